/* Link-time seam that lets the real libserialport 0.1.1 code open a pseudo-terminal in tests.
 * Linked into test_drivers only, with -Wl,--wrap=ioctl,--wrap=__lxstat,--wrap=readlink and the
 * static libserialport.a. It makes /sys/class/tty/pts/N look present (libserialport insists on
 * a sysfs entry) and emulates the modem-line ioctls TIOCMGET/TIOCMBIS/TIOCMBIC/TIOCMSET, which
 * the Linux pty driver answers with ENOTTY, for pty-slave descriptors (char major 136..143) only.
 * tcsetattr is wrapped too, only to record the flags asked for on a pty slave (the pty driver
 * forces CS8 and no parity, so they cannot be read back). Everything else passes through unchanged. See DEVELOPERS.md, "Serial ports and pseudo-terminals". */
#define _GNU_SOURCE
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>
#include <sys/ioctl.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <sys/types.h>
#include <unistd.h>
#include <termios.h>

int __real_ioctl(int fd, unsigned long request, ...);
int __real___lxstat(int ver, const char* path, struct stat* buf);
ssize_t __real_readlink(const char* path, char* buf, size_t size);

static const char kSysPrefix[] = "/sys/class/tty/pts/";

/* Emulated modem lines, one word per fd (enough for a test process). */
#define SEAM_MAX_FD 1024
static int seam_lines[SEAM_MAX_FD];

static int is_pty_slave_fd(int fd) {
  struct stat st;
  if (fd < 0 || fd >= SEAM_MAX_FD || fstat(fd, &st) != 0 || !S_ISCHR(st.st_mode)) return 0;
  return major(st.st_rdev) >= 136 && major(st.st_rdev) <= 143;
}

/* "/sys/class/tty/pts/N" -> 1 when /dev/pts/N exists as a character device. */
static int names_existing_pty(const char* path) {
  if (strncmp(path, kSysPrefix, sizeof kSysPrefix - 1) != 0) return 0;
  const char* n = path + sizeof kSysPrefix - 1;
  if (*n == '\0' || strchr(n, '/') != NULL) return 0;
  char dev[64];
  snprintf(dev, sizeof dev, "/dev/pts/%s", n);
  struct stat st;
  return stat(dev, &st) == 0 && S_ISCHR(st.st_mode);
}

/* The flags libserialport last asked for on a pty slave. The Linux pty driver keeps only some
 * of them (it forces CS8 and no parity), so tests check the request here. */
static unsigned seam_cflag, seam_iflag;
static int seam_sets;
unsigned pty_seam_last_cflag(void) { return seam_cflag; }
unsigned pty_seam_last_iflag(void) { return seam_iflag; }
int pty_seam_settings_seen(void) { return seam_sets; }

int __real_tcsetattr(int fd, int when, const struct termios* t);

/* Records the request for pty slaves, then applies it unchanged. */
int __wrap_tcsetattr(int fd, int when, const struct termios* t) {
  if (t != NULL && is_pty_slave_fd(fd)) {
    seam_cflag = t->c_cflag;
    seam_iflag = t->c_iflag;
    ++seam_sets;
  }
  return __real_tcsetattr(fd, when, t);
}

int __wrap_ioctl(int fd, unsigned long request, ...) {
  va_list ap;
  va_start(ap, request);
  void* arg = va_arg(ap, void*);
  va_end(ap);
  if ((request == TIOCMGET || request == TIOCMBIS || request == TIOCMBIC || request == TIOCMSET) &&
      is_pty_slave_fd(fd)) {
    int* bits = (int*)arg;
    if (bits == NULL) {
      errno = EFAULT;
      return -1;
    }
    switch (request) {
      case TIOCMGET: *bits = seam_lines[fd] | TIOCM_CTS | TIOCM_DSR | TIOCM_CAR; break;
      case TIOCMBIS: seam_lines[fd] |= *bits; break;
      case TIOCMBIC: seam_lines[fd] &= ~*bits; break;
      default: seam_lines[fd] = *bits; break;
    }
    return 0;
  }
  return __real_ioctl(fd, request, arg);
}

int __wrap___lxstat(int ver, const char* path, struct stat* buf) {
  if (names_existing_pty(path)) {
    memset(buf, 0, sizeof *buf);
    buf->st_mode = S_IFLNK | 0777;   /* sysfs class entries are symlinks */
    return 0;
  }
  return __real___lxstat(ver, path, buf);
}

ssize_t __wrap_readlink(const char* path, char* buf, size_t size) {
  if (names_existing_pty(path)) {
    char target[128];
    int len = snprintf(target, sizeof target, "../../devices/virtual/tty/pts/%s", path + sizeof kSysPrefix - 1);
    if (len < 0) return -1;
    size_t n = (size_t)len < size ? (size_t)len : size;
    memcpy(buf, target, n);   /* readlink does not NUL-terminate */
    return (ssize_t)n;
  }
  return __real_readlink(path, buf, size);
}
