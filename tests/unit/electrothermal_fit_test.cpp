// The electro-thermal fit (fitting/electrothermal_fit.hpp) against readings
// generated here by an independent steady-state solve of a self-heating
// junction: Tj = Ta + Rth·I·V found by bisection, V from the Shockley diode
// with Is(T) written in the algebraic form
//   Is(T) = IS·(T/TNOM)^(XTI/N)·exp(EG·q/(N·k)·(1/TNOM − 1/T))
// (the SPICE law of docs/references.md §2 rearranged; ngspice diotemp.c), and the
// AC readings from a std::complex divider of the fixture (RL, Rs + rj).
#include "fitting/electrothermal_fit.hpp"
#include "formats/report_json.hpp"  // electrothermal_run_json: the report as juncod stores it

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <random>
#include <vector>

using namespace junco::fitting;

namespace {

struct Truth {
  double is_a = 2.5e-9, n = 1.75, rs_ohm = 0.7, rth_k_per_w = 400.0;
  double ambient_k = 300.15, eg_ev = 1.11, xti = 3.0;
};

constexpr double k_b = 1.380649e-23, q_e = 1.602176634e-19;  // SI 2019, exact

double is_at(const Truth& t, double temp_k) {
  return t.is_a * std::pow(temp_k / t.ambient_k, t.xti / t.n) *
         std::exp(t.eg_ev * q_e / (t.n * k_b) * (1.0 / t.ambient_k - 1.0 / temp_k));
}
double v_at(const Truth& t, double i_a, double temp_k) {
  return i_a * t.rs_ohm + t.n * k_b * temp_k / q_e * std::log(i_a / is_at(t, temp_k) + 1.0);
}
// Steady junction temperature at i_a: the root of Tj − Ta − Rth·I·V(I, Tj),
// which is increasing in Tj (bisection, 200 halvings of 500 K).
double tj_at(const Truth& t, double i_a) {
  double lo = t.ambient_k, hi = t.ambient_k + 500.0;
  for (int k = 0; k < 200; ++k) {
    const double mid = 0.5 * (lo + hi);
    (mid - t.ambient_k - t.rth_k_per_w * i_a * v_at(t, i_a, mid) < 0 ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

struct Readings {
  std::vector<IvPoint> dc;
  std::vector<AcPoint> ac;
};

// 50 DC points 1 µA..50 mA, 20 AC readings 0.5..50 mA at 10 MHz into RL = 50 Ω
// (choke return). noise = false: exact readings.
Readings make_readings(const Truth& t, bool noise, unsigned seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  Readings r;
  const AccuracyModel acc;  // the default figures, read as rectangular limits (GUM 4.3.7): σ = limit/√3
  for (int k = 0; k < 50; ++k) {
    const double i = 1e-6 * std::pow(5e4, k / 49.0);
    double v = v_at(t, i, tj_at(t, i)), i_read = i;
    if (noise) {
      v += g(rng) * (acc.v_rel * v + acc.v_abs_v) / std::sqrt(3.0);
      i_read += g(rng) * (acc.i_rel * i + acc.i_abs_a) / std::sqrt(3.0);
    }
    r.dc.push_back({v, i_read});
  }
  for (int k = 0; k < 20; ++k) {
    const double i = 5e-4 * std::pow(100.0, k / 19.0), tj = tj_at(t, i);
    const double rj = t.n * k_b * tj / q_e / (i + is_at(t, tj));
    const std::complex<double> gain = 50.0 / (std::complex<double>(t.rs_ohm + rj) + 50.0);
    double db = 20.0 * std::log10(std::abs(gain));
    if (noise) db += 0.01 * g(rng);
    AcPoint p;
    p.bias_i_a = i;
    p.freq_hz = 10e6;
    p.vin = 0.002;  // Vrms: 2 mV keeps the signal current under 10 % of the bias (screen_ac_readings)
    p.vout = 0.002 * std::pow(10.0, db / 20.0);
    r.ac.push_back(p);
  }
  return r;
}

Fixture fixture_50() {
  Fixture fx;
  fx.load_ohm = 50.0;
  return fx;
}

}  // namespace

TEST_CASE("exact heated readings give back Is, n, Rs, Rth") {
  const Truth t;
  const auto r = make_readings(t, false, 1);
  ElectroThermalOptions o;
  o.ambient_k = t.ambient_k;
  const auto f = fit_electrothermal(r.dc, r.ac, fixture_50(), o);
  INFO(f.message);
  REQUIRE(f.ok);
  CHECK(f.rs_ohm.value == Approx(t.rs_ohm).epsilon(1e-6));
  CHECK(f.rth_k_per_w.value == Approx(t.rth_k_per_w).epsilon(1e-6));
  CHECK(f.n.value == Approx(t.n).epsilon(1e-7));
  CHECK(f.is_a.value == Approx(t.is_a).epsilon(1e-6));
  // Tj at the top reading (50 mA) against the bisection above.
  CHECK(f.top_i_a == Approx(50e-3).epsilon(1e-12));
  CHECK(f.top_tj_k.value == Approx(tj_at(t, 50e-3)).epsilon(1e-8));
  // The heated junction's model voltage equals the generator's.
  double tj = 0;
  CHECK(heated_voltage_v(DiodeParams{t.is_a, t.n, t.rs_ohm}, 20e-3, t.ambient_k, t.rth_k_per_w,
                         TemperatureLaw{}, &tj) == Approx(v_at(t, 20e-3, tj_at(t, 20e-3))).epsilon(1e-12));
  CHECK(tj == Approx(tj_at(t, 20e-3)).epsilon(1e-12));
  // The DC-only fit of the same readings: Rs far too low (docs/references.md §8:
  // apparent Rs ≈ Rs − Rth·V·|dV/dT|, about −0.4 ohm at 400 K/W).
  CHECK(f.apparent_rs_ohm.value < t.rs_ohm - 0.2);
}

TEST_CASE("noisy heated readings at 400 K/W: Rs within 5 % and 3 standard errors") {
  // Issue target: isothermal Rs within 5 % of the truth, heating at 400 K/W.
  const Truth t;
  ElectroThermalOptions o;
  o.ambient_k = t.ambient_k;
  for (unsigned seed : {11u, 12u, 13u}) {
    const auto r = make_readings(t, true, seed);
    const auto f = fit_electrothermal(r.dc, r.ac, fixture_50(), o);
    INFO("seed " << seed << ": " << f.message << " Rs " << f.rs_ohm.value << " ± " << f.rs_ohm.std_error << ", Rth "
                 << f.rth_k_per_w.value << " ± " << f.rth_k_per_w.std_error << ", chi2r " << f.reduced_chi2);
    REQUIRE(f.ok);
    CHECK(std::abs(f.rs_ohm.value - t.rs_ohm) < 0.05 * t.rs_ohm);
    CHECK(std::abs(f.rs_ohm.value - t.rs_ohm) < 3 * f.rs_ohm.std_error);
    CHECK(std::abs(f.rth_k_per_w.value - t.rth_k_per_w) < 3 * f.rth_k_per_w.std_error);
    CHECK(std::abs(f.n.value - t.n) < 3 * f.n.std_error);
    CHECK(std::abs(std::log(f.is_a.value / t.is_a)) < 3 * f.is_a.std_error / f.is_a.value);
    CHECK(f.reduced_chi2 == Approx(1.0).margin(0.5));
    // The apparent (DC-only) Rs with its tight error is many errors off.
    CHECK(t.rs_ohm - f.apparent_rs_ohm.value > 10 * f.apparent_rs_ohm.std_error);
  }
}

TEST_CASE("without heating the fit finds Rth near 0 and the DC Rs") {
  Truth t;
  t.rth_k_per_w = 0.0;
  const auto r = make_readings(t, true, 21);
  ElectroThermalOptions o;
  const auto f = fit_electrothermal(r.dc, r.ac, fixture_50(), o);
  REQUIRE(f.ok);
  CHECK(f.rth_k_per_w.value < 3 * f.rth_k_per_w.std_error + 1e-9);
  CHECK(std::abs(f.rs_ohm.value - t.rs_ohm) < 3 * f.rs_ohm.std_error);
}

TEST_CASE("without AC readings it refuses and says why") {
  const Truth t;
  const auto r = make_readings(t, false, 1);
  const auto f = fit_electrothermal(r.dc, {}, fixture_50(), ElectroThermalOptions{});
  CHECK_FALSE(f.ok);
  CHECK(f.message.find("cannot be told apart") != std::string::npos);
  CHECK(f.apparent_rs_ohm.value < t.rs_ohm - 0.2);  // the DC-only Rs is still reported
}

TEST_CASE("fit_run_electrothermal: fits with AC readings, sizes the heating bias without") {
  const Truth t;
  const auto r = make_readings(t, true, 31);
  ElectroThermalRunOptions o;
  o.fit.ambient_k = t.ambient_k;
  // With AC: the fit, and a large-signal reading screened out first (a
  // reading whose output level means a signal current above 10 % of the bias).
  auto ac = r.ac;
  AcPoint big = ac.front();
  big.vin = 5.0;
  big.vout = 5.0 * ac.front().vout / ac.front().vin;
  ac.push_back(big);
  const auto run = fit_run_electrothermal(r.dc, ac, fixture_50(), o);
  CHECK(run.status == "fitted");
  CHECK(run.ac_total == 21);
  CHECK(run.ac_left_out == 1);
  CHECK(std::abs(run.fit.rs_ohm.value - t.rs_ohm) < 0.05 * t.rs_ohm);
  const auto j = electrothermal_run_json(run, o);
  CHECK(j["rth_k_per_w"]["value"].get<double>() == run.fit.rth_k_per_w.value);
  CHECK(j["apparent_rs_ohm"]["value"].get<double>() < t.rs_ohm - 0.2);
  CHECK(j["eg_ev"] == 1.11);
  // Without AC: DC only, with the bias per 100 K/W. Its size at this part's top
  // reading (50 mA, ~0.9 V) from dVj/dT = (Vj − EG − XTI·Vt)/T (docs/references.md
  // §2, E3) is about 0.1 ohm; the truth's own bias at 400 K/W (DC-only Rs −
  // Rs) must be about 4× it (docs/references.md §8: Rs_app ≈ Rs − Rth·V·|dV/dT|).
  const auto dc_only = fit_run_electrothermal(r.dc, {}, fixture_50(), o);
  CHECK(dc_only.status == "no_ac");
  CHECK(dc_only.note.find("may include self-heating") != std::string::npos);
  const double per_100 = dc_only.rs_bias_per_100_k_per_w_ohm;
  CHECK(per_100 == Approx((t.rs_ohm - dc_only.fit.apparent_rs_ohm.value) / 4.0).epsilon(0.1));  // 0.1100 vs 0.1097 here
  CHECK(electrothermal_run_json(dc_only, o)["rth_k_per_w"]["value"].is_null());
}

// ---- Stored charge in the AC model ------------------------------------------
//
// A heated junction with a transit time and a depletion law, read at 1, 10,
// 30 and 100 MHz (TT 4 ns: corner 1/(2π·TT) ≈ 40 MHz). The truth's AC
// readings come from this test's own std::complex divider of the junction in
// the charge-control linearisation, Z = Rs + 1/(gd + jω(Cdep(Vd) + TT·gd)) with
// gd = (I + Is(Tj))/(n·Vt(Tj)) and Vd = n·Vt(Tj)·ln(1 + I/Is(Tj)) at the
// bisected Tj (docs/references.md §2 and §8: Cd = TT·gd, ngspice manual's
// diode model), and Cdep the SPICE depletion law as ngspice dioload.c writes
// it, coded here from docs/references.md §2: CJO·(1 − V/VJ)^−M below FC·VJ,
// CJO/(1 − FC)^(1+M)·(1 − FC·(1 + M) + M·V/VJ) above.

namespace {

struct ChargeTruth {
  Truth dc;
  double tt_s = 4e-9, cj0_f = 2e-12, vj_v = 0.7, m = 0.4, fc = 0.5;
};

double cdep_f(const ChargeTruth& t, double v) {
  if (v < t.fc * t.vj_v) return t.cj0_f * std::pow(1.0 - v / t.vj_v, -t.m);
  return t.cj0_f / std::pow(1.0 - t.fc, 1.0 + t.m) * (1.0 - t.fc * (1.0 + t.m) + t.m * v / t.vj_v);
}

// 50 DC points as make_readings; AC readings at 12 biases 0.5..50 mA × 4 frequencies.
Readings make_charge_readings(const ChargeTruth& t, bool noise, unsigned seed) {
  Readings r = make_readings(t.dc, noise, seed);
  r.ac.clear();
  std::mt19937_64 rng(seed + 1000);
  std::normal_distribution<double> g(0.0, 1.0);
  for (int k = 0; k < 12; ++k) {
    const double i = 5e-4 * std::pow(100.0, k / 11.0), tj = tj_at(t.dc, i);
    const double nvt = t.dc.n * k_b * tj / q_e, is = is_at(t.dc, tj);
    const double gd = (i + is) / nvt, vd = nvt * std::log(1.0 + i / is);
    for (double f : {1e6, 1e7, 3e7, 1e8}) {
      const double w = 2.0 * M_PI * f;
      const std::complex<double> z = t.dc.rs_ohm + 1.0 / std::complex<double>(gd, w * (cdep_f(t, vd) + t.tt_s * gd));
      double db = 20.0 * std::log10(std::abs(50.0 / (z + 50.0)));
      if (noise) db += 0.01 * g(rng);
      AcPoint p;
      p.bias_i_a = i;
      p.freq_hz = f;
      p.vin = 0.002;
      p.vout = 0.002 * std::pow(10.0, db / 20.0);
      r.ac.push_back(p);
    }
  }
  return r;
}

ElectroThermalOptions charge_options(const ChargeTruth& t) {
  ElectroThermalOptions o;
  o.ambient_k = t.dc.ambient_k;
  o.charge.cap = {t.cj0_f, t.vj_v, t.m, t.fc};
  o.charge.tt_s = t.tt_s;
  return o;
}

}  // namespace

TEST_CASE("TT 4 ns and Cj(V): exact heated readings give back Rs and Rth only with the charge in the AC model") {
  const ChargeTruth t;
  const auto r = make_charge_readings(t, false, 41);
  const auto f = fit_electrothermal(r.dc, r.ac, fixture_50(), charge_options(t));
  INFO(f.message << " Rs " << f.rs_ohm.value << " Rth " << f.rth_k_per_w.value << " n " << f.n.value << " chi2r " << f.reduced_chi2);
  REQUIRE(f.ok);
  CHECK(f.rs_ohm.value == Approx(t.dc.rs_ohm).epsilon(1e-6));
  CHECK(f.rth_k_per_w.value == Approx(t.dc.rth_k_per_w).epsilon(1e-6));
  CHECK(f.n.value == Approx(t.dc.n).epsilon(1e-7));
  CHECK(f.is_a.value == Approx(t.dc.is_a).epsilon(1e-6));

  // The same readings with the AC model of before (rd ∥ nothing): the
  // readings above the corner read as a smaller rd, and the fit cannot
  // describe them.
  ElectroThermalOptions bare;
  bare.ambient_k = t.dc.ambient_k;
  const auto b = fit_electrothermal(r.dc, r.ac, fixture_50(), bare);
  INFO("without the charge: Rs " << b.rs_ohm.value << " Rth " << b.rth_k_per_w.value << " n " << b.n.value << " chi2r "
                                 << b.reduced_chi2);
  CHECK(b.reduced_chi2 > 1e3);
  CHECK(std::abs(b.rth_k_per_w.value - t.dc.rth_k_per_w) > 0.1 * t.dc.rth_k_per_w);
  // The depletion law alone (no TT) is not enough either: TT·gd is what moves with the current.
  ElectroThermalOptions cap_only = charge_options(t);
  cap_only.charge.tt_s = 0.0;
  const auto c = fit_electrothermal(r.dc, r.ac, fixture_50(), cap_only);
  CHECK(c.reduced_chi2 > 1e3);
}

TEST_CASE("TT 4 ns and Cj(V): noisy heated readings at 400 K/W, Rs within 5 % and 3 standard errors") {
  const ChargeTruth t;
  for (unsigned seed : {51u, 52u, 53u}) {
    const auto r = make_charge_readings(t, true, seed);
    const auto f = fit_electrothermal(r.dc, r.ac, fixture_50(), charge_options(t));
    INFO("seed " << seed << ": " << f.message << " Rs " << f.rs_ohm.value << " ± " << f.rs_ohm.std_error << ", Rth "
                 << f.rth_k_per_w.value << " ± " << f.rth_k_per_w.std_error << ", chi2r " << f.reduced_chi2);
    REQUIRE(f.ok);
    CHECK(std::abs(f.rs_ohm.value - t.dc.rs_ohm) < 0.05 * t.dc.rs_ohm);
    CHECK(std::abs(f.rs_ohm.value - t.dc.rs_ohm) < 3 * f.rs_ohm.std_error);
    CHECK(std::abs(f.rth_k_per_w.value - t.dc.rth_k_per_w) < 3 * f.rth_k_per_w.std_error);
    CHECK(std::abs(f.n.value - t.dc.n) < 3 * f.n.std_error);
    CHECK(f.reduced_chi2 == Approx(1.0).margin(0.5));
  }
}
