// The multi-frequency AC fit of the stored charge (fitting/ac_charge_fit.hpp)
// on synthetic readings: the fixture's series switch (source → diode → RL,
// Vout/Vin = RL/(Z + RL)) with a known N, RS, Cj(V) and TT, at several biases
// and frequencies, with seeded Gaussian noise in dB. The fit must find TT
// within its own uncertainty, find none where there is none, and refuse
// readings at one frequency. And TT's way out: the SPICE card, the model
// document and the calculators' part.
#include "fitting/ac_charge_fit.hpp"
#include "formats/report_json.hpp"  // ac_charge_fit_json, printed when a check fails
#include "design/calculators.hpp"
#include "formats/model_document.hpp"
#include "formats/spice_card.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <complex>
#include <random>
#include <vector>

using namespace junco::fitting;

namespace {

constexpr double t27_k = 300.15;
const DiodeParams truth{2.5e-9, 1.85, 0.7};  // junco-sim's nominal part (docs/sim.md)
const JunctionCap law{2e-12, 0.65, 0.4, 0.5};

// Readings at biases 50 µA … 20 mA and the given frequencies. The diode's
// impedance is the SPICE small-signal one (RS + 1/(gd + jω(Cj(Vd) + TT·gd)),
// ngspice's .ac linearisation, junction_charge.hpp); noise is σ_dB on the ratio.
std::vector<AcPoint> readings(double tt_s, const std::vector<double>& freqs, double sigma_db, unsigned seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, sigma_db);
  std::vector<AcPoint> out;
  for (double f : freqs)
    for (double i = 50e-6; i <= 20.001e-3; i *= 2.0) {
      const std::complex<double> z = diode_small_signal_impedance(truth, {law, tt_s}, i, f, t27_k);
      const double gain = std::abs(50.0 / (z + 50.0)) * std::pow(10.0, noise(rng) / 20.0);
      AcPoint p;
      p.bias_i_a = i;
      p.freq_hz = f;
      p.vin = 0.1;
      p.vout = 0.1 * gain;
      out.push_back(p);
    }
  return out;
}

AcChargeFitOptions options(double sigma_db) {
  AcChargeFitOptions o;
  o.temp_k = t27_k;
  o.is_a = truth.is_a;
  o.ac_sigma_db = sigma_db;
  o.cap = law;  // the depletion law as the off-state fit would give it
  return o;
}

}  // namespace

TEST_CASE("the multi-frequency AC fit recovers TT, N and RS from noisy readings") {
  // Synthetic truth (no outside source): TT = 5 ns, 1 to 100 MHz, 0.01 dB noise.
  const auto ac = readings(5e-9, {1e6, 10e6, 30e6, 100e6}, 0.01, 7);
  const auto fit = fit_ac_stored_charge(ac, Fixture{}, options(0.01));
  INFO(ac_charge_fit_json(fit).dump());
  REQUIRE(fit.ok);
  WARN("TT " << fit.tt_s.value << " +- " << fit.tt_s.std_error << " s, N " << fit.n.value << " +- " << fit.n.std_error << ", RS "
             << fit.rs_ohm.value << " +- " << fit.rs_ohm.std_error << ", reduced chi2 " << fit.reduced_chi2);
  CHECK(fit.frequencies == 4);
  CHECK(std::abs(fit.tt_s.value - 5e-9) < 3.0 * fit.tt_s.std_error);
  CHECK(fit.tt_s.std_error < 0.05e-9);  // well determined: 1 % of TT or better
  CHECK(std::abs(fit.n.value - truth.n) < 3.0 * fit.n.std_error);
  CHECK(std::abs(fit.rs_ohm.value - truth.rs_ohm) < 3.0 * fit.rs_ohm.std_error);
  CHECK(fit.reduced_chi2 == Approx(1.0).margin(0.5));  // the noise the readings carry
}

TEST_CASE("exact readings give TT to 1e-4, and a part without stored charge gives TT = 0") {
  const auto exact = fit_ac_stored_charge(readings(2e-9, {3e6, 30e6, 300e6}, 0.0, 1), Fixture{}, options(0.01));
  REQUIRE(exact.ok);
  CHECK(exact.tt_s.value == Approx(2e-9).epsilon(1e-4));
  CHECK(exact.n.value == Approx(truth.n).epsilon(1e-5));

  const auto none = fit_ac_stored_charge(readings(0.0, {1e6, 10e6, 100e6}, 0.01, 3), Fixture{}, options(0.01));
  REQUIRE(none.ok);
  WARN("no stored charge: TT " << none.tt_s.value << " +- " << none.tt_s.std_error << " s");
  CHECK(none.tt_s.value < 3.0 * none.tt_s.std_error + 1e-15);
}

TEST_CASE("without the right model TT absorbs the capacitance: Cj must be given or fitted") {
  // The same readings fitted with no depletion law: TT (a capacitance ∝ I)
  // cannot take up Cj (nearly constant), the residuals show it, and fitting
  // a constant Cj as well brings TT back near the truth.
  const auto ac = readings(5e-9, {1e6, 10e6, 30e6, 100e6}, 0.01, 11);
  auto o = options(0.01);
  o.cap = {};
  const auto no_cj = fit_ac_stored_charge(ac, Fixture{}, o);
  REQUIRE(no_cj.ok);
  CHECK(no_cj.reduced_chi2 > 10.0);
  o.fit_cj = true;
  const auto with_cj = fit_ac_stored_charge(ac, Fixture{}, o);
  REQUIRE(with_cj.ok);
  CHECK(with_cj.reduced_chi2 < no_cj.reduced_chi2 / 5.0);
  CHECK(with_cj.tt_s.value == Approx(5e-9).epsilon(0.05));
  CHECK(std::isfinite(with_cj.cj_f.value));
}

TEST_CASE("readings at one frequency are refused, naming why") {
  const auto fit = fit_ac_stored_charge(readings(5e-9, {10e6}, 0.01, 5), Fixture{}, options(0.01));
  CHECK_FALSE(fit.ok);
  CHECK(fit.message.find("2 or more frequencies") != std::string::npos);
}

TEST_CASE("TT travels: SPICE card, model document, and the calculators' part") {
  // SPICE level-1 parameter name TT (docs/references.md §2); the document
  // round trip and the calculators' echo are ours (no outside source).
  PartModel m;
  m.part_label = "K24B-017";
  m.params = truth;
  m.cj0_f = 2e-12;
  m.vj_v = 0.65;
  m.m = 0.4;
  m.tt_s = 5e-9;
  m.tt_se_s = 0.05e-9;
  const std::string card = spice_model_card(m);
  CHECK(card.find(" TT=5.000000e-09") != std::string::npos);
  CHECK(card.find("* TT = ") != std::string::npos);
  const auto back = parse_model_document(model_document_json(m));
  REQUIRE(back);
  CHECK(back->tt_s == 5e-9);
  CHECK(back->tt_se_s == 0.05e-9);
  m.tt_s = std::numeric_limits<double>::quiet_NaN();  // not known: no TT on the card (SPICE default 0)
  CHECK(spice_model_card(m).find("TT=") == std::string::npos);
  std::string why;
  CHECK_FALSE(parse_model_document(
      R"({"format":"junco.part-model","version":1,"temperature_k":300,"model":{"is_a":{"value":1e-9},"n":{"value":1.8},)"
      R"("rs_ohm":{"value":1},"tt_s":{"value":-1e-9}}})",
      &why));
  CHECK(why.find("model.tt_s") != std::string::npos);

  // The calculators: the part's TT by value and the --tt override, echoed.
  DesignPart part = design_part_from_json({{"is_a", 2.5e-9}, {"n", 1.85}, {"rs_ohm", 0.7}, {"tt_s", 5e-9}});
  CHECK(part.tt_s == 5e-9);
  const auto a = run_design("loss", &part, {{"current_a", 1e-3}, {"freq_hz", 100e6}});
  CHECK(a["part"]["tt_s"] == 5e-9);
  CHECK(a["junction"]["tt_s"] == 5e-9);
  const auto b = run_design("loss", &part, {{"current_a", 1e-3}, {"freq_hz", 100e6}, {"tt_s", 0.0}});
  CHECK(b["junction"]["tt_s"] == 0.0);
  double loss_a = 0, loss_b = 0;
  for (const auto& l : a["result"]) if (l["key"] == "loss_db") loss_a = l["value"].get<double>();
  for (const auto& l : b["result"]) if (l["key"] == "loss_db") loss_b = l["value"].get<double>();
  CHECK(loss_a < loss_b - 1.0);  // 5 ns at 1 mA is ~100 pF: it carries the signal past rd at 100 MHz
  try {
    run_design("loss", &part, {{"current_a", 1e-3}, {"tt_s", -1e-9}});
    FAIL("a negative TT was accepted");
  } catch (const DesignInputError& e) {
    CHECK(e.field() == "tt_s");
  }
}
