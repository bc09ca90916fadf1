#include "tools/junco/joint_report.hpp"

#include "tools/junco/rpc_client.hpp"

#include <cmath>
#include <cstdio>
#include <string>

namespace junco::cli {

namespace {

double num(const Json& j) { return j.is_number() ? j.get<double>() : std::nan(""); }

std::string estimate(const Json& e, const std::string& unit) {
  if (!e.is_object() || !e["value"].is_number()) return "not determined";
  const auto fmt = [&](double x, int digits) {
    if (!unit.empty()) return format_si(x, unit, digits);
    char t[32];
    std::snprintf(t, sizeof t, "%.*g", digits, x);
    return std::string(t);
  };
  std::string text = fmt(e["value"].get<double>(), 5);
  if (e["std_error"].is_number()) text += " ± " + fmt(e["std_error"].get<double>(), 2);
  return text;
}


std::string chi2(const Json& j) {
  char t[32];
  std::snprintf(t, sizeof t, "%.3g", num(j));
  return t;
}

}  // namespace

void print_joint_report(const Json& j) {
  const Json none = Json::object();
  const Json& ac = j.contains("ac_only") ? j["ac_only"] : none;
  std::printf("\n  DC-only, AC-only (rd = Rs + n·Vt/I) and joint AC+DC fits\n  %s%s%s%s\n", pad_columns("", 15).c_str(),
              pad_columns("DC only", 27).c_str(), pad_columns("AC alone", 27).c_str(), "DC + AC");
  const auto row = [&](const char* name, const char* key, const std::string& unit) {
    std::printf("  %s%s%s%s\n", pad_columns(name, 15).c_str(), pad_columns(estimate(j["dc_only"][key], unit), 27).c_str(),
                pad_columns(ac.contains(key) ? estimate(ac[key], unit) : "—", 27).c_str(), estimate(j["joint"][key], unit).c_str());
  };
  row("Is", "is_a", "A");
  row("n", "n", "");
  row("Rs", "rs_ohm", "Ω");
  std::printf("  %s%s%s%s\n", pad_columns("reduced chi2", 15).c_str(), pad_columns(chi2(j["dc_only"]["reduced_chi2"]), 27).c_str(),
              pad_columns(ac.contains("reduced_chi2") ? chi2(ac["reduced_chi2"]) : "—", 27).c_str(), chi2(j["joint"]["reduced_chi2"]).c_str());
  std::printf("  %s%s%s%s\n", pad_columns("readings", 15).c_str(),
              pad_columns(std::to_string(j["dc_only"]["dc_points"].get<long>()) + " DC", 27).c_str(),
              pad_columns(ac.contains("ac_points") ? std::to_string(ac["ac_points"].get<long>()) + " AC" : "—", 27).c_str(),
              (std::to_string(j["joint"]["dc_points"].get<long>()) + " DC + " + std::to_string(j["joint"]["ac_points"].get<long>()) + " AC").c_str());
  for (const char* which : {"dc_only", "ac_only", "joint"})
    if (j.contains(which) && !j[which]["ok"].get<bool>()) std::printf("  %s fit: %s\n", which, j[which]["message"].get<std::string>().c_str());
  const std::string verdict = j.value("verdict", std::string(j["agree"].get<bool>() ? "agree" : "DISAGREE"));
  std::printf("\n  verdict: %s\n", verdict == "agree"      ? "AC and DC agree within their uncertainties"
                                     : verdict == "DISAGREE" ? "AC and DC DISAGREE"
                                                             : ("AC and DC " + verdict + " (the stored fit's Rs agrees with the AC readings')").c_str());
  const std::string lines = j["agreement"].get<std::string>();
  std::size_t start = 0;
  while (start < lines.size()) {
    const auto end = lines.find('\n', start);
    std::printf("    %s\n", lines.substr(start, end - start).c_str());
    if (end == std::string::npos) break;
    start = end + 1;
  }
  if (j.contains("hint")) std::printf("  hint: %s\n", j["hint"].get<std::string>().c_str());
}

}  // namespace junco::cli
