// The switch around the diode (design/network.hpp, issue 15) against
// ngspice and published relations:
//   a. off-state headroom: the onsets of forward conduction and of breakdown
//      in ngspice .tran of a reverse-biased series switch with BV set;
//   b. junction temperature: Tj = Ta + theta*P against the formula, and the
//      loss at Tj and the diode's RF dissipation against ngspice at Tj;
//   c. the bias network: ngspice .op (the diode's current through the
//      Rb/Rgnd divider) and .ac of the whole netlist, 1 MHz to 1 GHz, 0.1 dB;
//   d. the series-shunt switch and the PIN pi/T attenuator: ngspice .ac within
//      0.1 dB, and the matched-attenuator resistor formulas.
#include "design/calculators.hpp"
#include "design/network.hpp"
#include "fitting/temperature.hpp"
#include "tests/support/ngspice.hpp"
#include "tests/support/sim_nominal_part.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

using namespace junco::fitting;
using Json = nlohmann::json;

namespace {

using junco::test::t27_k;
// junco-sim's nominal part (tests/support/sim_nominal_part.hpp).
const auto sim_part = junco::test::sim_nominal_part;

std::string model_card(const DesignPart& p, const std::string& extra = "") {
  std::ostringstream f;
  f.precision(15);
  f << ".model dut D(IS=" << p.dc.is_a << " N=" << p.dc.n << " RS=" << p.dc.rs_ohm << " CJO=" << p.cap.cj0_f << " VJ=" << p.cap.vj_v
    << " M=" << p.cap.m << " FC=" << p.cap.fc << " TT=" << p.tt_s << extra << ")\n";
  return f.str();
}

double value_of(const Json& answer, const std::string& key) {
  for (const auto& l : answer["result"])
    if (l["key"] == key) return l["value"].get<double>();
  FAIL("no result " << key << " in " << answer.dump());
  return 0;
}

// wrdata with wr_singlescale: the scale, then one column per vector.
std::vector<std::vector<double>> read_columns(const std::string& path, std::size_t columns) {
  std::ifstream data(path);
  std::string line;
  std::vector<std::vector<double>> rows;
  while (std::getline(data, line)) {
    std::istringstream row(line);
    std::vector<double> v(columns);
    bool ok = true;
    for (auto& x : v) ok = ok && static_cast<bool>(row >> x);
    if (ok) rows.push_back(v);
  }
  return rows;
}

double db(double x) { return 20.0 * std::log10(x); }

bool fails_on(const Json& answer, const std::string& words) {
  for (const auto& f : answer["failures"])
    if (f.get<std::string>().find(words) != std::string::npos) return true;
  return false;
}

}  // namespace

// ---- a. off-state headroom ------------------------------------------------------

TEST_CASE("off-headroom: ngspice .tran shows conduction and breakdown where the calculator puts their onsets",
          "[reference][ngspice]") {
  // Source: ngspice (Debian package) .tran of a series switch, EMF = -VR + A*sin
  // at 10 kHz, Rg = RL = 50 ohm, the diode with BV = 30 V, IBV = 100 uA (SPICE
  // defines BV as the voltage at which the reverse current is IBV, ngspice
  // diotemp.c, docs/references.md §2 and E6). The rule itself (VR > RF peak, VR +
  // RF peak < BV, with a margin) is docs/references.md §6 [M].
  DesignPart part = sim_part(0.0);
  const double vr = 5.0, bv = 30.0, onset = 10e-6, freq = 10e3;
  const auto run = [&](double emf) {
    return run_design("off-headroom", &part,
                      {{"reverse_v", vr}, {"amplitude_v", emf}, {"bv_v", bv}, {"onset_a", onset}, {"freq_hz", freq}});
  };
  const Json unit = run(1.0);
  const double gain = value_of(unit, "junction_peak_v");  // junction peak per volt of EMF (linear)
  REQUIRE(gain == Approx(1.0).margin(1e-3));              // the off junction takes nearly the whole EMF
  const double conduction = value_of(unit, "conduction_peak_v"), breakdown = value_of(unit, "breakdown_peak_v");
  CHECK(breakdown == Approx(bv - vr));
  // The junction voltage at which the forward current is 10 uA, by hand:
  // N*Vt*ln(1 + I/IS) = 1.85 * 25.865 mV * ln(4001) = 0.39688 V.
  CHECK(conduction - vr == Approx(1.85 * thermal_voltage_v(t27_k) * std::log(1.0 + onset / 2.5e-9)).epsilon(1e-9));

  // EMF amplitudes just below and just above each onset, and the rule's own limits.
  const double margin = 0.5;
  const std::vector<double> emf{(conduction - 0.1) / gain, (conduction + 0.1) / gain, (breakdown - 0.2) / gain,
                                (breakdown + 0.2) / gain, (vr - margin - 0.01) / gain, (bv - vr - margin - 0.01) / gain};
  const junco::test::Ngspice ng("offhead");
  std::ostringstream f;
  f.precision(12);
  f << "off-state headroom\n";
  std::string vectors;
  for (std::size_t k = 0; k < emf.size(); ++k) {
    const std::string s = std::to_string(k);
    f << "V" << s << " s" << s << " 0 DC " << -vr << " SIN(" << -vr << " " << emf[k] << " " << freq << ")\nRg" << s << " s" << s
      << " a" << s << " 50\nD" << s << " a" << s << " o" << s << " dut\nRL" << s << " o" << s << " 0 50\n";
    vectors += " v(o" + s + ")";
  }
  f << model_card(part, " BV=30 IBV=100u") << ".options reltol=1e-6 abstol=1e-15 temp=27 tnom=27\n.control\ntran 10n 300u 100u 10n\n"
    << "set wr_singlescale\nwrdata " << ng.path("tran.txt") << vectors << "\n.endc\n.end\n";
  ng.run(f.str(), "tran");
  const auto rows = read_columns(ng.path("tran.txt"), 1 + emf.size());
  REQUIRE(rows.size() > 1000);
  std::vector<double> i_max(emf.size(), -1.0), i_min(emf.size(), 1.0);
  for (const auto& r : rows)
    for (std::size_t k = 0; k < emf.size(); ++k) {
      i_max[k] = std::max(i_max[k], r[1 + k] / 50.0);  // the diode current is RL's
      i_min[k] = std::min(i_min[k], r[1 + k] / 50.0);
    }
  for (std::size_t k = 0; k < emf.size(); ++k) INFO("EMF " << emf[k] << " V: diode current " << i_min[k] << " .. " << i_max[k] << " A");
  WARN("forward peak current 0.1 V below / above the conduction onset: " << i_max[0] << " / " << i_max[1]
       << " A; reverse 0.2 V below / above the breakdown onset: " << -i_min[2] << " / " << -i_min[3] << " A");
  CHECK(i_max[0] < onset);
  CHECK(i_max[1] > onset);
  CHECK(-i_min[2] < 100e-6);
  CHECK(-i_min[3] > 100e-6);
  // At the rule's limits (margin 0.5 V) ngspice shows neither.
  CHECK(run(emf[4])["failures"].empty());
  CHECK(i_max[4] < onset / 10);
  CHECK(!fails_on(run(emf[5]), "of BV"));  // (its forward side fails: VR is far below that peak)
  CHECK(-i_min[5] < 100e-6 / 10);
  // Past either limit the calculator fails, naming the fix.
  CHECK(fails_on(run(emf[1]), "of forward bias"));
  CHECK(!fails_on(run(emf[1]), "of BV"));
  CHECK(fails_on(run(emf[3]), "of BV"));
  // Without BV only the forward side is judged.
  CHECK(run_design("off-headroom", &part, {{"reverse_v", vr}, {"amplitude_v", emf[3]}})["failures"].size() == 1);
}

TEST_CASE("off-headroom: the RF peak of a power is sqrt(2*P*Z0) on a matched shunt switch", "[reference]") {
  // Source: docs/references.md §6 [C]: 1 V at 10 mW, 3.16 V at 100 mW, 10 V at
  // 1 W in 50 ohm (load peak of a matched source). The off shunt diode sits
  // across the load, so its junction sees nearly that peak at 1 MHz.
  const DesignPart part = sim_part(0.0);
  for (const auto& [p_w, v] : std::vector<std::pair<double, double>>{{10e-3, 1.0}, {100e-3, 3.1623}, {1.0, 10.0}}) {
    const Json a = run_design("off-headroom", &part, {{"switch", "shunt"}, {"reverse_v", 20.0}, {"power_w", p_w}, {"freq_hz", 1e6}});
    CHECK(value_of(a, "junction_peak_v") == Approx(v).epsilon(2e-3));
  }
  CHECK_THROWS_AS(run_design("off-headroom", &part, {{"reverse_v", 5.0}}), DesignInputError);
  CHECK_THROWS_AS(run_design("off-headroom", &part, {{"reverse_v", 5.0}, {"power_w", 1.0}, {"amplitude_v", 1.0}}), DesignInputError);
}

// ---- b. junction temperature -------------------------------------------------------

namespace {

// The IS(T) law written out here from docs/references.md §2 (not the library's).
double is_at(double is_a, double n, double t_k) {
  const double vt = thermal_voltage_v(t_k);
  return is_a * std::pow(t_k / t27_k, 3.0 / n) * std::exp((t_k / t27_k - 1.0) * 1.11 / (n * vt));
}

// Series switch at bias i_a (the loop's DC source sets it) at temperature t_k:
// per frequency, the loss and the diode's RF power per volt^2 of EMF.
struct AcRow {
  double freq, loss_db, diode_w_per_v2;
};
std::vector<AcRow> ngspice_series_at(const DesignPart& part, double i_a, double t_k) {
  const junco::test::Ngspice ng("tj");
  const double nvt = part.dc.n * thermal_voltage_v(t_k);
  const double v_dc = i_a * (100.0 + part.dc.rs_ohm) + nvt * std::log1p(i_a / is_at(part.dc.is_a, part.dc.n, t_k));
  std::ostringstream f;
  f.precision(15);
  f << "series switch at temperature\nV1 s 0 DC " << v_dc << " AC 1\nRg s a 50\nD1 a o dut\nRL o 0 50\n" << model_card(part)
    << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=" << t_k - zero_celsius_k << " tnom=27\n.control\nac dec 3 1e6 1e9\n"
    << "set wr_singlescale\nwrdata " << ng.path("ac.txt") << " vr(a) vi(a) vr(o) vi(o)\n.endc\n.end\n";
  ng.run(f.str(), "ac");
  std::vector<AcRow> out;
  for (const auto& r : read_columns(ng.path("ac.txt"), 5)) {
    const std::complex<double> va(r[1], r[2]), vo(r[3], r[4]);
    const std::complex<double> i = vo / 50.0;
    out.push_back({r[0], db(0.5 / std::abs(vo)), 0.5 * std::real((va - vo) * std::conj(i))});
  }
  REQUIRE(out.size() == 10);
  return out;
}

}  // namespace

TEST_CASE("junction-temp: Tj = Ta + theta*P with P = I*Vf(Tj), solved by hand", "[reference]") {
  // Source: docs/references.md §8 [M] (steady self-heating Tj = Ta + Rth*P) and
  // §2 (IS(T), SPICE law). The test iterates the formula itself.
  const DesignPart part = sim_part(0.0);
  for (const double theta : {0.0, 200.0, 800.0})
    for (const double i_a : {1e-3, 20e-3}) {
      double tj = 298.15;
      for (int k = 0; k < 200; ++k) {
        const double vf = part.dc.n * thermal_voltage_v(tj) * std::log1p(i_a / is_at(part.dc.is_a, part.dc.n, tj)) + i_a * part.dc.rs_ohm;
        tj = 298.15 + theta * i_a * vf;
      }
      const Json a = run_design("junction-temp", &part, {{"current_a", i_a}, {"theta_k_per_w", theta}, {"ambient_k", 298.15}});
      INFO("theta " << theta << ", I " << i_a << ": " << a.dump());
      CHECK(value_of(a, "tj_k") == Approx(tj).margin(1e-6));
      CHECK(value_of(a, "rf_power_w") == 0.0);
      CHECK(value_of(a, "diode_power_w") == Approx((tj - 298.15) / std::max(theta, 1e-300)).epsilon(1e-6).margin(theta == 0 ? 1.0 : 0.0));
      CHECK(a["junction"]["temp_k"].get<double>() == Approx(tj).margin(1e-6));
    }
  CHECK_THROWS_AS(run_design("junction-temp", &part, {{"current_a", 1e-3}, {"theta_k_per_w", 100.0}, {"temp_k", 350.0}}),
                  DesignInputError);
}

TEST_CASE("junction-temp: loss at Tj, its shift and the diode's RF share match ngspice at that temperature",
          "[reference][ngspice]") {
  // Source: ngspice (Debian package) .ac at temp = Tj and at 27 degC, the
  // series switch at 10 mA (TT = 5 ns, Cj(V)); the diode's RF power from
  // ngspice's node voltages, Re(Vd*conj(I))/2.
  const DesignPart part = sim_part(5e-9);
  const double i_a = 10e-3, p_w = 1e-3, theta = 5000.0;  // a hot small part: Tj well above ambient
  const double emf = emf_peak_from_power_v(p_w, 50.0);
  const auto cold = ngspice_series_at(part, i_a, t27_k);
  double worst = 0.0;
  for (std::size_t k = 0; k < cold.size(); ++k) {
    const double f = cold[k].freq;
    const Json a = run_design("junction-temp", &part,
                              {{"current_a", i_a}, {"theta_k_per_w", theta}, {"power_w", p_w}, {"freq_hz", f}, {"ambient_k", t27_k}});
    const double tj = value_of(a, "tj_k");
    const auto hot = ngspice_series_at(part, i_a, tj);
    INFO(f << " Hz, Tj " << tj << " K: " << a.dump());
    CHECK(value_of(a, "loss_ambient_db") == Approx(cold[k].loss_db).margin(0.01));
    CHECK(value_of(a, "loss_db") == Approx(hot[k].loss_db).margin(0.01));
    CHECK(value_of(a, "loss_shift_db") == Approx(hot[k].loss_db - cold[k].loss_db).margin(0.01));
    CHECK(value_of(a, "rf_power_w") == Approx(hot[k].diode_w_per_v2 * emf * emf).epsilon(1e-3));
    worst = std::max(worst, std::abs(value_of(a, "loss_db") - hot[k].loss_db));
    if (k == 0) WARN("at 1 MHz: Tj " << tj << " K, loss shift " << value_of(a, "loss_shift_db") << " dB (ngspice "
                                      << hot[k].loss_db - cold[k].loss_db << ")");
  }
  WARN("largest loss difference from ngspice at Tj: " << worst << " dB");
}

// ---- c. the bias network --------------------------------------------------------------

namespace {

struct NetworkCase {
  Json inputs;
  bool feed_diode, ferrite, bypass;
};

void check_network(const DesignPart& part, const NetworkCase& c, double* worst_db) {
  const Json a = run_design("bias-network", &part, c.inputs);
  INFO(a.dump());
  REQUIRE(a["achievable"] == true);
  const double cb = value_of(a, "cblock_f"), l = value_of(a, "choke_h"), i_a = value_of(a, "bias_current_a");
  const double vs = c.inputs["supply_v"].get<double>(), rb = c.inputs["bias_resistor_ohm"].get<double>();
  const junco::test::Ngspice ng("biasnet");
  std::ostringstream f;
  f.precision(15);
  // Without the isolating diode the feed point F is G itself.
  const std::string fe = c.feed_diode ? "f" : "g";
  f << "series switch with its bias network\nV1 s 0 DC 0 AC 1\nRg s p1 50\nCb1 p1 a " << cb << "\nD1 a k dut\nCb2 k p2 " << cb
    << "\nRL p2 0 50\nL1 a " << fe << " " << l << "\nL2 k m " << l << "\nVm m 0 DC 0\n";
  if (c.ferrite)
    f << "Rf1 a " << fe << " " << c.inputs["ferrite_r_ohm"].get<double>() << "\nRf2 k m " << c.inputs["ferrite_r_ohm"].get<double>() << "\n";
  if (c.feed_diode) f << "D2 g f dut\n";
  f << "Rb g sup " << rb << "\nVsup sup 0 DC " << vs << "\n";
  if (c.inputs.contains("rground_ohm")) f << "Rgnd g 0 " << c.inputs["rground_ohm"].get<double>() << "\n";
  if (c.bypass) f << "Cbyp g 0 " << c.inputs["cbypass_f"].get<double>() << "\n";
  f << model_card(part) << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n.control\nop\nprint i(vm)\n"
    << "ac dec 6 1e6 1e9\nset wr_singlescale\nwrdata " << ng.path("ac.txt") << " vm(p2) vm(g)\n.endc\n.end\n";
  const std::string netlist = f.str();
  const auto run = ng.run(netlist, "net");
  // `print i(vm)` prints "i(vm) = -7.68e-03": the return current flows up through Vm.
  const auto at = run.out.find("i(vm) = ");
  REQUIRE(at != std::string::npos);
  const double ngspice_i = std::abs(std::stod(run.out.substr(at + 8)));
  CHECK(i_a == Approx(ngspice_i).epsilon(1e-6));
  const auto rows = read_columns(ng.path("ac.txt"), 3);
  REQUIRE(rows.size() == 19);
  BiasNetwork net;
  net.supply_v = vs;
  net.rbias_ohm = rb;
  net.rground_ohm = c.inputs.value("rground_ohm", 0.0);
  net.feed_diode = c.feed_diode;
  net.cblock_f = cb;
  net.choke_h = l;
  net.ferrite_r_ohm = c.inputs.value("ferrite_r_ohm", 0.0);
  net.cbypass_f = c.inputs.value("cbypass_f", 0.0);
  for (const auto& r : rows) {
    const auto x = network_response(net, part.dc, part.charge(), i_a, r[0], part.temp_k);
    const double loss = db(0.5 / r[1]), leak = db(r[2] / 0.5);
    INFO(r[0] << " Hz: loss ngspice " << loss << " ours " << x.loss_db << "; leak ngspice " << leak << " ours " << x.supply_leak_db);
    CHECK(x.loss_db == Approx(loss).margin(0.1));
    CHECK(x.supply_leak_db == Approx(leak).margin(0.1));
    *worst_db = std::max({*worst_db, std::abs(x.loss_db - loss), std::abs(x.supply_leak_db - leak)});
  }
  CHECK(value_of(a, "loss_low_db") == Approx(db(0.5 / rows.front()[1])).margin(0.1));
  CHECK(value_of(a, "loss_high_db") == Approx(db(0.5 / rows.back()[1])).margin(0.1));
}

}  // namespace

TEST_CASE("bias-network: diode current and loss and supply leakage match ngspice .op and .ac, 1 MHz to 1 GHz",
          "[reference][ngspice]") {
  // Source: ngspice (Debian package) .op and .ac of the full netlist (blocks,
  // chokes or ferrites R||L, Rb, Rgnd, isolating diode, bypass C). Target
  // (issue 15): 0.1 dB.
  const DesignPart part = sim_part(5e-9);
  double worst = 0.0;
  check_network(part, {{{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"rground_ohm", 1000.0}}, false, false, false}, &worst);
  check_network(part,
                {{{"supply_v", 12.0}, {"bias_resistor_ohm", 1000.0}, {"rground_ohm", 2200.0}, {"feed_diode", "same"}, {"ferrite_r_ohm", 300.0},
                  {"cbypass_f", 100e-12}, {"ratio", 5.0}},
                 true, true, true},
                &worst);
  check_network(part, {{{"supply_v", 3.3}, {"bias_resistor_ohm", 150.0}, {"cblock_f", 1e-9}, {"choke_h", 1e-6}}, false, false, false}, &worst);
  WARN("largest difference from ngspice, bias network: " << worst << " dB");
  CHECK(worst < 0.01);
}

namespace {

// The shunt switch with its bias network (design/network.hpp): the line
// between the blocks carries the anode, the cathode is grounded, the feed
// comes in through the choke. on: the supply as given; off: reversed, no
// isolating diode. Loss (or isolation) and supply leakage per frequency
// against ngspice .op and .ac of the full netlist, and the calculator's band
// edges against the same rows.
void check_shunt_network(const DesignPart& part, const NetworkCase& c, bool on, double* worst_db) {
  Json inputs = c.inputs;
  inputs["switch"] = "shunt";
  inputs["state"] = on ? "on" : "off";
  const Json a = run_design("bias-network", &part, inputs);
  INFO(a.dump());
  REQUIRE(a["achievable"] == true);
  const double cb = value_of(a, "cblock_f"), l = value_of(a, "choke_h");
  const double vs = c.inputs["supply_v"].get<double>(), rb = c.inputs["bias_resistor_ohm"].get<double>();
  const junco::test::Ngspice ng("shuntnet");
  std::ostringstream f;
  f.precision(15);
  const std::string fe = c.feed_diode ? "f" : "g";
  f << "shunt switch with its bias network\nV1 s 0 DC 0 AC 1\nRg s p1 50\nCb1 p1 a " << cb << "\nD1 a m dut\nVm m 0 DC 0\nCb2 a p2 " << cb
    << "\nRL p2 0 50\nL1 a " << fe << " " << l << "\n";
  if (c.ferrite) f << "Rf1 a " << fe << " " << c.inputs["ferrite_r_ohm"].get<double>() << "\n";
  if (c.feed_diode) f << "D2 g f dut\n";
  f << "Rb g sup " << rb << "\nVsup sup 0 DC " << (on ? vs : -vs) << "\n";
  if (c.inputs.contains("rground_ohm")) f << "Rgnd g 0 " << c.inputs["rground_ohm"].get<double>() << "\n";
  if (c.bypass) f << "Cbyp g 0 " << c.inputs["cbypass_f"].get<double>() << "\n";
  f << model_card(part) << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n.control\nop\nprint i(vm) v(a)\n"
    << "ac dec 6 1e6 1e9\nset wr_singlescale\nwrdata " << ng.path("ac.txt") << " vm(p2) vm(g)\n.endc\n.end\n";
  const auto run = ng.run(f.str(), "net");
  const auto at = run.out.find("i(vm) = ");
  REQUIRE(at != std::string::npos);
  const double ngspice_i = std::abs(std::stod(run.out.substr(at + 8)));
  BiasNetwork net;
  net.supply_v = vs;
  net.rbias_ohm = rb;
  net.rground_ohm = c.inputs.value("rground_ohm", 0.0);
  net.feed_diode = c.feed_diode;
  net.cblock_f = cb;
  net.choke_h = l;
  net.ferrite_r_ohm = c.inputs.value("ferrite_r_ohm", 0.0);
  net.cbypass_f = c.inputs.value("cbypass_f", 0.0);
  net.mount = SwitchKind::shunt;
  const auto b = network_bias(net, part.dc, part.temp_k);
  if (on) {
    CHECK(value_of(a, "bias_current_a") == Approx(ngspice_i).epsilon(1e-6));
  } else {
    // The diode's reverse bias is the feed's Thevenin voltage; ngspice's v(a) is its anode.
    const auto va = run.out.find("v(a) = ");
    REQUIRE(va != std::string::npos);
    CHECK(value_of(a, "reverse_v") == Approx(-std::stod(run.out.substr(va + 7))).epsilon(1e-5));
  }
  const auto rows = read_columns(ng.path("ac.txt"), 3);
  REQUIRE(rows.size() == 19);
  for (const auto& r : rows) {
    const auto zd = on ? diode_small_signal_impedance(part.dc, part.charge(), b.i_a, r[0], part.temp_k)
                       : diode_off_impedance(part.dc, part.charge(), b.thevenin_v, r[0], {}, part.temp_k);
    const auto x = network_response(net, zd, zd, r[0]);
    const double loss = db(0.5 / r[1]), leak = db(r[2] / 0.5);
    INFO((on ? "on " : "off ") << r[0] << " Hz: ngspice " << loss << " ours " << x.loss_db << "; leak ngspice " << leak << " ours "
                               << x.supply_leak_db);
    CHECK(x.loss_db == Approx(loss).margin(0.1));
    CHECK(x.supply_leak_db == Approx(leak).margin(0.1));
    *worst_db = std::max({*worst_db, std::abs(x.loss_db - loss), std::abs(x.supply_leak_db - leak)});
  }
  // A biased shunt switch blocks (isolation), an unbiased one passes (insertion loss).
  CHECK(value_of(a, on ? "isolation_low_db" : "loss_low_db") == Approx(db(0.5 / rows.front()[1])).margin(0.1));
  CHECK(value_of(a, on ? "isolation_high_db" : "loss_high_db") == Approx(db(0.5 / rows.back()[1])).margin(0.1));
}

}  // namespace

TEST_CASE("bias-network, shunt switch on and off: diode current, isolation or loss and supply leakage match ngspice, 1 MHz to 1 GHz",
          "[reference][ngspice]") {
  // Source: ngspice (Debian package) .op and .ac of the full shunt netlist.
  // Target (issue 15): 0.1 dB.
  const DesignPart part = sim_part(5e-9);
  double worst = 0.0;
  const NetworkCase plain{{{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"rground_ohm", 1000.0}}, false, false, false};
  check_shunt_network(part, plain, true, &worst);
  check_shunt_network(part, plain, false, &worst);
  const NetworkCase full{{{"supply_v", 12.0}, {"bias_resistor_ohm", 1000.0}, {"rground_ohm", 2200.0}, {"feed_diode", "same"},
                          {"ferrite_r_ohm", 300.0}, {"cbypass_f", 100e-12}, {"ratio", 5.0}},
                         true, true, true};
  check_shunt_network(part, full, true, &worst);
  const NetworkCase off{{{"supply_v", 12.0}, {"bias_resistor_ohm", 1000.0}, {"rground_ohm", 2200.0}, {"ferrite_r_ohm", 300.0},
                         {"cbypass_f", 100e-12}, {"ratio", 5.0}},
                        false, true, true};
  check_shunt_network(part, off, false, &worst);
  WARN("largest difference from ngspice, shunt bias network: " << worst << " dB");
  CHECK(worst < 0.01);
  // The off state has no isolating diode (the two junctions would share the reverse bias by leakage).
  Json with_diode = full.inputs;
  with_diode["switch"] = "shunt";
  with_diode["state"] = "off";
  CHECK_THROWS_AS(run_design("bias-network", &part, with_diode), DesignInputError);
}

TEST_CASE("bias-network: sized reactances and the Rb/Rgnd divider", "[reference]") {
  // Common practice, no source (docs/references.md §6 [P]): |Xc| = Z0/10 and
  // |XL| = 10*Z0 at the band's low edge; the divider's Thevenin equivalent
  // (textbook circuit theory, from memory).
  const DesignPart part = sim_part(0.0);
  const Json a = run_design("bias-network", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"rground_ohm", 1000.0}, {"freq_low_hz", 10e6}});
  CHECK(1.0 / (2 * M_PI * 10e6 * value_of(a, "cblock_f")) == Approx(5.0));
  CHECK(2 * M_PI * 10e6 * value_of(a, "choke_h") == Approx(500.0));
  CHECK(value_of(a, "thevenin_v") == Approx(5.0 * 1000 / 1390));
  CHECK(value_of(a, "thevenin_ohm") == Approx(390.0 * 1000 / 1390));
  // The current solves Vth = I*Rth + Vd(I).
  const double i = value_of(a, "bias_current_a");
  CHECK(i * value_of(a, "thevenin_ohm") + diode_voltage_v(part.dc, i, t27_k) == Approx(value_of(a, "thevenin_v")).epsilon(1e-9));
  CHECK_THROWS_AS(run_design("bias-network", &part, {{"supply_v", 5.0}, {"bias_resistor_ohm", 390.0}, {"freq_low_hz", 1e9}, {"freq_high_hz", 1e8}}),
                  DesignInputError);
}

// ---- d. topologies --------------------------------------------------------------------

TEST_CASE("series-shunt: insertion loss and isolation match ngspice .ac, 1 MHz to 1 GHz", "[reference][ngspice]") {
  // Source: ngspice (Debian package) .ac: series diode then shunt diode across
  // the load, each on its own DC island (1 F blocks, 1 kH feeds), on at
  // current_a from a current source, off at reverse_v through a feed.
  const DesignPart part = sim_part(5e-9);
  const double i_a = 5e-3, vr = 5.0;
  const junco::test::Ngspice ng("sershunt");
  std::ostringstream f;
  f.precision(15);
  f << "series-shunt switch, both states\n";
  for (const std::string s : {"0", "1"}) {
    const bool through = s == "0";  // 0: series on, shunt off; 1: series off, shunt on
    f << "V" << s << " s" << s << " 0 DC 0 AC 1\nRg" << s << " s" << s << " p" << s << " 50\nCa" << s << " p" << s << " a" << s << " 1\n"
      << "Ds" << s << " a" << s << " k" << s << " dut\nLr" << s << " k" << s << " 0 1k\nCb" << s << " k" << s << " o" << s << " 1\n"
      << "RL" << s << " o" << s << " 0 50\nCc" << s << " o" << s << " h" << s << " 1\nDh" << s << " h" << s << " 0 dut\n";
    const auto on = [&](const std::string& node, const std::string& tag) { f << "I" << tag << s << " 0 " << node << s << " DC " << i_a << "\n"; };
    const auto off = [&](const std::string& node, const std::string& tag) {
      f << "V" << tag << s << " b" << tag << s << " 0 DC " << -vr << "\nL" << tag << s << " b" << tag << s << " " << node << s << " 1k\n";
    };
    if (through) {
      on("a", "s");
      off("h", "h");
    } else {
      off("a", "s");
      on("h", "h");
    }
  }
  f << model_card(part) << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n.control\nac dec 6 1e6 1e9\n"
    << "set wr_singlescale\nwrdata " << ng.path("ac.txt") << " vm(o0) vm(o1)\n.endc\n.end\n";
  ng.run(f.str(), "ac");
  const auto rows = read_columns(ng.path("ac.txt"), 3);
  REQUIRE(rows.size() == 19);
  double worst = 0.0;
  for (const auto& r : rows) {
    const Json a = run_design("series-shunt", &part, {{"current_a", i_a}, {"reverse_v", vr}, {"freq_hz", r[0]}});
    INFO(r[0] << " Hz: ngspice " << db(0.5 / r[1]) << " / " << db(0.5 / r[2]) << " dB: " << a.dump());
    CHECK(value_of(a, "insertion_loss_db") == Approx(db(0.5 / r[1])).margin(0.1));
    CHECK(value_of(a, "isolation_db") == Approx(db(0.5 / r[2])).margin(0.1));
    worst = std::max({worst, std::abs(value_of(a, "insertion_loss_db") - db(0.5 / r[1])), std::abs(value_of(a, "isolation_db") - db(0.5 / r[2]))});
  }
  WARN("largest difference from ngspice, series-shunt: " << worst << " dB");
  CHECK(worst < 0.01);
}

TEST_CASE("series-shunt: matched ports equal the ABCD cascade S21", "[reference]") {
  // Source: docs/references.md §6 (series Zs then shunt Zsh: S21 = 2/(A + B/Z0 +
  // C*Z0 + D), A = 1 + Zs/Zsh, B = Zs, C = 1/Zsh, D = 1) and E10's impedances
  // (Zon = 1 + j11.310, Zoff = 1 - j253.949 ohm at 6 GHz).
  const std::complex<double> zon(1.0, 11.310), zoff(1.0, -253.949);
  CHECK(series_shunt_db(zon, zoff, 50, 50) == Approx(series_shunt_loss_db(zon, zoff, 50)).margin(1e-12));
  CHECK(series_shunt_db(zoff, zon, 50, 50) == Approx(series_shunt_loss_db(zoff, zon, 50)).margin(1e-12));
}

TEST_CASE("attenuator: matched pi and T resistors are the textbook values", "[reference]") {
  // Source: the matched-attenuator design equations (K = 10^(A/20); T: Z0(K-1)/(K+1)
  // and 2*Z0*K/(K^2-1); pi: Z0(K+1)/(K-1) and Z0(K^2-1)/(2K)), as tabulated for
  // 50 ohm in RF handbooks; the values below from memory of those tables.
  struct Row {
    double db, t_series, t_shunt, pi_shunt, pi_series;
  };
  for (const Row& r : {Row{3, 8.55, 141.9, 292.4, 17.61}, Row{6, 16.61, 66.93, 150.5, 37.35}, Row{10, 25.97, 35.14, 96.25, 71.15},
                       Row{20, 40.91, 10.10, 61.11, 247.5}}) {
    const auto t = matched_pad(PadKind::tee, r.db, 50), p = matched_pad(PadKind::pi, r.db, 50);
    INFO(r.db << " dB");
    CHECK(t.series_ohm == Approx(r.t_series).epsilon(2e-3));
    CHECK(t.shunt_ohm == Approx(r.t_shunt).epsilon(2e-3));
    CHECK(p.shunt_ohm == Approx(r.pi_shunt).epsilon(2e-3));
    CHECK(p.series_ohm == Approx(r.pi_series).epsilon(2e-3));
    // matched: the designed pad gives its attenuation and no reflection
    CHECK(pad_response(PadKind::tee, t, 50, 50).loss_db == Approx(r.db).margin(1e-9));
    CHECK(pad_response(PadKind::pi, p, 50, 50).reflection < 1e-12);
    CHECK(pad_response(PadKind::tee, t, 50, 50).reflection < 1e-12);
  }
}

TEST_CASE("attenuator: attenuation against PIN bias current matches ngspice .ac with R(I) = R0 + K*I^-x", "[reference][ngspice]") {
  // Source: ngspice (Debian package) .ac of the pads with behavioural resistors
  // r = {R0 + K*pow(I, -x)} at the calculator's currents; the law itself is
  // docs/references.md §8 [P].
  const Json law{{"r0_ohm", 1.5}, {"k_ohm_a_x", 0.05}, {"x", 0.87}};
  struct Case {
    std::string pad;
    Json extra;
  };
  std::vector<Case> cases{{"pi", {{"target_db", 10.0}}},
                          {"tee", {{"target_db", 6.0}}},
                          {"pi", {{"series_current_a", 2e-3}, {"shunt_current_a", 0.3e-3}}},
                          {"tee", {{"series_current_a", 0.5e-3}, {"shunt_current_a", 5e-3}}}};
  const junco::test::Ngspice ng("pad");
  std::ostringstream f;
  f.precision(15);
  f << "PIN attenuators\n.param r0=1.5 k=0.05 x=0.87\n";
  std::vector<double> ours, reflection;
  std::string vectors;
  for (std::size_t n = 0; n < cases.size(); ++n) {
    Json in = law;
    in["pad"] = cases[n].pad;
    in.update(cases[n].extra);
    const Json a = run_design("attenuator", nullptr, in);
    REQUIRE(a["achievable"] == true);
    ours.push_back(value_of(a, "pad_loss_db"));
    reflection.push_back(value_of(a, "input_reflection"));
    if (cases[n].extra.contains("target_db")) CHECK(ours.back() == Approx(cases[n].extra["target_db"].get<double>()).margin(1e-9));
    const bool design = cases[n].extra.contains("target_db");
    const double is = design ? value_of(a, "series_current_a") : in["series_current_a"].get<double>();
    const double ish = design ? value_of(a, "shunt_current_a") : in["shunt_current_a"].get<double>();
    const std::string s = std::to_string(n);
    const auto r = [&](double i) { std::ostringstream e; e.precision(15); e << "r={r0 + k*pow(" << i << ", -x)}"; return e.str(); };
    f << "V" << s << " s" << s << " 0 DC 0 AC 1\nRg" << s << " s" << s << " i" << s << " 50\nRL" << s << " o" << s << " 0 50\n";
    if (cases[n].pad == "pi")
      f << "Rp1" << s << " i" << s << " 0 " << r(ish) << "\nRs" << s << " i" << s << " o" << s << " " << r(is) << "\nRp2" << s << " o" << s
        << " 0 " << r(ish) << "\n";
    else
      f << "Rs1" << s << " i" << s << " m" << s << " " << r(is) << "\nRp" << s << " m" << s << " 0 " << r(ish) << "\nRs2" << s << " m" << s
        << " o" << s << " " << r(is) << "\n";
    vectors += " vm(o" + s + ") vr(i" + s + ")";
  }
  f << ".control\nac dec 6 1e6 1e9\nset wr_singlescale\nwrdata " << ng.path("ac.txt") << vectors << "\n.endc\n.end\n";
  ng.run(f.str(), "ac");
  const auto rows = read_columns(ng.path("ac.txt"), 1 + 2 * cases.size());
  REQUIRE(rows.size() == 19);
  for (const auto& row : rows)
    for (std::size_t n = 0; n < cases.size(); ++n) {
      INFO(cases[n].pad << " " << cases[n].extra.dump() << " at " << row[0] << " Hz");
      const double v_out = row[1 + 2 * n], v_in = row[2 + 2 * n];
      CHECK(ours[n] == Approx(db(0.5 / v_out)).margin(0.1));
      CHECK(ours[n] == Approx(db(0.5 / v_out)).margin(1e-6));
      // The input's reflection from its voltage: Zin = Rg*Vin/(1 - Vin) (EMF 1 V).
      const double z_in = 50.0 * v_in / (1.0 - v_in);
      CHECK(reflection[n] == Approx(std::abs((z_in - 50.0) / (z_in + 50.0))).margin(1e-6));
    }
  // A target below what R0 allows is not achievable, and says why.
  Json in = law;
  in["pad"] = "pi";
  in["target_db"] = 0.2;  // a pi pad's series element near 1.15 ohm < R0
  const Json a = run_design("attenuator", nullptr, in);
  CHECK(a["achievable"] == false);
  CHECK(a["reason"].get<std::string>().find("R0") != std::string::npos);
}
