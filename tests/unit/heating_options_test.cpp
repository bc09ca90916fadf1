// The heating plan options: plan parsing, expansion and refusals
// (daemon/plan.hpp), the dry-run estimate (daemon/plan_estimate.hpp), the
// two-dwell and hysteresis analysis (fitting/heating.hpp), and one σ for
// every χ² of the same readings (fitting/joint_fit.hpp vs extract.hpp).
// Sources: the first-order RC step response T(t) = T∞·(1 − e^(−t/τ))
// (common practice, no source), integrated here numerically with the power
// following the junction (dT/dt = (Ta + Rth·P(T) − T)/τ, junco-sim's model,
// docs/sim.md); the SPICE Is(T) law written out in the algebraic form
// IS·(T/TNOM)^(XTI/N)·exp(EG·q/(N·k)·(1/TNOM − 1/T)) (ngspice manual, diode
// temperature effects; docs/references.md §2), not through fitting/temperature.hpp;
// GUM 4.3.7 for σ = limit/√3.
#include "daemon/plan.hpp"
#include "daemon/plan_estimate.hpp"
#include "fitting/joint_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/heating.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <random>

using namespace junco::daemon;
namespace ft = junco::fitting;

namespace {

Config bench() {
  Config c;
  c.fixture.bias_resistor_ohm = 100;
  c.fixture.slots = 8;
  c.safety = {10.0, 0.1, 0.25, 5.0, 3600.0};  // max_supply_v, current_limit_a, max_power_w, max_reverse_v, max_job_s
  return c;
}

Json current_plan() {
  return Json::parse(R"({"lot": "WREN-0912", "parts": [{"slot": 1, "label": "WR-01"}],
    "sweep": {"mode": "current", "spacing": "log", "start": 1e-5, "stop": 0.05, "count": 16, "settle_s": 0.05}})");
}

std::string refusal(const Json& j) {
  try {
    check_plan(parse_plan(j), bench());
  } catch (const DomainError& e) {
    return e.what();
  }
  return "(accepted)";
}

constexpr double kQ = 1.602176634e-19, kK = 1.380649e-23;

// Terminal voltage of a diode (IS at TNOM) at current i and junction T, the law written out.
double diode_v(double is_a, double n, double rs, double tnom, double t, double i, double eg = 1.11, double xti = 3) {
  const double is_t = is_a * std::pow(t / tnom, xti / n) * std::exp(eg * kQ / (n * kK) * (1 / tnom - 1 / t));
  return n * kK * t / kQ * std::log1p(i / is_t) + i * rs;
}

}  // namespace

TEST_CASE("plan.heating: parsed, expanded and estimated") {
  Json j = current_plan();
  j["heating"] = {{"pulse", {{"on_s", 0.002}, {"off_s", 0.2}}}, {"dwell", {{"short_s", 0.03}, {"long_s", 0.2}}}, {"down_sweep", true}};
  const Plan p = parse_plan(j);
  REQUIRE(refusal(j) == "(accepted)");
  // The top decade: 5 mA..50 mA of a 16-step log sweep from 10 µA (3.69 decades,
  // 4.07 steps per decade): steps with value >= 5 mA, counted by hand = 5.
  const auto values = sweep_values(p.sweep);
  int top = 0;
  for (double v : values) top += v >= 0.005 ? 1 : 0;
  CHECK(top == 5);
  CHECK(pulsed_steps(p) == 5);
  CHECK(pulse_from(p) == Approx(0.005));
  const auto steps = expand_steps(p);
  // 16 up + 2 dwell readings per pulsed step + 16 down.
  CHECK(steps.size() == 16 + 2 * 5 + 16);
  CHECK(steps_per_part(p) == static_cast<double>(steps.size()));
  int pulsed = 0, dwell = 0, down = 0;
  for (std::size_t k = 0; k < steps.size(); ++k) {
    const Step& s = steps[k];
    pulsed += s.pulsed && s.series == Series::up;
    if (s.series == Series::dwell) {
      ++dwell;
      // A dwell reading follows its pulse's reading (or the short one) at the same set value.
      REQUIRE(k >= 1);
      CHECK(steps[k - 1].set_value == s.set_value);
      CHECK(steps[k - 1].pulsed);
    }
    down += s.series == Series::down;
  }
  CHECK(pulsed == 5);
  CHECK(dwell == 10);
  CHECK(down == 16);
  CHECK(steps.back().series == Series::down);
  CHECK(steps.back().set_value == values.front());
  // Round trip through the stored form.
  const Plan q = parse_plan(to_json(p));
  CHECK(to_json(q) == to_json(p));
  // The lower bound of the duration: 11 held steps × 50 ms, 5 pulses × (200 ms off +
  // 200 ms long dwell), down: 11 × 50 ms + 5 × (200 + 2) ms. Counted by hand: 3.56 s.
  CHECK(min_duration_s(p) == Approx(11 * 0.05 + 5 * 0.4 + 11 * 0.05 + 5 * 0.202));
  const PlanEstimate e = estimate_plan(p, bench());
  CHECK(e.points_per_part == 42);
  CHECK(e.duration_s > min_duration_s(p));
  CHECK(e.pulsed_steps_per_part == 5);
  CHECK(e.pulse_duty == Approx(0.2 / (0.2 + 0.2)));  // on = the long dwell
  // Without heating options the plan expands as before (no AC: 16 steps).
  CHECK(expand_steps(parse_plan(current_plan())).size() == 16);
}

TEST_CASE("plan.heating: AC readings are not taken at a pulsed step") {
  Json j = current_plan();
  j["heating"] = {{"pulse", Json::object()}};
  j["ac"] = {{"freqs_hz", {1e6, 1e7}}, {"amplitude", 0.002}};
  const Plan p = parse_plan(j);
  int ac_at_pulsed = 0, ac = 0;
  const auto steps = expand_steps(p);
  for (const auto& s : steps) {
    if (s.kind != Step::Kind::ac) continue;
    ++ac;
    ac_at_pulsed += s.set_value >= pulse_from(p);
  }
  CHECK(ac == 2 * (16 - 5));
  CHECK(ac_at_pulsed == 0);
  CHECK(steps_per_part(p) == static_cast<double>(steps.size()));
}

TEST_CASE("plan.heating: bad options are refused, naming the key") {
  auto with = [](Json heating) {
    Json j = current_plan();
    j["heating"] = std::move(heating);
    return j;
  };
  CHECK_THAT(refusal(with({{"dwell", {{"short_s", 0.01}, {"long_s", 0.1}}}})), Catch::Contains("heating.dwell needs heating.pulse"));
  CHECK_THAT(refusal(with({{"pulse", Json::object()}, {"dwell", {{"short_s", 0.2}, {"long_s", 0.1}}}})),
             Catch::Contains("short_s < long_s"));
  CHECK_THAT(refusal(with({{"pulse", {{"from", 1.0}}}})), Catch::Contains("above every step"));
  CHECK_THAT(refusal(with({{"pulse", {{"off_s", -1}}}})), Catch::Contains("heating.pulse.off_s"));
  Json v = with({{"pulse", Json::object()}});
  v["sweep"] = {{"mode", "voltage"}, {"start", 0.0}, {"stop", 5.0}, {"count", 11}};
  CHECK_THAT(refusal(v), Catch::Contains("heating.pulse.from must be given (in V)"));
  try {
    parse_plan(with({{"pulse", {{"width_s", 1}}}}));
    FAIL("accepted");
  } catch (const DomainError& e) {
    CHECK(std::string(e.what()) == "plan.heating.pulse.width_s: unknown field");
  }
}

TEST_CASE("first-order rise: tau from the ratio of two dwells, exactly") {
  const double tau = 0.040, t0 = 0.0013, t1 = 0.03, t2 = 0.2;
  const auto rise = [&](double t) { return 1.0 - std::exp(-t / tau); };
  const double ratio = (rise(t1) - rise(t0)) / (rise(t2) - rise(t0));
  CHECK(ft::first_order_tau_s(t0, t1, t2, ratio) == Approx(tau).epsilon(1e-9));
  // Outside the model's range: no answer.
  CHECK(std::isnan(ft::first_order_tau_s(t0, t1, t2, 1.01)));
  CHECK(std::isnan(ft::first_order_tau_s(t0, t1, t2, (t1 - t0) / (t2 - t0) * 0.99)));
}

TEST_CASE("two dwells: Rth and tau of a junction heating with its own power") {
  // The part, its thermal resistance and time constant (the junco-sim nominal part).
  const double is = 2.5e-9, n = 1.85, rs = 0.7, ta = 300.15, rth = 400, tau = 0.040;
  ft::HeatingOptions o;
  o.ambient_k = ta;
  std::vector<ft::DwellStep> steps;
  for (double i : {0.0125, 0.025, 0.05}) {
    // dT/dt = (Ta + Rth·I·V(T) − T)/τ from cold, Euler in 1 µs steps.
    double t = ta;
    ft::DwellStep s;
    ft::TimedReading* at[3] = {&s.start, &s.short_dwell, &s.long_dwell};
    const double when[3] = {0.0012, 0.03, 0.2};
    double now = 0;
    for (int k = 0; k < 3; ++k) {
      for (; now < when[k]; now += 1e-6) t += 1e-6 * (ta + rth * i * diode_v(is, n, rs, ta, t, i) - t) / tau;
      *at[k] = {when[k], diode_v(is, n, rs, ta, t, i), i};
    }
    steps.push_back(s);
  }
  const ft::DwellThermal d = ft::dwell_thermal(steps, {is, n, rs}, o);
  INFO(d.note);
  REQUIRE(d.status == "measured");
  CHECK(d.used == 3);
  // The model linearises the power's fall with T (loop gain ~3 % at 50 mA) and
  // takes the law's secant: Rth within 1 %, τ within 2 %.
  CHECK(d.rth_k_per_w.value == Approx(rth).epsilon(0.01));
  CHECK(d.tau_s.value == Approx(tau).epsilon(0.02));
  for (const auto& s : d.steps) CHECK(s.delta_vf_inf_v < 0);  // silicon: Vf falls as it warms
}

TEST_CASE("two dwells: a rise within the noise is not a measurement") {
  ft::HeatingOptions o;
  std::vector<ft::DwellStep> steps{{{0.001, 0.7000, 0.01}, {0.03, 0.69995, 0.01}, {0.2, 0.6999, 0.01}}};
  const ft::DwellThermal d = ft::dwell_thermal(steps, {2.5e-9, 1.85, 0.7}, o);
  CHECK(d.status == "not_determined");
  CHECK_THAT(d.note, Catch::Contains("sigma"));
}

TEST_CASE("hysteresis: flagged when the sweep down reads lower than the noise allows") {
  const double is = 2.5e-9, n = 1.85, rs = 0.7, ta = 300.15;
  ft::HeatingOptions o;
  o.ambient_k = ta;
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<ft::SweepPair> cold, warm;
  for (int k = 0; k < 20; ++k) {
    const double i = 1e-5 * std::pow(10.0, k * 3.7 / 19);
    const double v = diode_v(is, n, rs, ta, ta, i);
    // Readings within the accuracy model's σ (GUM rectangular, limit/√3).
    const double sv = ft::standard_uncertainty_v(o.accuracy, v);
    cold.push_back({i, {v + sv * noise(rng), i}, {v + sv * noise(rng), i}});
    // Coming down, the junction is 3 K warmer per 10 mW (τ lag).
    const double dt = 300.0 * i * v;
    warm.push_back({i, {v, i}, {diode_v(is, n, rs, ta, ta + dt, i), i}});
  }
  const ft::Hysteresis c = ft::sweep_hysteresis(cold, {is, n, rs}, o);
  const ft::Hysteresis w = ft::sweep_hysteresis(warm, {is, n, rs}, o);
  INFO(c.note << "\n" << w.note);
  CHECK_FALSE(c.flagged);
  CHECK(w.flagged);
  CHECK(w.mean_v > 0);
  CHECK(w.at_i_a == Approx(1e-5 * std::pow(10.0, 3.7)).epsilon(1e-9));  // the largest difference where the power is highest
}

TEST_CASE("one sigma: the joint DC+AC fit's DC-only chi2 is the stored fit's for the same readings") {
  // Readings of the nominal part with noise at the accuracy model's σ.
  const double is = 2.5e-9, n = 1.85, rs = 0.7, ta = 300.15;
  ft::AccuracyModel a;
  std::mt19937_64 rng(11);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<ft::IvPoint> dc;
  for (int k = 0; k < 40; ++k) {
    const double i = 1e-6 * std::pow(10.0, k * 4.6 / 39);
    dc.push_back({diode_v(is, n, rs, ta, ta, i) + ft::standard_uncertainty_v(a, 0.6) * noise(rng), i});
  }
  ft::FitOptions fo;
  fo.accuracy = a;
  fo.temp_k = ta;
  const ft::FitResult stored = ft::fit_forward(dc, fo);
  ft::JointFitOptions jo;
  jo.accuracy = a;
  jo.temp_k = ta;
  const ft::SimpleFit joint = ft::fit_dc_ac(dc, {}, ft::Fixture{}, jo);
  REQUIRE(stored.usable());
  REQUIRE(joint.ok);
  INFO("stored chi2r " << stored.reduced_chi2 << ", fit_dc_ac chi2r " << joint.reduced_chi2);
  // Same readings, same model, same σ: same χ² (before: 3× smaller, σ without the √3).
  CHECK(joint.dc_points == stored.points_used);
  CHECK(joint.reduced_chi2 == Approx(stored.reduced_chi2).epsilon(0.02));
  // Readings at their stated σ: χ²ᵣ near 1 (38 degrees of freedom: 1 ± 0.23).
  CHECK(stored.reduced_chi2 == Approx(1.0).margin(0.5));
  CHECK(joint.rs_ohm.value == Approx(stored.rs_ohm.value).epsilon(1e-3));
}
