#include "simulator/pty_endpoint.hpp"

#include <fcntl.h>
#include <termios.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <stdexcept>

#include <fmt/format.h>

#include "simulator/stream_session.hpp"

namespace echoline::sim {

using Session = detail::StreamSession<asio::posix::stream_descriptor>;

namespace {

std::runtime_error pty_error(const LineService& service, std::string_view what, int err) {
  return std::runtime_error(fmt::format("{}: pty: {}: {}", service.role(), what, std::strerror(err)));
}

// Raw mode on the slave so the line discipline neither echoes our replies back as input nor
// rewrites CR/LF. Opens the slave once and closes it again; the setting stays with the pair.
void make_raw(const LineService& service, const std::string& slave) {
  const int fd = ::open(slave.c_str(), O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (fd < 0) throw pty_error(service, "open " + slave, errno);
  termios tio{};
  if (::tcgetattr(fd, &tio) != 0) {
    const int err = errno;
    ::close(fd);
    throw pty_error(service, "tcgetattr " + slave, err);
  }
  ::cfmakeraw(&tio);
  if (::tcsetattr(fd, TCSANOW, &tio) != 0) {
    const int err = errno;
    ::close(fd);
    throw pty_error(service, "tcsetattr " + slave, err);
  }
  ::close(fd);
}

}  // namespace

struct PtyEndpoint::Impl {
  asio::io_context& io;
  LineService& service;
  std::string device;
  std::string link;
  int baud;
  int master = -1;                  // owned until handed to the session
  std::shared_ptr<Session> session;
};

PtyEndpoint::PtyEndpoint(asio::io_context& io, LineService& service, std::string link, int baud)
    : impl_(std::make_unique<Impl>(Impl{io, service, "", std::move(link), baud, -1, nullptr})) {
  const int master = ::posix_openpt(O_RDWR | O_NOCTTY | O_CLOEXEC);
  if (master < 0) throw pty_error(service, "posix_openpt", errno);
  impl_->master = master;
  try {
    if (::grantpt(master) != 0) throw pty_error(service, "grantpt", errno);
    if (::unlockpt(master) != 0) throw pty_error(service, "unlockpt", errno);
    char name[128] = {};
    if (::ptsname_r(master, name, sizeof name) != 0) throw pty_error(service, "ptsname", errno);
    impl_->device = name;
    make_raw(service, impl_->device);
  } catch (...) {
    ::close(master);   // the destructor does not run for a throwing constructor
    throw;
  }

  if (!impl_->link.empty()) {
    namespace fs = std::filesystem;
    std::error_code ec;
    const auto status = fs::symlink_status(impl_->link, ec);
    if (fs::is_symlink(status)) {
      fs::remove(impl_->link, ec);   // stale link from an earlier run
    } else if (fs::exists(status)) {
      const std::string what = "link " + impl_->link + " exists and is not a symlink; not replacing it";
      ::close(master);
      throw std::runtime_error(fmt::format("{}: pty: {}", service.role(), what));
    }
    fs::create_symlink(impl_->device, impl_->link, ec);
    if (ec) {
      const std::string what = "cannot create link " + impl_->link + ": " + ec.message();
      ::close(master);
      throw std::runtime_error(fmt::format("{}: pty: {}", service.role(), what));
    }
  }
}

PtyEndpoint::~PtyEndpoint() {
  stop();
  if (impl_->master >= 0) ::close(impl_->master);
  if (!impl_->link.empty()) {
    std::error_code ec;
    std::filesystem::remove(impl_->link, ec);
  }
}

void PtyEndpoint::start() {
  const int master = impl_->master;
  impl_->master = -1;   // the descriptor object owns it from here
  asio::posix::stream_descriptor stream(impl_->io, master);
  detail::SessionHooks hooks;
  hooks.persistent = true;
  // The client closed the slave (or a drop fault): throw away what is still in the pty's queues
  // so the next client does not read stale replies.
  hooks.on_lost = [master]() { ::tcflush(master, TCIOFLUSH); };
  hooks.on_hang_up = [master]() { ::tcflush(master, TCIOFLUSH); };
  impl_->session = std::make_shared<Session>(std::move(stream), impl_->service, "pty " + impl_->device, hooks);
  impl_->session->start();
}

void PtyEndpoint::stop() {
  if (impl_->session) {
    impl_->session->stop();
    impl_->session.reset();
  }
}

const std::string& PtyEndpoint::device() const { return impl_->device; }
const std::string& PtyEndpoint::link() const { return impl_->link; }
std::string PtyEndpoint::address() const { return fmt::format("serial:{}?baud={}", impl_->device, impl_->baud); }

}  // namespace echoline::sim
