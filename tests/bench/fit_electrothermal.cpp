// Time per part of the electro-thermal fit against the plain DC fit (and the
// isothermal joint DC + AC fit) on the same readings, in the same run,
// interleaved so machine load hits all alike. A run is 50 DC points
// (1 µA..50 mA) and AC_COUNT AC readings (0.5..50 mA, 10 MHz) of a junction
// heating at 400 K/W; 8 parts spread like a lot; Gaussian noise of the
// default accuracy model (fixed seed). A second set of the same parts with a
// 4 ns transit time and a Cj(V) law, read at 1, 10, 30 and 100 MHz in turn,
// times the fit with that charge in its AC model (ElectroThermalOptions::charge).
//   build/<preset>/bin/bench_fit_electrothermal [REPS] [AC_COUNT]   (defaults 200, 50)
// Prints the median ms per part of each fit and the electro-thermal Rs error.
#include "fitting/joint_fit.hpp"
#include "fitting/electrothermal_fit.hpp"

#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <vector>

using namespace junco::fitting;

namespace {

struct Run {
  DiodeParams truth;
  std::vector<IvPoint> dc;
  std::vector<AcPoint> ac;
};

const JunctionCharge bench_charge{{2e-12, 0.65, 0.4, 0.5}, 4e-9};

Run make_run(std::mt19937_64& rng, int ac_count, const Fixture& fx, bool with_charge = false) {
  std::normal_distribution<double> g(0.0, 1.0);
  Run r;
  r.truth = {2.5e-9 * std::exp(0.3 * g(rng)), 1.75 + 0.05 * g(rng), 0.7 * (1.0 + 0.1 * g(rng))};
  const double ta = 300.15, rth = 400.0;
  const AccuracyModel acc;
  for (int k = 0; k < 50; ++k) {
    const double i = 1e-6 * std::pow(5e4, k / 49.0);
    const double v = heated_voltage_v(r.truth, i, ta, rth, {});
    r.dc.push_back({v + g(rng) * standard_uncertainty_v(acc, v), i + g(rng) * standard_uncertainty_i(acc, i)});
  }
  for (int k = 0; k < ac_count; ++k) {
    const double i = 5e-4 * std::pow(100.0, k / double(ac_count - 1));
    double tj = 0;
    heated_voltage_v(r.truth, i, ta, rth, {}, &tj);
    const double freq_hz = with_charge ? std::array{1e6, 1e7, 3e7, 1e8}[static_cast<std::size_t>(k % 4)] : 10e6;
    AcPart part{diode_at_temperature(r.truth, ta, tj, {}), 0.0};
    if (with_charge) part.tt_s = bench_charge.tt_s, part.cap = bench_charge.cap;
    const double db = to_db(fixture_gain(fx, diode_on_impedance(part, i, freq_hz, tj))) + 0.01 * g(rng);
    AcPoint p;
    p.bias_i_a = i;
    p.freq_hz = freq_hz;
    p.vin = 0.05;
    p.vout = 0.05 * std::pow(10.0, db / 20.0);
    r.ac.push_back(p);
  }
  return r;
}

template <typename F>
double seconds(F&& f) {
  const auto start = std::chrono::steady_clock::now();
  f();
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

double median(std::vector<double> v) {
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

}  // namespace

int main(int argc, char** argv) {
  const int reps = argc > 1 ? std::atoi(argv[1]) : 200;
  const int ac_count = argc > 2 ? std::atoi(argv[2]) : 50;
  if (reps < 1 || ac_count < 3) {
    std::fprintf(stderr, "usage: bench_fit_electrothermal [REPS >= 1] [AC_COUNT >= 3]\n");
    return 2;
  }
  Fixture fx;
  std::mt19937_64 rng(20261203);
  std::vector<Run> runs;
  for (int k = 0; k < 8; ++k) runs.push_back(make_run(rng, ac_count, fx));
  std::vector<Run> charged;
  for (int k = 0; k < 8; ++k) charged.push_back(make_run(rng, ac_count, fx, true));

  FitOptions plain_options;
  JointFitOptions joint_options;
  ElectroThermalOptions et_options;
  ElectroThermalOptions charge_options;
  charge_options.charge = bench_charge;
  std::vector<double> t_plain, t_joint, t_et, t_charge;
  double worst_rs_rel = 0.0, worst_charge_rs_rel = 0.0, sink = 0.0;
  for (int rep = 0; rep < reps; ++rep) {
    for (const auto& r : runs) {
      t_plain.push_back(seconds([&] { sink += fit_forward(r.dc, plain_options).rs_ohm.value; }));
      t_joint.push_back(seconds([&] { sink += fit_dc_ac(r.dc, r.ac, fx, joint_options).rs_ohm.value; }));
      ElectroThermalFit f;
      t_et.push_back(seconds([&] { f = fit_electrothermal(r.dc, r.ac, fx, et_options); }));
      if (rep == 0) {
        if (!f.ok) {
          std::fprintf(stderr, "electro-thermal fit failed: %s\n", f.message.c_str());
          return 1;
        }
        worst_rs_rel = std::max(worst_rs_rel, std::abs(f.rs_ohm.value / r.truth.rs_ohm - 1.0));
      }
    }
    for (const auto& r : charged) {
      ElectroThermalFit f;
      t_charge.push_back(seconds([&] { f = fit_electrothermal(r.dc, r.ac, fx, charge_options); }));
      if (rep == 0) {
        if (!f.ok) {
          std::fprintf(stderr, "electro-thermal fit with TT failed: %s\n", f.message.c_str());
          return 1;
        }
        worst_charge_rs_rel = std::max(worst_charge_rs_rel, std::abs(f.rs_ohm.value / r.truth.rs_ohm - 1.0));
      }
    }
  }
  std::printf("run: 50 DC points + %d AC readings, 8 parts, %d repetitions (median per part)\n", ac_count, reps);
  std::printf("plain DC fit (fit_forward)            %8.3f ms\n", 1e3 * median(t_plain));
  std::printf("joint DC + AC, isothermal (fit_dc_ac) %8.3f ms\n", 1e3 * median(t_joint));
  std::printf("electro-thermal DC + AC               %8.3f ms  (target <= 5 ms)\n", 1e3 * median(t_et));
  std::printf("electro-thermal Rs, worst |error| over the 8 parts: %.2f %%\n", 100.0 * worst_rs_rel);
  std::printf("electro-thermal, TT 4 ns + Cj(V), 1-100 MHz %8.3f ms  (target <= 5 ms)\n", 1e3 * median(t_charge));
  std::printf("  its Rs, worst |error| over the 8 parts: %.2f %%\n", 100.0 * worst_charge_rs_rel);
  return sink == 12345.678 ? 3 : 0;  // keep the work observable
}
