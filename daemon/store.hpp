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
//
// It takes and gives typed rows (daemon/rows.hpp). What it reads back is
// checked: a stored JSON column that does not parse or has the wrong shape is
// a StoreError naming the row ("fit 7 of part 3: detail: ..."), so damage in
// the file reaches a client as a storage error, never as its own mistake.
#pragma once

#include "daemon/errors.hpp"
#include "daemon/rows.hpp"

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
struct JunctionCapFit;
}

namespace junco::daemon {



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
  std::vector<LotRow> lots();
  std::vector<PartListRow> parts(const std::optional<std::string>& lot);  // nullopt = all

  void record_instrument(const std::string& role, const std::string& address, const std::string& manufacturer,
                         const std::string& model, const std::string& serial, const std::string& firmware);
  std::vector<InstrumentRow> instruments();

  Id insert_job(const Plan& plan, long points_total, int uid, int pid);
  // A stored plan that no longer parses is a StoreError naming the job.
  std::optional<JobRecord> job(Id id);
  // Seconds since the job first went running (started_at, kept across pauses
  // and restarts); 0 when it never ran.
  double seconds_since_first_start(Id id);
  std::vector<JobRecord> jobs(const std::optional<JobState>& state);
  // Sets state and error (nullopt = leave error unchanged, "" = clear it); stamps started_at on
  // the first "running", finished_at on terminal states.
  void set_job_state(Id id, JobState state, const std::optional<std::string>& error = std::nullopt);
  // Atomically moves `from` → `to`; false when the job was not in `from`.
  bool transition_job(Id id, JobState from, JobState to, const std::optional<std::string>& error = std::nullopt);
  std::optional<Id> next_queued_job();
  // A job state the store could not write (read-only file, disk full): kept
  // in memory and served by job() and jobs() in place of the file's state
  // (persisted = false) until a state write for that job succeeds. A restart
  // forgets it and recovers the job from the file as usual.
  void hold_job_state(Id id, JobState state, const std::string& error);

  // Returns the run of (job, part), creating it when absent.
  // One run per (job, part, temp_index); returns the existing one after a restart.
  RunRecord ensure_run(Id job_id, Id part_id, int slot, const RunFixture& fixture, double temp_k, int temp_index = 0,
                       double setpoint_k = kNaN);
  // The chamber's readbacks around a run's readings and the ambient its fit uses.
  void set_run_ambient(Id run_id, double ambient_k, double ambient_end_k, double temp_k);
  std::vector<RunRecord> runs_of_part(Id part_id);
  std::vector<RunRecord> runs_of_job(Id job_id);
  void finish_run(Id run_id, RunState state);
  // The end of a run and its fit, one transaction: the fit row (a failed fit
  // too, with its status and reason in message) and runs.state = 'done'.
  // A kill at any moment leaves either both or neither, so a done run always
  // has its fit. Returns the fit's id.
  // more: the further reports stored in the fit's detail (heating, stored
  // charge, pin, package; rows.hpp MoreReports).
  Id finish_run_with_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap = nullptr,
                         const ElectrothermalReport* electrothermal = nullptr, const MoreReports& more = {});
  // Runs without any fit row: state 'done' only (done_only), or every run
  // with at least one reading. job_id: only that job's runs.
  std::vector<RunRecord> runs_without_fit(std::optional<Id> job_id, bool done_only);
  std::optional<long> last_seq(Id run_id);
  bool run_has_flag(Id run_id, int flag);

  // One transaction: the reading and its job's points_done. Throws StoreError
  // (also when (run_id, seq) already exists: a reading is never stored twice).
  void insert_point(Id job_id, const PointRow& p);
  // The same for several readings (one bias step): all or none.
  void insert_points(Id job_id, const std::vector<PointRow>& points);
  std::vector<PointRow> points(Id run_id);

  // cap: the junction capacitance law from the run's off-state readings,
  // stored with the forward fit (null: the run had none), with what each
  // reading gave; electrothermal: the electro-thermal fit (null: none made).
  Id insert_fit(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap = nullptr,
                const ElectrothermalReport* electrothermal = nullptr, const MoreReports& more = {});
  // The part's latest fit, with its covariance (rows written before
  // migration 0007 have none stored: it is rebuilt from the stored
  // correlation and standard errors, which determine it). null: no fit.
  std::shared_ptr<const FitRecord> latest_fit(Id part_id);
  // The temperature law fitted from a job's runs of a part at several
  // temperatures (fitting/temperature_fit.hpp, with the runs it used); the
  // part's latest, or nullopt. A damaged stored law is a StoreError naming it.
  Id insert_temperature_fit(Id part_id, Id job_id, const TemperatureLawReport& law);
  std::optional<TemperatureLawRecord> latest_temperature_fit(Id part_id);
  // The forward fit of each of a job's runs of a part, in temperature order.
  std::vector<RunFitAtTemperature> fits_of_job_part(Id job_id, Id part_id);

 private:
  class Stmt;
  class Conn;
  class ReadLease;
  ReadLease reader();
  void release(std::unique_ptr<Conn> conn);
  bool set_job_state_if(Id id, const std::optional<JobState>& from, JobState state, const std::optional<std::string>& error);
  void apply_held(JobRecord& row);
  // INSERT INTO fits; the caller holds write_mutex_ (and its transaction).
  Id insert_fit_row(Id part_id, Id run_id, const fitting::FitResult& fit, const JunctionCapReport* cap,
                    const ElectrothermalReport* electrothermal, const MoreReports& more);
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
  std::unordered_map<Id, std::shared_ptr<const FitRecord>> fit_cache_;
  std::mutex held_mutex_;
  std::unordered_map<Id, std::pair<JobState, std::string>> held_states_;  // id → {state, error}
};

}  // namespace junco::daemon
