#include "drivers/transport.hpp"

#include "drivers/errors.hpp"
#include "drivers/transport_impl.hpp"

#include <iostream>
#include <sys/stat.h>
#include <sys/sysmacros.h>  // major()

namespace junco::drivers {

namespace detail {

bool is_pseudo_terminal(const std::string& path) {
  if (path.rfind("/dev/pts/", 0) == 0) return true;
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0 || !S_ISCHR(st.st_mode)) return false;
  // Linux devices.txt: majors 136-143 are UNIX98 PTY slaves.
  unsigned m = major(st.st_rdev);
  return m >= 136 && m <= 143;
}

long remaining_ms(std::chrono::steady_clock::time_point deadline) {
  auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
  return left.count() > 0 ? static_cast<long>(left.count()) : 0;
}

std::string read_framed(LineFramer& framer, std::chrono::milliseconds deadline_ms, const std::string& who,
                        const std::function<std::size_t(char* buf, std::size_t size, long left_ms)>& read_some) {
  const auto deadline = std::chrono::steady_clock::now() + deadline_ms;
  char buf[4096];
  while (true) {
    if (auto message = framer.next()) return *message;
    const long left = remaining_ms(deadline);
    if (left == 0)
      throw DriverError(ErrorKind::timeout, who + ": no complete reply within " + std::to_string(deadline_ms.count()) + " ms");
    framer.feed(std::string_view(buf, read_some(buf, sizeof buf, left)));
  }
}

}  // namespace detail

std::unique_ptr<Transport> open_transport(std::string_view address, const TransportOptions& options) {
  if (options.read_terminator.empty() || options.write_terminator.empty())
    throw DriverError(ErrorKind::config, "transport terminators must not be empty");
  Address a = parse_address(address);
  switch (a.kind) {
    case Address::Kind::tcp: return detail::open_tcp(a, options);
    case Address::Kind::usbtmc: return detail::open_usbtmc(a.path, options);
    case Address::Kind::serial: {
      SerialBackend backend = a.serial.backend;
      if (backend == SerialBackend::automatic) {
        backend = detail::is_pseudo_terminal(a.serial.path) ? SerialBackend::termios : SerialBackend::libserialport;
        if (backend == SerialBackend::termios)
          // libserialport cannot open a pty (no /sys/class/tty entry, no
          // modem-control ioctls), so a pty such as junco-sim's gets termios.
          std::cerr << "junco drivers: " << a.serial.path
                    << " is a pseudo-terminal; using the termios serial path\n";
      }
      if (backend == SerialBackend::termios) return detail::open_serial_termios(a.serial, options);
      return detail::open_serial_libserialport(a.serial, options);
    }
  }
  throw DriverError(ErrorKind::config, "unsupported address " + std::string(address));
}

}  // namespace junco::drivers
