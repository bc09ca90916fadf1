// Parsing of instrument addresses (syntax in transport.hpp). Pure: a bad
// address gives DriverError(config) naming the part that is wrong.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace junco::drivers {

enum class Parity { none, odd, even, mark, space };
enum class FlowControl { none, rts_cts, xon_xoff };
// Which code opens a serial path. auto: pseudo-terminals (which
// libserialport cannot open) get the termios path, everything else
// libserialport.
enum class SerialBackend { automatic, libserialport, termios };

struct SerialSettings {
  std::string path;
  int baud = 9600;
  int data_bits = 8;  // 5..8
  Parity parity = Parity::none;
  int stop_bits = 1;  // 1 or 2
  FlowControl flow = FlowControl::none;
  SerialBackend backend = SerialBackend::automatic;
};

struct Address {
  enum class Kind { tcp, serial, usbtmc };
  Kind kind = Kind::tcp;
  std::string host;        // tcp
  std::uint16_t port = 0;  // tcp
  std::string path;        // usbtmc
  SerialSettings serial;   // serial
};

// tcp:HOST:PORT | serial:PATH[?baud=..&bits=..&parity=..&stop=..&flow=..&via=..]
// | usbtmc:PATH, or the VISA resource names TCPIPn::HOST::PORT::SOCKET and
// ASRL/dev/PATH::INSTR / ASRLn::INSTR (serial options may follow ::INSTR).
// Throws DriverError(config).
Address parse_address(std::string_view address);

const char* to_string(Parity parity);
const char* to_string(FlowControl flow);

}  // namespace junco::drivers
