#include "formats/fit_json.hpp"

#include <cmath>

namespace junco::fitting {

nlohmann::json number_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

nlohmann::json matrix_json(const std::vector<std::vector<double>>& m) {
  nlohmann::json out = nlohmann::json::array();
  for (const auto& row : m) {
    nlohmann::json r = nlohmann::json::array();
    for (double c : row) r.push_back(number_or_null(c));
    out.push_back(std::move(r));
  }
  return out;
}

nlohmann::json estimate_json(const Estimate& e) { return {{"value", number_or_null(e.value)}, {"std_error", number_or_null(e.std_error)}}; }

nlohmann::json fit_result_json(const FitResult& r) {
  return {{"status", to_string(r.status)},
          {"message", r.message},
          {"is_a", estimate_json(r.is_a)},
          {"n", estimate_json(r.n)},
          {"rs_ohm", estimate_json(r.rs_ohm)},
          {"rsh_ohm", estimate_json(r.rsh_ohm)},
          {"temp_k", number_or_null(r.temp_k)},
          {"cost", number_or_null(r.cost)},
          {"rms_residual", number_or_null(r.rms_residual)},
          {"points_used", r.points_used},
          {"warnings", r.warnings}};
}

}  // namespace junco::fitting
