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
