// Junction capacitance law from off-state AC readings.
//
// Reverse biased, the diode in the fixture (transfer.hpp) is Rs in series
// with its depletion capacitance Cj(Vr); the leakage conductance is
// negligible next to ω·Cj at signal frequencies. The meter's ratio is then
//   |G| = |Vout/Vin| = z / |z + Rs + 1/(jωC)|,   z = RL ∥ Rr,
// so each reading gives C in closed form:
//   (z + Rs)² + 1/(ωC)² = (z/|G|)²   ⇒   C = 1/(ω·sqrt((z/|G|)² − (z + Rs)²)).
// With A = (z/|G|)², d ln C / d ln|G| = A/(A − (z + Rs)²), so one reading's
// uncertainty σ_dB becomes σ_lnC = σ_dB·ln10/20 · A/(A − (z + Rs)²): fine
// while the diode isolates (A ≫ (z + Rs)²), unbounded as |G| nears
// z/(z + Rs), where the reactance is lost in the resistances.
//
// Over the reverse biases C follows the SPICE depletion law (docs/references.md §2,
// ngspice dioload.c with V = −Vr): Cj(Vr) = CJO·(1 + Vr/VJ)^−M. The fit is
// least squares in ln C, r = (ln C_k − ln CJO + M·ln(1 + Vr_k/VJ))/σ_lnC,k,
// one residual per reading (several frequencies at one bias are several
// readings), parameters ln CJO, VJ ∈ [0.1, 2] V (ngspice accepts VJ up to
// 2 V), M ∈ [0.05, 0.95]. For fixed VJ the model is linear in (ln CJO, M),
// so the start is the best of those linear fits over a grid of VJ. Standard
// errors from the covariance scaled by the reduced χ² (N − 3). VJ and M are
// strongly correlated over a few volts of bias (both bend the same curve),
// so their standard errors are large next to CJO's; vj_m_correlation says
// how much. With fewer than 4 distinct biases VJ and M are held (at the SPICE
// defaults unless told otherwise) and only CJO is fitted (N − 1); its
// standard error then leaves out the error of the held law.
#pragma once

#include "fitting/extract.hpp"
#include "fitting/transfer.hpp"

#include <cstddef>
#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

struct OffStatePoint {
  double reverse_v = 0.0;        // magnitude of the reverse bias (V, >= 0)
  double freq_hz = 0.0;
  double vin = 0.0, vout = 0.0;  // ch1, ch2 levels in the same unit (only the ratio is used)
};

struct JunctionCapOptions {
  double ac_sigma_db = 0.01;  // standard uncertainty of one ratio reading
  double floor_v = 100e-6;    // a level below this is left out ("below the level floor")
  double max_gain = 0.9;      // |G| above this is left out: too little isolation to resolve C (common practice, no source)
  double vj_v_held = 1.0, m_held = 0.5;  // SPICE defaults (docs/references.md §2), used when the law cannot be fitted
  // The fixture's own capacitance across the slot (measured with the slot
  // empty): in parallel with the part, so subtracted from each reading's C
  // before the law is fitted. A reading not above it is left out.
  double stray_c_f = 0.0;
  int max_iterations = 200;
};

struct JunctionCapFit {
  bool ok = false;
  std::string message;      // why not ok; or a note (held law, parameter at a bound, covariance)
  Estimate cj0_f, vj_v, m;  // std_error NaN when held
  bool law_held = false;    // fewer than 4 distinct reverse biases: VJ, M held, only CJO fitted
  std::size_t points_used = 0;
  double reduced_chi2 = std::numeric_limits<double>::quiet_NaN();      // 2·cost/(N − 3), or /(N − 1) when held
  double vj_m_correlation = std::numeric_limits<double>::quiet_NaN();  // of the VJ and M estimates; NaN when held
  std::vector<double> c_f;             // per input point: the part's C from that reading (stray subtracted), NaN when left out
  std::vector<std::string> left_out;   // per input point: "" when used, else the reason
};

// C of one reading (NaN when |G| >= 1 or the levels are not positive, and
// also when |G| >= z/(z + Rs), which no series capacitance can give).
double off_state_capacitance_f(const OffStatePoint& p, const Fixture& fixture, double rs_ohm);

// The fixture ratio of an off-state reading: −20·log10(vout/vin) (dB). It is
// the level meter's ratio in the fixture, not the switch's isolation (that
// has one definition, design_switch.hpp: a matched Z0 system).
double off_state_fixture_ratio_db(const OffStatePoint& p);
// The former name of the same ratio, kept while callers move.
inline double off_state_isolation_db(const OffStatePoint& p) { return off_state_fixture_ratio_db(p); }

// Standard uncertainty of ln C from one reading with ratio uncertainty
// sigma_db (see above); NaN where C is NaN.
double off_state_sigma_ln_c(const OffStatePoint& p, const Fixture& fixture, double rs_ohm, double sigma_db);

// Left-out reasons: "level not a positive number", "bias or frequency not valid",
// "below the level floor", "gain above max_gain", "no series C gives this gain".
// Needs 1 usable reading (held law) or 4 distinct reverse biases (full law).
JunctionCapFit fit_junction_cap(std::span<const OffStatePoint> points, const Fixture& fixture, double rs_ohm,
                                const JunctionCapOptions& options = {});

// The same law fitted to capacitances already known per reading (vector
// readings de-embedded: fitting/deembed.hpp), each with its σ of ln C.
// c_f and left_out are per reading as above; options' level keys are unused.
struct CapacitanceReading {
  double reverse_v = 0.0;
  double c_f = 0.0;
  double sigma_ln_c = 0.01;
};
JunctionCapFit fit_junction_cap_values(std::span<const CapacitanceReading> readings, const JunctionCapOptions& options = {});

}  // namespace junco::fitting
