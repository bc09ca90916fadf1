// The PIN law fitted from complex impedances at forward bias
// (fitting::fit_pin_impedance, the fit behind plan.vector's forward_vector
// readings), on synthetic impedances with a known truth and seeded noise.
//
// Sources:
//  - Charge control dQ/dt = i − Q/τ, the ideal I-region's resistance
//    R_I = W²/((µn + µp)·Q) with Q = I·τ, i.e. RF resistance inversely
//    proportional to the stored charge: Bhat and Borrego, IEE J. Solid-State
//    and Electron Devices 1(3), 1977; the textbook PIN relation (J. F. White,
//    Microwave Semiconductor Engineering) — from memory. The impedance below
//    is written out here from those equations (small signal about Q0 = I·τ),
//    not through the library.
//  - A signal diode's small-signal impedance RS + 1/(gd + jω(TT·gd + Cj)),
//    gd = I/(N·Vt): the SPICE junction's diffusion capacitance TT·gd
//    (ngspice manual, diode model, from memory).
//  - Silicon µn + µp = (1350 + 480) cm²/Vs at 300 K: Sze, from memory.
//  - "Within 4 standard errors": ours, no source.
#include "fitting/pin_diode.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <vector>

using namespace junco::fitting;
using cplx = std::complex<double>;

namespace {

constexpr double t27_k = 300.15;
constexpr double vt_v = 1.380649e-23 * t27_k / 1.602176634e-19;  // kT/q, CODATA 2018 exact constants

struct Truth {
  double n, tau_s, r0_ohm, k_ohm_a_x, x;  // R_I(Q) = K·(Q/τ)^−x
  double cj_f = 0.0;                      // depletion capacitance across the junction
};

// v = R0·i + v_j + R_I·i + I·(dR_I/dQ)·q, where the junction's admittance is
// gd·(1 + jωτ) + jω·Cj (diffusion charge q = τ·gd·v_j) and I·dR_I/dQ = −x·R_I/τ.
cplx truth_impedance(const Truth& t, double i_a, double f_hz) {
  const double w = 2.0 * std::numbers::pi * f_hz;
  const double gd = i_a / (t.n * vt_v);
  const double r_i = t.k_ohm_a_x * std::pow(i_a, -t.x);
  const cplx y_j = gd * cplx(1.0, w * t.tau_s) + cplx(0.0, w * t.cj_f);
  const cplx v_j = 1.0 / y_j;             // per ampere of signal current
  const cplx q = t.tau_s * gd * v_j;      // diffusion charge per ampere
  return t.r0_ohm + v_j + r_i + (-t.x * r_i / t.tau_s) * q;
}

std::vector<PinImpedanceReading> readings(const Truth& t, const std::vector<double>& currents, const std::vector<double>& freqs,
                                          double sigma_rel, unsigned seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, sigma_rel);
  std::vector<PinImpedanceReading> out;
  for (double i : currents)
    for (double f : freqs) {
      const cplx z = truth_impedance(t, i, f);
      out.push_back({i, f, z + std::abs(z) * cplx(noise(rng), noise(rng)), t.cj_f});
    }
  return out;
}

const std::vector<double> currents{0.2e-3, 0.5e-3, 1e-3, 2e-3, 5e-3, 10e-3, 20e-3};
// W = 30 µm, µn + µp = 0.183 m²/Vs, τ = 500 ns: K = W²/((µn + µp)·τ) = 9.84e-3 Ω·A, knee 318 kHz.
constexpr double w_m = 30e-6, mu_m2 = (1350.0 + 480.0) * 1e-4, tau_true_s = 500e-9;
const double k_ideal = w_m * w_m / (mu_m2 * tau_true_s);

}  // namespace

TEST_CASE("PIN impedance fit: the ideal I-region's K = W^2/((mun+mup) tau), x = 1 and tau from complex impedances") {
  const Truth t{2.0, tau_true_s, 0.6, k_ideal, 1.0, 0.3e-12};
  PinImpedanceFitOptions o;
  o.temp_k = t27_k;
  const auto fit = fit_pin_impedance(readings(t, currents, {30e3, 100e3, 300e3, 1e6, 3e6, 10e6, 100e6}, 0.003, 5), o);
  INFO(fit.message << ": tau " << fit.tau_s.value << " +- " << fit.tau_s.std_error << ", K " << fit.k_ohm_a_x.value << " +- "
                   << fit.k_ohm_a_x.std_error << ", x " << fit.x.value << " +- " << fit.x.std_error << ", R0 " << fit.r0_ohm.value
                   << " +- " << fit.r0_ohm.std_error << ", chi2 " << fit.reduced_chi2);
  REQUIRE(fit.ok);
  CHECK(k_ideal == Approx(9.836e-3).epsilon(1e-3));  // the published relation's number for this part
  CHECK(std::abs(fit.k_ohm_a_x.value - k_ideal) < 4 * fit.k_ohm_a_x.std_error);
  CHECK(std::abs(fit.x.value - 1.0) < 4 * fit.x.std_error);
  CHECK(std::abs(fit.tau_s.value - tau_true_s) < 4 * fit.tau_s.std_error);
  CHECK(std::abs(fit.r0_ohm.value - 0.6) < 4 * fit.r0_ohm.std_error);
  CHECK(std::abs(fit.n.value - 2.0) < 4 * fit.n.std_error);
  // Not merely large errors: within a few per cent of the truth.
  CHECK(fit.k_ohm_a_x.value == Approx(k_ideal).epsilon(0.03));
  CHECK(fit.tau_s.value == Approx(tau_true_s).epsilon(0.03));
  CHECK(fit.x.value == Approx(1.0).margin(0.02));
  // σ is 0.3 % per component here and the fit assumes 0.5 %: χ² ≈ (0.3/0.5)².
  CHECK(fit.reduced_chi2 == Approx(0.36).margin(0.12));
  CHECK(fit.above_knee >= currents.size() * 3);
}

TEST_CASE("PIN impedance fit: a practical law (x 0.9) above and below the knee; pulls are unit normal") {
  const double k = 20.0 * std::pow(1e-3, 0.9);  // R(1 mA) − R0 = 20 Ω
  const Truth t{1.9, 200e-9, 0.4, k, 0.9};
  const std::vector<double> freqs{100e3, 300e3, 1e6, 3e6, 30e6, 300e6};
  PinImpedanceFitOptions o;
  o.temp_k = t27_k;
  const int runs = 40;
  double sum[3] = {0, 0, 0}, sum2[3] = {0, 0, 0};
  for (int s = 0; s < runs; ++s) {
    const auto f = fit_pin_impedance(readings(t, currents, freqs, 0.005, 200 + s), o);
    REQUIRE(f.ok);
    const double pulls[3] = {(f.tau_s.value - 200e-9) / f.tau_s.std_error, (f.x.value - 0.9) / f.x.std_error,
                             (f.r_1ma_ohm.value - 20.4) / f.r_1ma_ohm.std_error};
    for (int j = 0; j < 3; ++j) sum[j] += pulls[j], sum2[j] += pulls[j] * pulls[j];
  }
  for (int j = 0; j < 3; ++j) {
    const double mean = sum[j] / runs, sd = std::sqrt(sum2[j] / runs - mean * mean);
    INFO("parameter " << j << " (tau, x, R(1 mA)) pull mean " << mean << " sd " << sd);
    CHECK(std::abs(mean) < 0.55);  // 3.5 σ of a mean of 40 unit normals
    CHECK(sd > 0.65);
    CHECK(sd < 1.4);
  }
}

TEST_CASE("PIN impedance fit, junction only: a signal diode's RS, N and TT (diffusion capacitance TT*gd)") {
  const Truth t{1.83, 5e-9, 0.7, 0.0, 1.0, 2.5e-12};  // no I-region
  PinImpedanceFitOptions o;
  o.temp_k = t27_k;
  o.junction_only = true;
  const auto fit = fit_pin_impedance(readings(t, {0.5e-3, 1e-3, 2e-3, 5e-3, 10e-3}, {3e6, 10e6, 30e6, 100e6, 300e6}, 0.003, 9), o);
  INFO(fit.message << ": TT " << fit.tau_s.value << " +- " << fit.tau_s.std_error << ", N " << fit.n.value << " +- " << fit.n.std_error
                   << ", RS " << fit.r0_ohm.value << " +- " << fit.r0_ohm.std_error);
  REQUIRE(fit.ok);
  CHECK(std::abs(fit.tau_s.value - 5e-9) < 4 * fit.tau_s.std_error);
  CHECK(std::abs(fit.n.value - 1.83) < 4 * fit.n.std_error);
  CHECK(std::abs(fit.r0_ohm.value - 0.7) < 4 * fit.r0_ohm.std_error);
  CHECK(fit.tau_s.value == Approx(5e-9).epsilon(0.03));
  CHECK(fit.k_ohm_a_x.value == 0.0);
  CHECK(std::isnan(fit.k_ohm_a_x.std_error));
  // The cj_f term of the law against the SPICE form RS + 1/(gd + jω(TT·gd + Cj)).
  const PinLaw law{1.83, 5e-9, 0.7, 0.0, 1.0};
  const double gd = 2e-3 / (1.83 * vt_v), w = 2.0 * std::numbers::pi * 100e6;
  const cplx spice = 0.7 + 1.0 / cplx(gd, w * (5e-9 * gd + 2.5e-12));
  const cplx z = pin_on_impedance(law, 2e-3, 100e6, t27_k, 2.5e-12);
  CHECK(z.real() == Approx(spice.real()).epsilon(1e-9));
  CHECK(z.imag() == Approx(spice.imag()).epsilon(1e-9));
}

TEST_CASE("PIN impedance fit refuses one frequency and too few readings") {
  PinImpedanceFitOptions o;
  const Truth t{2.0, tau_true_s, 0.6, k_ideal, 1.0};
  const auto one = fit_pin_impedance(readings(t, currents, {1e6}, 0.003, 1), o);
  CHECK_FALSE(one.ok);
  CHECK(one.message.find("2 or more frequencies") != std::string::npos);
  const auto few = fit_pin_impedance(readings(t, {1e-3}, {1e6, 1e7}, 0.003, 1), o);
  CHECK_FALSE(few.ok);
  CHECK(few.message.find("5 parameters") != std::string::npos);
}
