// Console sink that drops instead of blocking.
#include "drivers/log_stderr_sink.hpp"

#include <poll.h>
#include <unistd.h>

#include <cerrno>
#include <string>

#include <fmt/format.h>

namespace echoline {

bool DroppingStderrSink::write_now(const char* data, std::size_t size) {
  // POLLOUT on a pipe or terminal means a write of one line goes in without waiting (a pipe
  // reports it while a whole buffer page is free; log lines are far shorter).
  pollfd p{fd_, POLLOUT, 0};
  int r = 0;
  do {
    r = ::poll(&p, 1, 0);
  } while (r < 0 && errno == EINTR);
  if (r != 1 || (p.revents & POLLOUT) == 0) return false;
  while (size > 0) {
    const ssize_t n = ::write(fd_, data, size);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return false;
    data += n;
    size -= static_cast<std::size_t>(n);
  }
  return true;
}

void DroppingStderrSink::sink_it_(const spdlog::details::log_msg& msg) {
  spdlog::memory_buf_t formatted;
  formatter_->format(msg, formatted);
  if (dropped_ > 0) {
    const std::string note = fmt::format("{}: {} log lines not shown here: stderr was not being read "
                                         "(the log file has them)\n", program_, dropped_);
    if (!write_now(note.data(), note.size())) {
      ++dropped_;
      ++dropped_total_;
      return;
    }
    dropped_ = 0;
  }
  if (!write_now(formatted.data(), formatted.size())) {
    ++dropped_;
    ++dropped_total_;
  }
}

}  // namespace echoline
