#include "formats/fit_json.hpp"

#include <cmath>

namespace junco::fitting {

namespace {
nlohmann::json nullable(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }
}  // namespace

nlohmann::json estimate_json(const Estimate& e) { return {{"value", nullable(e.value)}, {"std_error", nullable(e.std_error)}}; }

nlohmann::json fit_result_json(const FitResult& r) {
  return {{"status", to_string(r.status)},
          {"message", r.message},
          {"is_a", estimate_json(r.is_a)},
          {"n", estimate_json(r.n)},
          {"rs_ohm", estimate_json(r.rs_ohm)},
          {"rsh_ohm", estimate_json(r.rsh_ohm)},
          {"temp_k", nullable(r.temp_k)},
          {"cost", nullable(r.cost)},
          {"rms_residual", nullable(r.rms_residual)},
          {"points_used", r.points_used},
          {"warnings", r.warnings}};
}

}  // namespace junco::fitting
