// Address syntax (transport.hpp) and the line framer shared by transports.
#include "drivers/address.hpp"
#include "drivers/errors.hpp"
#include "drivers/framer.hpp"

#include <catch2/catch.hpp>

using namespace junco::drivers;

namespace {
std::string config_error_of(const std::string& address) {
  try {
    parse_address(address);
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::config);
    return e.what();
  }
  return "no error";
}
}  // namespace

TEST_CASE("addresses parse into their parts", "[drivers][address]") {
  Address tcp = parse_address("tcp:127.0.0.1:5025");
  CHECK(tcp.kind == Address::Kind::tcp);
  CHECK(tcp.host == "127.0.0.1");
  CHECK(tcp.port == 5025);

  Address ser = parse_address("serial:/dev/ttyUSB0?baud=115200&bits=7&parity=even&stop=2&flow=rtscts&via=termios");
  CHECK(ser.kind == Address::Kind::serial);
  CHECK(ser.serial.path == "/dev/ttyUSB0");
  CHECK(ser.serial.baud == 115200);
  CHECK(ser.serial.data_bits == 7);
  CHECK(ser.serial.parity == Parity::even);
  CHECK(ser.serial.stop_bits == 2);
  CHECK(ser.serial.flow == FlowControl::rts_cts);
  CHECK(ser.serial.backend == SerialBackend::termios);

  Address plain = parse_address("serial:/dev/pts/3");
  CHECK(plain.serial.baud == 9600);
  CHECK(plain.serial.flow == FlowControl::none);
  CHECK(plain.serial.backend == SerialBackend::automatic);

  Address tmc = parse_address("usbtmc:/dev/usbtmc0");
  CHECK(tmc.kind == Address::Kind::usbtmc);
  CHECK(tmc.path == "/dev/usbtmc0");
}

// Source: IVI Foundation VPP-4.3 resource-name grammar (docs/references.md §8):
// TCPIP[board]::host::port::SOCKET and ASRL[board]::INSTR, case-insensitive.
TEST_CASE("VISA resource names for sockets and serial ports", "[drivers][address]") {
  const Address tcp = parse_address("TCPIP0::192.168.1.40::5025::SOCKET");
  CHECK(tcp.kind == Address::Kind::tcp);
  CHECK(tcp.host == "192.168.1.40");
  CHECK(tcp.port == 5025);
  const Address lower = parse_address("tcpip::bench-psu.lab::5025::socket");
  CHECK(lower.host == "bench-psu.lab");
  CHECK(lower.port == 5025);
  const Address v6 = parse_address("TCPIP1::[fe80::1]::5025::SOCKET");
  CHECK(v6.host == "fe80::1");

  const Address usb = parse_address("ASRL/dev/ttyUSB0::INSTR");
  CHECK(usb.kind == Address::Kind::serial);
  CHECK(usb.serial.path == "/dev/ttyUSB0");
  CHECK(usb.serial.baud == 9600);
  const Address first = parse_address("ASRL1::INSTR");
  CHECK(first.serial.path == "/dev/ttyS0");
  const Address fast = parse_address("asrl/dev/ttyACM0::instr?baud=115200&parity=even");
  CHECK(fast.serial.path == "/dev/ttyACM0");
  CHECK(fast.serial.baud == 115200);
  CHECK(fast.serial.parity == Parity::even);

  // The same instrument spelt both ways is the same address.
  const Address ours = parse_address("tcp:192.168.1.40:5025");
  CHECK(ours.host == tcp.host);
  CHECK(ours.port == tcp.port);
}

TEST_CASE("VISA names junco cannot open say what to write instead", "[drivers][address]") {
  CHECK_THAT(config_error_of("TCPIP0::192.168.1.40::INSTR"), Catch::Contains("VXI-11") && Catch::Contains("::SOCKET"));
  CHECK_THAT(config_error_of("TCPIP0::192.168.1.40::hislip0::INSTR"), Catch::Contains("only raw sockets"));
  CHECK_THAT(config_error_of("TCPIP0::host::70000::SOCKET"), Catch::Contains("port must be 1..65535"));
  CHECK_THAT(config_error_of("TCPIP0::::5025::SOCKET"), Catch::Contains("expected TCPIP0::HOST::PORT::SOCKET"));
  CHECK_THAT(config_error_of("USB0::0x1234::0x5678::SN01::INSTR"), Catch::Contains("usbtmc:/dev/usbtmcN"));
  CHECK_THAT(config_error_of("GPIB0::22::INSTR"), Catch::Contains("GPIB resources are not supported"));
  CHECK_THAT(config_error_of("ASRLttyUSB0::INSTR"), Catch::Contains("ASRL/dev/PATH::INSTR"));
  CHECK_THAT(config_error_of("ASRL/dev/ttyUSB0::INSTR?speed=9600"), Catch::Contains("unknown serial option 'speed'"));
  CHECK_THAT(config_error_of("FOO0::x::INSTR"), Catch::Contains("unknown VISA interface 'FOO0'"));
}

TEST_CASE("bad addresses name what is wrong", "[drivers][address]") {
  CHECK_THAT(config_error_of("localhost"), Catch::Contains("expected tcp:HOST:PORT"));
  CHECK_THAT(config_error_of("127.0.0.1:5025"), Catch::Contains("unknown scheme '127.0.0.1'"));
  CHECK_THAT(config_error_of("tcp:127.0.0.1:99999"), Catch::Contains("port must be 1..65535"));
  CHECK_THAT(config_error_of("tcp:127.0.0.1:"), Catch::Contains("port must be"));
  CHECK_THAT(config_error_of("gpib:22"), Catch::Contains("unknown scheme 'gpib'"));
  CHECK_THAT(config_error_of("serial:ttyS0"), Catch::Contains("must be absolute"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?baud=fast"), Catch::Contains("baud must be"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?parity=maybe"), Catch::Contains("parity must be"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?stop=3"), Catch::Contains("stop must be 1 or 2"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?flow=dtr"), Catch::Contains("flow must be"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?speed=9600"), Catch::Contains("unknown serial option 'speed'"));
  CHECK_THAT(config_error_of("serial:/dev/ttyS0?baud"), Catch::Contains("is not KEY=VALUE"));
  CHECK_THAT(config_error_of("usbtmc:usbtmc0"), Catch::Contains("must be absolute"));
}

TEST_CASE("framer splits at the terminator and accepts CR LF", "[drivers][framer]") {
  LineFramer f("\n");
  f.feed("1.0\r\n2.");
  CHECK(f.next() == std::optional<std::string>("1.0"));
  CHECK_FALSE(f.next());
  f.feed("0\n\n");
  CHECK(f.next() == std::optional<std::string>("2.0"));
  CHECK(f.next() == std::optional<std::string>(""));
  CHECK(f.empty());

  LineFramer cr("\r");
  cr.feed("A\rB\r");
  CHECK(cr.next() == std::optional<std::string>("A"));
  CHECK(cr.next() == std::optional<std::string>("B"));
}

TEST_CASE("framer refuses a runaway message", "[drivers][framer]") {
  LineFramer f("\n");
  f.feed(std::string(max_message_bytes + 1, 'x'));
  try {
    f.next();
    FAIL("no error for an overlong message");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::garbled);
  }
  CHECK(f.empty());
}
