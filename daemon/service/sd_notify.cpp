// sd_notify protocol: a datagram on the AF_UNIX socket named by $NOTIFY_SOCKET ('@' = abstract).
#include "daemon/service/sd_notify.hpp"

#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <cstddef>
#include <cstdlib>
#include <cstring>
#include <string>

namespace echoline::service {

bool sd_notify_state(std::string_view state) {
  const char* path = std::getenv("NOTIFY_SOCKET");
  if (path == nullptr || path[0] == '\0') return false;
  const std::size_t len = std::strlen(path);
  sockaddr_un addr{};
  if (len >= sizeof(addr.sun_path) || (path[0] != '/' && path[0] != '@')) return false;
  addr.sun_family = AF_UNIX;
  std::memcpy(addr.sun_path, path, len);
  if (path[0] == '@') addr.sun_path[0] = '\0';   // abstract namespace
  const int fd = ::socket(AF_UNIX, SOCK_DGRAM | SOCK_CLOEXEC, 0);
  if (fd < 0) return false;
  const socklen_t addr_len = static_cast<socklen_t>(offsetof(sockaddr_un, sun_path) + len);
  const ssize_t n = ::sendto(fd, state.data(), state.size(), MSG_NOSIGNAL, reinterpret_cast<sockaddr*>(&addr), addr_len);
  ::close(fd);
  return n == static_cast<ssize_t>(state.size());
}

}  // namespace echoline::service
