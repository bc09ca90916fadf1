// The SPICE temperature law (fitting/temperature.hpp) against published check
// values, and the derived figures at another temperature.
#include "fitting/derived.hpp"
#include "formats/model_document.hpp"
#include "fitting/temperature.hpp"

#include <catch2/catch.hpp>

#include <cmath>

using namespace junco::fitting;

TEST_CASE("IS(T) reproduces the E3 table") {
  // Source: docs/references.md E3 (IS = 1e-14 A, N = 1, XTI = 3, EG = 1.11 eV,
  // TNOM = 27 degC; the law of §2 from ngspice diotemp.c).
  const TemperatureLaw law;  // SPICE defaults EG 1.11, XTI 3
  const struct {
    double temp_c, is_a;
  } table[] = {{-25, 7.0234675e-19}, {0, 1.0836673e-16}, {50, 2.6468879e-13}, {100, 8.5073276e-11}, {125, 9.0285511e-10}};
  for (const auto& row : table) {
    INFO(row.temp_c << " degC");
    CHECK(saturation_current_at_a(1e-14, 1.0, 300.15, kelvin_from_celsius(row.temp_c), law) == Approx(row.is_a).epsilon(1e-7));
  }
  // At TNOM nothing moves; near 300 K IS doubles every 4.55 K (E3).
  CHECK(saturation_current_at_a(1e-14, 1.0, 300.15, 300.15, law) == 1e-14);
  CHECK(saturation_current_at_a(1e-14, 1.0, 300.15, 300.15 + 4.55, law) / 1e-14 == Approx(2.0).epsilon(0.01));
}

TEST_CASE("the law composes: TNOM to T1 to T2 equals TNOM to T2") {
  // From the form of the law (docs/references.md §2): the exponent is
  // EG·q/(N·k)·(1/TNOM − 1/T) + XTI/N·ln(T/TNOM), additive over steps (derived, no other source).
  const TemperatureLaw law{0.69, 2.0, 0.0, 0.0};
  const double direct = saturation_current_at_a(3e-9, 1.7, 300.15, 398.15, law);
  const double stepped = saturation_current_at_a(saturation_current_at_a(3e-9, 1.7, 300.15, 333.15, law), 1.7, 333.15, 398.15, law);
  CHECK(stepped == Approx(direct).epsilon(1e-12));
  // TRS1, TRS2 (ngspice diotemp.c: 1 + TRS1·dt + TRS2·dt²).
  const TemperatureLaw rs_law{1.11, 3.0, 3e-3, 1e-5};
  CHECK(series_resistance_at_ohm(0.5, 300.15, 350.15, rs_law) == Approx(0.5 * (1 + 3e-3 * 50 + 1e-5 * 2500)).epsilon(1e-14));
}

TEST_CASE("a fit's forward voltage at another temperature, with its error") {
  // dV/dT at constant current = (V − EG − XTI·N·Vt)/T (docs/references.md §2, E3:
  // −1.774 mV/K for the default card at 1 mA, 27 degC, RS = 0).
  FitResult fit;
  fit.status = FitStatus::converged;
  fit.temp_k = 300.15;
  fit.is_a = {1e-14, 1e-16};
  fit.n = {1.0, 1e-3};
  fit.rs_ohm = {0.0, 0.0};
  fit.covariance = {{1e-32, 0, 0}, {0, 1e-6, 0}, {0, 0, 0}};
  const TemperatureLaw law;
  const Estimate cold = forward_voltage_v(fit, 1e-3);
  const Estimate warm = forward_voltage_v(fit, 1e-3, 301.15, law);
  CHECK(warm.value - cold.value == Approx(-1.774e-3).margin(2e-5));
  CHECK(warm.std_error > 0.0);
  CHECK(forward_voltage_v(fit, 1e-3, 373.15, law).value == Approx(0.523485).margin(1e-6));
}

TEST_CASE("the model document and the card carry the temperature law") {
  // Card names as in ngspice's diode (dio.c: EG, XTI, TRS1, TNOM in degC; docs/references.md §2).
  PartModel m;
  m.part_label = "WREN-0912-03";
  m.lot = "WREN-0912";
  m.temp_k = 300.15;
  m.params = {2.5e-9, 1.75, 0.7};
  m.law = {0.69, 2.0, 4e-3, 0.0};
  const std::string card = spice_model_card(m);
  CHECK(card.find(" EG=0.69 XTI=2 TRS1=4.000000e-03 TNOM=27)") != std::string::npos);
  std::string why;
  const auto back = parse_model_document(model_document_json(m), &why);
  REQUIRE(back);
  CHECK(back->law.eg_ev == 0.69);
  CHECK(back->law.xti == 2.0);
  CHECK(back->law.trs1_per_k == 4e-3);
  // A document without the law (written before it existed) reads as the SPICE defaults.
  const auto old = parse_model_document(
      R"({"format":"junco.part-model","version":1,"temperature_k":300.15,"model":{"is_a":{"value":1e-14},"n":{"value":1},"rs_ohm":{"value":1}}})",
      &why);
  REQUIRE(old);
  CHECK(old->law.eg_ev == 1.11);
  CHECK(old->law.xti == 3.0);
  CHECK_FALSE(parse_model_document(
      R"({"format":"junco.part-model","version":1,"temperature_k":300.15,"model":{"is_a":{"value":1e-14},"n":{"value":1},"rs_ohm":{"value":1}},"temperature_law":{"eg_ev":-1}})",
      &why));
  CHECK(why == "temperature_law.eg_ev must be positive (eV)");
}

TEST_CASE("VJ and CJO at temperature reproduce E4") {
  // Source: docs/references.md E4 (ngspice tlevc = 0, diotemp.c; VJ = 0.7 V, CJO = 1 pF,
  // M = 0.5, TNOM = 27 degC): at 100 degC VJ = 0.556963 V, CJO = 1.116769 pF;
  // at −25 degC VJ = 0.797154 V, CJO = 0.920204 pF.
  const auto hot = depletion_at_temperature(1e-12, 0.7, 0.5, 300.15, 373.15);
  CHECK(hot.vj_v == Approx(0.556963).margin(1e-6));
  CHECK(hot.cj0_f == Approx(1.116769e-12).margin(1e-18));
  const auto cold = depletion_at_temperature(1e-12, 0.7, 0.5, 300.15, 248.15);
  CHECK(cold.vj_v == Approx(0.797154).margin(1e-6));
  CHECK(cold.cj0_f == Approx(0.920204e-12).margin(1e-18));
  const auto same = depletion_at_temperature(1e-12, 0.7, 0.5, 300.15, 300.15);
  CHECK(same.vj_v == Approx(0.7).epsilon(1e-12));
  CHECK(same.cj0_f == Approx(1e-12).epsilon(1e-12));
}
