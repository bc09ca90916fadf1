// A run's vector readings (plan.vector; kinds reverse_vector, vector_open,
// vector_short) turned into the part's package and junction law: each
// transfer H = ratio·e^(j·phase) becomes the slot's impedance into the
// fixture's load (RL ∥ the return resistor when there is one), the run's own
// open and short standards are removed at each frequency (when the run read
// them), the package's Ls and Cp are fitted over every reverse bias and
// frequency and removed, and the chip's Cj(V) law is fitted from what is
// left (fitting/deembed.hpp, fitting/junction_cap.hpp). Stored as
// detail.package of the run's fit, served by part.fit as "package".
//
// Readings at forward bias (kind forward_vector, plan.vector.forward_i_a):
// each becomes the chip's own impedance at (I, f) the same way (slot
// impedance, the run's open and short removed, the package just fitted
// removed), and the PIN law's fit on complex impedances
// (fitting::fit_pin_impedance) gives R0, K, x and τ for a PIN part, or RS,
// N and TT (no I-region) for a junction part, compared by the caller with
// the run's DC and AC fit. Stored as detail.package.forward.
#pragma once

#include "daemon/rows.hpp"
#include "fitting/deembed.hpp"
#include "fitting/fit_reports.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/junction_charge.hpp"
#include "fitting/pin_diode.hpp"

#include <optional>
#include <vector>

namespace junco::daemon {

// The types are the fitting library's reports (fitting/fit_reports.hpp); their
// one JSON writer and reader is formats/report_json.hpp.
using fitting::ForwardVectorFit;
using fitting::VectorRunFit;

// What the forward readings' fit takes from the rest of the run.
struct ForwardContext {
  bool pin = false;
  double temp_k = 300.15;
  // A junction part: the DC fit (its junction voltage at each current) and
  // a Cj(V) law from the level readings, used when the vector readings give
  // none: the depletion capacitance at forward bias beside TT·gd.
  std::optional<fitting::DiodeParams> dc;
  std::optional<fitting::JunctionCap> cap;
};

// nullopt when the run has no reverse_vector readings.
std::optional<VectorRunFit> vector_fit_of_run(const std::vector<PointRow>& points, const RunFixture& fixture,
                                              const ForwardContext& context = {});

}  // namespace junco::daemon
