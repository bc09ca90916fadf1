#include "drivers/address.hpp"

#include "drivers/errors.hpp"

#include <charconv>

namespace junco::drivers {

namespace {

[[noreturn]] void bad(std::string_view address, const std::string& what) {
  throw DriverError(ErrorKind::config, "bad instrument address '" + std::string(address) + "': " + what);
}

bool to_int(std::string_view text, long& value) {
  auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), value);
  return ec == std::errc() && end == text.data() + text.size();
}

void apply_serial_option(std::string_view address, std::string_view key, std::string_view value,
                         SerialSettings& s) {
  long n = 0;
  if (key == "baud") {
    if (!to_int(value, n) || n < 50 || n > 4000000) bad(address, "baud must be 50..4000000, got '" + std::string(value) + "'");
    s.baud = static_cast<int>(n);
  } else if (key == "bits") {
    if (!to_int(value, n) || n < 5 || n > 8) bad(address, "bits must be 5..8, got '" + std::string(value) + "'");
    s.data_bits = static_cast<int>(n);
  } else if (key == "stop") {
    if (!to_int(value, n) || (n != 1 && n != 2)) bad(address, "stop must be 1 or 2, got '" + std::string(value) + "'");
    s.stop_bits = static_cast<int>(n);
  } else if (key == "parity") {
    if (value == "none") s.parity = Parity::none;
    else if (value == "odd") s.parity = Parity::odd;
    else if (value == "even") s.parity = Parity::even;
    else if (value == "mark") s.parity = Parity::mark;
    else if (value == "space") s.parity = Parity::space;
    else bad(address, "parity must be none|odd|even|mark|space, got '" + std::string(value) + "'");
  } else if (key == "flow") {
    if (value == "none") s.flow = FlowControl::none;
    else if (value == "rtscts") s.flow = FlowControl::rts_cts;
    else if (value == "xonxoff") s.flow = FlowControl::xon_xoff;
    else bad(address, "flow must be none|rtscts|xonxoff, got '" + std::string(value) + "'");
  } else if (key == "via") {
    if (value == "auto") s.backend = SerialBackend::automatic;
    else if (value == "libserialport") s.backend = SerialBackend::libserialport;
    else if (value == "termios") s.backend = SerialBackend::termios;
    else bad(address, "via must be auto|libserialport|termios, got '" + std::string(value) + "'");
  } else {
    bad(address, "unknown serial option '" + std::string(key) + "' (known: baud, bits, parity, stop, flow, via)");
  }
}

Address parse_serial(std::string_view address, std::string_view rest) {
  Address a;
  a.kind = Address::Kind::serial;
  auto q = rest.find('?');
  a.serial.path = std::string(rest.substr(0, q));
  if (a.serial.path.empty() || a.serial.path.front() != '/') bad(address, "serial path must be absolute, e.g. serial:/dev/ttyUSB0");
  if (q == std::string_view::npos) return a;
  std::string_view opts = rest.substr(q + 1);
  while (!opts.empty()) {
    auto amp = opts.find('&');
    std::string_view kv = opts.substr(0, amp);
    auto eq = kv.find('=');
    if (eq == std::string_view::npos) bad(address, "serial option '" + std::string(kv) + "' is not KEY=VALUE");
    apply_serial_option(address, kv.substr(0, eq), kv.substr(eq + 1), a.serial);
    if (amp == std::string_view::npos) break;
    opts.remove_prefix(amp + 1);
  }
  return a;
}

}  // namespace

Address parse_address(std::string_view address) {
  auto colon = address.find(':');
  if (colon == std::string_view::npos) bad(address, "expected tcp:HOST:PORT, serial:PATH or usbtmc:PATH");
  std::string_view scheme = address.substr(0, colon);
  std::string_view rest = address.substr(colon + 1);
  if (scheme == "tcp") {
    auto last = rest.rfind(':');
    if (last == std::string_view::npos || last == 0) bad(address, "expected tcp:HOST:PORT");
    long port = 0;
    if (!to_int(rest.substr(last + 1), port) || port < 1 || port > 65535)
      bad(address, "port must be 1..65535, got '" + std::string(rest.substr(last + 1)) + "'");
    Address a;
    a.kind = Address::Kind::tcp;
    a.host = std::string(rest.substr(0, last));
    a.port = static_cast<std::uint16_t>(port);
    return a;
  }
  if (scheme == "serial") return parse_serial(address, rest);
  if (scheme == "usbtmc") {
    if (rest.empty() || rest.front() != '/') bad(address, "usbtmc path must be absolute, e.g. usbtmc:/dev/usbtmc0");
    Address a;
    a.kind = Address::Kind::usbtmc;
    a.path = std::string(rest);
    return a;
  }
  bad(address, "unknown scheme '" + std::string(scheme) + "' (known: tcp, serial, usbtmc)");
}

const char* to_string(Parity parity) {
  switch (parity) {
    case Parity::none: return "N";
    case Parity::odd: return "O";
    case Parity::even: return "E";
    case Parity::mark: return "M";
    case Parity::space: return "S";
  }
  return "?";
}

const char* to_string(FlowControl flow) {
  switch (flow) {
    case FlowControl::none: return "none";
    case FlowControl::rts_cts: return "rtscts";
    case FlowControl::xon_xoff: return "xonxoff";
  }
  return "?";
}

}  // namespace junco::drivers
