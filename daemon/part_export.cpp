#include "daemon/part_export.hpp"

#include <cctype>
#include <cmath>
#include <cstdio>
#include <sstream>

namespace junco::daemon {

namespace {

double num_or_nan(const Json& j) { return j.is_number() ? j.get<double>() : kNaN; }

fitting::Estimate estimate(const Json& j) {
  if (!j.is_object()) return {};
  return {num_or_nan(j.value("value", Json())), num_or_nan(j.value("std_error", Json()))};
}

std::string csv_field(const Json& v) {
  if (v.is_null()) return "";
  if (v.is_string()) return v.get<std::string>();
  if (v.is_number_float()) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.9g", v.get<double>());
    return buf;
  }
  return v.dump();
}

// SPICE model names: letters, digits, underscore; must start with a letter.
std::string model_name(const PartRow& part) {
  std::string out = "D_";
  for (char c : part.lot + "_" + part.label) out += std::isalnum(static_cast<unsigned char>(c)) ? c : '_';
  return out;
}

}  // namespace

Json export_json(const PartRow& part, const Json& readings, const std::optional<Json>& fit) {
  return {{"part", to_json(part)}, {"run", readings.value("run", Json())}, {"points", readings.value("points", Json::array())},
          {"fit", fit ? *fit : Json(nullptr)}};
}

std::string export_csv(const Json& points) {
  static const char* cols[] = {"run_id", "seq", "kind", "set_value", "set_unit", "supply_v", "v", "i_a", "ac_in_v",
                               "ac_out_v", "ac_unit", "freq_hz", "temp_k", "t_s", "flags"};
  std::ostringstream os;
  for (std::size_t k = 0; k < std::size(cols); ++k) os << (k ? "," : "") << cols[k];
  os << "\n";
  for (const auto& p : points) {
    for (std::size_t k = 0; k < std::size(cols); ++k) os << (k ? "," : "") << csv_field(p.value(cols[k], Json()));
    os << "\n";
  }
  return os.str();
}

std::string export_spice(const PartRow& part, const Json& fit) {
  const auto g = [](double x) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.6g", x);
    return std::string(buf);
  };
  const double temp_k = num_or_nan(fit.value("temp_k", Json()));
  std::ostringstream os;
  os << "* junco fit " << fit.value("fit_id", 0) << ": lot " << part.lot << ", part " << part.label << ", "
     << fit.value("points_used", 0) << " points\n";
  os << ".model " << model_name(part) << " D(IS=" << g(estimate(fit["is_a"]).value) << " N=" << g(estimate(fit["n"]).value)
     << " RS=" << g(estimate(fit["rs_ohm"]).value);
  // TNOM is in °C in SPICE (ngspice dio.c / diosetup.c).
  if (std::isfinite(temp_k)) os << " TNOM=" << g(temp_k - 273.15);
  os << ")\n";
  return os.str();
}

fitting::FitResult fit_result_from_json(const Json& fit) {
  fitting::FitResult r;
  const std::string status = fit.value("status", "");
  r.status = status == "converged" ? fitting::FitStatus::converged
             : status == "no_convergence" ? fitting::FitStatus::no_convergence
             : status == "failed" ? fitting::FitStatus::failed
                                  : fitting::FitStatus::insufficient;
  r.is_a = estimate(fit.value("is_a", Json()));
  r.n = estimate(fit.value("n", Json()));
  r.rs_ohm = estimate(fit.value("rs_ohm", Json()));
  r.rsh_ohm = estimate(fit.value("rsh_ohm", Json()));
  r.temp_k = num_or_nan(fit.value("temp_k", Json()));
  r.points_used = fit.value("points_used", 0u);
  const Json detail = fit.value("detail", Json::object());
  if (detail.contains("parameter_names")) r.parameter_names = detail["parameter_names"].get<std::vector<std::string>>();
  if (detail.contains("correlation"))
    for (const auto& row : detail["correlation"]) {
      std::vector<double> v;
      for (const auto& c : row) v.push_back(num_or_nan(c));
      r.correlation.push_back(v);
    }
  return r;
}

}  // namespace junco::daemon
