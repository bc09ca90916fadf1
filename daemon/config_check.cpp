#include "daemon/config_check.hpp"

#include "daemon/rpc_server.hpp"

#include "drivers/address.hpp"
#include "drivers/dialect.hpp"
#include "drivers/errors.hpp"

#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/un.h>
#include <unistd.h>

#include <fstream>
#include <sstream>

namespace junco::daemon {

namespace fs = std::filesystem;

namespace {

drivers::Role role_of(const std::string& role) {
  if (role == "source") return drivers::Role::source;
  if (role == "meter") return drivers::Role::meter;
  if (role == "scanner") return drivers::Role::scanner;
  if (role == "siggen") return drivers::Role::siggen;
  if (role == "chamber") return drivers::Role::chamber;
  if (role == "vectormeter") return drivers::Role::vectormeter;
  return drivers::Role::levelmeter;
}

void check_instruments(const Config& c, ConfigCheck& out) {
  const std::string file = c.file.string();
  for (const auto& [role, ic] : c.bench) {
    const std::string where = file + ": /bench/" + role;
    try {
      (void)drivers::parse_address(ic.address);
    } catch (const drivers::DriverError& e) {
      out.problems.push_back(where + "/address: " + e.what());
    }
    try {
      const drivers::Dialect d = drivers::load_dialect(ic.dialect_path.string());
      if (d.role != role_of(role))
        out.problems.push_back(where + "/dialect: " + ic.dialect_path.string() + " is for role " + drivers::to_string(d.role) +
                               ", not " + role);
      if (role == "meter" && c.fixture.current_from == CurrentFrom::meter && !d.find("measure_dc_current"))
        out.problems.push_back(where + "/dialect: " + ic.dialect_path.string() +
                               " has no measure_dc_current, but fixture.current_from is \"meter\"");
      if (role == "chamber" && c.safety.chamber_max_rate_k_per_min > 0 && !d.find("set_rate"))
        out.problems.push_back(where + "/dialect: " + ic.dialect_path.string() +
                               " has no set_rate, but safety.chamber_max_rate_k_per_min is set (the limit could not be programmed)");
    } catch (const drivers::DriverError& e) {
      out.problems.push_back(where + "/dialect: " + e.what());
    }
  }
}

// The server's own rules (rpc_server.hpp socket_dir_problem), read-only.
void check_socket(const Config& c, ConfigCheck& out) {
  const std::string path = c.paths.socket.string();
  if (path.size() >= sizeof(sockaddr_un{}.sun_path))
    out.problems.push_back("socket: path is " + std::to_string(path.size()) + " bytes, the limit for a Unix socket is " +
                           std::to_string(sizeof(sockaddr_un{}.sun_path) - 1) + ": " + path);
  const fs::path dir = c.paths.socket.parent_path();
  struct stat st{};
  if (::stat(dir.c_str(), &st) != 0) {
    const fs::path parent = dir.parent_path();
    if (::access(parent.c_str(), W_OK | X_OK) != 0)
      out.problems.push_back("socket: directory " + dir.string() + " does not exist and " + parent.string() +
                             " does not let this user create it");
    return;
  }
  if (const std::string problem = socket_dir_problem(dir.string(), st); !problem.empty()) out.problems.push_back("socket: " + problem);
}

void check_database(const Config& c, ConfigCheck& out) {
  const fs::path db = c.paths.database;
  const fs::path dir = db.parent_path();
  std::error_code ec;
  if (!fs::is_directory(dir, ec)) {
    const bool given = c.raw.is_object() && c.raw.contains("paths") && c.raw["paths"].is_object() && c.raw["paths"].contains("database");
    if (!given) {  // the per-user default (config.hpp default_paths) is created at start
      out.warnings.push_back("database: " + dir.string() + " will be created at start (the default place; set paths.database to choose)");
      return;
    }
    out.problems.push_back("database: directory " + dir.string() +
                           " does not exist; create it (or mount the data volume that holds it) before starting juncod");
    return;
  }
  if (::access(dir.c_str(), W_OK | X_OK) != 0)
    out.problems.push_back("database: directory " + dir.string() + " is not writable by this user (SQLite keeps its journal beside the file)");
  if (fs::exists(db, ec)) {
    if (!fs::is_regular_file(db, ec)) out.problems.push_back("database: " + db.string() + " exists and is not a file");
    else if (::access(db.c_str(), R_OK | W_OK) != 0) out.problems.push_back("database: " + db.string() + " is not readable and writable by this user");
  }
}

// Limits that are allowed but look like a unit slip (mA typed as A, ...).
// Thresholds are ours (common practice for small-signal and PIN diodes on a
// bench, no source).
void check_limits(const Config& c, ConfigCheck& out) {
  const auto& s = c.safety;
  const std::string file = c.file.string();
  if (s.current_limit_a > 1.0) out.warnings.push_back(file + ": /safety/current_limit_a: " + std::to_string(s.current_limit_a) + " A is large for a small diode; the unit is amperes (0.1 = 100 mA)");
  if (s.max_power_w > 5.0) out.warnings.push_back(file + ": /safety/max_power_w: " + std::to_string(s.max_power_w) + " W is more than a small diode survives; the unit is watts");
  if (s.max_supply_v > 60.0) out.warnings.push_back(file + ": /safety/max_supply_v: above 60 V the fixture is no longer extra-low voltage; follow your lab's rules for hazardous voltages");
  if (s.max_job_s < 60.0) out.warnings.push_back(file + ": /safety/max_job_s: " + std::to_string(s.max_job_s) + " s stops almost any job; the unit is seconds");
  if (c.bench.count("chamber")) {
    // Kelvin typed as Celsius gives set points near 0 K; a chamber past
    // −100…+200 °C is beyond what small-signal parts are rated for (common
    // practice, no source).
    if (s.chamber_min_k > 0 && s.chamber_min_k < 173.15)
      out.warnings.push_back(file + ": /safety/chamber_min_k: " + std::to_string(s.chamber_min_k) + " K is below −100 °C; the unit is kelvin (253.15 = −20 °C)");
    if (s.chamber_max_k > 473.15)
      out.warnings.push_back(file + ": /safety/chamber_max_k: " + std::to_string(s.chamber_max_k) + " K is above +200 °C; the unit is kelvin (358.15 = 85 °C)");
    if (s.max_soak_s > 0 && s.max_soak_s < 60)
      out.warnings.push_back(file + ": /safety/max_soak_s: " + std::to_string(s.max_soak_s) + " s is short for a chamber to settle; the unit is seconds");
  }
  if (s.current_limit_a * s.max_supply_v < s.max_power_w)
    out.warnings.push_back(file + ": /safety/max_power_w: never reached (current_limit_a × max_supply_v is lower)");
}

}  // namespace

ConfigCheck check_config_file(const fs::path& file) {
  ConfigCheck out;
  std::ifstream in(file, std::ios::binary);
  if (!in) {
    out.problems.push_back(file.string() + ": /: cannot read the file");
    return out;
  }
  std::ostringstream text;
  text << in.rdbuf();
  for (const auto& e : config_problems(text.str(), file, &out.config)) out.problems.push_back(e.what());
  out.config.file = file;
  check_instruments(out.config, out);
  if (!out.config.paths.socket.empty()) check_socket(out.config, out);
  if (!out.config.paths.database.empty()) check_database(out.config, out);
  check_limits(out.config, out);
  return out;
}

}  // namespace junco::daemon
