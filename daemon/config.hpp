// juncod's configuration: one JSON file (comments allowed) describing the
// bench, the fixture, the safety limits and where the daemon keeps its files.
// load_config() validates everything up front; a bad file is refused with
// ConfigError naming the file, the key (JSON pointer) and what is wrong.
// File format: docs/daemon-core.md and tools/examples/bench.jsonc.
#pragma once

#include "drivers/roles.hpp"
#include "fitting/extract.hpp"

#include <nlohmann/json.hpp>

#include <filesystem>
#include <map>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

namespace junco::daemon {

class ConfigError : public std::runtime_error {
 public:
  // what() is "<file>: <pointer>: <problem>".
  ConfigError(const std::string& file, const std::string& pointer, const std::string& problem)
      : std::runtime_error(file + ": " + (pointer.empty() ? "/" : pointer) + ": " + problem),
        pointer_(pointer.empty() ? "/" : pointer) {}
  const std::string& pointer() const { return pointer_; }

 private:
  std::string pointer_;
};

// One instrument of the bench. Roles: source, meter, scanner, siggen,
// levelmeter, chamber, vectormeter (source, meter and scanner are required).
struct InstrumentConfig {
  std::string role;
  std::string address;                // drivers/transport.hpp syntax
  std::filesystem::path dialect_path; // resolved, existing file
  int reply_timeout_ms = 2000;
  int max_retries = 2;                // driver-level retries per operation
  // Siggen / levelmeter: the amplitude unit this instrument is set to take or
  // read (overrides its dialect's; drivers/levels.hpp), and the resistance
  // its dBm are stated into (0 = the dialect's).
  std::optional<drivers::LevelUnit> amplitude_unit{};
  double impedance_ohm = 0.0;
  // Not in the file: the bench check (`junco bench`) shortens it.
  int connect_timeout_ms = 2000;
};

// Where the diode's voltage and current are read.
enum class CurrentFrom { source, meter };

struct FixtureConfig {
  double bias_resistor_ohm = 0.0;  // supply → anode
  double dc_return_ohm = 0.0;      // cathode → ground
  double source_ohm = 50.0;        // signal generator source resistance
  double load_ohm = 50.0;          // AC load on the cathode side
  int slots = 1;                   // scanner slots, numbered from 1
  double stray_c_f = 0.0;          // the fixture's capacitance across an empty slot (subtracted from off-state C)
  CurrentFrom current_from = CurrentFrom::source;  // diode voltage always from the meter
};

// Hard limits of this bench; no plan may exceed them, the executor enforces them too.
struct SafetyLimits {
  double max_supply_v = 10.0;     // highest |voltage| ever programmed on the supply
  double current_limit_a = 0.1;   // supply compliance programmed before output on
  double max_power_w = 0.25;      // dissipation allowed in the part
  double max_reverse_v = 5.0;     // highest reverse bias on the part
  double max_job_s = 86400.0;     // a job running longer is stopped (outputs off, failed)
  // The temperature chamber (bench.chamber; required there, ignored without
  // one): set points allowed, the longest wait for one soak, the chamber's
  // set point whenever no job runs (make-safe), and an optional ramp-rate
  // limit programmed before every set point (0 = none; the dialect must
  // then offer set_rate). docs/daemon-core.md, "Temperature chamber".
  double chamber_min_k = 0.0;
  double chamber_max_k = 0.0;
  double max_soak_s = 0.0;
  double chamber_idle_k = 298.15;
  double chamber_max_rate_k_per_min = 0.0;
};

// Resource limits on what one job may ask of the daemon (docs/daemon-core.md).
// check_plan refuses a plan over either before anything is expanded.
struct JobLimits {
  // Readings one job may take (steps per part × parts).
  long max_points_per_job = 1'000'000;
  // Memory the daemon may need to run one plan (plan_memory_bytes in plan.hpp:
  // the expanded steps and a part's readings held for its fit).
  double max_plan_memory_bytes = 64.0 * 1024 * 1024;
};

struct PathsConfig {
  std::filesystem::path database;  // SQLite file; only juncod opens it
  std::filesystem::path socket;    // Unix socket of the JSON-RPC server
  std::string socket_group;        // group allowed to connect ("" = owner only)
};

// The socket server's client policy (rpc_server.hpp ServerOptions).
struct ServerConfig {
  // A client that sends nothing this long, without a subscription or replies
  // pending, is closed; 0 = never.
  double idle_timeout_s = 600.0;
  // server.log_level: error | warn | info | debug (daemon/log.hpp); "" =
  // not set (info). juncod --log-level overrides it.
  std::string log_level;
};

// The lab database this bench publishes to (daemon/lab_publisher.hpp,
// docs/lab.md). database "" = no lab: the bench keeps its data to itself.
struct LabConfig {
  std::string database;  // libpq connection string; the password never here (~/.pgpass, PGPASSFILE, service file)
  std::string bench;     // this bench's name in the lab, [A-Za-z0-9._-]{1,64}
  int batch_rows = 2000; // outbox entries per lab transaction
};

struct Config {
  std::filesystem::path file;  // where it was loaded from ("" when built in code)
  std::map<std::string, InstrumentConfig> bench;  // by role
  FixtureConfig fixture;
  SafetyLimits safety;
  JobLimits limits;
  // How well the bench reads voltage and current, as ±(rel·|x| + abs) limits
  // (the meter's, or the supply's readback when current comes from it). The
  // fits weight every reading by it and exclude currents below 10 × i_abs_a.
  // Optional; fitting::AccuracyModel's defaults otherwise.
  fitting::AccuracyModel accuracy;
  // The level meter's accuracy for the ratio of its two channels, as a
  // ±limit in dB (accuracy.level_db); σ = limit/√3 as for the DC readings.
  // Every AC fit and consistency test juncod makes uses this one σ.
  double level_db = 0.02;
  double level_sigma_db() const { return level_db / 1.7320508075688772; }
  PathsConfig paths;
  ServerConfig server;
  LabConfig lab;
  nlohmann::json raw;  // the parsed document (for bench.describe)

  const InstrumentConfig* instrument(const std::string& role) const {
    auto it = bench.find(role);
    return it == bench.end() ? nullptr : &it->second;
  }
};

// Where the database and socket go when the config does not say: system
// paths when running as root (a service), per-user XDG paths otherwise.
PathsConfig default_paths();

// Parses and validates; `file` is only used for messages and to resolve
// relative paths (its directory). Throws ConfigError.
Config parse_config(const std::string& text, const std::filesystem::path& file);
Config load_config(const std::filesystem::path& file);
// Every problem of the text at once (for --check-config): each section and
// each instrument is checked on its own; within one, the first problem. The
// config as far as it could be read goes to *parsed. Empty when it is good.
std::vector<ConfigError> config_problems(const std::string& text, const std::filesystem::path& file, Config* parsed = nullptr);

// Finds a dialect given as a bare name ("scpi-source") or a path.
// Search order for bare names: $JUNCO_DIALECT_DIR, the installed share dir,
// the source tree's drivers/dialects. Returns nullopt when not found.
std::optional<std::filesystem::path> find_dialect(const std::string& name, const std::filesystem::path& config_dir);

const char* to_string(CurrentFrom from);

}  // namespace junco::daemon
