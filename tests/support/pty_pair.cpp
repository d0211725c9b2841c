// Pseudo-terminal pair for serial transport tests. See pty_pair.hpp.
#include "tests/support/pty_pair.hpp"

#include <fcntl.h>
#include <poll.h>
#include <stdlib.h>
#include <termios.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <stdexcept>
#include <string>

namespace echoline::testing {

namespace {
std::runtime_error failure(const char* what) {
  return std::runtime_error(std::string("pty pair: ") + what + ": " + std::strerror(errno));
}
}  // namespace

PtyPair::PtyPair() {
  master_ = ::posix_openpt(O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (master_ < 0) throw failure("posix_openpt");
  if (::grantpt(master_) != 0) throw failure("grantpt");
  if (::unlockpt(master_) != 0) throw failure("unlockpt");
  char name[128];
  if (::ptsname_r(master_, name, sizeof name) != 0) throw failure("ptsname_r");
  slave_path_ = name;
  slave_hold_ = ::open(name, O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (slave_hold_ < 0) throw failure("open slave");
  termios t{};
  if (::tcgetattr(slave_hold_, &t) != 0) throw failure("tcgetattr");
  ::cfmakeraw(&t);
  if (::tcsetattr(slave_hold_, TCSANOW, &t) != 0) throw failure("tcsetattr");
  int flags = ::fcntl(master_, F_GETFL);
  ::fcntl(master_, F_SETFL, flags | O_NONBLOCK);
}

PtyPair::~PtyPair() {
  if (slave_hold_ >= 0) ::close(slave_hold_);
  close_master();
}

void PtyPair::close_master() {
  if (master_ >= 0) ::close(master_);
  master_ = -1;
}

bool PtyPair::write(std::string_view bytes) {
  while (!bytes.empty()) {
    ssize_t n = ::write(master_, bytes.data(), bytes.size());
    if (n < 0) {
      if (errno == EAGAIN || errno == EINTR) {
        pollfd p{master_, POLLOUT, 0};
        ::poll(&p, 1, 100);
        continue;
      }
      return false;
    }
    bytes.remove_prefix(static_cast<std::size_t>(n));
  }
  return true;
}

std::string PtyPair::read_until(char terminator, std::chrono::milliseconds timeout) {
  auto deadline = std::chrono::steady_clock::now() + timeout;
  std::string out;
  while (out.find(terminator) == std::string::npos) {
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) break;
    pollfd p{master_, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) continue;
    char buf[4096];
    ssize_t n = ::read(master_, buf, sizeof buf);
    if (n > 0) out.append(buf, static_cast<std::size_t>(n));
    else if (n < 0 && errno != EAGAIN && errno != EINTR) break;
  }
  return out;
}

std::string PtyPair::read_for(std::chrono::milliseconds timeout) {
  auto deadline = std::chrono::steady_clock::now() + timeout;
  std::string out;
  for (;;) {
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) break;
    pollfd p{master_, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) continue;
    char buf[4096];
    ssize_t n = ::read(master_, buf, sizeof buf);
    if (n > 0) out.append(buf, static_cast<std::size_t>(n));
    else if (n < 0 && errno != EAGAIN && errno != EINTR) break;
  }
  return out;
}

}  // namespace echoline::testing
