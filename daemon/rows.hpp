// The daemon's stored data as typed rows: what the store hands out and takes.
// The store parses and checks what it reads (a damaged row is a StoreError
// naming the row, never a malformed value passed on); the service computes on
// these types; JSON is made from them in one place, daemon/api_json.hpp, at
// the API boundary.
#pragma once

#include "daemon/plan.hpp"
#include "fitting/ac_charge_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/fit_reports.hpp"

#include <cstdint>
#include <limits>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::daemon {

using Id = std::int64_t;

inline constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// ---- job states: the one home of their names ---------------------------------
// queued → running → done | failed | cancelled; running → paused → queued
// (resume); interrupted: the daemon died and the plan forbids resuming.
enum class JobState { queued, running, paused, done, failed, cancelled, interrupted };

const char* to_string(JobState state);
// nullopt for a name that is not a state.
std::optional<JobState> job_state_from_string(std::string_view name);
// "queued, running, paused, done, failed, cancelled, interrupted"
const std::string& job_state_names();
bool is_terminal(JobState state);  // done, failed, cancelled, interrupted

// ---- run states: the one home of their names ---------------------------------
// A part's run: running → done (its readings and fit stored) | stopped (the
// job ended before the part's readings did). The runs table's CHECK allows
// exactly these names (schema/migrations/0004).
enum class RunState { running, done, stopped };

const char* to_string(RunState state);
std::optional<RunState> run_state_from_string(std::string_view name);

struct LotRow {
  Id id = 0;
  std::string name;
  std::string created_at;
  long parts = 0;
};

struct PartRow {
  Id id = 0;
  Id lot_id = 0;
  std::string lot;
  std::string label;
  int slot = 0;
};

// A part as part.list gives it: with whether it has any fit.
struct PartListRow {
  PartRow part;
  bool has_fit = false;
};

struct InstrumentRow {
  std::string role, address, manufacturer, model, serial, firmware, first_seen, last_seen;
};

// The fixture as it was when a run was measured (the bench config may change
// later). NaN / "": not recorded (rows written by older versions).
// The AC units of a run: the plan's amplitude unit, and what the generator
// takes and the level meter reads (drivers/levels.hpp), as they were named.
struct AcUnits {
  std::string plan, siggen, levelmeter;
};

struct RunFixture {
  double bias_resistor_ohm = kNaN;
  double dc_return_ohm = kNaN;
  double source_ohm = kNaN;
  double load_ohm = kNaN;
  std::string current_from;  // "source" or "meter"
  double stray_c_f = kNaN;
  std::optional<AcUnits> ac_units;  // runs with AC readings (since the amplitude units)
};

// The fixture of the bench config, as a run records it.
RunFixture run_fixture(const FixtureConfig& fixture);

struct RunRecord {
  Id id = 0;
  Id job_id = 0;
  Id part_id = 0;
  int slot = 0;
  RunFixture fixture;
  double temp_k = kNaN;
  RunState state = RunState::running;
  std::string started_at, finished_at;
  // With a chamber (plan.temps_k): which temperature, its set point, and the
  // chamber's readback before and after the part's readings (NaN without).
  int temp_index = 0;
  double setpoint_k = kNaN;
  double ambient_k = kNaN;
  double ambient_end_k = kNaN;
};

struct JobRecord {
  Id id = 0;
  Plan plan;
  JobState state = JobState::queued;
  long points_done = 0;
  long points_total = 0;
  std::string error;  // "" when none
  int submitted_uid = -1;
  int submitted_pid = -1;
  std::string submitted_at, started_at, finished_at, updated_at;
  // false: state and error are held in memory because the store could not
  // write them (Store::hold_job_state); the file still has the old state.
  bool persisted = true;
};

// The reports stored with a fit (detail.junction_cap, detail.electrothermal,
// detail.heating, detail.stored_charge, detail.pin, detail.package) and the
// temperature law are the fitting library's typed reports
// (fitting/fit_reports.hpp, fitting/ac_charge_fit.hpp); their one JSON
// writer and reader is formats/report_json.hpp.
using fitting::ElectrothermalReport;
using fitting::HeatingReport;
using fitting::JunctionCapReport;
using fitting::OffStateReadingReport;
using fitting::PinReport;
using fitting::TemperatureLawReport;
using fitting::VectorRunFit;

// What a run's fit stores beside the forward fit, the capacitance law and the
// electro-thermal fit.
struct MoreReports {
  std::optional<HeatingReport> heating;             // detail.heating (plan.heating readings)
  std::optional<fitting::AcChargeFit> stored_charge;  // detail.stored_charge (multi-frequency AC readings)
  std::optional<PinReport> pin;                     // detail.pin (a PIN part: plan.part_type "pin")
  std::optional<VectorRunFit> package;              // detail.package (plan.vector readings)
};

// A part's temperature law as stored (temperature_fits): which row, from
// which multi-temperature job, when, and the law with its standard errors.
struct TemperatureLawRecord {
  Id id = 0;  // served as temperature_fit_id
  Id job_id = 0;
  std::string created_at;
  TemperatureLawReport report;
};

// A run's stored forward fit as the temperature law takes it
// (Store::fits_of_job_part): the run's temperatures and the fit's Is, n, Rs
// with the (Is, n) correlation (0 when not stored).
struct RunFitAtTemperature {
  Id run_id = 0;
  int temp_index = 0;
  double temp_k = kNaN;
  double ambient_k = kNaN, ambient_end_k = kNaN;  // chamber readback before and after (NaN without)
  std::string status;  // the fit's status as stored ("converged", ...)
  fitting::Estimate is_a, n, rs_ohm;
  double corr_is_n = 0.0;
};

// A stored fit: the forward fit with its covariance (so every figure served
// from it carries a standard error), the junction capacitance law when the
// run had off-state readings, and the stored reports.
struct FitRecord {
  Id id = 0;
  Id part_id = 0;
  std::optional<Id> run_id;
  std::string model;  // "forward"
  std::string created_at;
  // status, message, is_a/n/rs_ohm/rsh_ohm, temp_k (NaN: not recorded), cost,
  // rms_residual, points_used, warnings, parameter_names, correlation,
  // covariance, excluded, iterations.
  fitting::FitResult fit;
  fitting::Estimate cj0_f, vj_v, m;  // value NaN: no law
  // The transit time from the run's multi-frequency AC readings
  // (detail.stored_charge, when that fit succeeded); value NaN: none.
  fitting::Estimate tt_s;
  // The reports read from the stored detail, typed (absent: the run had no
  // off-state readings / no electro-thermal fit was made).
  std::optional<JunctionCapReport> junction_cap;
  std::optional<ElectrothermalReport> electrothermal;
  std::optional<HeatingReport> heating;
  std::optional<fitting::AcChargeFit> stored_charge;
  std::optional<PinReport> pin;          // a PIN part's law and off state
  std::optional<VectorRunFit> package;   // the package from the run's vector readings
  // The rest of the stored detail (parameter_names, correlation, excluded,
  // iterations) is read into `fit`; api_json writes the document back from
  // these fields (keys a newer juncod stored and this one does not know are
  // not kept).
  // The part's latest temperature law (Store::latest_temperature_fit, from a
  // multi-temperature job: EG, XTI, TRS1), none when it has none. Not a
  // column of fits: the service adds it for part.fit and the exports.
  std::optional<TemperatureLawRecord> temperature_law;

  // Points used by the capacitance law, 0 without one.
  long cap_points_used() const { return junction_cap ? junction_cap->points_used : 0; }
};

// Quality flags of a reading (points.flags).
enum PointFlag : int {
  flag_current_limit = 1,  // supply was regulating current: excluded from fits
  flag_retried = 2,        // taken after a transient fault was retried
  flag_off_target = 4,     // current-targeted step missed its target by > 5 %
  flag_power_limit = 8,    // v·i above max_power_w: excluded from fits, the sweep stops going up
};
// The readings taken in a limit: left out of fits, and the sweep goes no higher.
inline constexpr int kLimitFlags = flag_current_limit | flag_power_limit;

// NaN = not measured (stored as NULL).
struct PointRow {
  Id run_id = 0;
  long seq = 0;
  std::string kind = "dc";  // dc, ac, reverse, reverse_ac, reverse_vector, vector_open, vector_short, forward_vector
  double set_value = 0.0;
  std::string set_unit = "V";
  double supply_v = kNaN;
  double v = kNaN;
  double i_a = kNaN;
  double ac_in_v = kNaN;
  double ac_out_v = kNaN;
  std::string ac_unit;  // "" unless kind == ac
  double freq_hz = kNaN;
  double temp_k = kNaN;
  double t_s = 0.0;
  int flags = 0;
  // dc only: "up" (the sweep the fit uses), "dwell" or "down" (plan.heating,
  // schema 0006); dwell_s: output on → reading, for a reading in a pulse.
  std::string series = "up";
  double dwell_s = kNaN;
  // Vector kinds (schema 0011): the transfer ch2/ch1 as read, |V2/V1| and
  // arg(V2/V1) in degrees.
  double ratio = kNaN;
  double phase_deg = kNaN;
};

// How the stored forward fit treated one reading (part.readings): used, or
// left out and why ("below noise floor 3.5e-06 A", "taken in a current or
// power limit"). Only readings the forward fit considers have one.
struct FitUse {
  bool used = false;
  std::string reason;  // "" when used
};

}  // namespace junco::daemon
