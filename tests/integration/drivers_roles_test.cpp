// Each role driver through each shipped dialect against a real junco-sim
// process over TCP. What the driver set is checked in the sim's own state
// (control endpoint `state?`); what it read is checked against the sim's
// true operating point. Both families of every role (docs/command-sets.md).
#include "drivers/errors.hpp"
#include "tests/integration/drivers_test_support.hpp"

#include <catch2/catch.hpp>

using namespace junco::drivers;
using junco::test::SimProcess;
using junco::test::sim_spec;

namespace {

struct FamilySet {
  const char* source;
  const char* meter;
  const char* scanner;
  const char* siggen;
  const char* levelmeter;
};

const FamilySet family_sets[] = {
    {"scpi-source", "scpi-dmm", "scpi-switch", "scpi-gen", "scpi-acv"},
    {"psu-compact", "dmm-prefixed", "relay-bank", "gen-channel", "scope-meas"},
};

std::vector<std::string> sim_args(const FamilySet& f) {
  return {"--seed",   "11",
          "--settle-ms", "0",
          "--family", std::string("source=") + f.source,
          "--family", std::string("meter=") + f.meter,
          "--family", std::string("scanner=") + f.scanner,
          "--family", std::string("siggen=") + f.siggen,
          "--family", std::string("levelmeter=") + f.levelmeter};
}

}  // namespace

TEST_CASE("every role through every shipped dialect against junco-sim", "[drivers][integration]") {
  const FamilySet& families = family_sets[GENERATE(0, 1)];
  SimProcess sim(sim_args(families));
  REQUIRE(sim.family("source") == families.source);
  INFO("source family " << families.source);

  junco::test::TrafficLog log;
  auto source = open_source(sim_spec(sim, "source", &log));
  auto meter = open_meter(sim_spec(sim, "meter"));
  auto scanner = open_scanner(sim_spec(sim, "scanner"));
  auto gen = open_signal_gen(sim_spec(sim, "siggen"));
  auto level = open_level_meter(sim_spec(sim, "levelmeter"));

  SECTION("identify and reset") {
    Identity id = source->identify();
    CHECK(id.manufacturer == "junco-sim");
    CHECK(id.model == (families.source == std::string("scpi-source") ? "SRC-100" : "PSU-C2"));
    CHECK_NOTHROW(meter->reset());
    CHECK(log.contains("> *IDN?"));
  }

  SECTION("source settings reach the instrument; readings match the true operating point") {
    scanner->connect_slot(2);
    source->set_current_limit_a(0.02);
    source->set_voltage_v(1.5);
    source->set_output(true);
    auto state = sim.control("state?");
    CHECK(state["source"]["voltage_v"].get<double>() == Approx(1.5));
    CHECK(state["source"]["current_limit_a"].get<double>() == Approx(0.02));
    CHECK(state["source"]["output_on"].get<bool>());
    CHECK(state["scanner"]["slot"].get<int>() == 2);

    const double i_true = state["diode"]["i_a"].get<double>();
    const double v_true = state["diode"]["v"].get<double>();
    REQUIRE(i_true > 1e-4);  // the part conducts
    CHECK(source->measure_current_a() == Approx(i_true).epsilon(0.02));
    CHECK_FALSE(source->in_current_limit());
    meter->set_range(MeterFunction::dc_voltage, 0);  // autorange
    meter->set_integration_nplc(1);
    meter->set_averaging(4);
    meter->set_averaging(1);
    CHECK(meter->measure_dc_voltage_v() == Approx(v_true).epsilon(0.01));
    CHECK(meter->measure_dc_current_a() == Approx(i_true).epsilon(0.02));
    meter->set_range(MeterFunction::dc_current, 0.1);
    CHECK(meter->measure_dc_current_a() == Approx(i_true).epsilon(0.02));
    CHECK(log.contains(families.source == std::string("scpi-source") ? "> VOLT 1.5" : "> VSET 1.5"));
    CHECK(log.contains("> SYST:ERR?"));

    // Compliance: a current limit far below what the part would draw.
    source->set_current_limit_a(1e-4);
    source->set_voltage_v(5);
    CHECK(source->in_current_limit());
    CHECK(sim.control("state?")["source"]["in_current_limit"].get<bool>());
    source->set_output(false);
    CHECK_FALSE(sim.control("state?")["source"]["output_on"].get<bool>());
  }

  SECTION("meter overload is an overrange error, never a reading") {
    scanner->connect_slot(1);
    source->set_current_limit_a(0.02);
    source->set_voltage_v(2);
    source->set_output(true);
    meter->set_range(MeterFunction::dc_voltage, 0.1);  // the part drops ~0.7 V
    try {
      double v = meter->measure_dc_voltage_v();
      FAIL("overload returned as a reading: " << v);
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::overrange);
      CHECK_THAT(std::string(e.what()), Catch::Contains("measure_dc_voltage"));
    }
  }

  SECTION("scanner connects and opens slots") {
    scanner->connect_slot(3);
    CHECK(sim.control("state?")["scanner"]["slot"].get<int>() == 3);
    scanner->connect_slot(1);
    CHECK(sim.control("state?")["scanner"]["slot"].get<int>() == 1);
    scanner->disconnect_all();
    CHECK(sim.control("state?")["scanner"]["slot"].get<int>() == 0);
    // A slot past the fixture is refused by the instrument (-222).
    try {
      scanner->connect_slot(99);
      FAIL("slot 99 accepted");
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::instrument);
      CHECK(e.scpi_code() == -222);
    }
  }

  SECTION("signal generator frequency, amplitude in both units, output") {
    gen->set_frequency_hz(2.5e6);
    gen->set_amplitude(0.2, LevelUnit::vpp);
    gen->set_output(true);
    auto state = sim.control("state?")["siggen"];
    CHECK(state["freq_hz"].get<double>() == Approx(2.5e6));
    CHECK(state["emf_vpp"].get<double>() == Approx(0.2));
    CHECK(state["output_on"].get<bool>());
    gen->set_amplitude(0.1, LevelUnit::vrms);  // a sine: Vpp = 2*sqrt(2)*Vrms
    CHECK(sim.control("state?")["siggen"]["emf_vpp"].get<double>() == Approx(0.2 * std::sqrt(2.0)).epsilon(1e-6));
    gen->set_output(false);
    CHECK_FALSE(sim.control("state?")["siggen"]["output_on"].get<bool>());
  }

  SECTION("level meter reads both channels; Vpp only where the dialect offers it") {
    scanner->connect_slot(2);
    source->set_current_limit_a(0.05);
    source->set_voltage_v(3);
    source->set_output(true);
    gen->set_frequency_hz(1e6);
    gen->set_amplitude(0.1, LevelUnit::vpp);
    gen->set_output(true);
    const double in_vrms = level->measure_level(1, LevelUnit::vrms).value;
    const double out_vrms = level->measure_level(2, LevelUnit::vrms).value;
    auto levels = sim.control("state?")["levels"];
    CHECK(in_vrms == Approx(levels["in_vrms"].get<double>()).epsilon(0.02));
    CHECK(out_vrms == Approx(levels["out_vrms"].get<double>()).epsilon(0.02));
    CHECK(out_vrms > 0);
    if (families.levelmeter == std::string("scpi-acv")) {
      // A Vrms-only meter asked for Vpp answers Vrms, labelled so: turning
      // it into Vpp would assume a sine the biased diode does not pass.
      const Level l = level->measure_level(2, LevelUnit::vpp);
      CHECK(l.unit == LevelUnit::vrms);
      CHECK(l.value == Approx(levels["out_vrms"].get<double>()).epsilon(0.02));
    } else {
      const Level l = level->measure_level(2, LevelUnit::vpp);
      CHECK(l.unit == LevelUnit::vpp);
      CHECK(l.value == Approx(levels["out_vpp"].get<double>()).epsilon(0.02));
    }
    CHECK_THROWS_AS(level->measure_level(3, LevelUnit::vrms), DriverError);
  }
}

TEST_CASE("a dialect whose idn_match does not fit the instrument is refused", "[drivers][integration]") {
  SimProcess sim({"--family", "source=scpi-source"});
  auto spec = sim_spec(sim, "source");
  spec.dialect_path = junco::test::dialect_file("psu-compact");
  try {
    open_source(spec);
    FAIL("wrong dialect accepted");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::config);
    CHECK_THAT(std::string(e.what()), Catch::Contains("SRC-100") && Catch::Contains("idn_match"));
  }
  spec.dialect_path = junco::test::dialect_file("scpi-dmm");
  CHECK_THROWS_WITH(open_source(spec), Catch::Contains("is for role meter, not source"));
}
