// One daemon per station store: an exclusive advisory lock (flock) on a file beside the store,
// taken before the store is opened or any instrument is touched and held for the life of the
// process. The kernel drops it when the process ends, however it ends, so no stale lock remains.
#pragma once

#include <filesystem>
#include <string>

namespace echoline::service {

class InstanceLock {
 public:
  // Creates `file` if needed, locks it and writes this process's pid into it. Throws
  // std::runtime_error naming the file and, when another process holds it, that process's pid.
  static InstanceLock acquire(const std::filesystem::path& file);
  InstanceLock(InstanceLock&& other) noexcept;
  InstanceLock& operator=(InstanceLock&&) = delete;
  InstanceLock(const InstanceLock&) = delete;
  ~InstanceLock();
  const std::filesystem::path& file() const { return file_; }

 private:
  InstanceLock(std::filesystem::path file, int fd) : file_(std::move(file)), fd_(fd) {}
  std::filesystem::path file_;
  int fd_ = -1;
};

}  // namespace echoline::service
