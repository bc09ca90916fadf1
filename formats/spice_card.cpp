#include "formats/spice_card.hpp"

#include <cctype>
#include <cmath>
#include <cstdio>

namespace junco::fitting {

namespace {

std::string num(double v) {
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.6e", v);
  return buf;
}

std::string with_error(double value, double se, const char* unit) {
  std::string s = num(value) + " " + unit;
  s += std::isfinite(se) ? " +/- " + num(se) + " " + unit : std::string(" (standard error not determined)");
  return s;
}

// Comments must not break the card: one line each, no newline from a label.
std::string one_line(const std::string& text) {
  std::string out;
  for (char c : text) out += (c == '\n' || c == '\r') ? ' ' : c;
  return out;
}

}  // namespace

std::string spice_model_name(const std::string& label) {
  std::string name;
  for (char c : label) name += std::isalnum(static_cast<unsigned char>(c)) ? c : '_';
  if (name.empty() || !std::isalpha(static_cast<unsigned char>(name.front()))) name = "D" + name;
  return name;
}

std::string spice_model_card(const PartModel& part, const std::string& name) {
  const std::string model = name.empty() ? spice_model_name(part.part_label) : spice_model_name(name);
  const double tnom_c = part.temp_k - zero_celsius_k;
  std::string s;
  s += "* junco diode model: part " + one_line(part.part_label) + ", lot " + one_line(part.lot) + "\n";
  if (!part.run_id.empty()) s += "* run " + one_line(part.run_id) + "\n";
  for (const auto& note : part.notes) s += "* " + one_line(note) + "\n";
  char line[160];
  std::snprintf(line, sizeof line, "* fitted at %.2f K (TNOM = %.2f degC)\n", part.temp_k, tnom_c);
  s += line;
  s += "* IS = " + with_error(part.params.is_a, part.is_se_a, "A") + "\n";
  s += "* N  = " + with_error(part.params.n, part.n_se, "") + "\n";
  s += "* RS = " + with_error(part.params.rs_ohm, part.rs_se_ohm, "ohm") + "\n";
  if (std::isfinite(part.params.rsh_ohm))
    s += "* the fit's shunt RSH = " + num(part.params.rsh_ohm) + " ohm has no D-model parameter; add a resistor\n";
  if (std::isfinite(part.tt_s)) s += "* TT = " + with_error(part.tt_s, part.tt_se_s, "s") + " (stored charge: diffusion capacitance TT*gd)\n";
  if (std::isfinite(part.rms_residual))
    s += "* fit rms residual " + num(part.rms_residual) + " over " + std::to_string(part.points_used) + " points\n";
  s += ".model " + model + " D(IS=" + num(part.params.is_a) + " N=" + num(part.params.n) +
       " RS=" + num(part.params.rs_ohm);
  if (std::isfinite(part.cj0_f)) s += " CJO=" + num(part.cj0_f);
  if (std::isfinite(part.vj_v)) s += " VJ=" + num(part.vj_v);
  if (std::isfinite(part.m)) s += " M=" + num(part.m);
  if (std::isfinite(part.tt_s)) s += " TT=" + num(part.tt_s);
  std::snprintf(line, sizeof line, " EG=%.6g XTI=%.6g", part.law.eg_ev, part.law.xti);
  s += line;
  if (part.law.trs1_per_k != 0.0) s += " TRS1=" + num(part.law.trs1_per_k);
  if (part.law.trs2_per_k2 != 0.0) s += " TRS2=" + num(part.law.trs2_per_k2);
  std::snprintf(line, sizeof line, " TNOM=%.4g)\n", tnom_c);
  s += line;
  return s;
}

}  // namespace junco::fitting
