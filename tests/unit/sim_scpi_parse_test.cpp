// The simulator's pure SCPI pieces: header matching, number parsing, the
// status model and reply garbling. Rules from docs/references.md §5 (SCPI-99
// syntax, error queue) unless marked.
#include "tools/sim/bench.hpp"
#include "tools/sim/instrument.hpp"
#include "tools/sim/scpi.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>

using namespace junco::sim;

TEST_CASE("headers match in short or long form, any case, optional leading colon and suffix 1") {
  CHECK(header_matches("MEASure:VOLTage:DC?", "MEAS:VOLT:DC?"));
  CHECK(header_matches("MEASure:VOLTage:DC?", ":measure:voltage:dc?"));
  CHECK_FALSE(header_matches("MEASure:VOLTage:DC?", "MEAS:VOLT:DC"));   // query vs command
  CHECK_FALSE(header_matches("MEASure:VOLTage:DC?", "MEASU:VOLT:DC?"));  // neither form
  CHECK(header_matches("SOURce1:FREQuency", ":SOUR1:FREQ"));
  CHECK(header_matches("SOURce1:FREQuency", "SOUR:FREQ"));
  CHECK_FALSE(header_matches("SOURce1:FREQuency", "SOUR2:FREQ"));
}

TEST_CASE("NRf numbers parse whole; suffixed amplitudes split") {
  CHECK(parse_number("1") == 1.0);
  CHECK(parse_number("-2.5E-3") == -2.5e-3);
  CHECK(parse_number(" +.5 ") == 0.5);
  CHECK_FALSE(parse_number("1.2.3"));
  CHECK_FALSE(parse_number("nan"));
  CHECK_FALSE(parse_number("0x10"));
  CHECK_FALSE(parse_number("1e"));
  const auto v = parse_number_with_suffix("0.1VPP");
  REQUIRE(v);
  CHECK(v->first == 0.1);
  CHECK(v->second == "VPP");
  const auto e = parse_number_with_suffix("1E-1VRMS");
  REQUIRE(e);
  CHECK(e->first == Approx(0.1));
  CHECK(e->second == "VRMS");
}

TEST_CASE("messages split at ';' outside quotes") {
  const auto cmds = split_message(":SENS:FUNC 'A;B';*OPC?");
  REQUIRE(cmds.size() == 2);
  CHECK(cmds[0].args == "'A;B'");
  CHECK(cmds[1].query);
}

TEST_CASE("status model: FIFO, overflow keeps older entries, ESR class bits") {
  StatusModel s(3);
  s.push_error(-113, "Undefined header");
  s.push_error(-222, "Data out of range");
  s.push_error(-410, "Query INTERRUPTED");
  s.push_error(-100, "Command error");  // overflow
  CHECK(s.read_and_clear_esr() == (StatusModel::esr_cme | StatusModel::esr_exe | StatusModel::esr_qye |
                                   StatusModel::esr_dde));
  CHECK(s.read_and_clear_esr() == 0);
  CHECK(s.pop_error() == "-113,\"Undefined header\"");
  CHECK(s.pop_error() == "-222,\"Data out of range\"");
  CHECK(s.pop_error() == "-350,\"Queue overflow\"");
  CHECK(s.pop_error() == "0,\"No error\"");
}

TEST_CASE("garbled replies never parse as a number, in any of the forms") {
  Bench bench(SimConfig{});
  auto inst = make_instrument("meter", "scpi-dmm", bench, 7);
  for (const std::string reply : {"+6.523010E-01", "1", "-3.2E-09", "0,\"No error\"", "CV"}) {
    for (int k = 0; k < 9; ++k) {
      const std::string g = inst->garble(reply);
      INFO(reply << " → " << g);
      CHECK(g != reply);
      CHECK(g.find('\n') == std::string::npos);
      CHECK_FALSE(parse_number(g));
      char* end = nullptr;
      std::strtod(g.c_str(), &end);
      CHECK(end != g.c_str() + g.size());  // not a whole number to strtod either
    }
  }
}

TEST_CASE("the lot is a seeded spread around the nominal part") {
  PartParams nominal;
  const auto a = draw_lot(nominal, LotSpread{}, 50, 3), b = draw_lot(nominal, LotSpread{}, 50, 3);
  const auto c = draw_lot(nominal, LotSpread{}, 50, 4);
  double mean_n = 0;
  for (size_t i = 0; i < a.size(); ++i) {
    CHECK(a[i].part.is_a == b[i].part.is_a);
    mean_n += a[i].part.n / 50;
    CHECK(a[i].part.rs_ohm > 0);
  }
  CHECK(a[0].part.is_a != c[0].part.is_a);
  CHECK(mean_n == Approx(nominal.n).margin(0.02));  // σ = 0.02, 50 parts: 4.5 σ of the mean
}
