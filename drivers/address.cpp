#include "drivers/address.hpp"

#include "drivers/errors.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <vector>

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

std::string upper(std::string_view text) {
  std::string out(text);
  std::transform(out.begin(), out.end(), out.begin(), [](unsigned char c) { return static_cast<char>(std::toupper(c)); });
  return out;
}

// "TCPIP0" → true for prefix "TCPIP": the interface name, then an optional board number.
bool is_interface(std::string_view field, std::string_view prefix) {
  const std::string f = upper(field);
  if (f.compare(0, prefix.size(), prefix) != 0) return false;
  return std::all_of(f.begin() + static_cast<long>(prefix.size()), f.end(), [](unsigned char c) { return std::isdigit(c) != 0; });
}

// Splits a VISA resource name at "::"; an IPv6 host in brackets keeps its colons.
std::vector<std::string_view> visa_fields(std::string_view text) {
  std::vector<std::string_view> out;
  std::size_t start = 0;
  bool bracket = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '[') bracket = true;
    else if (text[i] == ']') bracket = false;
    else if (!bracket && text.compare(i, 2, "::") == 0) {
      out.push_back(text.substr(start, i - start));
      start = i + 2;
      ++i;
    }
  }
  out.push_back(text.substr(start));
  return out;
}

// VISA resource names (IVI VPP-4.3; docs/references.md §8) for the two
// transports labs reach over plain byte streams:
//   TCPIP[board]::HOST::PORT::SOCKET       a raw SCPI socket
//   ASRL[board]::INSTR, ASRLPATH::INSTR    a serial port (ASRL1 = /dev/ttyS0)
// The serial line settings are not part of a VISA name; junco takes the same
// ?baud=..&parity=.. options after ::INSTR as after serial:PATH. Names are
// case-insensitive as in VISA. Other VISA interfaces are refused with the
// spelling to use instead.
Address parse_visa(std::string_view address) {
  std::string_view text = address;
  std::string_view options;
  if (const auto q = text.find('?'); q != std::string_view::npos) {
    options = text.substr(q);
    text = text.substr(0, q);
  }
  const auto f = visa_fields(text);
  const std::string last = upper(f.back());
  if (is_interface(f[0], "TCPIP")) {
    if (last != "SOCKET")
      bad(address, "only raw sockets are supported over TCPIP (VXI-11 and HiSLIP are not); use TCPIP0::HOST::PORT::SOCKET with the "
                   "instrument's SCPI socket port, often 5025");
    if (f.size() != 4 || f[1].empty()) bad(address, "expected TCPIP0::HOST::PORT::SOCKET");
    if (!options.empty()) bad(address, "a TCPIP resource takes no ?options");
    std::string_view host = f[1];
    if (host.size() > 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
    long port = 0;
    if (!to_int(f[2], port) || port < 1 || port > 65535) bad(address, "port must be 1..65535, got '" + std::string(f[2]) + "'");
    Address a;
    a.kind = Address::Kind::tcp;
    a.host = std::string(host);
    a.port = static_cast<std::uint16_t>(port);
    return a;
  }
  if (upper(f[0]).rfind("ASRL", 0) == 0) {
    if (f.size() != 2 || last != "INSTR") bad(address, "expected ASRL/dev/PATH::INSTR or ASRLn::INSTR");
    const std::string_view board = f[0].substr(4);
    std::string path;
    long n = 0;
    if (!board.empty() && board.front() == '/') path = std::string(board);
    else if (to_int(board, n) && n >= 1 && n <= 256) path = "/dev/ttyS" + std::to_string(n - 1);  // ASRL1 is the first port
    else bad(address, "expected ASRL/dev/PATH::INSTR or ASRLn::INSTR (n = 1 for /dev/ttyS0)");
    return parse_serial(address, path + std::string(options));
  }
  for (const char* other : {"USB", "GPIB", "VXI", "PXI"})
    if (is_interface(f[0], other))
      bad(address, std::string(other) + " resources are not supported; for a USBTMC instrument use usbtmc:/dev/usbtmcN");
  bad(address, "unknown VISA interface '" + std::string(f[0]) + "' (known: TCPIPn::HOST::PORT::SOCKET, ASRL…::INSTR)");
}

}  // namespace

Address parse_address(std::string_view address) {
  if (address.find("::") != std::string_view::npos) return parse_visa(address);
  auto colon = address.find(':');
  if (colon == std::string_view::npos)
    bad(address, "expected tcp:HOST:PORT, serial:PATH, usbtmc:PATH or a VISA name (TCPIP0::HOST::PORT::SOCKET, ASRL/dev/PATH::INSTR)");
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
