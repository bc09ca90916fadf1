// Vector readings against junco-sim (a real process, drivers over real TCP):
// the scpi-vvm dialect reads ch2/ch1 as ratio and phase; open and short
// standards in two slots and the package's Ls and Cp given remove what sits
// around the junction (fitting/deembed.hpp), and the C–V law comes out at
// the sim's truth, where the same readings' magnitudes alone, with the
// package's 0.15 pF unseparated, bend VJ and M far off (issue 15).
// The correction is the open–short de-embedding of on-wafer practice
// (Koolen et al., 1991; docs/references.md §10, from memory).
#include "drivers/errors.hpp"
#include "drivers/factory.hpp"
#include "fitting/deembed.hpp"
#include "fitting/junction_cap.hpp"
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <chrono>
#include <algorithm>
#include <cmath>
#include <complex>
#include <filesystem>
#include <fstream>
#include <map>
#include <numbers>
#include <vector>

using namespace junco;
using cplx = std::complex<double>;

namespace {

drivers::InstrumentSpec spec_of(const test::SimProcess& sim, const char* role, const char* dialect) {
  drivers::InstrumentSpec s;
  s.name = role;
  s.address = sim.endpoint(role);
  s.dialect_path = std::string(JUNCO_SOURCE_DIR) + "/drivers/dialects/" + dialect + ".json";
  return s;
}

// The sim's truth for this test: one part law (no lot spread) at VJ 0.7 V,
// M 0.5, in a package of 1.2 nH and 0.15 pF, in a slot with 0.05 pF stray
// and 2 nH of trace; slot 7 empty (open standard), slot 8 a link (short).
constexpr double truth_vj = 0.7, truth_m = 0.5, truth_cj0 = 2e-12;
constexpr fitting::PackageParasitics truth_package{1.2e-9, 0.15e-12};

std::string sim_config_file() {
  const auto path = std::filesystem::temp_directory_path() / ("junco-vector-sim-" + std::to_string(::getpid()) + ".json");
  std::ofstream(path) << R"({"nominal": {"cj0_f": 2e-12, "vj_v": 0.7, "m": 0.5, "rs_ohm": 0.7},
    "spread": {"is_ln_sigma": 0, "n_sigma": 0, "rs_rel_sigma": 0, "cj0_rel_sigma": 0},
    "fixture": {"package_ls_h": 1.2e-9, "package_cp_f": 0.15e-12, "stray_c_f": 0.05e-12, "slot_ls_h": 2e-9},
    "empty_slots": [7], "short_slots": [8], "thermal": {"theta_k_per_w": 0}})";
  return path.string();
}

}  // namespace

TEST_CASE("vector readings de-embedded with open/short and the package give the sim's C-V law", "[drivers][sim][vector]") {
  const std::string config = sim_config_file();
  test::SimProcess sim({"--config", config, "--settle-ms", "0", "--seed", "11"});
  std::filesystem::remove(config);
  auto source = drivers::open_source(spec_of(sim, "source", "scpi-source"));
  auto scanner = drivers::open_scanner(spec_of(sim, "scanner", "scpi-switch"));
  auto gen = drivers::open_signal_gen(spec_of(sim, "siggen", "scpi-gen"));
  drivers::InstrumentSpec vvm_spec = spec_of(sim, "vectormeter", "scpi-vvm");
  vvm_spec.reply_timeout = std::chrono::milliseconds(500);  // the refusal below answers nothing: do not wait long
  vvm_spec.max_retries = 0;
  auto vvm = drivers::open_vector_meter(vvm_spec);

  // Without a generator signal there is no reference: the meter refuses.
  CHECK_THROWS_AS(vvm->measure_transfer(), drivers::DriverError);

  const std::vector<double> freqs{10e6, 30e6, 100e6};
  const std::vector<double> biases{0, 0.5, 1, 2, 3, 5, 8, 10};
  gen->set_amplitude(0.05, drivers::LevelUnit::vpp);
  gen->set_output(true);
  source->set_current_limit_a(1e-3);
  source->set_output(true);

  const auto z_slot = [&](double f) {
    gen->set_frequency_hz(f);
    return fitting::slot_impedance_ohm(vvm->measure_transfer().value(), 50.0);  // load: RL, return inductor open at AC
  };
  std::map<double, cplx> z_open, z_short;
  scanner->connect_slot(7);
  for (double f : freqs) z_open[f] = z_slot(f);
  scanner->connect_slot(8);
  for (double f : freqs) z_short[f] = z_slot(f);

  std::vector<fitting::OffStatePoint> magnitudes;
  std::vector<fitting::CapacitanceReading> vector_c;
  std::vector<fitting::PackagedOffReading> packaged;
  scanner->connect_slot(1);
  for (double v : biases) {
    source->set_voltage_v(-v);
    for (double f : freqs) {
      gen->set_frequency_hz(f);
      const drivers::Transfer t = vvm->measure_transfer();
      magnitudes.push_back({v, f, 1.0, t.ratio});
      const cplx z_dut = fitting::deembed_open_short(fitting::slot_impedance_ohm(t.value(), 50.0), z_open[f], z_short[f]);
      packaged.push_back({v, f, z_dut});
      const cplx z_chip = fitting::chip_impedance_from_packaged(z_dut, truth_package, f);
      vector_c.push_back({v, fitting::reverse_capacitance_f(z_chip, f), 1e-3});
    }
  }
  source->set_output(false);
  gen->set_output(false);

  // Magnitudes alone (the level-meter path: |G| → series C, RS known), the
  // package's Cp and the stray unseparated.
  fitting::Fixture fx;
  const fitting::JunctionCapFit mag = fitting::fit_junction_cap(magnitudes, fx, 0.7, {});
  REQUIRE(mag.ok);
  // Vector readings, de-embedded, package given.
  const fitting::JunctionCapFit vec = fitting::fit_junction_cap_values(vector_c);
  REQUIRE(vec.ok);
  WARN("magnitudes alone: CJO " << mag.cj0_f.value << " VJ " << mag.vj_v.value << " M " << mag.m.value
                                << "; vector, de-embedded: CJO " << vec.cj0_f.value << " VJ " << vec.vj_v.value << " M " << vec.m.value);
  // The truth is the sim's configured law; the tolerances are ours, no
  // source: the sim's 0.02 % / 0.02 degree noise moves VJ and M by well
  // under 0.02 over 0–10 V.
  CHECK(vec.cj0_f.value == Approx(truth_cj0).epsilon(0.005));
  CHECK(vec.vj_v.value == Approx(truth_vj).margin(0.03));
  CHECK(vec.m.value == Approx(truth_m).margin(0.02));
  // Without separating 0.2 pF of package and stray (and 3.2 nH), the law is
  // far off (seen: VJ 0.54, M 0.38 over 0-10 V; issue 15's 0.43/0.27 was
  // another bias range and fixture): at least five times the vector path's
  // error, and more than 0.1 in each.
  CHECK(std::abs(mag.vj_v.value - truth_vj) > std::max(0.1, 5 * std::abs(vec.vj_v.value - truth_vj)));
  CHECK(std::abs(mag.m.value - truth_m) > std::max(0.1, 5 * std::abs(vec.m.value - truth_m)));

  // Fitting Cp and Ls instead of taking them as given: below 100 MHz
  // ω²·Ls·Cj is ≤ 0.1 % of Cj, comparable to the noise; report what it gives.
  const fitting::PackageFit pf = fitting::fit_package(packaged);
  WARN("package fitted from 10-100 MHz readings: ok " << pf.ok << " Cp " << pf.package.cp_f << " F, Ls " << pf.package.ls_h
                                                      << " H, rms " << pf.rms_relative << " " << pf.message);
}
