// Joint DC+AC fit and lot statistics on synthetic data from known parameters
// (seeded noise); expected values are the generating parameters, not outputs.
#include "fitting/joint_fit.hpp"
#include "fitting/lot_stats.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <random>
#include <span>

using namespace junco::fitting;

namespace {
struct Data {
  std::vector<IvPoint> dc;
  std::vector<AcPoint> ac;
};
// DC: 1 µA..100 mA, 0.02 % noise; AC at 1 MHz, ratio noise 0.005 dB. The AC
// part may have a different Rs from the DC one (to make them disagree).
Data make(const DiodeParams& p, double ac_rs_ohm, unsigned seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<double> g(0.0, 1.0);
  Data d;
  const Fixture fx;
  for (int k = 0; k <= 40; ++k) {
    const double i = 1e-6 * std::pow(10.0, k / 8.0);
    d.dc.push_back({diode_voltage_v(p, i, 300.15) * (1 + 2e-4 * g(rng)), i * (1 + 2e-4 * g(rng))});
  }
  DiodeParams pa = p;
  pa.rs_ohm = ac_rs_ohm;
  for (int k = 0; k <= 12; ++k) {
    const double i = 1e-3 * std::pow(10.0, k / 6.0);
    const double gain = std::abs(fixture_gain(fx, diode_on_impedance({pa, 0.0}, i, 1e6, 300.15)));
    d.ac.push_back({i, 1e6, 1.0, gain * std::pow(10.0, 0.005 * g(rng) / 20.0)});
  }
  return d;
}
}  // namespace

TEST_CASE("AC alone: the dynamic-resistance line rd = Rs + n·Vt/I gives back Rs and n") {
  // docs/references.md §3, dynamic resistance: dV/dI = N·Vt/I + RS is a straight
  // line against 1/I with slope N·Vt and intercept RS. Exact readings from the
  // fixture divider (RL = 50 Ω, I ≫ IS) must return the generating values;
  // Vt = kT/q at 300.15 K (docs/references.md §1).
  const double vt = 1.380649e-23 * 300.15 / 1.602176634e-19;
  std::vector<AcPoint> ac;
  for (int k = 0; k <= 10; ++k) {
    const double i = 1e-4 * std::pow(10.0, k / 4.0);
    const double rd = 0.8 + 1.7 * vt / i;
    ac.push_back({i, 1e6, 1.0, 50.0 / (50.0 + rd)});
  }
  JointFitOptions o;
  const SimpleFit f = fit_ac_only(ac, Fixture{}, o);
  REQUIRE(f.ok);
  CHECK(f.rs_ohm.value == Approx(0.8).margin(1e-9));
  CHECK(f.n.value == Approx(1.7).epsilon(1e-9));
  CHECK(f.ac_points == ac.size());
  CHECK(std::isnan(f.is_a.value));  // AC readings cannot see Is
  // A DC return shunt enters through Z = RL ∥ Rr (divider with the shunt).
  Fixture shunt;
  shunt.dc_return_ohm = 200.0;
  std::vector<AcPoint> ac2;
  for (const auto& p : ac) {
    const double rd = 50.0 / p.vout - 50.0;  // the rd that point was made from
    ac2.push_back({p.bias_i_a, 1e6, 1.0, 40.0 / (40.0 + rd)});
  }
  const SimpleFit g = fit_ac_only(ac2, shunt, o);
  CHECK(g.rs_ohm.value == Approx(0.8).margin(1e-9));
  CHECK(g.n.value == Approx(1.7).epsilon(1e-9));
  // Too few readings: no fit, and it says why.
  const SimpleFit none = fit_ac_only(std::span<const AcPoint>(ac.data(), 2), Fixture{}, o);
  CHECK_FALSE(none.ok);
  CHECK_FALSE(none.message.empty());
}

TEST_CASE("joint fit recovers the generating Rs and n and agrees with DC-only") {
  const DiodeParams truth{1e-9, 1.8, 0.5};
  const auto d = make(truth, truth.rs_ohm, 7);
  JointFitOptions o;
  o.ac_sigma_db = 0.005;
  o.accuracy = {2e-4, 0.0, 2e-4, 0.0};
  const auto rep = compare_dc_and_joint(d.dc, d.ac, Fixture{}, o);
  INFO(rep.agreement);
  REQUIRE(rep.joint.ok);
  REQUIRE(rep.dc_only.ok);
  CHECK(rep.joint.ac_points == d.ac.size());
  CHECK(rep.joint.rs_ohm.value == Approx(0.5).margin(4 * rep.joint.rs_ohm.std_error));
  CHECK(rep.joint.n.value == Approx(1.8).margin(4 * rep.joint.n.std_error));
  CHECK(rep.joint.reduced_chi2 < 2.0);
  CHECK(rep.agree);
}

TEST_CASE("joint fit reports disagreement when the AC readings see another Rs") {
  const DiodeParams truth{1e-9, 1.8, 0.5};
  const auto d = make(truth, 2.0, 8);  // e.g. an unaccounted fixture resistance
  JointFitOptions o;
  o.ac_sigma_db = 0.005;
  o.accuracy = {2e-4, 0.0, 2e-4, 0.0};
  const auto rep = compare_dc_and_joint(d.dc, d.ac, Fixture{}, o);
  INFO(rep.agreement);
  CHECK_FALSE(rep.agree);
  CHECK(rep.agreement.find("DISAGREE") != std::string::npos);
}

TEST_CASE("lot statistics: moments, robust outlier, matched pairs") {
  std::vector<LotPart> parts;
  const double ns[] = {1.80, 1.81, 1.79, 1.80, 1.82, 2.40};  // the last is the odd one
  for (int k = 0; k < 6; ++k)
    parts.push_back({"P" + std::to_string(k), "LOT-A", {1e-9, ns[k], 0.5}, 300.15});
  parts.push_back({"Q0", "LOT-B", {2e-9, 1.7, 0.4}, 300.15});
  LotStatsOptions o;
  o.match_tolerance_v = 1e-3;
  const auto lots = lot_statistics(parts, o);
  REQUIRE(lots.size() == 2);
  const auto& a = lots[0];
  CHECK(a.lot == "LOT-A");
  const auto& n = a.quantities[1];
  REQUIRE(n.name == "n");
  // Hand-computed from the six values above.
  CHECK(n.mean == Approx(11.42 / 6.0));
  CHECK(n.median == Approx(1.805));
  CHECK(n.min == Approx(1.79));
  CHECK(n.max == Approx(2.40));
  CHECK(n.mad == Approx(0.01));
  double ss = 0;
  for (double v : ns) ss += (v - 11.42 / 6.0) * (v - 11.42 / 6.0);
  CHECK(n.std_dev == Approx(std::sqrt(ss / 5)));
  REQUIRE(n.outliers.size() == 1);
  CHECK(n.outliers[0] == "P5");
  // P0 and P3 are identical: a matched pair; P5 is matched with nobody.
  bool p0p3 = false;
  for (const auto& m : a.matched) {
    CHECK(m.spread_v <= 1e-3);
    for (const auto& l : m.labels) CHECK(l != "P5");
    p0p3 = p0p3 || (m.labels.size() == 2 && ((m.labels[0] == "P0" && m.labels[1] == "P3") ||
                                              (m.labels[0] == "P3" && m.labels[1] == "P0")));
  }
  CHECK(p0p3);
  CHECK(a.nominal.n == Approx(1.805));
}

TEST_CASE("lot statistics: the capacitance law over the parts that have one") {
  std::vector<LotPart> parts;
  const double cj[] = {2.0e-12, 2.2e-12, 1.9e-12};
  for (int k = 0; k < 3; ++k) {
    LotPart p{"C" + std::to_string(k), "LOT-C", {1e-9, 1.8, 0.5}, 300.15};
    p.cj0_f = cj[k];
    p.vj_v = 0.6 + 0.05 * k;
    p.m = 0.4;
    parts.push_back(p);
  }
  parts.push_back({"C3", "LOT-C", {1e-9, 1.8, 0.5}, 300.15});  // no off-state readings
  const auto st = lot_statistics(parts).front();
  const QuantityStats* c = nullptr;
  for (const auto& q : st.quantities) c = q.name == "cj0_f" ? &q : c;
  REQUIRE(c != nullptr);
  CHECK(c->count == 3);  // C3 has no law: not counted, and not 0 F
  CHECK(c->mean == Approx(6.1e-12 / 3));
  CHECK(c->min == 1.9e-12);
  CHECK(st.nominal_cj0_f == 2.0e-12);  // median of the three
  CHECK(st.nominal_vj_v == Approx(0.65));
  CHECK(st.nominal_m == 0.4);
  // None measured: no such quantities, NaN nominal.
  parts.resize(1);
  parts[0].cj0_f = std::nan("");
  const auto none = lot_statistics(parts).front();
  for (const auto& q : none.quantities) CHECK(q.name != "cj0_f");
  CHECK(std::isnan(none.nominal_cj0_f));
}

TEST_CASE("lot statistics: the PIN law over the parts fitted as PIN parts") {
  // Hand-computed moments (sample standard deviation, n − 1) of the values below.
  std::vector<LotPart> parts;
  const double r0[] = {0.30, 0.40, 0.35}, k[] = {0.020, 0.024, 0.022}, x[] = {0.90, 1.00, 0.95}, tau[] = {200e-9, 220e-9, 180e-9};
  for (int j = 0; j < 3; ++j) {
    LotPart p{"PIN" + std::to_string(j), "LOT-P", {1e-12, 2.0, 0.3}, 300.15};
    PinPart pin;
    pin.law = {2.0, tau[j], r0[j], k[j], x[j]};
    if (j < 2) {  // the third has no off state
      pin.ct_f = 0.25e-12 + 0.05e-12 * j;
      pin.rp_ohm = 20e3;
    }
    p.pin = pin;
    parts.push_back(p);
  }
  parts.push_back({"J0", "LOT-P", {1e-9, 1.8, 0.5}, 300.15});  // a junction part: not in the PIN quantities
  const auto st = lot_statistics(parts).front();
  const auto find = [&](const std::string& name) -> const QuantityStats* {
    for (const auto& q : st.quantities)
      if (q.name == name) return &q;
    return nullptr;
  };
  for (const char* name : {"r0_ohm", "k_ohm_a_x", "x", "tau_s", "r_1ma_ohm", "ct_f", "rp_ohm"}) REQUIRE(find(name) != nullptr);
  const auto* q = find("r0_ohm");
  CHECK(q->count == 3);
  CHECK(q->mean == Approx(0.35));
  CHECK(q->std_dev == Approx(0.05));  // deviations −0.05, 0.05, 0: sqrt(0.005/2)
  CHECK(q->min == 0.30);
  CHECK(q->max == 0.40);
  CHECK(find("tau_s")->mean == Approx(200e-9));
  CHECK(find("tau_s")->std_dev == Approx(20e-9));
  CHECK(find("x")->std_dev == Approx(0.05));
  CHECK(find("k_ohm_a_x")->max == 0.024);
  // R(1 mA) = R0 + K·(1e-3)^−x per part.
  double sum = 0.0;
  for (int j = 0; j < 3; ++j) sum += r0[j] + k[j] * std::pow(1e-3, -x[j]);
  CHECK(find("r_1ma_ohm")->mean == Approx(sum / 3));
  CHECK(find("ct_f")->count == 2);
  CHECK(find("ct_f")->mean == Approx(0.275e-12));
  // No PIN part: no PIN quantities.
  parts.resize(4);
  parts.erase(parts.begin(), parts.begin() + 3);
  const auto junction_only = lot_statistics(parts).front();
  REQUIRE(junction_only.labels.size() == 1);
  for (const auto& qq : junction_only.quantities) CHECK(qq.name != "r0_ohm");
}
