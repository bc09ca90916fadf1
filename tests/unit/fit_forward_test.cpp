// fit_forward on synthetic curves: recovery, exclusions with reasons, robust
// loss, identifiability warnings, input checks, and a quick efficiency check.
#include "fitting/derived.hpp"
#include "fitting/extract.hpp"
#include "tests/bench/fit_curves.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <limits>

using namespace junco;
using fitting::DiodeParams;
using fitting::FitOptions;
using fitting::IvPoint;

namespace {

bool has_warning(const fitting::FitResult& r, const std::string& part) {
  return std::any_of(r.warnings.begin(), r.warnings.end(), [&](const std::string& w) { return w.find(part) != std::string::npos; });
}

const DiodeParams signal_part{2.5e-9, 1.75, 0.57};

FitOptions options_at(double temp_k) {
  FitOptions o;
  o.temp_k = temp_k;
  return o;
}

}  // namespace

TEST_CASE("noisy curve: parameters within a few standard errors, errors sensible", "[fit]") {
  std::mt19937_64 rng(7);
  const auto opt = options_at(300.15);
  const auto clean = fitbench::clean_curve(signal_part, opt.temp_k, 40, 1e-6, 0.1);
  const auto r = fitting::fit_forward(fitbench::add_noise(clean, opt.accuracy, rng), opt);
  REQUIRE(r.usable());
  CHECK(r.points_used == 40);
  CHECK(r.excluded.empty());
  // 4 σ: fails if either the estimate or its standard error is wrong by much.
  CHECK(std::abs(std::log(r.is_a.value / signal_part.is_a)) < 4.0 * r.is_a.std_error / r.is_a.value);
  CHECK(std::abs(r.n.value - signal_part.n) < 4.0 * r.n.std_error);
  CHECK(std::abs(r.rs_ohm.value - signal_part.rs_ohm) < 4.0 * r.rs_ohm.std_error);
  CHECK(r.n.std_error < 0.01);
  CHECK(r.reduced_chi2 == Approx(1.0).margin(0.6));
  REQUIRE(r.correlation.size() == 3);
  CHECK(r.correlation[0][0] == Approx(1.0));
  CHECK(r.correlation[0][1] > 0.5);  // Is and n rise together (known strong correlation, docs/references.md §3)
  CHECK(r.correlation[0][1] == Approx(r.correlation[1][0]));
  CHECK(r.warnings.empty());
}

TEST_CASE("reverse, zero, non-finite and sub-floor readings are excluded with a reason", "[fit]") {
  const auto opt = options_at(300.15);
  auto pts = fitbench::clean_curve(signal_part, opt.temp_k, 20, 1e-6, 0.05);
  pts.insert(pts.begin(), {{-0.5, -2e-9}, {0.0, 0.0}, {0.05, 2e-9}, {std::numeric_limits<double>::quiet_NaN(), 1e-3}});
  const auto r = fitting::fit_forward(pts, opt);
  REQUIRE(r.usable());
  CHECK(r.points_used == 20);
  REQUIRE(r.excluded.size() == 4);
  CHECK(r.excluded[0].index == 0);
  CHECK(r.excluded[0].reason.find("reverse bias") != std::string::npos);
  CHECK(r.excluded[1].reason.find("reverse bias") != std::string::npos);
  CHECK(r.excluded[2].reason == "below noise floor 1e-08 A");  // default floor: 10 × i_abs_a = 10 nA
  CHECK(r.excluded[3].reason == "not a finite number");
  CHECK(r.n.value == Approx(signal_part.n).epsilon(1e-6));
}

TEST_CASE("explicit noise floor moves the cut", "[fit]") {
  auto opt = options_at(300.15);
  opt.noise_floor_a = 5e-5;
  const auto pts = fitbench::clean_curve(signal_part, opt.temp_k, 30, 1e-6, 0.05);
  const auto r = fitting::fit_forward(pts, opt);
  REQUIRE(r.usable());
  const auto below = std::count_if(pts.begin(), pts.end(), [](const IvPoint& p) { return p.i_a < 5e-5; });
  CHECK(r.excluded.size() == static_cast<std::size_t>(below));
  CHECK(r.points_used == pts.size() - static_cast<std::size_t>(below));
  for (const auto& e : r.excluded) CHECK(e.reason == "below noise floor 5e-05 A");
}

TEST_CASE("one glitched reading: plain least squares is pulled, a robust loss is not", "[fit]") {
  std::mt19937_64 rng(11);
  auto opt = options_at(300.15);
  const auto clean = fitbench::clean_curve(signal_part, opt.temp_k, 30, 1e-6, 0.1);
  auto noisy = fitbench::add_noise(clean, opt.accuracy, rng);
  noisy[24].v += 0.04;  // 40 mV glitch near the top, where it pulls Rs
  const auto plain = fitting::fit_forward(noisy, opt);
  REQUIRE(plain.usable());
  CHECK(has_warning(plain, "more than 6 robust σ"));
  CHECK(has_warning(plain, "input index 24"));
  CHECK(std::abs(plain.rs_ohm.value - signal_part.rs_ohm) > 0.015);  // pulled by > 2.5 % (≈ 5 standard errors)
  for (auto loss : {fitting::RobustLoss::huber, fitting::RobustLoss::cauchy}) {
    opt.loss = loss;
    const auto robust = fitting::fit_forward(noisy, opt);
    REQUIRE(robust.usable());
    CHECK(robust.rs_ohm.value == Approx(signal_part.rs_ohm).epsilon(0.02));
    CHECK(robust.n.value == Approx(signal_part.n).epsilon(0.005));
    CHECK(std::abs(robust.rs_ohm.value - signal_part.rs_ohm) < std::abs(plain.rs_ohm.value - signal_part.rs_ohm) / 3.0);
  }
}

TEST_CASE("no high-current readings: Rs is flagged as not determined", "[fit]") {
  std::mt19937_64 rng(3);
  const auto opt = options_at(300.15);
  const auto clean = fitbench::clean_curve(signal_part, opt.temp_k, 25, 1e-7, 1e-4);  // tops out at 100 µA
  const auto r = fitting::fit_forward(fitbench::add_noise(clean, opt.accuracy, rng), opt);
  REQUIRE(r.status != fitting::FitStatus::insufficient);
  CHECK(has_warning(r, "Rs not determined by this sweep: no high-current points"));
  CHECK(r.n.value == Approx(signal_part.n).epsilon(0.01));  // n and Is still fine
  // The same part swept to 100 mA gives no such warning.
  const auto full = fitting::fit_forward(fitbench::clean_curve(signal_part, opt.temp_k, 25, 1e-7, 0.1), opt);
  CHECK_FALSE(has_warning(full, "Rs not determined"));
}

TEST_CASE("too few usable readings: nothing fitted, message says why", "[fit]") {
  const auto opt = options_at(300.15);
  const std::vector<IvPoint> three{{0.5, 1e-4}, {0.6, 1e-3}, {0.7, 1e-2}, {-0.3, -1e-9}};
  const auto r = fitting::fit_forward(three, opt);
  CHECK(r.status == fitting::FitStatus::insufficient);
  CHECK_FALSE(r.usable());
  CHECK(r.message == "need at least 4 forward readings at distinct currents above the noise floor, have 3");
  CHECK(std::isnan(r.n.value));
  const std::vector<IvPoint> same_i{{0.5, 1e-3}, {0.51, 1e-3}, {0.52, 1e-3}, {0.53, 1e-3}, {0.54, 1e-3}};
  CHECK(fitting::fit_forward(same_i, opt).status == fitting::FitStatus::insufficient);
  CHECK(fitting::fit_forward(std::vector<IvPoint>{}, opt).status == fitting::FitStatus::insufficient);
}

TEST_CASE("shunt across the junction is recovered when asked", "[fit]") {
  const DiodeParams leaky{1e-12, 1.3, 1.2, 2e6};
  auto opt = options_at(300.15);
  opt.fit_shunt = true;
  opt.noise_floor_a = 1e-9;
  std::vector<IvPoint> pts;
  for (double v = 0.05; v < 0.95; v += 0.025) pts.push_back({v, fitting::diode_current_a(leaky, v, opt.temp_k)});
  const auto r = fitting::fit_forward(pts, opt);
  REQUIRE(r.usable());
  CHECK(r.rsh_ohm.value == Approx(leaky.rsh_ohm).epsilon(1e-4));
  CHECK(r.is_a.value == Approx(leaky.is_a).epsilon(1e-4));
  CHECK(r.n.value == Approx(leaky.n).epsilon(1e-5));
  CHECK(r.rs_ohm.value == Approx(leaky.rs_ohm).epsilon(1e-4));
  CHECK(r.parameter_names.back() == "rsh_ohm");
  // Without the shunt term the same data fit worse (leakage bends the bottom decade).
  opt.fit_shunt = false;
  const auto no_shunt = fitting::fit_forward(pts, opt);
  CHECK(no_shunt.cost > 100.0 * std::max(r.cost, 1e-12));
}

TEST_CASE("derived figures and their propagated errors", "[fit]") {
  std::mt19937_64 rng(5);
  const auto opt = options_at(300.15);
  const auto clean = fitbench::clean_curve(signal_part, opt.temp_k, 40, 1e-6, 0.1);
  const auto r = fitting::fit_forward(fitbench::add_noise(clean, opt.accuracy, rng), opt);
  REQUIRE(r.usable());
  const auto vf = fitting::forward_voltage_v(r, 1e-3);
  const double vf_true = fitting::diode_voltage_v(signal_part, 1e-3, opt.temp_k);
  CHECK(std::abs(vf.value - vf_true) < 4.0 * vf.std_error);
  CHECK(vf.std_error > 0.0);
  CHECK(vf.std_error < 1e-3);
  const auto rd = fitting::small_signal_resistance_ohm(r, 5e-3);
  CHECK(rd.value == Approx(r.n.value * fitting::thermal_voltage_v(opt.temp_k) / 5e-3 + r.rs_ohm.value).epsilon(1e-6));
  // current_for_resistance_a inverts rd(I), with and without a shunt.
  for (const DiodeParams& p : {signal_part, DiodeParams{1e-12, 1.3, 1.2, 2e6}}) {
    for (double i : {1e-5, 1e-3, 2e-2}) {
      const double rd_i = fitting::small_signal_resistance_ohm(p, i, 300.15);
      CHECK(fitting::current_for_resistance_a(p, rd_i, 300.15) == Approx(i).epsilon(1e-8));
    }
  }
  CHECK(std::isnan(fitting::current_for_resistance_a(signal_part, 0.5, 300.15)));  // below Rs: unreachable
}

TEST_CASE("quick efficiency: RMS error within 1.5× the Cramér–Rao bound", "[fit][efficiency]") {
  // The full version (≥ 500 replicas, target 1.2×) is bench_fit_efficiency.
  const DiodeParams truth{1e-9, 1.8, 0.5};  // docs/references.md E7 set
  const auto opt = options_at(300.0);
  const auto clean = fitbench::clean_curve(truth, opt.temp_k, 30, 1e-6, 0.1);
  const auto crb = fitbench::cramer_rao_sd(truth, clean, opt.accuracy, opt.temp_k);
  std::mt19937_64 rng(99);
  double se[3] = {};
  const int replicas = 200;
  for (int k = 0; k < replicas; ++k) {
    const auto r = fitting::fit_forward(fitbench::add_noise(clean, opt.accuracy, rng), opt);
    REQUIRE(r.usable());
    const double e[3] = {std::log(r.is_a.value / truth.is_a), r.n.value - truth.n, r.rs_ohm.value - truth.rs_ohm};
    for (int q = 0; q < 3; ++q) se[q] += e[q] * e[q];
  }
  for (std::size_t q = 0; q < 3; ++q) {
    const double ratio = std::sqrt(se[q] / replicas) / crb[q];
    INFO("parameter " << q << " rms/CRB = " << ratio);
    CHECK(ratio < 1.5);
    CHECK(ratio > 0.6);  // far below the bound would mean the bound (or the noise) is computed wrongly
  }
}
