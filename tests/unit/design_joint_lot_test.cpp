// Joint DC+AC fit and lot statistics on synthetic data from known parameters
// (seeded noise); expected values are the generating parameters, not outputs.
#include "fitting/design_joint_fit.hpp"
#include "fitting/lot_stats.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <random>

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
