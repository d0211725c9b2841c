// A stderr log sink that never blocks: it writes only when stderr can take the line at once. A
// reader that stops reading (a paused terminal, a pipe nobody drains) must never stall the
// daemon's sweep thread with the RF output ON; lines are dropped instead and counted, and the
// next line that gets through says how many. The log file keeps every line. Used by
// setup_logging (logging.hpp). Thread-safe (spdlog mutex).
#pragma once

#include <cstddef>
#include <mutex>
#include <string>

#include <spdlog/sinks/base_sink.h>

namespace echoline {

class DroppingStderrSink final : public spdlog::sinks::base_sink<std::mutex> {
 public:
  explicit DroppingStderrSink(std::string program, int fd = 2) : program_(std::move(program)), fd_(fd) {}
  std::size_t dropped_total() const { return dropped_total_; }   // read under no lock: a hint

 protected:
  void sink_it_(const spdlog::details::log_msg& msg) override;
  void flush_() override {}

 private:
  bool write_now(const char* data, std::size_t size);
  std::string program_;
  int fd_;
  std::size_t dropped_ = 0;         // since the last line that got through
  std::size_t dropped_total_ = 0;
};

}  // namespace echoline
