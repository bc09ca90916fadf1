// A job's plan: which parts, which sweep, and the checks it must pass before
// it is queued. parse_plan() checks types and presence (BadInput naming the
// field, e.g. "plan.sweep.count"); check_plan() checks ranges and every safety
// limit of the bench (PlanRefused naming the limit and the plan's field).
// Both are domain errors (daemon/errors.hpp). Format: docs/daemon-core.md.
#pragma once

#include "daemon/config.hpp"
#include "daemon/errors.hpp"
#include "drivers/roles.hpp"

#include <nlohmann/json.hpp>

#include <optional>
#include <string>
#include <vector>

namespace junco::daemon {

using Json = nlohmann::json;

enum class SweepMode { voltage, current };  // set value in V, or a target current in A
enum class Spacing { linear, log };

struct PartSpec {
  int slot = 0;  // fixture slot, from 1
  std::string label;
};

struct SweepSpec {
  SweepMode mode = SweepMode::voltage;
  Spacing spacing = Spacing::linear;
  double start = 0.0;  // V or A (by mode)
  double stop = 0.0;
  int count = 2;
  double settle_s = 0.05;   // wait after setting a step before reading
  int average = 1;          // readings averaged per point
  double compliance_a = 0;  // supply current limit for this job; 0 = the bench's current_limit_a
};

struct AcSpec {
  std::vector<double> freqs_hz;
  double amplitude = 0.0;
  drivers::LevelUnit unit = drivers::LevelUnit::vrms;
  double settle_s = 0.01;  // after each frequency change
  // Also read the levels at every reverse_v point (the part switched off):
  // the off-state isolation, and the junction capacitance law fitted from it.
  // Its own amplitude: the isolation leaves little signal at the output, and
  // a reverse-biased junction takes a larger swing than a forward one.
  struct OffState {
    std::vector<double> freqs_hz;  // default: the forward readings' frequencies
    double amplitude = 0.0;        // default: the forward readings' amplitude
  };
  std::optional<OffState> off_state;
};

// Vector readings (plan.vector; docs/daemon-core.md "Vector readings"): the
// complex transfer ch2/ch1 (ratio and phase, the vectormeter role) at every
// reverse_v point and frequency, and, when the plan names them, the fixture's
// open and short standards (an empty slot and a slot with a link) read at the
// start of each part's run at the same frequencies. Each run carries its own
// standards, so a run is de-embedded from its own readings (no calibration
// kept apart from the readings it corrects). The fit turns them into the
// package's Ls and Cp and the chip's Cj(V) (fitting/deembed.hpp).
// forward_i_a: also the transfer at these forward currents (the supply set
// in current mode, as for the sweep's current steps), every frequency each:
// the on-state impedance, from which the PIN law and lifetime (a PIN part)
// or RS, N and TT (a junction part) are fitted with the package removed
// (daemon/vector_analysis.hpp).
struct VectorSpec {
  std::vector<double> freqs_hz;
  double amplitude = 0.0;
  drivers::LevelUnit unit = drivers::LevelUnit::vpp;
  double settle_s = 0.01;  // after each frequency change
  int open_slot = 0;       // 0 = no open standard read
  int short_slot = 0;      // 0 = no short standard read
  std::vector<double> forward_i_a;  // forward bias currents (A) of the forward_vector readings; empty = none
  bool standards() const { return open_slot > 0 && short_slot > 0; }
};

// How the chamber soaks at each of a plan's temperatures: the readback must
// stay within tolerance_k of the set point for hold_s without a break
// (safety.max_soak_s bounds the whole wait).
struct SoakSpec {
  double tolerance_k = 0.5;
  double hold_s = 60.0;
};

// Plan options that limit or measure the junction's self-heating
// (docs/daemon-core.md, "Heating"). All optional; none changes the steps
// below `pulse.from`.
struct HeatingSpec {
  // Pulsed readings: every forward step at or above `from` (in the sweep's
  // unit) is one pulse from cold: output off for off_s, on, read after on_s,
  // off again. Keeps the junction near ambient where the power is highest.
  struct Pulse {
    double from = 0.0;    // set value (V or A by sweep mode); 0 = the top decade (highest set value / 10, current mode only)
    double on_s = 0.001;  // output on before the reading
    double off_s = 0.1;   // output off before each pulse (cooling)
  };
  // Two dwells per pulsed step: the same pulse also read at short_s and at
  // long_s after the output went on, giving Rth and the thermal time constant.
  struct Dwell {
    double short_s = 0.0;
    double long_s = 0.0;
  };
  std::optional<Pulse> pulse;
  std::optional<Dwell> dwell;  // needs pulse
  bool down_sweep = false;     // after the sweep up, the same steps down (hysteresis)
};

struct Plan {
  std::string lot;
  std::vector<PartSpec> parts;
  SweepSpec sweep;
  std::optional<AcSpec> ac;
  std::optional<VectorSpec> vector;
  std::vector<double> reverse_v;  // magnitudes of reverse-bias points (V)
  HeatingSpec heating;
  bool resume = true;             // may continue after a daemon restart
  double temp_k = 300.15;         // ambient, used by the fit (without temps_k)
  // Chamber set points, measured in this order (every part at each): empty =
  // no chamber, temp_k is the ambient. With them, each run's ambient is the
  // chamber's readback, and temp_k is not allowed.
  std::vector<double> temps_k;
  SoakSpec soak;
  bool temp_k_given = false;      // parse_plan saw temp_k (refused with temps_k)
  // Highest forward voltage assumed when bounding the power in the part
  // (conservative for silicon signal and PIN diodes; common practice, no source).
  double vf_max_v = 1.5;
  // What the parts are: "junction" (a switching diode: the junction fits) or
  // "pin" (a PIN diode: the PIN law and lifetime, fitting/pin_diode.hpp, and
  // the charge criterion for large AC signals).
  std::string part_type = "junction";
};

// One measurement of the expansion; a point's seq is its index here.
// Forward DC readings belong to one of three series (points.series): the
// sweep up (the one the fit uses), the extra dwell readings of a pulse, and
// the sweep down (compared with the sweep up for hysteresis).
enum class Series : unsigned char { up, dwell, down };

struct Step {
  // vector_open / vector_short: a fixture standard (plan.vector), read with
  // the supply off; reverse_vector: the transfer at a reverse_v point;
  // forward_vector: the transfer at a plan.vector.forward_i_a current.
  enum class Kind { dc, ac, reverse, reverse_ac, reverse_vector, vector_open, vector_short, forward_vector } kind = Kind::dc;
  // Which forward step (dc and ac), which reverse_v point (reverse,
  // reverse_ac, reverse_vector) or which forward_i_a current (forward_vector).
  int dc_index = 0;
  double set_value = 0;  // V or A for dc/ac (by mode); −|V| for reverse and reverse_ac; A for forward_vector
  double freq_hz = 0;    // ac, reverse_ac and the vector kinds
  Series series = Series::up;  // dc only
  bool pulsed = false;         // dc only: read in a pulse from cold (heating.pulse)
  double dwell_s = 0;          // series dwell: time from output on to the reading
};

Plan parse_plan(const Json& plan);                  // throws BadInput
// Throws PlanRefused; checks the size limits (c.limits) by
// arithmetic, before anything is expanded.
void check_plan(const Plan& plan, const Config& c);
Json to_json(const Plan& plan);                     // normalized (round-trips through parse_plan)

// Steps per part and readings per job, counted without expanding (as
// doubles: a refused plan may be far beyond any integer type's use).
double steps_per_part(const Plan& plan);
// Measured temperatures: temps_k.size(), or 1 without a chamber.
int temperature_count(const Plan& plan);
// Ramp-rate assumed for a soak estimate when the bench states no limit:
// 2 K/min, a bench chamber's usual rate (common practice, no source).
inline constexpr double kAssumedChamberRateKPerMin = 2.0;
// Time the soaks take: hold_s per temperature (at least), plus the ramps
// from chamber_idle_k through the set points at the bench's rate limit or
// kAssumedChamberRateKPerMin (with_ramps).
double soak_s(const Plan& plan, const Config& c, bool with_ramps);
double points_per_job(const Plan& plan);
// Estimate of the memory the daemon needs to run the plan: the expanded steps
// (sizeof(Step) each) and, at each part's fit, every reading of the part read
// back (kReadingBytes each). check_plan compares it with limits.max_plan_memory_bytes.
inline constexpr double kReadingBytes = 256.0;  // a PointRow with its strings, and the fit's copy of its V and I
double plan_memory_bytes(const Plan& plan);

std::vector<double> sweep_values(const SweepSpec& s);
std::vector<Step> expand_steps(const Plan& plan);  // per part; same for every part
// Lower bound of the time the job takes (settle times, and the soaks' hold times).
double min_duration_s(const Plan& plan);
double compliance_a(const Plan& plan, const Config& c);
const char* to_string(Step::Kind kind);
// The kinds read with the generator on (levels or transfer).
bool uses_siggen(Step::Kind kind);
bool is_vector(Step::Kind kind);
// The kinds set in volts at a reverse bias or with the supply off (reverse,
// reverse_ac, reverse_vector and the standards; not forward_vector).
bool is_reverse(Step::Kind kind);
const char* to_string(Series series);
// heating.pulse.from as it applies: the plan's value, or the top decade.
double pulse_from(const Plan& plan);
// Forward steps read in a pulse, and the readings a part takes in the heating
// options (pulses' dwell readings + the sweep down).
double pulsed_steps(const Plan& plan);

}  // namespace junco::daemon
