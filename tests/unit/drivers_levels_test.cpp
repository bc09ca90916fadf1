// AC amplitude units (drivers/levels.hpp) against their definitions, and the
// dialect keys that state an instrument's unit.
//
// Sources: Vrms of a periodic signal is √(mean of v²) over a period (IEEE Std
// 100, "root-mean-square value"); for a sine of peak Vpk that is Vpk/√2, and
// Vpp = 2·Vpk. dBm = 10·log10(P / 1 mW) (IEEE Std 100, "dBm"), P = Vrms²/R.
// Worked values: 0 dBm into 600 Ω is 0.7746 Vrms (the 0 dBu reference
// voltage √0.6 V, ITU-T and audio practice); 0 dBm into 50 Ω is 223.6 mVrms
// = 632.5 mVpp (RF practice, from memory; recomputed here from the
// definition).
#include "drivers/dialect.hpp"
#include "drivers/errors.hpp"
#include "drivers/levels.hpp"

#include <catch2/catch.hpp>

#include <cmath>

using namespace junco::drivers;

namespace {

// RMS of one period of a sampled sine, straight from the definition.
double sampled_sine_rms(double vpk) {
  constexpr int n = 100000;
  double sum = 0;
  for (int k = 0; k < n; ++k) {
    const double v = vpk * std::sin(2 * M_PI * (k + 0.5) / n);
    sum += v * v;
  }
  return std::sqrt(sum / n);
}

}  // namespace

TEST_CASE("Vpp and Vrms of a sine agree with the RMS definition", "[drivers][levels]") {
  for (double vpk : {1e-3, 0.05, 1.0, 7.5}) {
    const double vpp = 2 * vpk;
    const double rms = sampled_sine_rms(vpk);
    CHECK(sine_to_vrms(vpp, {LevelUnit::vpp}) == Approx(rms).epsilon(1e-9));
    CHECK(sine_from_vrms(rms, {LevelUnit::vpp}) == Approx(vpp).epsilon(1e-9));
    CHECK(sine_to_vrms(rms, {LevelUnit::vrms}) == rms);
  }
}

TEST_CASE("dBm is power into the stated resistance", "[drivers][levels]") {
  // 0 dBm into 600 Ω: √(1 mW · 600 Ω) = √0.6 V = 0.7746 V (the 0 dBu voltage).
  CHECK(dbm_to_vrms(0.0, 600.0) == Approx(0.7745966692).epsilon(1e-9));
  // 0 dBm into 50 Ω: 223.6 mVrms, 632.5 mVpp for a sine.
  CHECK(dbm_to_vrms(0.0, 50.0) == Approx(0.2236068).epsilon(1e-6));
  CHECK(sine_from_vrms(dbm_to_vrms(0.0, 50.0), {LevelUnit::vpp}) == Approx(0.6324555).epsilon(1e-6));
  // +10 dBm into 50 Ω is 10 mW: Vrms = √(10 mW · 50 Ω) = 0.7071 V = 2 Vpp.
  CHECK(sine_to_vrms(10.0, {LevelUnit::dbm, 50.0}) == Approx(std::sqrt(0.5)).epsilon(1e-12));
  CHECK(sine_from_vrms(std::sqrt(0.5), {LevelUnit::dbm, 50.0}) == Approx(10.0).epsilon(1e-12));
  // −20 dBm is 10 µW: P = V²/R recomputed from the result.
  const double v = dbm_to_vrms(-20.0, 50.0);
  CHECK(v * v / 50.0 == Approx(10e-6).epsilon(1e-12));
  CHECK(vrms_to_dbm(v, 50.0) == Approx(-20.0).epsilon(1e-12));
  CHECK_THROWS_AS(dbm_to_vrms(0.0, 0.0), DriverError);
  CHECK_THROWS_AS(vrms_to_dbm(0.0, 50.0), DriverError);
  CHECK(describe(LevelScale{LevelUnit::dbm, 50.0}) == "dbm into 50 ohm");
  CHECK(parse_level_unit("vpp") == LevelUnit::vpp);
  CHECK_FALSE(parse_level_unit("VPP"));
}

TEST_CASE("dialects state a generator's one unit and a meter's dBm impedance", "[drivers][levels]") {
  const Dialect gen = parse_dialect(R"J({"dialect": "g", "role": "siggen", "amplitude_unit": "vpp",
    "operations": {"set_frequency": {"commands": ["FREQ {hz}"]}, "set_amplitude": {"commands": ["VOLT {v}"]},
                   "output_on": {"commands": ["OUTP ON"]}, "output_off": {"commands": ["OUTP OFF"]},
                   "query_state": {"query": "OUTP?"}}})J",
                                    "g.json");
  REQUIRE(gen.amplitude_unit);
  CHECK(*gen.amplitude_unit == LevelUnit::vpp);
  CHECK(gen.find("query_state")->query == "OUTP?");
  const Dialect lvl = parse_dialect(R"J({"dialect": "l", "role": "levelmeter", "impedance_ohm": 50,
    "operations": {"measure_dbm": {"query": "MEAS:POW:AC? (@{ch})", "reply": {"type": "number"}}}})J",
                                    "l.json");
  CHECK(lvl.impedance_ohm == 50.0);
  CHECK(lvl.find("measure_vrms") == nullptr);
  auto error_of = [](const std::string& text) {
    try {
      parse_dialect(text, "broken.json");
    } catch (const DriverError& e) {
      return std::string(e.what());
    }
    return std::string("no error");
  };
  CHECK_THAT(error_of(R"J({"dialect": "l", "role": "levelmeter",
    "operations": {"measure_dbm": {"query": "P? {ch}", "reply": {"type": "number"}}}})J"),
             Catch::StartsWith("broken.json: /impedance_ohm: missing"));
  CHECK_THAT(error_of(R"J({"dialect": "l", "role": "levelmeter", "operations": {}})J"),
             Catch::StartsWith("broken.json: /operations/measure_vrms: missing (a levelmeter needs"));
  CHECK_THAT(error_of(R"J({"dialect": "g", "role": "siggen", "amplitude_unit": "dbm",
    "operations": {"set_frequency": {"commands": ["F {hz}"]}, "set_amplitude": {"commands": ["V {v}"]},
                   "output_on": {"commands": ["O 1"]}, "output_off": {"commands": ["O 0"]}}})J"),
             Catch::StartsWith("broken.json: /impedance_ohm: missing"));
  CHECK_THAT(error_of(R"J({"dialect": "g", "role": "siggen", "amplitude_unit": "volts", "operations": {}})J"),
             Catch::StartsWith("broken.json: /amplitude_unit: unknown unit \"volts\""));
  CHECK_THAT(error_of(R"J({"dialect": "s", "role": "scanner", "amplitude_unit": "vpp", "operations": {}})J"),
             Catch::StartsWith("broken.json: /amplitude_unit: only a siggen dialect"));
  CHECK_THAT(error_of(R"J({"dialect": "s", "role": "scanner",
    "operations": {"connect_slot": {"commands": ["C {slot}"]}, "disconnect_all": {"commands": ["O"]},
                   "query_state": {"query": "C?", "reply": {"type": "number"}}}})J"),
             Catch::StartsWith("broken.json: /operations/query_state/reply: the reply of this operation is shown"));
}
