// The fits juncod makes of a run from its stored readings, in one place:
// the forward fit, the junction capacitance law (off-state or vector
// readings), the package and the forward vector fit, the PIN law or the
// stored charge, the electro-thermal fit and the heating analysis
// (docs/daemon-core.md, "After a run"). Pure computation on stored rows: the
// executor calls fit_run when a part's run ends and when juncod finds a run
// stored without its fit, and stores what it returns.
#pragma once

#include "daemon/config.hpp"
#include "daemon/rows.hpp"
#include "fitting/extract.hpp"
#include "fitting/fit_reports.hpp"
#include "fitting/junction_cap.hpp"

#include <optional>
#include <string>
#include <vector>

namespace junco::daemon {

// A run's fits, computed from its stored readings. A forward fit that
// throws comes back as status "failed" with the reason as its message, so it
// is stored like any other outcome (a part is never left without one); a
// later fit that throws leaves a warning on the forward fit.
struct RunFit {
  fitting::FitResult fit;
  std::optional<fitting::JunctionCapFit> cap;
  std::optional<JunctionCapReport> cap_report;          // what is stored of cap, with each reading's outcome
  std::optional<ElectrothermalReport> electrothermal;  // detail.electrothermal
  MoreReports more;  // detail.heating, detail.stored_charge, detail.pin, detail.package
  std::optional<VectorRunFit> vector;  // becomes detail.package once the forward readings are compared (fit_run)
};

// part_type: the plan's ("pin" or "junction").
RunFit fit_run(const Config& cfg, double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points,
              const std::string& part_type);

// One log line for a stored fit.
std::string describe_fit(const RunFit& f);

}  // namespace junco::daemon
