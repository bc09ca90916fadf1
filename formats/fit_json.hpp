// A forward fit as JSON, written in one place for the daemon's API (part.fit,
// schema/api) and `junco fit --json`, so the two read alike: every fitted
// value is an object {value, std_error} (null where not finite, e.g. Rsh when
// no shunt was fitted, or a standard error the fit could not determine).
#pragma once

#include "fitting/extract.hpp"

#include <nlohmann/json.hpp>

#include <vector>

namespace junco::fitting {

// A number for JSON: the value when finite, null otherwise (NaN: not
// determined or not measured; ±inf: none). The one home of that rule for
// every JSON junco writes from C++ numbers (formats, the daemon's API).
nlohmann::json number_or_null(double v);

// A matrix of numbers (covariance, correlation), each entry number_or_null.
nlohmann::json matrix_json(const std::vector<std::vector<double>>& m);

// {"value": x, "std_error": s}, each null when not finite.
nlohmann::json estimate_json(const Estimate& e);

// What every writer of a fit gives: status, message, is_a, n, rs_ohm,
// rsh_ohm (estimates as above), temp_k, cost, rms_residual (volts),
// points_used, warnings. Writers add their own keys (ids, file, ...).
nlohmann::json fit_result_json(const FitResult& r);

}  // namespace junco::fitting
