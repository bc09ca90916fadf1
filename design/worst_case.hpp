// Lot worst case of a design calculator: the calculator run on every fitted
// part of a lot (the lot's measured spread) at every corner of the given
// tolerances, and per result line the least and the greatest value with the
// part and corner that set it.
//
// Corners are the vertices of the tolerance box: junction temperature at each
// of temps_k (none: the part's own), supply_v × (1 ± supply_tol) when the
// calculator takes a supply, and each bias resistor input (bias_resistor_ohm,
// dc_return_ohm, when given and finite > 0) × (1 ± resistor_tol). Vertex
// analysis finds the extremes of a result that is monotonic in each
// tolerance over the box (common practice, no source); one with an extreme
// inside the box is not found (docs/design.md says so). The parts are the
// lot's spread itself, so no fit covariance is propagated here.
#pragma once

#include "design/calculators.hpp"

#include <nlohmann/json.hpp>

#include <string>
#include <vector>

namespace junco::fitting {

struct WorstCaseCorners {
  std::vector<double> temps_k;  // junction temperatures; empty: each part's own (or inputs.temp_k)
  double supply_tol = 0.0;      // relative: 0.05 is ± 5 %
  double resistor_tol = 0.0;    // relative, on bias_resistor_ohm and dc_return_ohm
};

// The bias resistor inputs resistor_tol applies to.
const std::vector<std::string>& worst_case_resistor_keys();

// Answer (schema/api/lot.design.json "result" without lot/left_out):
//   {"calculator", "parts", "corners", "evaluations",
//    "result": [{key, label, unit, "min": {value, part, part_index, corner}, "max": {...}}],
//    "not_achievable": [{part, part_index, corner, reason}] (the first 20), "not_achievable_count",
//    "failures": [{part, part_index, corner, failure}] (the first 20)}
// corner: {"temp_k"?, "supply_v"?, "bias_resistor_ohm"?, "dc_return_ohm"?} (the values used).
// Throws DesignInputError as run_design does (bad inputs, a calculator that
// needs no part), and for tolerances outside [0, 0.5] or temperatures ≤ 0.
nlohmann::json design_worst_case(const std::string& calculator, const std::vector<DesignPart>& parts, const nlohmann::json& inputs,
                                 const WorstCaseCorners& corners);

}  // namespace junco::fitting
