// The store: one SQLite file owned by juncod. WAL journal, synchronous=FULL
// (a COMMIT has reached the disk when it returns), foreign keys on, a busy
// timeout, prepared statements only (each connection caches its own). The
// readings of one bias step (its DC reading and the AC readings at that
// bias) are committed in one transaction together with the job's progress
// counter.
//
// Thread safety: every public method is safe to call from any thread. Writes
// go through one connection guarded by a mutex (the executor and job
// updates); reads borrow a read-only connection from a pool, so a query never
// waits for a writer's COMMIT (WAL lets readers run during a write). A read
// sees every transaction committed before it started.
#pragma once

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdint>
#include <filesystem>
#include <limits>
#include <memory>
#include <mutex>
#include <optional>
#include <stdexcept>
#include <string>
#include <unordered_map>
#include <vector>

struct sqlite3;

namespace junco::fitting {
struct FitResult;
struct JunctionCapFit;
}

namespace junco::daemon {

using Json = nlohmann::json;
using Id = std::int64_t;

class StoreError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

inline constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Quality flags of a reading (points.flags).
enum PointFlag : int {
  flag_current_limit = 1,  // supply was regulating current: excluded from fits
  flag_retried = 2,        // taken after a transient fault was retried
  flag_off_target = 4,     // current-targeted step missed its target by > 5 %
  flag_power_limit = 8,    // v·i above max_power_w: excluded from fits, the sweep stops going up
};
// The readings taken in a limit: left out of fits, and the sweep goes no higher.
inline constexpr int kLimitFlags = flag_current_limit | flag_power_limit;

struct JobRow {
  Id id = 0;
  Json plan;
  std::string state;
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

struct RunRow {
  Id id = 0;
  Id job_id = 0;
  Id part_id = 0;
  int slot = 0;
  Json fixture;
  double temp_k = kNaN;
  std::string state;  // running, done, stopped
  std::string started_at, finished_at;
  // With a chamber (plan.temps_k): which temperature, its set point, and the
  // chamber's readback before and after the part's readings (NaN without).
  int temp_index = 0;
  double setpoint_k = kNaN;
  double ambient_k = kNaN;
  double ambient_end_k = kNaN;
};

// NaN = not measured (stored as NULL).
struct PointRow {
  Id run_id = 0;
  long seq = 0;
  std::string kind = "dc";  // dc, ac, reverse
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
};

struct PartRow {
  Id id = 0;
  Id lot_id = 0;
  std::string lot;
  std::string label;
  int slot = 0;
};

class Store {
 public:
  // Opens (creating parent directories and the file if needed), runs
  // PRAGMA quick_check (a damaged file is refused: StoreError naming the file
  // and SQLite's first complaint) and migrates.
  explicit Store(const std::filesystem::path& file);
  ~Store();
  Store(const Store&) = delete;
  Store& operator=(const Store&) = delete;

  const std::filesystem::path& file() const { return file_; }
  int schema_version();
  Json pragma_summary();  // journal_mode, synchronous, foreign_keys (for tests/status)

  Id ensure_lot(const std::string& name);
  Id ensure_part(Id lot_id, const std::string& label, int slot);
  std::optional<PartRow> part(Id part_id);
  Json lots();
  Json parts(const std::optional<std::string>& lot);  // nullopt = all

  void record_instrument(const std::string& role, const std::string& address, const std::string& manufacturer,
                         const std::string& model, const std::string& serial, const std::string& firmware);
  Json instruments();

  Id insert_job(const Json& plan, long points_total, int uid, int pid);
  std::optional<JobRow> job(Id id);
  // Seconds since the job first went running (started_at, kept across pauses
  // and restarts); 0 when it never ran.
  double seconds_since_first_start(Id id);
  std::vector<JobRow> jobs(const std::optional<std::string>& state);
  // Sets state and error (nullopt = leave error unchanged, "" = clear it); stamps started_at on
  // the first "running", finished_at on terminal states.
  void set_job_state(Id id, const std::string& state, const std::optional<std::string>& error = std::nullopt);
  // Atomically moves `from` → `to`; false when the job was not in `from`.
  bool transition_job(Id id, const std::string& from, const std::string& to,
                      const std::optional<std::string>& error = std::nullopt);
  std::optional<Id> next_queued_job();
  // A job state the store could not write (read-only file, disk full): kept
  // in memory and served by job() and jobs() in place of the file's state
  // (persisted = false) until a state write for that job succeeds. A restart
  // forgets it and recovers the job from the file as usual.
  void hold_job_state(Id id, const std::string& state, const std::string& error);

  // Returns the run of (job, part), creating it when absent.
  // One run per (job, part, temp_index); returns the existing one after a restart.
  RunRow ensure_run(Id job_id, Id part_id, int slot, const Json& fixture, double temp_k, int temp_index = 0,
                    double setpoint_k = kNaN);
  // The chamber's readbacks around a run's readings and the ambient its fit uses.
  void set_run_ambient(Id run_id, double ambient_k, double ambient_end_k, double temp_k);
  std::vector<RunRow> runs_of_part(Id part_id);
  std::vector<RunRow> runs_of_job(Id job_id);
  void finish_run(Id run_id, const std::string& state);
  // The end of a run and its fit, one transaction: the fit row (a failed fit
  // too, with its status and reason in message) and runs.state = 'done'.
  // A kill at any moment leaves either both or neither, so a done run always
  // has its fit. Returns the fit's id.
  // more_detail: further reports merged into the fit's detail (e.g.
  // {"electrothermal": …}).
  Id finish_run_with_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const fitting::JunctionCapFit* cap = nullptr,
                         const Json& cap_readings = Json(), const Json& more_detail = Json());
  // Runs without any fit row: state 'done' only (done_only), or every run
  // with at least one reading. job_id: only that job's runs.
  std::vector<RunRow> runs_without_fit(std::optional<Id> job_id, bool done_only);
  std::optional<long> last_seq(Id run_id);
  bool run_has_flag(Id run_id, int flag);

  // One transaction: the reading and its job's points_done. Throws StoreError
  // (also when (run_id, seq) already exists: a reading is never stored twice).
  void insert_point(Id job_id, const PointRow& p);
  // The same for several readings (one bias step): all or none.
  void insert_points(Id job_id, const std::vector<PointRow>& points);
  std::vector<PointRow> points(Id run_id);

  // cap: the junction capacitance law from the run's off-state readings,
  // stored with the forward fit (null: the run had none); cap_readings, when
  // not null, lists what each reading gave (detail.junction_cap.readings).
  Id insert_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const fitting::JunctionCapFit* cap = nullptr,
                const Json& cap_readings = Json(), const Json& more_detail = Json());
  std::optional<Json> latest_fit(Id part_id);
  // The temperature law fitted from a job's runs of a part at several
  // temperatures (fitting/temperature_fit.hpp): `fit` is its JSON
  // (temperature_fit_json); the part's latest, or nullopt.
  Id insert_temperature_fit(Id part_id, Id job_id, const Json& fit);
  // The forward fit of each of a job's runs of a part, in temperature order:
  // [{"run_id", "temp_index", "temp_k", "ambient_k", "ambient_end_k", "status",
  //   "is_a", "n", "rs_ohm" ({"value","std_error"}), "corr_is_n"}].
  Json fits_of_job_part(Id job_id, Id part_id);
  std::optional<Json> latest_temperature_fit(Id part_id);

 private:
  class Stmt;
  class Conn;
  class ReadLease;
  ReadLease reader();
  void release(std::unique_ptr<Conn> conn);
  bool set_job_state_if(Id id, const std::optional<std::string>& from, const std::string& state,
                        const std::optional<std::string>& error);
  void apply_held(JobRow& row);
  // INSERT INTO fits; the caller holds write_mutex_ (and its transaction).
  Id insert_fit_row(Id part_id, Id run_id, const fitting::FitResult& fit, const fitting::JunctionCapFit* cap, const Json& cap_readings,
                    const Json& more_detail);
  void forget_cached_fit(Id part_id);

  std::filesystem::path file_;
  std::unique_ptr<Conn> writer_;
  std::recursive_mutex write_mutex_;
  std::mutex pool_mutex_;
  std::vector<std::unique_ptr<Conn>> idle_readers_;
  // part.fit cache: latest fit per part, dropped when a fit is inserted.
  // fit_generation_ guards against storing a row read before that insert.
  std::mutex fit_cache_mutex_;
  std::uint64_t fit_generation_ = 0;
  std::unordered_map<Id, Json> fit_cache_;
  std::mutex held_mutex_;
  std::unordered_map<Id, std::pair<std::string, std::string>> held_states_;  // id → {state, error}
};

Json to_json(const JobRow& j);
Json to_json(const RunRow& r);
Json to_json(const PointRow& p);
Json to_json(const PartRow& p);

bool is_terminal_state(const std::string& state);  // done, failed, cancelled, interrupted

}  // namespace junco::daemon
