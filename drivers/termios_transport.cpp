// Serial through plain termios: used for pseudo-terminals (junco-sim's
// serial instruments), which libserialport cannot open, or on request
// (serial:PATH?via=termios).
#include "drivers/errors.hpp"
#include "drivers/fd_transport.hpp"
#include "drivers/transport_impl.hpp"

#include <cerrno>
#include <cstring>
#include <fcntl.h>
#include <termios.h>
#include <unistd.h>

namespace junco::drivers::detail {

namespace {

speed_t speed_of(int baud) {
  switch (baud) {
    case 1200: return B1200;
    case 2400: return B2400;
    case 4800: return B4800;
    case 9600: return B9600;
    case 19200: return B19200;
    case 38400: return B38400;
    case 57600: return B57600;
    case 115200: return B115200;
    case 230400: return B230400;
    case 460800: return B460800;
    case 921600: return B921600;
    default: return B0;
  }
}

class TermiosTransport final : public FdTransport {
 public:
  TermiosTransport(SerialSettings serial, TransportOptions options)
      : FdTransport(serial.path, std::move(options)), serial_(std::move(serial)) {
    open();
  }
  std::string describe() const override {
    return "serial " + serial_.path + " (termios" + std::string(is_pseudo_terminal(serial_.path) ? ", pty" : "") +
           ") " + std::to_string(serial_.baud) + " " + std::to_string(serial_.data_bits) + to_string(serial_.parity) +
           std::to_string(serial_.stop_bits) + " flow " + to_string(serial_.flow);
  }

 protected:
  int open_fd() override {
    speed_t speed = speed_of(serial_.baud);
    if (speed == B0)
      throw DriverError(ErrorKind::config, describe() + ": baud " + std::to_string(serial_.baud) +
                                               " is not a standard termios rate");
    int fd = ::open(serial_.path.c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) fail_errno("open");
    termios t{};
    if (::tcgetattr(fd, &t) != 0) {
      int err = errno;
      ::close(fd);
      throw DriverError(ErrorKind::config, describe() + ": not a terminal: " + std::strerror(err));
    }
    ::cfmakeraw(&t);  // no echo, no CR/LF translation: bytes as sent
    ::cfsetispeed(&t, speed);
    ::cfsetospeed(&t, speed);
    t.c_cflag &= ~static_cast<tcflag_t>(CSIZE | PARENB | PARODD | CMSPAR | CSTOPB | CRTSCTS);
    static const tcflag_t sizes[] = {CS5, CS6, CS7, CS8};
    t.c_cflag |= sizes[serial_.data_bits - 5] | CLOCAL | CREAD;
    if (serial_.parity != Parity::none) t.c_cflag |= PARENB;
    if (serial_.parity == Parity::odd || serial_.parity == Parity::mark) t.c_cflag |= PARODD;
    if (serial_.parity == Parity::mark || serial_.parity == Parity::space) t.c_cflag |= CMSPAR;
    if (serial_.stop_bits == 2) t.c_cflag |= CSTOPB;
    if (serial_.flow == FlowControl::rts_cts) t.c_cflag |= CRTSCTS;
    if (serial_.flow == FlowControl::xon_xoff) t.c_iflag |= IXON | IXOFF;
    t.c_cc[VMIN] = 0;
    t.c_cc[VTIME] = 0;
    if (::tcsetattr(fd, TCSANOW, &t) != 0) {
      int err = errno;
      ::close(fd);
      throw DriverError(ErrorKind::config, describe() + ": cannot configure: " + std::strerror(err));
    }
    ::tcflush(fd, TCIOFLUSH);
    return fd;
  }

 private:
  SerialSettings serial_;
};

}  // namespace

std::unique_ptr<Transport> open_serial_termios(const SerialSettings& serial, const TransportOptions& options) {
  return std::make_unique<TermiosTransport>(serial, options);
}

}  // namespace junco::drivers::detail
