// The station store's instance lock (instance_lock.hpp).
#include "daemon/service/instance_lock.hpp"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <stdexcept>
#include <string>

#include <fmt/format.h>

namespace echoline::service {
namespace {

std::string holder_pid(int fd) {
  char buf[32] = {};
  const ssize_t n = ::pread(fd, buf, sizeof buf - 1, 0);
  std::string pid(buf, n > 0 ? static_cast<std::size_t>(n) : 0);
  while (!pid.empty() && (pid.back() == '\n' || pid.back() == ' ')) pid.pop_back();
  return pid;
}

}  // namespace

InstanceLock InstanceLock::acquire(const std::filesystem::path& file) {
  std::error_code ec;
  std::filesystem::create_directories(file.parent_path(), ec);
  const int fd = ::open(file.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) {
    const int err = errno;
    throw std::runtime_error(fmt::format("cannot open the station lock {}: {}", file.string(), std::strerror(err)));
  }
  if (::flock(fd, LOCK_EX | LOCK_NB) != 0) {
    const int err = errno;
    const std::string pid = err == EWOULDBLOCK ? holder_pid(fd) : "";
    ::close(fd);
    if (err == EWOULDBLOCK) {
      throw std::runtime_error(fmt::format(
          "another echolined{} is running on this station's store (lock {}); stop it first. Nothing was changed: "
          "no instrument was touched and no run was written",
          pid.empty() ? "" : " (pid " + pid + ")", file.string()));
    }
    throw std::runtime_error(fmt::format("cannot lock the station lock {}: {}", file.string(), std::strerror(err)));
  }
  const std::string pid = std::to_string(::getpid()) + "\n";
  if (::ftruncate(fd, 0) != 0 || ::pwrite(fd, pid.data(), pid.size(), 0) != static_cast<ssize_t>(pid.size())) {
    // The lock holds without the pid; only the message of a second daemon loses it.
  }
  return InstanceLock(file, fd);
}

InstanceLock::InstanceLock(InstanceLock&& other) noexcept : file_(std::move(other.file_)), fd_(other.fd_) {
  other.fd_ = -1;
}

InstanceLock::~InstanceLock() {
  if (fd_ >= 0) ::close(fd_);   // closing the last descriptor releases the lock
}

}  // namespace echoline::service
