// LD_PRELOAD interposer for the serial end-to-end test only: a pty answers
// the modem-control ioctls (TIOCMGET/TIOCMSET/TIOCMBIS/TIOCMBIC) with
// ENOTTY, and libserialport's sp_open() gives up on that. Here those
// requests, on pty slaves only, keep a per-process copy of the modem bits
// and succeed; every other call goes to the real ioctl untouched.
// Never loaded by junco itself.
#include <asm/ioctls.h>  // TIOCM* request numbers (sys/ioctl.h would clash with our definition)
#include <cerrno>
#include <cstdarg>
#include <dlfcn.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>

namespace {

using ioctl_fn = int (*)(int, unsigned long, ...);

bool is_pty_slave(int fd) {
  struct stat st {};
  if (fstat(fd, &st) != 0 || !S_ISCHR(st.st_mode)) return false;
  unsigned m = major(st.st_rdev);
  return m >= 136 && m <= 143;  // Linux devices.txt: UNIX98 PTY slaves
}

int modem_bits = 0x002 | 0x004;  // TIOCM_DTR | TIOCM_RTS, as a port just opened

}  // namespace

extern "C" int ioctl(int fd, unsigned long request, ...) {
  va_list args;
  va_start(args, request);
  void* arg = va_arg(args, void*);
  va_end(args);
  static ioctl_fn real = reinterpret_cast<ioctl_fn>(dlsym(RTLD_NEXT, "ioctl"));
  bool modem = request == TIOCMGET || request == TIOCMSET || request == TIOCMBIS || request == TIOCMBIC;
  if (!modem || !is_pty_slave(fd)) return real(fd, request, arg);
  int* bits = static_cast<int*>(arg);
  if (!bits) {
    errno = EFAULT;
    return -1;
  }
  if (request == TIOCMGET) *bits = modem_bits;
  else if (request == TIOCMSET) modem_bits = *bits;
  else if (request == TIOCMBIS) modem_bits |= *bits;
  else modem_bits &= ~*bits;
  return 0;
}
