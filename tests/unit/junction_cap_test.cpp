// Junction capacitance from off-state readings (fitting/junction_cap.hpp) on
// readings built in this file: the forward direction is the fixture divider
// z/(z + Rs + 1/(jωC)) in std::complex, z = RL ∥ Rr, and C follows the SPICE
// depletion law CJO·(1 + Vr/VJ)^−M (docs/references.md §2). Expected values are
// the generating ones, never outputs of the code under test.
#include "fitting/junction_cap.hpp"
#include "formats/report_json.hpp"  // junction_cap_json: the report as juncod stores it

#include <catch2/catch.hpp>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <vector>

using namespace junco::fitting;

namespace {

constexpr double pi = std::numbers::pi;

struct Law {
  double cjo_f, vj_v, m;
  double at(double reverse_v) const { return cjo_f * std::pow(1.0 + reverse_v / vj_v, -m); }
};

// |Vout/Vin| of a series Rs–C into z, written out here (not transfer.hpp).
double gain_of(double c_f, double freq_hz, double rs_ohm, double z_ohm) {
  const std::complex<double> zc = 1.0 / std::complex<double>(0.0, 2.0 * pi * freq_hz * c_f);
  return std::abs(z_ohm / (z_ohm + rs_ohm + zc));
}

OffStatePoint reading(double reverse_v, double freq_hz, double c_f, double rs_ohm, double z_ohm, double noise_db = 0.0) {
  return {reverse_v, freq_hz, 0.5, 0.5 * gain_of(c_f, freq_hz, rs_ohm, z_ohm) * std::pow(10.0, noise_db / 20.0)};
}

const std::vector<double> biases_v{0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 8.0, 12.0};
const std::vector<double> freqs_hz{10e6, 100e6};

std::vector<OffStatePoint> law_readings(const Law& law, double rs_ohm, double z_ohm, std::mt19937* rng = nullptr,
                                        double sigma_db = 0.0) {
  std::normal_distribution<double> g(0.0, 1.0);
  std::vector<OffStatePoint> pts;
  for (double f : freqs_hz)
    for (double vr : biases_v) pts.push_back(reading(vr, f, law.at(vr), rs_ohm, z_ohm, rng ? sigma_db * g(*rng) : 0.0));
  return pts;
}

}  // namespace

TEST_CASE("one reading's C inverts the series divider, with a DC return shunt") {
  Fixture fx;
  fx.load_ohm = 50.0;
  fx.dc_return_ohm = 1000.0;
  const double z = 50.0 * 1000.0 / 1050.0, rs = 2.5;
  for (double c : {0.3e-12, 2e-12, 15e-12})
    for (double f : {1e6, 30e6, 500e6}) {
      const OffStatePoint p = reading(2.0, f, c, rs, z);
      INFO("C " << c << " F at " << f << " Hz, |G| " << p.vout / p.vin);
      if (p.vout / p.vin > 0.99) continue;  // closed form exact but ill-conditioned there
      CHECK(off_state_capacitance_f(p, fx, rs) == Approx(c).epsilon(1e-10));
      CHECK(off_state_isolation_db(p) == Approx(-20.0 * std::log10(gain_of(c, f, rs, z))).epsilon(1e-12));
    }
  // The load without the shunt is RL alone: ignoring Rr must give another C.
  const OffStatePoint p = reading(0.0, 100e6, 2e-12, rs, z);
  CHECK(std::abs(off_state_capacitance_f(p, Fixture{}, rs) / 2e-12 - 1.0) > 1e-3);
}

TEST_CASE("σ of ln C is the derivative of the closed form times the ratio's σ") {
  // Central difference of ln C over ±1e-4 dB on the reading, against the
  // stated σ_lnC = σ_dB·ln10/20·A/(A − (z + Rs)²).
  const Fixture fx;
  const double rs = 3.0, sigma_db = 0.01, h_db = 1e-4;
  for (double c : {1e-12, 10e-12, 40e-12}) {
    OffStatePoint p = reading(1.0, 200e6, c, rs, 50.0);
    OffStatePoint up = p, down = p;
    up.vout *= std::pow(10.0, h_db / 20.0);
    down.vout *= std::pow(10.0, -h_db / 20.0);
    const double dlnc_ddb =
        (std::log(off_state_capacitance_f(up, fx, rs)) - std::log(off_state_capacitance_f(down, fx, rs))) / (2.0 * h_db);
    INFO("C " << c << " |G| " << p.vout / p.vin);
    CHECK(off_state_sigma_ln_c(p, fx, rs, sigma_db) == Approx(std::abs(dlnc_ddb) * sigma_db).epsilon(1e-6));
  }
  // Near isolation the factor is 1: σ_lnC → σ_dB·ln10/20.
  const OffStatePoint iso = reading(0.0, 1e6, 1e-12, rs, 50.0);
  CHECK(off_state_sigma_ln_c(iso, fx, rs, sigma_db) == Approx(sigma_db * std::log(10.0) / 20.0).epsilon(1e-5));
}

TEST_CASE("C is NaN where no series capacitance explains the reading") {
  const Fixture fx;  // z = 50 Ω
  CHECK(std::isnan(off_state_capacitance_f({1.0, 1e6, 1.0, 1.0}, fx, 0.0)));   // |G| = 1
  CHECK(std::isnan(off_state_capacitance_f({1.0, 1e6, 1.0, 1.2}, fx, 0.0)));   // |G| > 1
  CHECK(std::isnan(off_state_capacitance_f({1.0, 1e6, 0.0, 0.1}, fx, 0.0)));   // vin 0
  CHECK(std::isnan(off_state_capacitance_f({1.0, 1e6, 1.0, -0.1}, fx, 0.0)));  // vout < 0
  // Rs = 25 Ω: |G| ≤ 50/75 for any C; 0.8 is out of reach.
  CHECK(std::isnan(off_state_capacitance_f({1.0, 1e6, 1.0, 0.8}, fx, 25.0)));
  CHECK(std::isfinite(off_state_capacitance_f({1.0, 1e6, 1.0, 0.6}, fx, 25.0)));
}

TEST_CASE("exact law readings give back CJO, VJ and M") {
  const Law law{1.8e-12, 0.65, 0.42};
  Fixture fx;
  fx.dc_return_ohm = 2000.0;
  const double z = 50.0 * 2000.0 / 2050.0, rs = 1.1;
  const auto pts = law_readings(law, rs, z);
  const JunctionCapFit fit = fit_junction_cap(pts, fx, rs);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK_FALSE(fit.law_held);
  CHECK(fit.points_used == pts.size());
  CHECK(fit.cj0_f.value == Approx(law.cjo_f).epsilon(1e-8));
  CHECK(fit.vj_v.value == Approx(law.vj_v).epsilon(1e-7));
  CHECK(fit.m.value == Approx(law.m).epsilon(1e-7));
  CHECK(fit.reduced_chi2 < 1e-12);
  REQUIRE(fit.c_f.size() == pts.size());
  for (std::size_t k = 0; k < pts.size(); ++k) {
    CHECK(fit.left_out[k].empty());
    CHECK(fit.c_f[k] == Approx(law.at(pts[k].reverse_v)).epsilon(1e-10));
  }
}

TEST_CASE("a law at the edge of the bounds: M = 0.9 and VJ = 0.15 V are still found") {
  const Law law{5e-12, 0.15, 0.9};
  const auto pts = law_readings(law, 0.5, 50.0);
  const JunctionCapFit fit = fit_junction_cap(pts, Fixture{}, 0.5);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK(fit.vj_v.value == Approx(law.vj_v).epsilon(1e-6));
  CHECK(fit.m.value == Approx(law.m).epsilon(1e-6));
}

TEST_CASE("left-out readings carry their reason and NaN C") {
  const Fixture fx;
  const double rs = 25.0;  // z/(z + Rs) = 2/3
  const Law law{2e-12, 0.7, 0.5};
  std::vector<OffStatePoint> pts = law_readings(law, rs, 50.0);
  const std::size_t good = pts.size();
  pts.push_back({1.0, 10e6, 0.0, 0.01});        // level not positive
  pts.push_back({1.0, 10e6, 1.0, -1e-3});       // level not positive
  pts.push_back({-1.0, 10e6, 1.0, 0.01});       // forward: not a reverse bias
  pts.push_back({1.0, 0.0, 1.0, 0.01});         // no frequency
  pts.push_back({1.0, 10e6, 1.0, 50e-6});       // vout under the 100 µV floor
  pts.push_back({1.0, 10e6, 1.0, 0.95});        // too little isolation
  pts.push_back({1.0, 10e6, 1.0, 0.8});         // under max_gain but above 2/3
  const JunctionCapFit fit = fit_junction_cap(pts, fx, rs);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK(fit.points_used == good);
  REQUIRE(fit.left_out.size() == pts.size());
  const std::vector<std::string> expected{"level not a positive number", "level not a positive number", "bias or frequency not valid",
                                          "bias or frequency not valid", "below the level floor", "gain above max_gain",
                                          "no series C gives this gain"};
  for (std::size_t k = 0; k < expected.size(); ++k) {
    CHECK(fit.left_out[good + k] == expected[k]);
    CHECK(std::isnan(fit.c_f[good + k]));
  }
  CHECK(fit.vj_v.value == Approx(law.vj_v).epsilon(1e-6));  // the rest still fit the law

  // max_gain is the option's: at 0.99 a 0.95 reading with Rs = 0 is used.
  JunctionCapOptions o;
  o.max_gain = 0.99;
  const OffStatePoint weak{1.0, 10e6, 1.0, 0.95};
  const JunctionCapFit loose = fit_junction_cap(std::span(&weak, 1), fx, 0.0, o);
  CHECK(loose.ok);
  CHECK(loose.left_out[0].empty());
  CHECK(fit_junction_cap(std::span(&weak, 1), fx, 0.0).left_out[0] == "gain above max_gain");
}

TEST_CASE("too few readings: no fit, and a message that says why") {
  const Fixture fx;
  const std::vector<OffStatePoint> none;
  const JunctionCapFit empty = fit_junction_cap(none, fx, 1.0);
  CHECK_FALSE(empty.ok);
  CHECK(empty.message == "no usable off-state reading among 0");
  const std::vector<OffStatePoint> bad{{1.0, 1e6, 1.0, 0.95}, {1.0, 1e6, 1.0, 20e-6}, {2.0, 1e6, 1.0, 0.97}};
  const JunctionCapFit f = fit_junction_cap(bad, fx, 1.0);
  CHECK_FALSE(f.ok);
  CHECK(f.points_used == 0);
  CHECK(f.message == "no usable off-state reading among 3 (1 below the level floor, 2 gain above max_gain)");
  JunctionCapOptions o;
  o.ac_sigma_db = 0.0;
  const JunctionCapFit g = fit_junction_cap(law_readings({2e-12, 0.7, 0.5}, 1.0, 50.0), fx, 1.0, o);
  CHECK_FALSE(g.ok);
  CHECK(g.message.find("ac_sigma_db") != std::string::npos);
  const JunctionCapFit h = fit_junction_cap(law_readings({2e-12, 0.7, 0.5}, 1.0, 50.0), fx, -1.0);
  CHECK_FALSE(h.ok);
  CHECK(h.message == "rs_ohm must be a finite value >= 0");
}

TEST_CASE("fewer than 4 distinct biases: VJ and M held, CJO fitted") {
  const Fixture fx;
  const double rs = 1.0;
  const Law law{2e-12, 1.0, 0.5};  // the held defaults: the held fit is then exact
  SECTION("one reading: CJO straight from it") {
    const OffStatePoint p = reading(3.0, 50e6, law.at(3.0), rs, 50.0);
    const JunctionCapFit f = fit_junction_cap(std::span(&p, 1), fx, rs);
    INFO(f.message);
    REQUIRE(f.ok);
    CHECK(f.law_held);
    CHECK(f.cj0_f.value == Approx(law.cjo_f).epsilon(1e-10));
    CHECK(std::isnan(f.reduced_chi2));
    // Unscaled: CJO·σ_lnC of the one reading.
    CHECK(f.cj0_f.std_error == Approx(law.cjo_f * off_state_sigma_ln_c(p, fx, rs, 0.01)).epsilon(1e-8));
    CHECK(std::isnan(f.vj_v.std_error));
    CHECK(std::isnan(f.m.std_error));
    CHECK(std::isnan(f.vj_m_correlation));
  }
  SECTION("biases within 1 mV are one bias") {
    std::vector<OffStatePoint> pts;
    for (double vr : {0.0, 1.0, 1.0004, 2.0}) pts.push_back(reading(vr, 50e6, law.at(vr), rs, 50.0));
    const JunctionCapFit held = fit_junction_cap(pts, fx, rs);
    REQUIRE(held.ok);
    CHECK(held.law_held);
    CHECK(held.message.find("3 distinct") != std::string::npos);
    CHECK(held.cj0_f.value == Approx(law.cjo_f).epsilon(1e-9));
    pts.push_back(reading(3.0, 50e6, law.at(3.0), rs, 50.0));
    const JunctionCapFit full = fit_junction_cap(pts, fx, rs);
    REQUIRE(full.ok);
    CHECK_FALSE(full.law_held);
    CHECK(std::isfinite(full.m.std_error));
  }
  SECTION("held values from the options") {
    JunctionCapOptions o;
    o.vj_v_held = 0.6;
    o.m_held = 0.33;
    const Law other{3e-12, 0.6, 0.33};
    std::vector<OffStatePoint> pts;
    for (double vr : {0.5, 4.0}) pts.push_back(reading(vr, 20e6, other.at(vr), rs, 50.0));
    const JunctionCapFit f = fit_junction_cap(pts, fx, rs, o);
    REQUIRE(f.ok);
    CHECK(f.vj_v.value == 0.6);
    CHECK(f.m.value == 0.33);
    CHECK(f.cj0_f.value == Approx(other.cjo_f).epsilon(1e-9));
  }
}

TEST_CASE("junction_cap_json has the documented shape; NaN is null") {
  const Fixture fx;
  const OffStatePoint p = reading(1.0, 50e6, 1.5e-12, 1.0, 50.0);
  const nlohmann::json j = junction_cap_json(fit_junction_cap(std::span(&p, 1), fx, 1.0));
  for (const char* key : {"ok", "message", "cj0_f", "vj_v", "m", "law_held", "points_used", "reduced_chi2", "vj_m_correlation"})
    CHECK(j.contains(key));
  CHECK(j.size() == 9);
  CHECK(j["ok"] == true);
  CHECK(j["law_held"] == true);
  CHECK(j["points_used"] == 1);
  CHECK(j["cj0_f"]["value"].is_number());
  CHECK(j["cj0_f"]["std_error"].is_number());
  CHECK(j["vj_v"]["value"] == 1.0);
  CHECK(j["vj_v"]["std_error"].is_null());
  CHECK(j["m"]["std_error"].is_null());
  CHECK(j["reduced_chi2"].is_null());
  const nlohmann::json failed = junction_cap_json(fit_junction_cap(std::vector<OffStatePoint>{}, fx, 1.0));
  CHECK(failed["ok"] == false);
  CHECK(failed["cj0_f"]["value"].is_null());
}

TEST_CASE("noisy readings (0.01 dB): the standard errors cover the truth") {
  const Law law{2.2e-12, 0.75, 0.4};
  const double rs = 1.5;
  const Fixture fx;
  SECTION("one seed, within 3σ") {
    std::mt19937 rng(20260);
    const auto pts = law_readings(law, rs, 50.0, &rng, 0.01);
    const JunctionCapFit f = fit_junction_cap(pts, fx, rs);
    INFO(f.message);
    REQUIRE(f.ok);
    CHECK(std::abs(f.cj0_f.value - law.cjo_f) <= 3.0 * f.cj0_f.std_error);
    CHECK(std::abs(f.vj_v.value - law.vj_v) <= 3.0 * f.vj_v.std_error);
    CHECK(std::abs(f.m.value - law.m) <= 3.0 * f.m.std_error);
    CHECK(f.cj0_f.std_error < 0.01 * law.cjo_f);  // 16 readings of 0.1 % each pin CJO well
  }
  // With the covariance scaled by χ²/(N − 3), N − 3 = 13, |error|/σ is
  // Student-t with 13 degrees of freedom: P(|t| < 1) = 0.664 (the t density
  // integrated numerically; our computation, no source). Over 200 replicas
  // the binomial sd is 0.033; the window is about ±3.5 sd. The mean reduced
  // χ² is (noise/assumed σ)², with sd ≈ sqrt(2/13/200) of that.
  const auto ensemble = [&](double noise_db, double expected_chi2) {
    int within[3] = {0, 0, 0};
    double chi2_sum = 0;
    constexpr int replicas = 200;
    for (int s = 0; s < replicas; ++s) {
      std::mt19937 rng(1000 + s);
      const JunctionCapFit f = fit_junction_cap(law_readings(law, rs, 50.0, &rng, noise_db), fx, rs);
      REQUIRE(f.ok);
      within[0] += std::abs(f.cj0_f.value - law.cjo_f) <= f.cj0_f.std_error;
      within[1] += std::abs(f.vj_v.value - law.vj_v) <= f.vj_v.std_error;
      within[2] += std::abs(f.m.value - law.m) <= f.m.std_error;
      chi2_sum += f.reduced_chi2;
    }
    for (int k = 0; k < 3; ++k) {
      INFO("parameter " << k << ": " << within[k] << " of " << replicas << " within 1σ");
      CHECK(within[k] / double(replicas) > 0.55);
      CHECK(within[k] / double(replicas) < 0.78);
    }
    CHECK(chi2_sum / replicas == Approx(expected_chi2).epsilon(0.12));
  };
  SECTION("200 seeds at the stated 0.01 dB: about 66 % within 1σ, reduced χ² about 1") { ensemble(0.01, 1.0); }
  SECTION("200 seeds at 0.03 dB, stated 0.01 dB: χ² about 9 and the scaled errors still cover") { ensemble(0.03, 9.0); }
}

TEST_CASE("the fixture's stray capacitance is subtracted before the law is fitted") {
  const Law law{0.9e-12, 0.7, 0.38};
  const double stray_f = 0.25e-12, rs = 1.0, z = 50.0;
  const Fixture fx;
  // The slot holds the part with the stray in parallel.
  std::vector<OffStatePoint> pts;
  for (double f : freqs_hz)
    for (double vr : biases_v) pts.push_back(reading(vr, f, law.at(vr) + stray_f, rs, z));
  JunctionCapOptions o;
  const JunctionCapFit ignored = fit_junction_cap(pts, fx, rs, o);
  o.stray_c_f = stray_f;
  const JunctionCapFit fit = fit_junction_cap(pts, fx, rs, o);
  INFO(fit.message);
  REQUIRE(fit.ok);
  CHECK(fit.cj0_f.value == Approx(law.cjo_f).epsilon(1e-8));
  CHECK(fit.vj_v.value == Approx(law.vj_v).epsilon(1e-6));
  CHECK(fit.m.value == Approx(law.m).epsilon(1e-6));
  for (std::size_t k = 0; k < pts.size(); ++k) CHECK(fit.c_f[k] == Approx(law.at(pts[k].reverse_v)).epsilon(1e-9));
  // Not subtracted, the stray flattens the law: M reads low (the bias that
  // an open-slot reading removes).
  REQUIRE(ignored.ok);
  CHECK(ignored.m.value < law.m - 0.05);
  // A stray as large as the smallest reading leaves those readings out, with the reason.
  o.stray_c_f = law.at(12.0) + 1.001 * stray_f;
  const JunctionCapFit too_much = fit_junction_cap(pts, fx, rs, o);
  std::size_t left = 0;
  for (const auto& r : too_much.left_out) left += r == "not above the fixture's stray capacitance";
  CHECK(left == 2);  // the 12 V readings at both frequencies
  o.stray_c_f = -1e-12;
  CHECK_FALSE(fit_junction_cap(pts, fx, rs, o).ok);
}
