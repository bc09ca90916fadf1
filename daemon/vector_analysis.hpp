// A run's vector readings (plan.vector; kinds reverse_vector, vector_open,
// vector_short) turned into the part's package and junction law: each
// transfer H = ratio·e^(j·phase) becomes the slot's impedance into the
// fixture's load (RL ∥ the return resistor when there is one), the run's own
// open and short standards are removed at each frequency (when the run read
// them), the package's Ls and Cp are fitted over every reverse bias and
// frequency and removed, and the chip's Cj(V) law is fitted from what is
// left (fitting/deembed.hpp, fitting/junction_cap.hpp). Stored as
// detail.package of the run's fit, served by part.fit as "package".
#pragma once

#include "daemon/rows.hpp"
#include "fitting/deembed.hpp"
#include "fitting/fit_reports.hpp"
#include "fitting/junction_cap.hpp"

#include <optional>
#include <vector>

namespace junco::daemon {

// The type is the fitting library's report (fitting/fit_reports.hpp); its
// one JSON writer and reader is formats/report_json.hpp.
using fitting::VectorRunFit;

// nullopt when the run has no reverse_vector readings.
std::optional<VectorRunFit> vector_fit_of_run(const std::vector<PointRow>& points, const RunFixture& fixture);

}  // namespace junco::daemon
