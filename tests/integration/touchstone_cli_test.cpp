// `junco export touchstone` as a real process on a model document written
// here: the file it writes is the library's text for the same request
// (formats/touchstone.hpp; its physics is checked against ngspice in
// tests/reference/touchstone_ngspice_test.cpp), and bad input is refused
// with exit 2 and one line naming the value.
#include "formats/touchstone.hpp"
#include "formats/model_document.hpp"
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <fstream>

using namespace junco;

namespace {

fitting::PartModel kestrel_part() {
  fitting::PartModel p;  // invented values, lot WREN-0912
  p.part_label = "K24B-017";
  p.lot = "WREN-0912";
  p.params = {2.5e-9, 1.85, 0.7};
  p.cj0_f = 2e-12;
  p.vj_v = 0.65;
  p.m = 0.4;
  p.tt_s = 5e-9;
  return p;
}

}  // namespace

TEST_CASE("junco export touchstone writes the library's two-port for the model document", "[cli][touchstone]") {
  const test::ScratchDir dir("junco-s2p");
  const std::string model = dir.file("k24b.json");
  std::ofstream(model) << fitting::model_document_json(kestrel_part());
  const auto back = fitting::parse_model_document(test::slurp(model));
  REQUIRE(back);

  fitting::TouchstoneRequest req;
  req.bias = {fitting::BiasState::Kind::reverse_voltage, 5.0};
  req.mount = fitting::SwitchKind::shunt;
  req.freqs_hz = *fitting::parse_frequency_list("1MHz:1GHz:31log");
  req.package = {1.2e-9, 0.15e-12};
  const auto run = test::run_junco("export touchstone '" + model + "' --bias -5V --mount shunt --freq 1MHz:1GHz:31log --ls 1.2nH --cp 0.15pF -o '" +
                                   dir.file("k.s2p") + "'");
  INFO(run.out);
  REQUIRE(run.status == 0);
  const std::string text = test::slurp(dir.file("k.s2p"));
  CHECK(text == fitting::touchstone_s2p(*back, req));
  CHECK(text.find("\n# Hz S RI R 50\n") != std::string::npos);

  // Bad input: exit 2 and one line that names what was wrong.
  const auto positive_v = test::run_junco("export touchstone '" + model + "' --bias 5V");
  CHECK(positive_v.status == 2);
  CHECK(positive_v.out.find("'5V'") != std::string::npos);
  const auto no_bias = test::run_junco("export touchstone '" + model + "'");
  CHECK(no_bias.status == 2);
  CHECK(no_bias.out.find("--bias") != std::string::npos);
  const auto bad_freq = test::run_junco("export touchstone '" + model + "' --bias 1mA --freq 1GHz:1MHz:5log");
  CHECK(bad_freq.status == 2);
  CHECK(bad_freq.out.find("START < STOP") != std::string::npos);
}

TEST_CASE("Touchstone bias and frequency texts", "[touchstone]") {
  // Common practice, no source: what the options accept and refuse.
  const auto fwd = fitting::parse_bias_state("10mA");
  REQUIRE(fwd);
  CHECK(fwd->kind == fitting::BiasState::Kind::forward_current);
  CHECK(fwd->value == Approx(10e-3));
  const auto rev = fitting::parse_bias_state("-5V");
  REQUIRE(rev);
  CHECK(rev->kind == fitting::BiasState::Kind::reverse_voltage);
  CHECK(rev->value == Approx(5.0));
  std::string why;
  CHECK_FALSE(fitting::parse_bias_state("10m", &why));
  CHECK(why.find("'10m'") != std::string::npos);
  CHECK_FALSE(fitting::parse_bias_state("-1mA"));

  const auto sweep = fitting::parse_frequency_list("1MHz:1GHz:4log");
  REQUIRE(sweep);
  REQUIRE(sweep->size() == 4);
  CHECK((*sweep)[1] == Approx(10e6));
  CHECK((*sweep)[3] == 1e9);
  const auto lin = fitting::parse_frequency_list("10MHz:40MHz:4lin");
  REQUIRE(lin);
  CHECK((*lin)[2] == Approx(30e6));
  const auto list = fitting::parse_frequency_list("1MHz, 2.5MHz,1GHz");
  REQUIRE(list);
  CHECK(list->size() == 3);
  CHECK_FALSE(fitting::parse_frequency_list("1MHz:1GHz:1log", &why));
  CHECK(why.find("point count") != std::string::npos);
  CHECK_FALSE(fitting::parse_frequency_list("10MHz,1MHz", &why));
  CHECK(why.find("increasing") != std::string::npos);
}
