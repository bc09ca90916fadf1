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
#include "fitting/junction_cap.hpp"
#include "fitting/junction_charge.hpp"
#include "fitting/pin_diode.hpp"

#include <nlohmann/json.hpp>

#include <limits>
#include <optional>
#include <vector>

namespace junco::daemon {

// The on-state impedance's fit (package.forward).
struct ForwardVectorFit {
  bool pin = false;             // model: the PIN law, else a junction (K = 0)
  std::size_t readings = 0;     // usable forward_vector readings
  std::size_t currents = 0;     // distinct bias currents among them
  bool package_removed = false; // the run's package fit was ok and removed
  bool deembedded = false;      // every reading had the run's open and short at its frequency
  fitting::PinFit fit;
  // A junction part: the same quantities from the run's DC fit (RS, N) and
  // AC fit (TT, detail.stored_charge), set by the caller (NaN: none), and
  // (vector − fit)/√(u_vector² + u_fit²).
  struct Compared {
    fitting::Estimate other;
    double z = std::numeric_limits<double>::quiet_NaN();
  };
  std::optional<Compared> rs_ohm, n, tt_s;
  nlohmann::json to_json() const;
};

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
  std::optional<ForwardVectorFit> forward;  // with forward_vector readings
  nlohmann::json to_json() const;
};

// nullopt when the run has no reverse_vector readings.
std::optional<VectorRunFit> vector_fit_of_run(const std::vector<PointRow>& points, const RunFixture& fixture,
                                              const ForwardContext& context = {});

}  // namespace junco::daemon
