// The calculator table behind `junco design` and part.design: its answers
// against published check values (docs/references.md E8, E11, E12, E5), the
// inputs it echoes, and how it refuses bad input.
#include "design/calculators.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <set>

using namespace junco::fitting;
using Json = nlohmann::json;

namespace {

// The SPICE default junction of E8/E11: IS = 1e-14 A, N = 1, RS = 1 Ω, 27 °C.
DesignPart e8_part() {
  DesignPart p;
  p.dc = {1e-14, 1.0, 1.0};
  p.temp_k = 300.15;
  return p;
}

double value_of(const Json& lines, const std::string& key) {
  for (const auto& l : lines)
    if (l["key"] == key) return l["value"].get<double>();
  FAIL("no line " << key << " in " << lines.dump());
  return 0;
}

std::string field_of(const std::string& calc, const DesignPart* part, const Json& inputs) {
  try {
    run_design(calc, part, inputs);
  } catch (const DesignInputError& e) {
    return e.field();
  }
  return "(accepted)";
}

}  // namespace

TEST_CASE("E8: bias resistor and the operating point it gives back") {
  // Source: docs/references.md E8: 5 V, 10 mA → Vd = 0.724674 V, R = 427.533 Ω;
  // feeding R back through the Lambert-W form returns 10.0000 mA.
  const auto part = e8_part();
  const Json a = run_design("bias-r", &part, {{"supply_v", 5.0}, {"current_a", 0.01}});
  CHECK(a["achievable"] == true);
  const double rb = value_of(a["result"], "bias_resistor_ohm");
  CHECK(rb == Approx(427.533).margin(5e-4));
  CHECK(value_of(a["result"], "diode_voltage_v") == Approx(0.724674).margin(1e-6));
  const Json op = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", rb}});
  CHECK(value_of(op["result"], "bias_current_a") == Approx(0.01).epsilon(1e-6));
  // Every input is echoed, the default DC return included.
  std::set<std::string> keys;
  for (const auto& l : op["assumed"]) keys.insert(l["key"].get<std::string>());
  CHECK(keys == std::set<std::string>{"supply_v", "bias_resistor_ohm", "dc_return_ohm", "theta_k_per_w", "ambient_k"});
  CHECK(op["part"]["is_a"] == 1e-14);
}

TEST_CASE("op and power report Tj = Ta + theta*P from the application's theta, by hand; no theta, no Tj") {
  // Hand calculation (E8's part, 5 V, 427.533 Ω: 10 mA at Vd = 0.724674 V,
  // docs/references.md E8): P = I·Vd = 7.24674 mW; θ 200 K/W, Ta 298.15 K:
  // Tj = 298.15 + 200·7.24674e-3 = 299.599 K. With a 20 mA signal peak the
  // power calculator adds ½·Î²·rd, rd = Vt/I + RS = 25.865e-3/0.01 + 1 = 3.5865 Ω
  // (Vt at 300.15 K = 25.865 mV): 0.5·4e-4·3.5865 = 0.71730 mW.
  const auto part = e8_part();
  const Json op = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 427.533}, {"theta_k_per_w", 200.0}, {"ambient_k", 298.15}});
  CHECK(value_of(op["result"], "diode_power_w") == Approx(0.01 * 0.724674).epsilon(1e-5));
  CHECK(value_of(op["result"], "tj_k") == Approx(298.15 + 200.0 * 0.01 * 0.724674).margin(1e-3));
  const Json pw = run_design("power", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 427.533}, {"signal_peak_a", 0.02},
                                              {"theta_k_per_w", 200.0}, {"ambient_k", 298.15}});
  const double p_hand = 0.01 * 0.724674 + 0.5 * 0.02 * 0.02 * (0.025865 / 0.01 + 1.0);
  CHECK(value_of(pw["result"], "diode_power_w") == Approx(p_hand).epsilon(1e-4));
  CHECK(value_of(pw["result"], "tj_k") == Approx(298.15 + 200.0 * p_hand).margin(2e-3));
  // No theta: no tj_k line; an ambient alone or a theta alone is refused, naming ambient_k.
  for (const auto& l : run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 427.533}})["result"]) CHECK(l["key"] != "tj_k");
  CHECK(field_of("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 427.533}, {"ambient_k", 298.15}}) == "ambient_k");
  CHECK(field_of("power", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 427.533}, {"theta_k_per_w", 200.0}}) == "ambient_k");
}

TEST_CASE("loss and isolation give Tj from theta: DC bias plus the RF the diode absorbs, by hand") {
  // Hand calculation (Shockley diode and the series-switch divider; E8's part, IS 1e-14 A,
  // N 1, RS 1 ohm, 300.15 K, Vt = k*T/q = 25.8649 mV):
  //   I = 10 mA: Vd = Vt*ln(1 + I/IS) + I*RS = 0.724674 V; DC: I*Vd = 7.24674 mW.
  //   Z = RS + Vt/(I + IS) = 3.58649 ohm (no Cj, no TT: real at any frequency).
  //   1 V EMF into 50 + Z + 50: I^ = 1/103.58649 = 9.65377 mA; RF: 0.5*I^2*Re Z = 0.167122 mW.
  //   P = 7.41387 mW; theta 200 K/W, Ta 298.15 K: Tj = 298.15 + 200*P = 299.63277 K.
  const auto part = e8_part();
  const Json a = run_design("loss", &part, {{"current_a", 0.01}, {"amplitude_v", 1.0}, {"theta_k_per_w", 200.0}, {"ambient_k", 298.15}});
  CHECK(value_of(a["result"], "dc_power_w") == Approx(7.24674e-3).epsilon(1e-5));
  CHECK(value_of(a["result"], "rf_power_w") == Approx(0.167122e-3).epsilon(1e-5));
  CHECK(value_of(a["result"], "diode_power_w") == Approx(7.413865e-3).epsilon(1e-6));
  CHECK(value_of(a["result"], "tj_k") == Approx(299.63277).margin(1e-4));
  CHECK(value_of(a["result"], "loss_db") == Approx(20 * std::log10(1 + 3.5864926 / 100)).margin(1e-6));  // unchanged by theta
  // The same drive as available power: 1 V EMF into 50 ohm is (1/2)^2/(2*50) = 2.5 mW.
  const Json pw = run_design("loss", &part, {{"current_a", 0.01}, {"power_w", 2.5e-3}, {"theta_k_per_w", 200.0}, {"ambient_k", 298.15}});
  CHECK(value_of(pw["result"], "tj_k") == Approx(299.63277).margin(1e-4));
  // No drive: the DC bias alone (7.24674 mW): Tj = 298.15 + 200*7.24674e-3 = 299.59935 K; no rf line.
  const Json dc = run_design("loss", &part, {{"current_a", 0.01}, {"theta_k_per_w", 200.0}, {"ambient_k", 298.15}});
  CHECK(value_of(dc["result"], "tj_k") == Approx(299.59935).margin(1e-4));
  for (const auto& l : dc["result"]) CHECK(l["key"] != "rf_power_w");
  // Without theta or a drive the answer is the loss alone, as before.
  const Json bare = run_design("loss", &part, {{"current_a", 0.01}});
  CHECK(bare["result"].size() == 1);
  CHECK(field_of("loss", &part, {{"current_a", 0.01}, {"ambient_k", 298.15}}) == "ambient_k");
  CHECK(field_of("loss", &part, {{"current_a", 0.01}, {"amplitude_v", 1.0}, {"power_w", 1e-3}}) == "power_w");

  // Off state, hand calculation: CJO 1 pF, VJ 0.7 V, M 0.5, 5 V reverse, 100 MHz:
  //   Cj = 1 pF/(1 + 5/0.7)^0.5 = 0.350438 pF; Z = RS + 1/(gd + j*w*Cj) = 1 - j*4541.596 ohm
  //   (gd = IS/Vt*e^(-5/Vt), negligible). 10 V EMF, series: |I^| = 10/|101 - j*4541.596| = 2.201325 mA;
  //   RF: 0.5*I^2*Re Z = 2.422915 uW; leakage IS*(1 - e^(-5/Vt))*5 V = 5e-14 W.
  //   theta 1000 K/W: Tj = 298.15 + 1000*2.422915e-6 = 298.152423 K.
  const Json off = run_design("isolation", &part, {{"cj0_f", 1e-12}, {"vj_v", 0.7}, {"m", 0.5}, {"reverse_v", 5.0}, {"freq_hz", 1e8},
                                                   {"amplitude_v", 10.0}, {"theta_k_per_w", 1000.0}, {"ambient_k", 298.15}});
  CHECK(value_of(off["result"], "rf_power_w") == Approx(2.422915e-6).epsilon(1e-5));
  CHECK(value_of(off["result"], "dc_power_w") == Approx(5e-14).epsilon(1e-6));
  CHECK(value_of(off["result"], "tj_k") == Approx(298.152423).margin(1e-6));
}

TEST_CASE("E11: series insertion loss and shunt isolation over bias, defaults 50/50 ohm") {
  // Source: docs/references.md E11 (N = 1, RS = 1 Ω, 27 °C, 50 Ω): series IL
  // 2.067 / 0.306 dB at 1 / 10 mA; the same diode as a shunt isolates
  // 5.71 / 18.03 dB. The calculator's default frequency (10 MHz) and zero
  // series inductance leave the resistive result unchanged.
  const auto part = e8_part();
  const Json s1 = run_design("loss", &part, {{"current_a", 1e-3}});
  CHECK(value_of(s1["result"], "loss_db") == Approx(2.067).margin(1e-3));
  const Json s10 = run_design("loss", &part, {{"current_a", 1e-2}, {"switch", "series"}});
  CHECK(value_of(s10["result"], "loss_db") == Approx(0.306).margin(1e-3));
  const Json h1 = run_design("loss", &part, {{"current_a", 1e-3}, {"switch", "shunt"}});
  CHECK(value_of(h1["result"], "isolation_db") == Approx(5.71).margin(0.01));
  const Json h10 = run_design("loss", &part, {{"current_a", 1e-2}, {"switch", "shunt"}});
  CHECK(value_of(h10["result"], "isolation_db") == Approx(18.03).margin(0.01));
  CHECK(s1["assumed"][0]["text"] == "series");  // the default choice is shown
  // And back: the bias for 0.306 dB is 10 mA.
  const Json b = run_design("bias-for-loss", &part, {{"target_db", value_of(s10["result"], "loss_db")}});
  CHECK(value_of(b["result"], "bias_current_a") == Approx(0.01).epsilon(1e-4));
}

TEST_CASE("E12 and E5: off-state isolation from the junction capacitance, with reverse bias") {
  // Source: docs/references.md E12: Cj = 0.3 pF at 1 GHz → series isolation 14.646 dB,
  // shunt insertion loss 0.00963 dB (the capacitance given as the part's override).
  // E12 is a bare capacitor: the off state now keeps the part's RS in series
  // (as the SPICE diode does), so the part here has RS = 0.
  auto part = e8_part();
  part.dc.rs_ohm = 0.0;
  const Json s = run_design("isolation", &part, {{"cj0_f", 0.3e-12}, {"freq_hz", 1e9}});
  CHECK(value_of(s["result"], "isolation_db") == Approx(14.646).margin(1e-3));
  const Json h = run_design("isolation", &part, {{"cj0_f", 0.3e-12}, {"freq_hz", 1e9}, {"switch", "shunt"}});
  CHECK(value_of(h["result"], "loss_db") == Approx(0.00963).margin(1e-5));
  // docs/references.md E5: CJO = 1 pF, VJ = 1 V, M = 0.5 → C(−4 V) = 0.447214 pF.
  const Json r = run_design("isolation", &part, {{"cj0_f", 1e-12}, {"vj_v", 1.0}, {"m", 0.5}, {"reverse_v", 4.0}});
  CHECK(value_of(r["result"], "cj_f") == Approx(0.447214e-12).epsilon(1e-5));
  CHECK(r["part"]["cj0_f"] == 1e-12);
  // Without a capacitance there is no answer, and the missing input is named.
  CHECK(field_of("isolation", &part, Json::object()) == "cj0_f");
}

TEST_CASE("the junction temperature moves IS by the SPICE law: Vf falls as T rises") {
  // Source: docs/references.md E3 (SPICE IS(T) of §2, ngspice diotemp.c; IS = 1e-14 A,
  // N = 1, XTI = 3, EG = 1.11 eV, TNOM = 27 degC, RS = 0): V(1 mA) falls from
  // 0.655118 V at 27 degC to 0.523485 V at 100 degC; dV/dT at 27 degC = -1.774 mV/K.
  DesignPart part;
  part.dc = {1e-14, 1.0, 0.0};
  part.temp_k = 300.15;
  const auto vd_at = [&](double temp_k) {
    const Json a = run_design("bias-r", &part, {{"supply_v", 5.0}, {"current_a", 1e-3}, {"temp_k", temp_k}});
    return value_of(a["result"], "diode_voltage_v");
  };
  CHECK(vd_at(300.15) == Approx(0.655118).margin(1e-6));
  CHECK(vd_at(373.15) == Approx(0.523485).margin(1e-6));
  const double dv_dt = (vd_at(300.65) - vd_at(299.65)) / 1.0;
  CHECK(dv_dt == Approx(-1.774e-3).margin(2e-6));
  // The op calculator (fixed supply and resistor) falls the same way, and the
  // answer says at what temperature it computed, with IS moved there (E3:
  // IS(100 degC) = 8.5073276e-11 A), while "part" stays the part as given.
  const Json cold = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 4300.0}});
  const Json hot = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 4300.0}, {"temp_k", 373.15}});
  CHECK(value_of(hot["result"], "diode_voltage_v") < value_of(cold["result"], "diode_voltage_v") - 0.1);
  CHECK(hot["junction"]["temp_k"] == 373.15);
  CHECK(hot["junction"]["is_a"].get<double>() == Approx(8.5073276e-11).epsilon(1e-7));
  CHECK(hot["part"]["temp_k"] == 300.15);
  CHECK(hot["part"]["is_a"] == 1e-14);
  CHECK(hot["part"]["eg_ev"] == 1.11);
  std::set<std::string> keys;
  for (const auto& l : hot["assumed"]) keys.insert(l["key"].get<std::string>());
  CHECK(keys.count("temp_k") == 1);
  // A part given by value reads back as the same part (EG, XTI, TRS1 included).
  const Json law = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 430.0}, {"temp_k", 358.15}, {"eg_ev", 0.69},
                                            {"xti", 2.0}, {"trs1_per_k", 4e-3}});
  const DesignPart back = design_part_from_json(law["part"]);
  CHECK(back.law.eg_ev == 0.69);
  CHECK(back.law.xti == 2.0);
  CHECK(back.law.trs1_per_k == 4e-3);
  CHECK(back.temp_k == 300.15);
}

TEST_CASE("TRS1 moves RS linearly with the junction temperature") {
  // Source: ngspice diotemp.c / docs/references.md §2: RS(T) = RS·(1 + TRS1·ΔT + TRS2·ΔT²).
  const auto part = e8_part();  // RS = 1 ohm at 27 degC
  const Json a = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 430.0}, {"temp_k", 400.15}, {"trs1_per_k", 2e-3}});
  CHECK(a["junction"]["rs_ohm"].get<double>() == Approx(1.2).epsilon(1e-12));
  CHECK(field_of("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 430.0}, {"temp_k", 400.15}, {"trs1_per_k", -0.02}}) == "temp_k");
}

TEST_CASE("targets that cannot be met and power over a limit are answers, not errors") {
  const auto part = e8_part();
  const Json a = run_design("bias-r", &part, {{"supply_v", 0.5}, {"current_a", 0.01}});
  CHECK(a["achievable"] == false);
  CHECK_FALSE(a["reason"].get<std::string>().empty());
  const Json b = run_design("bias-for-loss", &part, {{"target_db", 0.01}});  // RS alone gives 0.086 dB
  CHECK(b["achievable"] == false);
  // 5 V into 100 Ω: ~42 mA, 177 mW in the resistor; a 125 mW part fails.
  const Json p = run_design("power", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 100.0}, {"max_resistor_w", 0.125}});
  CHECK(p["failures"].size() == 1);
  CHECK(value_of(p["result"], "resistor_power_w") == Approx(0.1769).margin(5e-4));
  const Json ok = run_design("power", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 100.0}, {"max_resistor_w", 0.5}});
  CHECK(ok["failures"].empty());
  // Headroom needs no part: I_min = V̂/RL with a choke return (common practice, no source).
  const Json h = run_design("headroom", nullptr, {{"amplitude_v", 1.0}});
  CHECK(value_of(h["result"], "min_bias_a") == Approx(0.02).epsilon(1e-9));
  CHECK_FALSE(h.contains("part"));
}

TEST_CASE("headroom: the DC rule without a frequency or stored charge, the charge-control rule with both") {
  // DC rule (common practice, no source): 1 V load peak, 50 ohm, choke return: I_min = 20 mA.
  // Charge-control rule (docs/references.md [CC], the derivation in design/bias.hpp):
  // I_min = I^/sqrt(1 + (w*tau)^2); TT 5 ns at 100 MHz: w*TT = pi, sqrt(1 + pi^2) = 3.296908,
  // 20 mA/3.296908 = 6.066288 mA.
  DesignPart part = e8_part();
  part.tt_s = 5e-9;
  const Json bare = run_design("headroom", nullptr, {{"amplitude_v", 1.0}});
  const Json no_freq = run_design("headroom", &part, {{"amplitude_v", 1.0}});
  REQUIRE(no_freq["result"].size() == 2);  // without a frequency: exactly the DC answer
  CHECK(no_freq["result"] == bare["result"]);
  CHECK(no_freq["warnings"].dump().find("give the frequency") != std::string::npos);
  const Json no_tt = run_design("headroom", nullptr, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}});
  CHECK(no_tt["result"] == bare["result"]);  // no stored charge: the DC rule at any frequency
  const Json at_f = run_design("headroom", &part, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}});
  CHECK(value_of(at_f["result"], "min_bias_a") == Approx(6.066288e-3).epsilon(1e-6));
  CHECK(value_of(at_f["result"], "charge_min_bias_a") == Approx(6.066288e-3).epsilon(1e-6));
  CHECK(value_of(at_f["result"], "dc_min_bias_a") == Approx(0.02).epsilon(1e-12));
  CHECK(value_of(at_f["result"], "omega_tau") == Approx(M_PI).epsilon(1e-12));
  CHECK(at_f["warnings"].dump().find("reverses in the trough") != std::string::npos);
  // TT alone, no part: the same; at 1 kHz the rule is the DC one to 5e-10 (w*TT = 3.1e-5).
  CHECK(value_of(run_design("headroom", nullptr, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}, {"tt_s", 5e-9}})["result"], "min_bias_a") ==
        Approx(6.066288e-3).epsilon(1e-6));
  CHECK(value_of(run_design("headroom", nullptr, {{"amplitude_v", 1.0}, {"freq_hz", 1e3}, {"tt_s", 5e-9}})["result"], "min_bias_a") ==
        Approx(0.02).epsilon(1e-9));
  // Two lifetimes without a part (--tt and --tau): refused, naming tau_s.
  CHECK(field_of("headroom", nullptr, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}, {"tt_s", 5e-9}, {"tau_s", 1e-6}}) == "tau_s");
  // The floor adds to the junction current: 6.066288 + 1 mA.
  CHECK(value_of(run_design("headroom", &part, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}, {"floor_a", 1e-3}})["result"], "min_bias_a") ==
        Approx(7.066288e-3).epsilon(1e-6));
  // A PIN part's lifetime: tau 1 us at 10 MHz, w*tau = 62.83185, sqrt(1 + 62.83185^2) = 62.83981:
  // 20 mA/62.83981 = 0.3182697 mA.
  DesignPart pin = e8_part();
  pin.pin = PinPart{};
  pin.pin->law.tau_s = 1e-6;
  CHECK(value_of(run_design("headroom", &pin, {{"amplitude_v", 1.0}, {"freq_hz", 1e7}})["result"], "min_bias_a") ==
        Approx(0.3182697e-3).epsilon(1e-6));
  // With Cj: part of I^ flows in the depletion capacitance, the rest reaches the
  // stored charge (share < 1): the least bias falls, never rises.
  DesignPart with_cj = part;
  with_cj.cap = {20e-12, 0.7, 0.5, 0.5};
  const Json cj = run_design("headroom", &with_cj, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}});
  CHECK(value_of(cj["result"], "charge_share") < 1.0);
  CHECK(value_of(cj["result"], "min_bias_a") < 6.066288e-3);
  CHECK(value_of(cj["result"], "min_bias_a") == Approx(6.066288e-3 * value_of(cj["result"], "charge_share")).epsilon(1e-6));
  // The fit's covariance gives +-: u(TT) = 0.5 ns; dI/dTT = -I^*w^2*TT/(1 + (w*TT)^2)^1.5
  // = -0.02*1.973921e9/35.83607 = -1.101640e6 A/s, so u(I_min) ~ 0.5508 mA (GUM linear law).
  part.cov.names = {"tt_s"};
  part.cov.matrix = {{0.25e-18}};
  part.cov.source = "test";
  const Json u = run_design("headroom", &part, {{"amplitude_v", 1.0}, {"freq_hz", 1e8}});
  for (const auto& l : u["result"])
    if (l["key"] == "min_bias_a") CHECK(l["std_error"].get<double>() == Approx(0.5508e-3).epsilon(0.03));
}

TEST_CASE("bad input is refused, naming the field") {
  const auto part = e8_part();
  CHECK(field_of("warp", &part, Json::object()) == "calculator");
  CHECK(field_of("op", &part, {{"supply_v", 5.0}}) == "bias_resistor_ohm");                              // missing
  CHECK(field_of("op", &part, {{"supply_v", "5V"}, {"bias_resistor_ohm", 1.0}}) == "supply_v");          // not a number
  CHECK(field_of("op", &part, {{"supply_v", -5.0}, {"bias_resistor_ohm", 1.0}}) == "supply_v");          // out of range
  CHECK(field_of("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}, {"vbias", 2.0}}) == "vbias");  // unknown
  CHECK(field_of("loss", &part, {{"current_a", 0.01}, {"switch", "diagonal"}}) == "switch");     // not a choice
  CHECK(field_of("op", nullptr, {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}}) == "part");
  CHECK(field_of("headroom", nullptr, {{"amplitude_v", 1.0}, {"cj0_f", 1e-12}}) == "cj0_f");    // needs the part itself
  CHECK(field_of("op", &part, Json::array()) == "inputs");
  DesignPart broken = part;
  broken.dc.n = 0;
  CHECK(field_of("op", &broken, {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}}) == "part");
  CHECK(field_of("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}}) == "(accepted)");
  // An old name and its new one together: which one is meant? Refused, naming both.
  CHECK(field_of("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 1.0}, {"rbias_ohm", 2.0}}) == "rbias_ohm");
}

TEST_CASE("old input names are read as the new ones, with a warning (docs/names.md)") {
  const auto part = e8_part();
  const Json old = run_design("op", &part, {{"supply_v", 5.0}, {"rbias_ohm", 430.0}, {"rreturn_ohm", 20.0}});
  const Json now = run_design("op", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 430.0}, {"dc_return_ohm", 20.0}});
  CHECK(value_of(old["result"], "bias_current_a") == value_of(now["result"], "bias_current_a"));
  CHECK(value_of(old["assumed"], "dc_return_ohm") == 20.0);
  REQUIRE(old["warnings"].size() == 2);
  CHECK(old["warnings"][0] == "input rbias_ohm is now spelled bias_resistor_ohm (the old spelling still works for now)");
  CHECK(now["warnings"].empty());
  const Json headroom = run_design("headroom", nullptr, {{"amplitude_v", 1.0}, {"rreturn_ohm", 1000.0}});
  CHECK(value_of(headroom["assumed"], "dc_return_ohm") == 1000.0);
}

TEST_CASE("rg_ohm and rl_ohm are read as source_ohm and load_ohm, with a warning; both spellings at once refused") {
  const auto part = e8_part();
  // Unequal resistors, so a swap of the two would show in the echo and the load voltage.
  const Json old = run_design("distortion", &part, {{"current_a", 1e-3}, {"amplitude_v", 0.1}, {"rg_ohm", 75.0}, {"rl_ohm", 25.0}});
  const Json now = run_design("distortion", &part, {{"current_a", 1e-3}, {"amplitude_v", 0.1}, {"source_ohm", 75.0}, {"load_ohm", 25.0}});
  CHECK(value_of(old["assumed"], "source_ohm") == 75.0);
  CHECK(value_of(old["assumed"], "load_ohm") == 25.0);
  for (const char* key : {"load_peak_v", "hd2_dbc", "hd3_dbc", "thd_pct"}) CHECK(value_of(old["result"], key) == value_of(now["result"], key));
  REQUIRE(old["warnings"].size() == now["warnings"].size() + 2);
  CHECK(old["warnings"].dump().find("input rg_ohm is now spelled source_ohm (the old spelling still works for now)") != std::string::npos);
  CHECK(old["warnings"].dump().find("input rl_ohm is now spelled load_ohm") != std::string::npos);
  CHECK(now["warnings"].dump().find("spelled") == std::string::npos);
  CHECK(field_of("loss", &part, {{"current_a", 1e-3}, {"rg_ohm", 50.0}, {"source_ohm", 50.0}}) == "rg_ohm");
  CHECK(field_of("headroom", nullptr, {{"amplitude_v", 1.0}, {"rl_ohm", 50.0}, {"load_ohm", 50.0}}) == "rl_ohm");
  try {
    run_design("loss", &part, {{"current_a", 1e-3}, {"rl_ohm", 50.0}, {"load_ohm", 50.0}});
    FAIL("both spellings accepted");
  } catch (const DesignInputError& e) {
    CHECK(std::string(e.what()) == "rl_ohm: give load_ohm only (rl_ohm is its old name)");
  }
}

TEST_CASE("every calculator in the table runs on its required inputs alone") {
  const auto part = e8_part();
  for (const auto& c : design_calculators()) {
    Json inputs = Json::object();
    for (const auto& s : c.inputs)
      if (!s.fallback && !s.optional && s.choices.empty()) inputs[s.key] = s.unit == "dB" ? 1.0 : s.unit == "%" ? 5.0 : s.unit == "A" ? 0.01 : 1.0;
    if (c.name == "isolation") inputs["cj0_f"] = 1e-12;
    if (c.name == "off-headroom") inputs["amplitude_v"] = 1.0;  // one of amplitude_v or power_w
    if (c.name == "attenuator") inputs["target_db"] = 10.0;     // or the two currents
    INFO(c.name << " " << inputs.dump());
    const Json a = run_design(c.name, c.needs_part ? &part : nullptr, inputs);
    CHECK(a["calculator"] == c.name);
    CHECK(a["assumed"].size() == c.inputs.size());
    CHECK_FALSE(a["result"].empty());
  }
}
