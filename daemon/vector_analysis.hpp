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
#include "fitting/junction_cap.hpp"

#include <nlohmann/json.hpp>

#include <optional>
#include <vector>

namespace junco::daemon {

struct VectorRunFit {
  fitting::PackageFit package;
  bool deembedded = false;  // the run's open and short standards were removed
  double z_load_ohm = 0.0;
  std::size_t readings = 0;  // reverse_vector readings
  std::size_t standards = 0; // vector_open + vector_short readings
  // The chip's law, package removed (when the package fit is ok); its
  // standard errors include the package's (package_in_law_errors).
  std::optional<fitting::JunctionCapFit> cap;
  bool package_in_law_errors = false;
  nlohmann::json to_json() const;
};

// nullopt when the run has no reverse_vector readings.
std::optional<VectorRunFit> vector_fit_of_run(const std::vector<PointRow>& points, const RunFixture& fixture);

}  // namespace junco::daemon
