// Prints a joint AC+DC fit report (fitting::joint_report_json) for people:
// the DC-only and joint estimates side by side, the verdict, the per-
// parameter agreement lines and the self-heating hint. Used by `junco
// transfer` (from juncod) and `junco fit --ac` (offline).
#pragma once

#include <nlohmann/json.hpp>

namespace junco::cli {

void print_joint_report(const nlohmann::json& joint);

}  // namespace junco::cli
