// The one SI-text grammar (units/si_text.hpp). Expected values are the SI
// prefix definitions (BIPM SI Brochure, 9th ed., table 7: m = 1e-3, µ = 1e-6,
// n = 1e-9, p = 1e-12, f = 1e-15, k = 1e3, M = 1e6, G = 1e9, T = 1e12) and the
// SPICE convention that "meg" is 1e6 (ngspice manual, section 2.3 "Conventions").
#include "units/si_text.hpp"

#include <catch2/catch.hpp>

#include <stdexcept>
#include <string>

using junco::units::format_si;
using junco::units::parse_si;
using junco::units::parse_si_list;
using junco::units::unit_scale;

TEST_CASE("the grammar's cases read as the SI prefixes say", "[units]") {
  struct Case {
    const char* text;
    const char* unit;
    double want;
  };
  const Case cases[] = {
      {"1mA", "A", 1e-3},        {"2.2pF", "F", 2.2e-12},    {"100MHz", "Hz", 100e6},     {"10meg", "ohm", 10e6},
      {"10MEG", "", 10e6},       {"10megohm", "ohm", 10e6},  {"4.7\xC2\xB5", "", 4.7e-6}, {"4.7\xCE\xBC" "F", "F", 4.7e-6},
      {"4.7u", "F", 4.7e-6},     {"1m", "", 1e-3},           {"1M", "", 1e6},             {"2F", "F", 2.0},
      {"2f", "F", 2e-15},        {"5 mA", "A", 5e-3},        {"10e-3", "A", 10e-3},       {"-40", "C", -40.0},
      {"1.5G", "Hz", 1.5e9},     {"3T", "", 3e12},           {"50", "ohm", 50.0},         {"1k", "ohm", 1e3},
      {"4.7kohm", "ohm", 4.7e3}, {"4.7k\xCE\xA9", "ohm", 4.7e3}, {"0.01dB", "dB", 0.01},  {".5V", "V", 0.5},
      {"+3n", "A", 3e-9},        {"10ma", "A", 10e-3},       {"1e3k", "", 1e6},           {"300K", "K", 300.0},
  };
  for (const auto& c : cases) {
    INFO(c.text << " in '" << c.unit << "'");
    std::string why;
    const auto v = parse_si(c.text, c.unit, &why);
    REQUIRE(v);
    CHECK(*v == Approx(c.want).epsilon(1e-12));
  }
}

TEST_CASE("bad text is refused with a reason that names it", "[units]") {
  struct Case {
    const char* text;
    const char* unit;
    const char* says;
  };
  const Case cases[] = {
      {"", "A", "empty value"},           {"abc", "A", "'abc' is not a number"}, {"4u7", "F", "'4u7': unknown suffix 'u7'"},
      {"1mV", "A", "unknown suffix 'mV'"}, {"10x", "", "unknown suffix 'x'"},   {"inf", "A", "'inf' is not a number"},
      {"nan", "", "'nan' is not a number"}, {"1e999", "", "out of range"},      {"1kk", "", "unknown suffix 'kk'"},
      {"0x10", "", "unknown suffix 'x10'"}, {"1mA,", "A", "unknown suffix"},
  };
  for (const auto& c : cases) {
    INFO(c.text);
    std::string why;
    CHECK_FALSE(parse_si(c.text, c.unit, &why));
    CHECK(why.find(c.says) != std::string::npos);
  }
  CHECK_THROWS_WITH(junco::units::parse_si_or_throw("1 furlong", "m"), Catch::Contains("'1 furlong'"));
}

TEST_CASE("lists name the bad item", "[units]") {
  const auto v = parse_si_list("1mA,10mA,100u", "A");
  REQUIRE(v.size() == 3);
  CHECK(v[0] == Approx(1e-3));
  CHECK(v[2] == Approx(100e-6));
  CHECK_THROWS_WITH(parse_si_list("1mA,,10mA", "A"), Catch::Contains("empty value"));
  CHECK_THROWS_WITH(parse_si_list("1mA,2mV", "A"), Catch::Contains("'2mV'"));
}

TEST_CASE("unit-marked names: prefix letters on the base unit", "[units]") {
  CHECK(*unit_scale("mV", "V") == Approx(1e-3));
  CHECK(*unit_scale("mv", "V") == Approx(1e-3));  // unit letter in any case, prefix as written
  CHECK(*unit_scale("uA", "A") == Approx(1e-6));
  CHECK(*unit_scale("\xC2\xB5" "A", "A") == Approx(1e-6));
  CHECK(*unit_scale("nA", "A") == Approx(1e-9));
  CHECK(*unit_scale("A", "A") == 1.0);
  CHECK(*unit_scale("", "A") == 1.0);
  CHECK_FALSE(unit_scale("mA", "V"));
  CHECK_FALSE(unit_scale("ohm", "A"));
}

TEST_CASE("formatting: engineering prefixes, significant digits, and back", "[units]") {
  CHECK(format_si(0.0123, "A") == "12.3 mA");
  CHECK(format_si(1.234e-3, "A") == "1.234 mA");
  CHECK(format_si(2.2e-12, "F") == "2.2 pF");
  CHECK(format_si(100e6, "Hz") == "100 MHz");
  CHECK(format_si(4.7e12, "Hz") == "4.7 THz");
  CHECK(format_si(-0.5, "V") == "-500 mV");
  CHECK(format_si(0.0, "A") == "0 A");
  CHECK(format_si(999.96e-6, "A") == "1 mA");  // rounding carries into the next prefix
  CHECK(format_si(950.0, "ohm", 2) == "950 ohm");
  CHECK(format_si(1.5e3, "") == "1.5 k");
  CHECK(format_si(1.0 / 0.0, "A") == "\xE2\x80\x94");
  for (double v : {3.3e-15, 4.7e-9, 0.1234, 1.0, 56.78, 9.1e4, 2.5e9}) {
    INFO(v);
    CHECK(*parse_si(format_si(v, "A", 6), "A") == Approx(v).epsilon(1e-6));
  }
}
