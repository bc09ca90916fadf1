// Serial through libserialport: real ports (ttyS, ttyUSB, ttyACM). Ptys go
// to the termios path instead (see open_transport()).
#include "drivers/errors.hpp"
#include "drivers/framer.hpp"
#include "drivers/transport_impl.hpp"

#include <libserialport.h>

namespace junco::drivers::detail {

namespace {

class SerialTransport final : public Transport {
 public:
  SerialTransport(SerialSettings serial, TransportOptions options)
      : serial_(std::move(serial)), options_(std::move(options)), framer_(options_.read_terminator) {
    open();
  }
  ~SerialTransport() override { release(); }
  SerialTransport(const SerialTransport&) = delete;
  SerialTransport& operator=(const SerialTransport&) = delete;

  void write_message(std::string_view message) override {
    ensure_open();
    std::string out = std::string(message) + options_.write_terminator;
    auto timeout = static_cast<unsigned>(std::max<long>(1, options_.connect_timeout.count()));
    sp_return n = sp_blocking_write(port_, out.data(), out.size(), timeout);
    if (n < 0) fail("write");
    if (static_cast<std::size_t>(n) < out.size())
      throw DriverError(ErrorKind::timeout, describe() + ": write did not complete in time");
  }

  std::string read_message(std::chrono::milliseconds deadline_ms) override {
    ensure_open();
    return read_framed(framer_, deadline_ms, describe(), [this](char* buf, std::size_t size, long left) {
      // A timeout of 0 would mean "wait forever" to libserialport; left is ≥ 1 here.
      const sp_return n = sp_blocking_read_next(port_, buf, size, static_cast<unsigned>(left));
      if (n < 0) fail("read");
      return static_cast<std::size_t>(n);
    });
  }

  void close() override {
    release();
    framer_.clear();
  }

  void reconnect() override {
    close();
    open();
  }

  std::string describe() const override {
    return "serial " + serial_.path + " (libserialport) " + std::to_string(serial_.baud) + " " +
           std::to_string(serial_.data_bits) + to_string(serial_.parity) + std::to_string(serial_.stop_bits) +
           " flow " + to_string(serial_.flow);
  }

 private:
  void check(sp_return r, const char* what) {
    if (r == SP_OK) return;
    std::string why = r == SP_ERR_FAIL ? last_error() : r == SP_ERR_SUPP ? "not supported" : "invalid argument";
    release();
    throw DriverError(ErrorKind::config, describe() + ": " + what + ": " + why);
  }

  static std::string last_error() {
    char* text = sp_last_error_message();
    std::string s = text ? text : "unknown error";
    sp_free_error_message(text);
    return s;
  }

  void open() {
    if (sp_get_port_by_name(serial_.path.c_str(), &port_) != SP_OK) {
      port_ = nullptr;
      throw DriverError(ErrorKind::disconnected, describe() + ": no such serial port: " + last_error());
    }
    if (sp_open(port_, SP_MODE_READ_WRITE) != SP_OK) {
      std::string why = last_error();
      sp_free_port(port_);
      port_ = nullptr;
      throw DriverError(ErrorKind::disconnected, describe() + ": cannot open: " + why);
    }
    open_ = true;
    check(sp_set_baudrate(port_, serial_.baud), "set baud rate");
    check(sp_set_bits(port_, serial_.data_bits), "set data bits");
    static const sp_parity parities[] = {SP_PARITY_NONE, SP_PARITY_ODD, SP_PARITY_EVEN, SP_PARITY_MARK,
                                         SP_PARITY_SPACE};
    check(sp_set_parity(port_, parities[static_cast<int>(serial_.parity)]), "set parity");
    check(sp_set_stopbits(port_, serial_.stop_bits), "set stop bits");
    static const sp_flowcontrol flows[] = {SP_FLOWCONTROL_NONE, SP_FLOWCONTROL_RTSCTS, SP_FLOWCONTROL_XONXOFF};
    check(sp_set_flowcontrol(port_, flows[static_cast<int>(serial_.flow)]), "set flow control");
    sp_flush(port_, SP_BUF_BOTH);
    framer_.clear();
  }

  void release() {
    if (!port_) return;
    if (open_) sp_close(port_);
    sp_free_port(port_);
    port_ = nullptr;
    open_ = false;
  }

  void ensure_open() {
    if (!port_) throw DriverError(ErrorKind::disconnected, describe() + ": not open");
  }

  [[noreturn]] void fail(const char* what) {
    std::string why = last_error();
    release();
    throw DriverError(ErrorKind::disconnected, describe() + ": " + what + " failed: " + why);
  }

  SerialSettings serial_;
  TransportOptions options_;
  LineFramer framer_;
  sp_port* port_ = nullptr;
  bool open_ = false;
};

}  // namespace

std::unique_ptr<Transport> open_serial_libserialport(const SerialSettings& serial, const TransportOptions& options) {
  return std::make_unique<SerialTransport>(serial, options);
}

}  // namespace junco::drivers::detail
