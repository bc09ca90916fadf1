// The pure reply parsers, from tables of labelled inputs. Grammar checks
// follow IEEE 488.2 section 7.7.2 (decimal numeric program data, NR1/NR2/NR3)
// and SCPI-99 vol. 1 7.2.1 (9.9E37 overload, 9.91E37 NaN) -- both from
// memory, not re-checked against the standard texts.
#include "drivers/reply_parser.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <random>
#include <string>

using namespace junco::drivers;

namespace {

struct NumberCase {
  const char* label;
  std::string input;
  const char* suffix;
  ParseStatus status;
  double value;  // checked only when status == ok
};

}  // namespace

TEST_CASE("parse_number: labelled table", "[drivers][parser]") {
  const NumberCase cases[] = {
      {"NR1", "42", "", ParseStatus::ok, 42.0},
      {"NR1 signed +0", "+0", "", ParseStatus::ok, 0.0},
      {"NR1 negative zero", "-0", "", ParseStatus::ok, -0.0},
      {"NR2", "0.652301", "", ParseStatus::ok, 0.652301},
      {"NR2 leading dot", ".5", "", ParseStatus::ok, 0.5},
      {"NR2 trailing dot", "5.", "", ParseStatus::ok, 5.0},
      {"NR3", "+6.52301E-01", "", ParseStatus::ok, 0.652301},
      {"NR3 lower-case e", "1.0e-3", "", ParseStatus::ok, 1.0e-3},
      {"NR3 negative", "-1.00012E-03", "", ParseStatus::ok, -1.00012e-3},
      {"blanks and CR around", "  +1.5E+00\r", "", ParseStatus::ok, 1.5},
      {"unit suffix VDC", "+6.52301E-01VDC", "VDC", ParseStatus::ok, 0.652301},
      {"unit suffix any case", "+1.00012E-03adc", "ADC", ParseStatus::ok, 1.00012e-3},
      {"suffix missing", "+6.52301E-01", "VDC", ParseStatus::malformed, 0},
      {"wrong suffix", "+6.52301E-01ADC", "VDC", ParseStatus::malformed, 0},
      {"suffix only", "VDC", "VDC", ParseStatus::malformed, 0},
      {"suffix not expected", "+6.52301E-01VDC", "", ParseStatus::malformed, 0},
      {"overload marker", "9.9E37", "", ParseStatus::overrange, 0},
      {"overload marker NR3", "+9.90000000E+37", "", ParseStatus::overrange, 0},
      {"negative overload", "-9.9E37", "", ParseStatus::overrange, 0},
      {"NaN marker", "9.91E37", "", ParseStatus::overrange, 0},
      {"overload with suffix", "+9.9E+37VDC", "VDC", ParseStatus::overrange, 0},
      {"empty", "", "", ParseStatus::empty, 0},
      {"blanks only", " \r\n", "", ParseStatus::empty, 0},
      {"garbage", "#$%&", "", ParseStatus::malformed, 0},
      {"binary bytes", std::string("\x01\xff\x7f", 3), "", ParseStatus::malformed, 0},
      {"truncated exponent", "1.5E", "", ParseStatus::malformed, 0},
      {"truncated exponent sign", "1.5E-", "", ParseStatus::malformed, 0},
      {"sign only", "-", "", ParseStatus::malformed, 0},
      {"dot only", ".", "", ParseStatus::malformed, 0},
      {"two values", "1.0,2.0", "", ParseStatus::malformed, 0},
      {"embedded blank", "1.0 E3", "", ParseStatus::malformed, 0},
      {"double sign", "+-1", "", ParseStatus::malformed, 0},
      {"inf word", "inf", "", ParseStatus::malformed, 0},
      {"nan word", "nan", "", ParseStatus::malformed, 0},
      {"hex", "0x10", "", ParseStatus::malformed, 0},
      {"error text instead of number", "-113,\"Undefined header\"", "", ParseStatus::malformed, 0},
      {"wrong terminator left in (LF CR)", "1.0\n\r", "", ParseStatus::ok, 1.0},
      {"text then number", "V=1.0", "", ParseStatus::malformed, 0},
      {"exponent overflows double", "1E400", "", ParseStatus::malformed, 0},
      {"overlong", std::string(300, '1'), "", ParseStatus::overlong, 0},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    NumberReply r = parse_number(c.input, c.suffix);
    CHECK(r.status == c.status);
    if (c.status == ParseStatus::ok) {
      CHECK(r.value == Approx(c.value).epsilon(1e-15));
      CHECK(r.why.empty());
    } else {
      CHECK_FALSE(r.why.empty());
    }
  }
}

TEST_CASE("parse_integer: register values for bit tests", "[drivers][parser]") {
  struct Case {
    const char* label;
    const char* input;
    ParseStatus status;
    long long value;
  } cases[] = {
      {"NR1", "2", ParseStatus::ok, 2},
      {"NR1 +0", "+0", ParseStatus::ok, 0},
      {"integral NR3", "+2.00000E+00", ParseStatus::ok, 2},
      {"large register", "65535", ParseStatus::ok, 65535},
      {"fraction", "2.5", ParseStatus::malformed, 0},
      {"negative", "-2", ParseStatus::malformed, 0},
      {"garbage", "CC", ParseStatus::malformed, 0},
      {"empty", "", ParseStatus::empty, 0},
      {"overload", "9.9E37", ParseStatus::overrange, 0},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    IntegerReply r = parse_integer(c.input);
    CHECK(r.status == c.status);
    if (c.status == ParseStatus::ok) CHECK(r.value == c.value);
  }
}

TEST_CASE("parse_error_entry: SYST:ERR? replies", "[drivers][parser]") {
  struct Case {
    const char* label;
    const char* input;
    ParseStatus status;
    int code;
    const char* text;
  } cases[] = {
      {"no error", "0,\"No error\"", ParseStatus::ok, 0, "No error"},
      {"signed zero", "+0,\"No error\"", ParseStatus::ok, 0, "No error"},
      {"undefined header", "-113,\"Undefined header\"", ParseStatus::ok, -113, "Undefined header"},
      {"data out of range", "-222,\"Data out of range\"", ParseStatus::ok, -222, "Data out of range"},
      {"device-specific positive", "201,\"Relay stuck\"", ParseStatus::ok, 201, "Relay stuck"},
      {"extra info after semicolon", "-222,\"Data out of range;VOLT 99\"", ParseStatus::ok, -222,
       "Data out of range;VOLT 99"},
      {"doubled quote inside", "-100,\"Bad \"\"x\"\"\"", ParseStatus::ok, -100, "Bad \"x\""},
      {"blank after comma", "-113, \"Undefined header\"\r", ParseStatus::ok, -113, "Undefined header"},
      {"no comma", "-113 Undefined header", ParseStatus::malformed, 0, ""},
      {"text not quoted", "-113,Undefined header", ParseStatus::malformed, 0, ""},
      {"truncated quote", "-113,\"Undefined hea", ParseStatus::malformed, 0, ""},
      {"code not integer", "x,\"No error\"", ParseStatus::malformed, 0, ""},
      {"code fractional", "1.5,\"No error\"", ParseStatus::malformed, 0, ""},
      {"stray quote", "-1,\"a\"b\"", ParseStatus::malformed, 0, ""},
      {"number instead", "+1.0E+00", ParseStatus::malformed, 0, ""},
      {"empty", "", ParseStatus::empty, 0, ""},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    ErrorEntryReply r = parse_error_entry(c.input);
    CHECK(r.status == c.status);
    if (c.status == ParseStatus::ok) {
      CHECK(r.code == c.code);
      CHECK(r.text == c.text);
    }
  }
}

TEST_CASE("parse_identity: *IDN? replies", "[drivers][parser]") {
  IdentityReply ok = parse_identity("junco-sim,SRC-100,SIM-S001,1.0\r");
  REQUIRE(ok.status == ParseStatus::ok);
  CHECK(ok.identity.manufacturer == "junco-sim");
  CHECK(ok.identity.model == "SRC-100");
  CHECK(ok.identity.serial == "SIM-S001");
  CHECK(ok.identity.firmware == "1.0");

  // IEEE 488.2 10.14: a field that is not available is "0" (from memory).
  IdentityReply zero = parse_identity("ACME, X1 ,0,0");
  REQUIRE(zero.status == ParseStatus::ok);
  CHECK(zero.identity.model == "X1");
  CHECK(zero.identity.serial == "0");

  struct Case {
    const char* label;
    std::string input;
    ParseStatus status;
  } cases[] = {
      {"three fields", "ACME,X1,123", ParseStatus::malformed},
      {"five fields", "ACME,X1,123,1.0,extra", ParseStatus::malformed},
      {"no manufacturer", ",X1,123,1.0", ParseStatus::malformed},
      {"no model", "ACME,,123,1.0", ParseStatus::malformed},
      {"control byte", std::string("ACME,X\x01,1,1"), ParseStatus::malformed},
      {"a number", "+1.0E+00", ParseStatus::malformed},
      {"empty", "", ParseStatus::empty},
      {"overlong", "A,B,C," + std::string(400, 'x'), ParseStatus::overlong},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    CHECK(parse_identity(c.input).status == c.status);
  }
}

TEST_CASE("parsers are total over random bytes and never pass an overload as ok", "[drivers][parser]") {
  // A seeded sweep standing in for the fuzz target until it exists: random
  // lengths, bytes drawn from number-ish characters plus anything.
  std::mt19937 rng(20261202);
  const std::string alphabet = "0123456789+-.eE, \"\r\nVDCA#\x7f\x80";
  for (int k = 0; k < 20000; ++k) {
    std::string s(rng() % 24, '\0');
    for (auto& c : s) c = (rng() % 4) ? alphabet[rng() % alphabet.size()] : static_cast<char>(rng() % 256);
    NumberReply n = parse_number(s);
    if (n.status == ParseStatus::ok) {
      INFO("input " << s);
      CHECK(std::isfinite(n.value));
      CHECK(std::fabs(n.value) < 9.9e37);
    } else {
      CHECK_FALSE(n.why.empty());
    }
    (void)parse_number(s, "VDC");
    (void)parse_integer(s);
    (void)parse_error_entry(s);
    (void)parse_identity(s);
  }
}
