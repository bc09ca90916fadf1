// Amplitude units per instrument, end to end: a generator that takes only
// Vpp (junco-sim family gen-vpp) and a level meter that reads only dBm into
// 50 Ω (family acv-dbm), each described by a lab-written dialect stating its
// unit, measure the same parts as the native bench (scpi-gen told the
// plan's Vrms, scpi-acv reading Vrms), with the plan in Vrms on both. juncod
// converts the plan's amplitude to Vpp (a sine: Vpp = 2·√2·Vrms) and the
// meter's dBm to Vrms (Vrms = √(R · 1 mW · 10^(dBm/10)), IEEE Std 100 "dBm");
// the readings are stored as Vrms, the run records both instruments' units,
// and the fits (the electro-thermal fit, which uses the AC readings) agree
// with the native bench's within their standard errors.
#include "tests/integration/drivers_test_support.hpp"
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <fstream>

using junco::test::BenchDaemon;
using junco::test::BenchDaemonOptions;
using Json = nlohmann::json;

namespace {

const Json kPlan{{"lot", "WREN-0912"},
                 {"parts", {{{"slot", 1}, {"label", "WR-01"}}, {{"slot", 2}, {"label", "WR-02"}}}},
                 {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.05}, {"count", 24}, {"settle_s", 0.03}}},
                 {"ac", {{"freqs_hz", {1e6}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0}}}};

struct Fitted {
  Json fit;
  Json run;
  Json first_ac;
};

std::vector<Fitted> measure(const std::vector<std::string>& sim_args, const BenchDaemonOptions& o, const std::string& tag, Json* sim_state) {
  BenchDaemon b(tag, sim_args, o);
  b.run_plan(kPlan);
  std::vector<Fitted> out;
  for (long part = 1; part <= 2; ++part) {
    Fitted f;
    f.fit = b.result("part.fit", {{"part_id", part}});
    const Json r = b.result("part.readings", {{"part_id", part}});
    f.run = r["run"];
    for (const auto& p : r["points"])
      if (p["kind"] == "ac") {
        f.first_ac = p;
        break;
      }
    out.push_back(f);
  }
  *sim_state = b.sim().control("state?");
  return out;
}

}  // namespace

TEST_CASE("a Vpp-only generator and a dBm-only meter fit as the native bench does", "[daemon][levels]") {
  // Heating (θ = 400 K/W) makes the AC readings matter: the stored Is, n and
  // Rs are the electro-thermal fit's, which separates Rs from heating with them.
  const auto dir = junco::test::scratch_dir("levels-cfg");
  std::filesystem::create_directories(dir);
  std::ofstream(dir / "hot.json") << R"J({"thermal": {"theta_k_per_w": 400, "tau_s": 0.005}})J";
  // Written as a lab would for instruments that take or read one unit only
  // (drivers/dialects/template.json: amplitude_unit, impedance_ohm, measure_dbm).
  std::ofstream(dir / "lab-gen-vpp.json") << R"J({
    "dialect": "lab-gen-vpp", "role": "siggen", "amplitude_unit": "vpp",
    "operations": {"set_frequency": {"commands": ["FREQ {hz}"]}, "set_amplitude": {"commands": ["VOLT {v}"]},
                   "output_on": {"commands": ["OUTP ON"]}, "output_off": {"commands": ["OUTP OFF"]},
                   "query_state": {"query": "OUTP?"}}})J";
  std::ofstream(dir / "lab-level-dbm.json") << R"J({
    "dialect": "lab-level-dbm", "role": "levelmeter", "impedance_ohm": 50,
    "operations": {"measure_dbm": {"query": "MEAS:POW:AC? (@{ch})", "reply": {"type": "number"}}}})J";
  const std::vector<std::string> common{"--settle-ms", "0", "--config", (dir / "hot.json").string()};

  Json native_state, mixed_state;
  const auto native = measure(common, BenchDaemonOptions{}, "levels-native", &native_state);
  std::vector<std::string> mixed_args = common;
  for (const char* a : {"--family", "siggen=gen-vpp", "--family", "levelmeter=acv-dbm"}) mixed_args.push_back(a);
  BenchDaemonOptions mixed_options;
  mixed_options.dialects = {{"siggen", (dir / "lab-gen-vpp.json").string()}, {"levelmeter", (dir / "lab-level-dbm.json").string()}};
  const auto mixed = measure(mixed_args, mixed_options, "levels-mixed", &mixed_state);
  std::filesystem::remove_all(dir);

  // The generator was programmed in Vpp: 2 mVrms of a sine is 5.657 mVpp.
  CHECK(mixed_state["siggen"]["emf_vpp"].get<double>() == Approx(0.002 * 2 * std::sqrt(2.0)).epsilon(1e-9));
  CHECK(native_state["siggen"]["emf_vpp"].get<double>() == Approx(0.002 * 2 * std::sqrt(2.0)).epsilon(1e-9));

  for (std::size_t k = 0; k < 2; ++k) {
    INFO("part " << k + 1 << "\nnative " << native[k].fit.dump().substr(0, 500) << "\nmixed  " << mixed[k].fit.dump().substr(0, 500));
    // Stored truly: dBm became Vrms and says so; the run names both units.
    CHECK(mixed[k].first_ac["ac_unit"] == "vrms");
    CHECK(native[k].first_ac["ac_unit"] == "vrms");
    CHECK(mixed[k].run["fixture"]["ac_units"] == Json{{"plan", "vrms"}, {"siggen", "vpp"}, {"levelmeter", "dbm into 50 ohm"}});
    CHECK(native[k].run["fixture"]["ac_units"]["siggen"] == "as asked");
    // Channel 1 is the fixture input: near the generator's 2 mVrms EMF
    // divided by Rg and the part's input (docs/sim.md); the same on both benches.
    CHECK(mixed[k].first_ac["ac_in_v"].get<double>() == Approx(native[k].first_ac["ac_in_v"].get<double>()).epsilon(0.01));
    REQUIRE(native[k].fit["status"] == "converged");
    REQUIRE(mixed[k].fit["status"] == "converged");
    // Both are the electro-thermal fit (DC + AC readings), not a DC-only fallback.
    const Json& et_native = native[k].fit["detail"]["electrothermal"];
    const Json& et_mixed = mixed[k].fit["detail"]["electrothermal"];
    REQUIRE(et_native["status"] == "fitted");
    REQUIRE(et_mixed["status"] == "fitted");
    // Same part, same fit within 3 combined standard errors: Is, n and the
    // isothermal Rs, and the thermal resistance the AC readings reveal.
    const std::vector<std::pair<const char*, const Json*>> compared{
        {"is_a", nullptr}, {"n", nullptr}, {"rs_ohm", nullptr}, {"rth_k_per_w", &et_native}};
    for (const auto& [p, from] : compared) {
      const Json& na = from ? et_native[p] : native[k].fit[p];
      const Json& mb = from ? et_mixed[p] : mixed[k].fit[p];
      const double a = na["value"], b = mb["value"];
      const double sa = na["std_error"], sb = mb["std_error"];
      INFO(p << ": native " << a << " ± " << sa << ", mixed " << b << " ± " << sb);
      CHECK(std::fabs(a - b) <= 3 * std::hypot(sa, sb));
      WARN("part " << k + 1 << " " << p << ": native " << a << " ± " << sa << ", mixed " << b << " ± " << sb << " (" << std::fabs(a - b) / std::hypot(sa, sb)
                   << " combined SE apart)");
    }
  }
}

// The bench config may state an instrument's unit too (a generic dialect
// that names the unit, {unit}, on a generator set to take Vpp): juncod's
// driver then sends VOLT:UNIT VPP and the plan's Vrms converted, and a level
// meter set to read Vrms reads Vrms even when Vpp is asked.
TEST_CASE("the bench config's amplitude_unit overrides the dialect's", "[drivers][levels]") {
  junco::test::SimProcess sim({"--settle-ms", "0", "--family", "levelmeter=scope-meas"});
  junco::test::TrafficLog gen_log;
  auto gen_spec = junco::test::sim_spec(sim, "siggen", &gen_log);
  gen_spec.level_unit = junco::drivers::LevelUnit::vpp;
  auto gen = junco::drivers::open_signal_gen(gen_spec);
  CHECK(gen->amplitude_units() == "vpp");
  gen->set_amplitude(0.01, junco::drivers::LevelUnit::vrms);
  CHECK(gen_log.contains("VOLT:UNIT VPP"));
  CHECK(gen_log.contains("VOLT 0.02828427125"));  // 2·√2 · 10 mVrms, 10 significant digits
  CHECK(sim.control("state?")["siggen"]["emf_vpp"].get<double>() == Approx(0.02 * std::sqrt(2.0)).epsilon(1e-9));

  auto level_spec = junco::test::sim_spec(sim, "levelmeter");
  level_spec.level_unit = junco::drivers::LevelUnit::vrms;
  auto level = junco::drivers::open_level_meter(level_spec);
  CHECK(level->level_units() == "vrms");
  CHECK(level->measure_level(1, junco::drivers::LevelUnit::vpp).unit == junco::drivers::LevelUnit::vrms);
  // Without the override the scope reads what is asked.
  auto plain = junco::drivers::open_level_meter(junco::test::sim_spec(sim, "levelmeter"));
  CHECK(plain->measure_level(1, junco::drivers::LevelUnit::vpp).unit == junco::drivers::LevelUnit::vpp);
}
