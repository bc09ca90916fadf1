// part.export formats and the stored fit as a fitting::FitResult again.
// json: the part, its latest run with every reading, and the latest fit.
// csv: raw readings, one row per point, SI units in the header.
// spice: a `.model` card from the latest converged fit (IS, N, RS; TNOM in °C).
#pragma once

#include "daemon/store.hpp"
#include "fitting/extract.hpp"

#include <optional>
#include <string>

namespace junco::daemon {

Json export_json(const PartRow& part, const Json& readings, const std::optional<Json>& fit);
std::string export_csv(const Json& points);
std::string export_spice(const PartRow& part, const Json& fit);

// Rebuilds what the figures need (values, standard errors, correlation).
fitting::FitResult fit_result_from_json(const Json& fit);

}  // namespace junco::daemon
