#include "formats/touchstone.hpp"

#include "units/si_text.hpp"

#include <cctype>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <stdexcept>

namespace junco::fitting {

using cplx = std::complex<double>;

namespace {

std::string trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return std::string(s);
}

// Sets *why and gives nullopt, so a parser can `return fail(why, ...)`.
std::nullopt_t fail(std::string* why, std::string text) {
  if (why) *why = std::move(text);
  return std::nullopt;
}

// The model's stored charge; absent C–V keys take the SPICE defaults, an
// absent CJO or TT means none.
JunctionCharge charge_of(const PartModel& m) {
  JunctionCharge c;
  if (std::isfinite(m.cj0_f)) c.cap.cj0_f = m.cj0_f;
  if (std::isfinite(m.vj_v)) c.cap.vj_v = m.vj_v;
  if (std::isfinite(m.m)) c.cap.m = m.m;
  if (std::isfinite(m.tt_s)) c.tt_s = m.tt_s;
  return c;
}

std::string num(double v) {
  char b[40];
  std::snprintf(b, sizeof b, "%.10g", v);
  return b;
}

}  // namespace

std::optional<BiasState> parse_bias_state(std::string_view text, std::string* why) {
  const std::string t = trim(text);
  const char last = t.empty() ? '\0' : t.back();
  BiasState b;
  std::string inner;
  if (last == 'A' || last == 'a') {
    const auto v = units::parse_si(t, "A", &inner);
    if (!v) return fail(why, "bias '" + t + "': " + inner);
    if (!(*v > 0.0) || *v > 10.0) return fail(why, "bias '" + t + "': a forward current must be > 0 and ≤ 10 A");
    b.kind = BiasState::Kind::forward_current;
    b.value = *v;
    return b;
  }
  if (last == 'V' || last == 'v') {
    const auto v = units::parse_si(t, "V", &inner);
    if (!v) return fail(why, "bias '" + t + "': " + inner);
    if (*v > 0.0)
      return fail(why, "bias '" + t + "': a voltage bias is a reverse bias, written negative (e.g. -5V); give a forward bias as a current (e.g. 10mA)");
    if (*v < -1000.0) return fail(why, "bias '" + t + "': reverse voltage beyond 1000 V");
    b.kind = BiasState::Kind::reverse_voltage;
    b.value = -*v + 0.0;  // + 0.0: "-0V" is 0, not −0
    return b;
  }
  return fail(why, "bias '" + t + "': give a forward current with its unit (10mA) or a reverse voltage (-5V)");
}

std::string bias_state_text(const BiasState& bias) {
  return bias.kind == BiasState::Kind::forward_current ? units::format_si(bias.value, "A") + " forward"
                                                       : units::format_si(bias.value, "V") + " reverse";
}

std::optional<std::vector<double>> parse_frequency_list(std::string_view text, std::string* why) {
  const std::string t = trim(text);
  std::vector<double> f;
  std::string inner;
  const auto first_colon = t.find(':');
  if (first_colon != std::string::npos) {
    const auto second_colon = t.find(':', first_colon + 1);
    if (second_colon == std::string::npos)
      return fail(why, "frequencies '" + t + "': a sweep is START:STOP:Nlog or START:STOP:Nlin");
    const auto a = units::parse_si(trim(t.substr(0, first_colon)), "Hz", &inner);
    if (!a) return fail(why, "frequencies '" + t + "': " + inner);
    const auto b = units::parse_si(trim(t.substr(first_colon + 1, second_colon - first_colon - 1)), "Hz", &inner);
    if (!b) return fail(why, "frequencies '" + t + "': " + inner);
    std::string spec = trim(t.substr(second_colon + 1));
    for (auto& c : spec) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    const bool log = spec.size() > 3 && spec.ends_with("log");
    const bool lin = spec.size() > 3 && spec.ends_with("lin");
    const std::string count_text = spec.substr(0, spec.size() >= 3 ? spec.size() - 3 : 0);
    std::size_t used = 0;
    long long n = 0;
    try {
      n = std::stoll(count_text, &used);
    } catch (const std::exception&) {
      used = 0;
    }
    if (!(log || lin) || used != count_text.size() || count_text.empty())
      return fail(why, "frequencies '" + t + "': the point count is N followed by log or lin (e.g. 101log)");
    if (n < 2 || static_cast<unsigned long long>(n) > max_frequency_points)
      return fail(why, "frequencies '" + t + "': point count " + std::to_string(n) + " is outside 2.." +
                           std::to_string(max_frequency_points));
    if (!(*a > 0.0) || !(*b > *a)) return fail(why, "frequencies '" + t + "': need 0 < START < STOP");
    for (long long k = 0; k < n; ++k) {
      const double x = static_cast<double>(k) / static_cast<double>(n - 1);
      f.push_back(log ? *a * std::pow(*b / *a, x) : *a + (*b - *a) * x);
    }
    f.back() = *b;  // the stop frequency exactly, not pow's rounding of it
    return f;
  }
  try {
    f = units::parse_si_list(t, "Hz");
  } catch (const std::invalid_argument& e) {
    return fail(why, std::string("frequencies '") + t + "': " + e.what());
  }
  if (f.empty()) return fail(why, "frequencies: empty list");
  if (f.size() > max_frequency_points)
    return fail(why, "frequencies: " + std::to_string(f.size()) + " points, more than " + std::to_string(max_frequency_points));
  for (std::size_t k = 0; k < f.size(); ++k) {
    if (!(f[k] > 0.0)) return fail(why, "frequencies '" + t + "': " + num(f[k]) + " Hz is not > 0");
    if (k > 0 && !(f[k] > f[k - 1]))
      return fail(why, "frequencies '" + t + "': not strictly increasing at " + num(f[k]) + " Hz");
  }
  return f;
}

cplx chip_impedance(const PartModel& model, const BiasState& bias, double freq_hz) {
  const JunctionCharge charge = charge_of(model);
  if (bias.kind == BiasState::Kind::forward_current)
    return diode_small_signal_impedance(model.params, charge, bias.value, freq_hz, model.temp_k);
  return diode_off_impedance(model.params, charge, bias.value, freq_hz, Parasitics{}, model.temp_k);
}

SMatrix element_s_matrix(SwitchKind mount, cplx z, double z0) {
  SMatrix m;
  cplx refl, thru;
  if (mount == SwitchKind::series) {
    refl = z / (z + 2.0 * z0);
    thru = 2.0 * z0 / (z + 2.0 * z0);
  } else {
    refl = -z0 / (2.0 * z + z0);
    thru = 2.0 * z / (2.0 * z + z0);
  }
  m.s = {refl, thru, thru, refl};
  return m;
}

std::string touchstone_request_problem(const PartModel& model, const TouchstoneRequest& req) {
  if (!(model.params.is_a > 0.0) || !(model.params.n > 0.0) || !(model.params.rs_ohm >= 0.0))
    return "model: IS and N must be > 0 and RS ≥ 0";
  if (!(model.temp_k > 0.0)) return "model: temperature must be > 0 K";
  if (req.freqs_hz.empty()) return "frequencies: none given";
  if (req.freqs_hz.size() > max_frequency_points) return "frequencies: more than " + std::to_string(max_frequency_points);
  for (std::size_t k = 0; k < req.freqs_hz.size(); ++k)
    if (!(req.freqs_hz[k] > 0.0) || !std::isfinite(req.freqs_hz[k]) || (k > 0 && !(req.freqs_hz[k] > req.freqs_hz[k - 1])))
      return "frequencies: must be positive and strictly increasing (at " + num(req.freqs_hz[k]) + " Hz)";
  if (!(req.z0_ohm > 0.0) || req.z0_ohm > 1e6) return "z0: " + num(req.z0_ohm) + " ohm is outside (0, 1e6]";
  if (!(req.package.ls_h >= 0.0) || req.package.ls_h > 1e-6) return "package Ls: " + num(req.package.ls_h) + " H is outside [0, 1 uH]";
  if (!(req.package.cp_f >= 0.0) || req.package.cp_f > 1e-9) return "package Cp: " + num(req.package.cp_f) + " F is outside [0, 1 nF]";
  if (req.bias.kind == BiasState::Kind::forward_current && (!(req.bias.value > 0.0) || req.bias.value > 10.0))
    return "bias: forward current " + num(req.bias.value) + " A is outside (0, 10 A]";
  if (req.bias.kind == BiasState::Kind::reverse_voltage && (!(req.bias.value >= 0.0) || req.bias.value > 1000.0))
    return "bias: reverse voltage " + num(req.bias.value) + " V is outside [0, 1000 V]";
  return "";
}

std::string touchstone_s2p(const PartModel& model, const TouchstoneRequest& req) {
  if (const std::string p = touchstone_request_problem(model, req); !p.empty()) throw std::invalid_argument(p);
  const JunctionCharge charge = charge_of(model);
  std::string s;
  // Comment header: everything needed to know what the numbers are of.
  s += "! junco two-port of a fitted diode (Touchstone 1.1)\n";
  s += "! part " + (model.part_label.empty() ? std::string("-") : model.part_label) + ", lot " +
       (model.lot.empty() ? std::string("-") : model.lot) + (model.run_id.empty() ? "" : ", run " + model.run_id) + "\n";
  s += "! mount " + std::string(to_string(req.mount)) +
       (req.mount == SwitchKind::series ? " (diode between port 1 and port 2)" : " (diode from the through line to ground)") +
       ", bias " + bias_state_text(req.bias) + ", T " + num(model.temp_k) + " K\n";
  s += "! model IS=" + num(model.params.is_a) + " N=" + num(model.params.n) + " RS=" + num(model.params.rs_ohm);
  if (charge.cap.cj0_f > 0.0)
    s += " CJO=" + num(charge.cap.cj0_f) + " VJ=" + num(charge.cap.vj_v) + " M=" + num(charge.cap.m) + " FC=" + num(charge.cap.fc);
  else
    s += " (no C-V law in the model: junction capacitance left out)";
  s += " TT=" + num(charge.tt_s) + "\n";
  if (req.package.ls_h > 0.0 || req.package.cp_f > 0.0)
    s += "! package Ls=" + num(req.package.ls_h) + " H in series, Cp=" + num(req.package.cp_f) + " F across the leads\n";
  else
    s += "! package: not known, left out (chip only)\n";
  s += "# Hz S RI R " + num(req.z0_ohm) + "\n";
  s += "! freq_hz re_s11 im_s11 re_s21 im_s21 re_s12 im_s12 re_s22 im_s22\n";
  char line[320];
  for (const double f : req.freqs_hz) {
    const cplx z = packaged_impedance(chip_impedance(model, req.bias, f), req.package, f);
    const SMatrix m = element_s_matrix(req.mount, z, req.z0_ohm);
    std::snprintf(line, sizeof line, "%.9g %.12g %.12g %.12g %.12g %.12g %.12g %.12g %.12g\n", f, m.s11().real(),
                  m.s11().imag(), m.s21().real(), m.s21().imag(), m.s12().real(), m.s12().imag(), m.s22().real(),
                  m.s22().imag());
    s += line;
  }
  return s;
}

}  // namespace junco::fitting
