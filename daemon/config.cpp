#include "daemon/config.hpp"

#include "daemon/log.hpp"
#include "drivers/levels.hpp"
#include "formats/json_limits.hpp"
#include "lab/pg.hpp"  // conninfo_problem

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <set>
#include <sstream>
#include <unistd.h>  // geteuid

namespace junco::daemon {

using Json = nlohmann::json;
namespace fs = std::filesystem;

namespace {

// Carries the file name so every check can name file + pointer.
class Checker {
 public:
  explicit Checker(std::string file) : file_(std::move(file)) {}

  [[noreturn]] void fail(const std::string& pointer, const std::string& problem) const {
    throw ConfigError(file_, pointer, problem);
  }

  const Json& object(const Json& parent, const std::string& key, const std::string& pointer) const {
    const Json& v = parent.at(key);
    if (!v.is_object()) fail(pointer, std::string("must be an object, not ") + v.type_name());
    return v;
  }

  // Rejects keys we do not know, so a typo ("max_suply_v") is not silently ignored.
  void only_keys(const Json& obj, const std::string& pointer, std::initializer_list<const char*> keys) const {
    std::set<std::string> known(keys.begin(), keys.end());
    for (const auto& [k, v] : obj.items()) {
      (void)v;
      if (!known.count(k)) fail(pointer + "/" + k, "unknown key");
    }
  }

  double number(const Json& obj, const std::string& key, const std::string& pointer, double fallback, bool required,
                double min_exclusive, bool allow_equal_min) const {
    const std::string p = pointer + "/" + key;
    if (!obj.contains(key)) {
      if (required) fail(p, "missing (required)");
      return fallback;
    }
    const Json& v = obj.at(key);
    if (!v.is_number()) fail(p, std::string("must be a number, not ") + v.type_name());
    const double x = v.get<double>();
    if (!std::isfinite(x)) fail(p, "must be finite");
    if (allow_equal_min ? x < min_exclusive : x <= min_exclusive) {
      std::ostringstream os;
      os << "must be " << (allow_equal_min ? ">= " : "> ") << min_exclusive << ", got " << x;
      fail(p, os.str());
    }
    return x;
  }

  std::string string(const Json& obj, const std::string& key, const std::string& pointer, const std::string& fallback,
                     bool required) const {
    const std::string p = pointer + "/" + key;
    if (!obj.contains(key)) {
      if (required) fail(p, "missing (required)");
      return fallback;
    }
    const Json& v = obj.at(key);
    if (!v.is_string()) fail(p, std::string("must be a string, not ") + v.type_name());
    return v.get<std::string>();
  }

  int integer(const Json& obj, const std::string& key, const std::string& pointer, int fallback, int min, int max) const {
    const std::string p = pointer + "/" + key;
    if (!obj.contains(key)) return fallback;
    const Json& v = obj.at(key);
    if (!v.is_number_integer()) fail(p, std::string("must be an integer, not ") + v.type_name());
    const auto x = v.get<long long>();
    if (x < min || x > max) fail(p, "must be in " + std::to_string(min) + ".." + std::to_string(max) + ", got " + std::to_string(x));
    return static_cast<int>(x);
  }

 private:
  std::string file_;
};

const char* const kRoles[] = {"source", "meter", "scanner", "siggen", "levelmeter", "chamber", "vectormeter"};
const char* const kRequiredRoles[] = {"source", "meter", "scanner"};

fs::path resolve(const fs::path& p, const fs::path& dir) { return p.is_absolute() ? p : (dir / p).lexically_normal(); }

InstrumentConfig parse_instrument(const Checker& c, const Json& obj, const std::string& role, const std::string& pointer,
                                  const fs::path& dir) {
  c.only_keys(obj, pointer, {"address", "dialect", "reply_timeout_ms", "max_retries", "amplitude_unit", "impedance_ohm"});
  InstrumentConfig ic;
  ic.role = role;
  ic.address = c.string(obj, "address", pointer, "", true);
  if (ic.address.empty()) c.fail(pointer + "/address", "must not be empty");
  const std::string dialect = c.string(obj, "dialect", pointer, "", true);
  auto found = find_dialect(dialect, dir);
  if (!found) c.fail(pointer + "/dialect", "dialect \"" + dialect + "\" not found");
  ic.dialect_path = *found;
  ic.reply_timeout_ms = c.integer(obj, "reply_timeout_ms", pointer, 2000, 1, 600000);
  ic.max_retries = c.integer(obj, "max_retries", pointer, 2, 0, 20);
  if (obj.contains("amplitude_unit")) {
    if (role != "siggen" && role != "levelmeter") c.fail(pointer + "/amplitude_unit", "only siggen and levelmeter take an amplitude unit");
    const std::string u = c.string(obj, "amplitude_unit", pointer, "", true);
    ic.amplitude_unit = drivers::parse_level_unit(u);
    if (!ic.amplitude_unit) c.fail(pointer + "/amplitude_unit", "unknown unit \"" + u + "\" (known: vpp, vrms, dbm)");
  }
  if (obj.contains("impedance_ohm")) {
    if (role != "siggen" && role != "levelmeter") c.fail(pointer + "/impedance_ohm", "only siggen and levelmeter take impedance_ohm");
    ic.impedance_ohm = c.number(obj, "impedance_ohm", pointer, 0.0, true, 0.0, false);
  }
  return ic;
}

FixtureConfig parse_fixture(const Checker& c, const Json& obj) {
  const std::string p = "/fixture";
  c.only_keys(obj, p, {"bias_resistor_ohm", "dc_return_ohm", "source_ohm", "load_ohm", "slots", "current_from", "stray_c_f"});
  FixtureConfig f;
  f.bias_resistor_ohm = c.number(obj, "bias_resistor_ohm", p, 0, true, 0, true);
  f.dc_return_ohm = c.number(obj, "dc_return_ohm", p, 0, false, 0, true);
  f.source_ohm = c.number(obj, "source_ohm", p, 50, false, 0, true);
  f.load_ohm = c.number(obj, "load_ohm", p, 50, false, 0, false);
  f.stray_c_f = c.number(obj, "stray_c_f", p, 0, false, 0, true);
  if (f.stray_c_f > 1e-9) c.fail(p + "/stray_c_f", "must be at most 1e-9 F (a fixture's stray is pF; is the unit farads?)");
  if (!obj.contains("slots")) c.fail(p + "/slots", "missing (required)");
  f.slots = c.integer(obj, "slots", p, 1, 1, 256);
  const std::string from = c.string(obj, "current_from", p, "source", false);
  if (from == "source") f.current_from = CurrentFrom::source;
  else if (from == "meter") f.current_from = CurrentFrom::meter;
  else c.fail(p + "/current_from", "must be \"source\" or \"meter\", got \"" + from + "\"");
  return f;
}

fitting::AccuracyModel parse_accuracy(const Checker& c, const Json& obj) {
  const std::string p = "/accuracy";
  c.only_keys(obj, p, {"v_rel", "v_abs_v", "i_rel", "i_abs_a", "level_db"});
  fitting::AccuracyModel a;
  a.v_rel = c.number(obj, "v_rel", p, a.v_rel, false, 0, true);
  a.v_abs_v = c.number(obj, "v_abs_v", p, a.v_abs_v, false, 0, true);
  a.i_rel = c.number(obj, "i_rel", p, a.i_rel, false, 0, true);
  a.i_abs_a = c.number(obj, "i_abs_a", p, a.i_abs_a, false, 0, true);
  // A reading known exactly cannot be weighted; a relative term alone leaves
  // zero readings with zero uncertainty.
  if (!(a.v_abs_v > 0)) c.fail(p + "/v_abs_v", "must be > 0 (the voltage reading's offset term)");
  if (!(a.i_abs_a > 0)) c.fail(p + "/i_abs_a", "must be > 0 (the current reading's offset term)");
  return a;
}

SafetyLimits parse_safety(const Checker& c, const Json& obj) {
  const std::string p = "/safety";
  c.only_keys(obj, p, {"max_supply_v", "current_limit_a", "max_power_w", "max_reverse_v", "max_job_s", "chamber_min_k", "chamber_max_k",
                       "max_soak_s", "chamber_idle_k", "chamber_max_rate_k_per_min"});
  // Every limit is required: a bench without stated limits is not safe to run.
  SafetyLimits s;
  s.max_supply_v = c.number(obj, "max_supply_v", p, 0, true, 0, false);
  s.current_limit_a = c.number(obj, "current_limit_a", p, 0, true, 0, false);
  s.max_power_w = c.number(obj, "max_power_w", p, 0, true, 0, false);
  s.max_reverse_v = c.number(obj, "max_reverse_v", p, 0, true, 0, true);
  s.max_job_s = c.number(obj, "max_job_s", p, 0, true, 0, false);
  // Chamber limits: required only with a chamber (checked with the bench, parse_config_impl).
  s.chamber_min_k = c.number(obj, "chamber_min_k", p, 0, false, 0, false);
  s.chamber_max_k = c.number(obj, "chamber_max_k", p, 0, false, 0, false);
  s.max_soak_s = c.number(obj, "max_soak_s", p, 0, false, 0, false);
  s.chamber_idle_k = c.number(obj, "chamber_idle_k", p, s.chamber_idle_k, false, 0, false);
  s.chamber_max_rate_k_per_min = c.number(obj, "chamber_max_rate_k_per_min", p, 0, false, 0, true);
  if (obj.contains("chamber_min_k") && obj.contains("chamber_max_k") && !(s.chamber_min_k < s.chamber_max_k)) {
    std::ostringstream os;
    os << "must be above chamber_min_k = " << s.chamber_min_k << " K, got " << s.chamber_max_k << " K";
    c.fail(p + "/chamber_max_k", os.str());
  }
  if (obj.contains("chamber_min_k") && obj.contains("chamber_max_k") &&
      (s.chamber_idle_k < s.chamber_min_k || s.chamber_idle_k > s.chamber_max_k)) {
    std::ostringstream os;
    os << "must be within chamber_min_k..chamber_max_k = " << s.chamber_min_k << ".." << s.chamber_max_k << " K, got "
       << s.chamber_idle_k << " K";
    c.fail(p + "/chamber_idle_k", os.str());
  }
  if (s.max_reverse_v > s.max_supply_v) {
    std::ostringstream os;
    os << "must not exceed max_supply_v = " << s.max_supply_v << " V, got " << s.max_reverse_v << " V";
    c.fail(p + "/max_reverse_v", os.str());
  }
  return s;
}

// Optional: the defaults (config.hpp) suit a bench PC with a few GB of memory.
JobLimits parse_limits(const Checker& c, const Json& obj) {
  const std::string p = "/limits";
  c.only_keys(obj, p, {"max_points_per_job", "max_plan_memory_bytes"});
  JobLimits l;
  if (obj.contains("max_points_per_job")) {
    const Json& v = obj.at("max_points_per_job");
    if (!v.is_number_integer()) c.fail(p + "/max_points_per_job", std::string("must be an integer, not ") + v.type_name());
    const auto n = v.get<long long>();
    if (n < 1 || n > 1'000'000'000LL) c.fail(p + "/max_points_per_job", "must be in 1..1000000000, got " + std::to_string(n));
    l.max_points_per_job = static_cast<long>(n);
  }
  l.max_plan_memory_bytes = c.number(obj, "max_plan_memory_bytes", p, l.max_plan_memory_bytes, false, 0, false);
  return l;
}

// The lab database (docs/lab.md). A password written into the connection
// string is refused: it would sit in a file many people read and in logs.
LabConfig parse_lab(const Checker& c, const Json& obj) {
  const std::string p = "/lab";
  c.only_keys(obj, p, {"database", "bench", "batch_rows"});
  LabConfig lab;
  lab.database = c.string(obj, "database", p, "", true);
  if (lab.database.empty()) c.fail(p + "/database", "must not be empty (a libpq connection string, e.g. \"service=junco-lab\")");
  if (const std::string bad = lab::conninfo_problem(lab.database); !bad.empty()) c.fail(p + "/database", bad);
  lab.bench = c.string(obj, "bench", p, "", true);
  if (lab.bench.empty() || lab.bench.size() > 64 ||
      lab.bench.find_first_not_of("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-") != std::string::npos)
    c.fail(p + "/bench", "must be 1..64 characters of A-Z a-z 0-9 . _ -, got \"" + lab.bench + "\"");
  lab.batch_rows = c.integer(obj, "batch_rows", p, lab.batch_rows, 1, 20000);
  return lab;
}

}  // namespace

const char* to_string(CurrentFrom from) { return from == CurrentFrom::source ? "source" : "meter"; }

PathsConfig default_paths() {
  PathsConfig p;
  if (::geteuid() == 0) {
    p.database = "/var/lib/junco/junco.db";
    p.socket = "/run/junco/juncod.sock";
    return p;
  }
  const char* home = std::getenv("HOME");
  const char* state = std::getenv("XDG_STATE_HOME");
  fs::path state_dir = (state && *state) ? fs::path(state) : fs::path(home ? home : "/tmp") / ".local/state";
  p.database = state_dir / "junco" / "junco.db";
  const char* runtime = std::getenv("XDG_RUNTIME_DIR");
  fs::path run_dir = (runtime && *runtime) ? fs::path(runtime) : state_dir;
  p.socket = run_dir / "junco" / "juncod.sock";
  return p;
}

std::optional<fs::path> find_dialect(const std::string& name, const fs::path& config_dir) {
  if (name.empty()) return std::nullopt;
  const bool bare = name.find('/') == std::string::npos && fs::path(name).extension() != ".json";
  std::error_code ec;
  if (!bare) {
    fs::path p = resolve(name, config_dir);
    if (fs::is_regular_file(p, ec)) return p;
    return std::nullopt;
  }
  std::vector<fs::path> dirs;
  if (const char* env = std::getenv("JUNCO_DIALECT_DIR"); env && *env) dirs.emplace_back(env);
#ifdef JUNCO_INSTALLED_DIALECT_DIR
  dirs.emplace_back(JUNCO_INSTALLED_DIALECT_DIR);
#endif
#ifdef JUNCO_SOURCE_DIALECT_DIR
  dirs.emplace_back(JUNCO_SOURCE_DIALECT_DIR);
#endif
  for (const auto& d : dirs) {
    fs::path p = d / (name + ".json");
    if (fs::is_regular_file(p, ec)) return p;
  }
  return std::nullopt;
}

namespace {

// Runs one section's checks. Collecting (problems != nullptr), a section's
// first problem is kept and the parse goes on with the next section, so a
// --check-config run reports every broken section at once; otherwise the
// first problem is thrown as before.
template <typename F>
void section(std::vector<ConfigError>* problems, F&& body) {
  if (!problems) {
    body();
    return;
  }
  try {
    body();
  } catch (const ConfigError& e) {
    problems->push_back(e);
  }
}

Config parse_config_impl(const std::string& text, const fs::path& file, std::vector<ConfigError>* problems) {
  const Checker c(file.string());
  Json doc;
  try {
    // Depth and size checked while parsing: a deep file never becomes a json value.
    doc = parse_json_limited(text, "the config", /*ignore_comments=*/true);
  } catch (const JsonLimitError& e) {
    c.fail("", e.what());
  } catch (const Json::exception& e) {  // parse_error, and out_of_range for numbers that overflow
    // nlohmann's message carries line and column; drop its "[json.exception...]" prefix.
    std::string what = e.what();
    if (auto pos = what.find("] "); pos != std::string::npos) what = what.substr(pos + 2);
    c.fail("", "not valid JSON: " + what);
  }
  if (!doc.is_object()) c.fail("", std::string("must be an object, not ") + doc.type_name());
  section(problems, [&] { c.only_keys(doc, "", {"bench", "fixture", "safety", "limits", "accuracy", "paths", "server", "lab"}); });

  Config cfg;
  cfg.file = file;
  cfg.raw = doc;
  const fs::path dir = file.has_parent_path() ? file.parent_path() : fs::current_path();

  section(problems, [&] {
    if (!doc.contains("bench")) c.fail("/bench", "missing (required)");
    const Json& bench = c.object(doc, "bench", "/bench");
    for (const auto& [role, obj] : bench.items()) {
      section(problems, [&, &role = role, &obj = obj] {
        const std::string p = "/bench/" + role;
        bool known = false;
        for (const char* r : kRoles) known = known || role == r;
        if (!known) c.fail(p, "unknown role (expected source, meter, scanner, siggen, levelmeter, chamber or vectormeter)");
        if (!obj.is_object()) c.fail(p, std::string("must be an object, not ") + obj.type_name());
        cfg.bench[role] = parse_instrument(c, obj, role, p, dir);
      });
    }
    for (const char* r : kRequiredRoles)
      if (!cfg.bench.count(r) && !bench.contains(r)) section(problems, [&] { c.fail(std::string("/bench/") + r, "missing (required)"); });
  });

  section(problems, [&] {
    if (!doc.contains("fixture")) c.fail("/fixture", "missing (required)");
    cfg.fixture = parse_fixture(c, c.object(doc, "fixture", "/fixture"));
  });
  section(problems, [&] {
    if (!doc.contains("safety")) c.fail("/safety", "missing (required)");
    cfg.safety = parse_safety(c, c.object(doc, "safety", "/safety"));
  });
  // A chamber needs its limits: a bench that can heat or cool parts without
  // stated bounds is not safe to run.
  section(problems, [&] {
    if (!cfg.bench.count("chamber") || !doc.contains("safety") || !doc["safety"].is_object()) return;
    for (const char* key : {"chamber_min_k", "chamber_max_k", "max_soak_s"})
      if (!doc["safety"].contains(key))
        section(problems, [&] { c.fail(std::string("/safety/") + key, "missing (required with a chamber in /bench)"); });
  });
  section(problems, [&] {
    if (doc.contains("limits")) cfg.limits = parse_limits(c, c.object(doc, "limits", "/limits"));
  });
  section(problems, [&] {
    if (doc.contains("accuracy")) {
      const Json& a = c.object(doc, "accuracy", "/accuracy");
      cfg.accuracy = parse_accuracy(c, a);
      cfg.level_db = c.number(a, "level_db", "/accuracy", cfg.level_db, false, 0, false);
      if (cfg.level_db > 3) c.fail("/accuracy/level_db", "must be at most 3 dB (a level meter's ratio accuracy)");
    }
  });

  section(problems, [&] { if (doc.contains("server")) {
    const Json& server = c.object(doc, "server", "/server");
    c.only_keys(server, "/server", {"idle_timeout_s", "log_level"});
    cfg.server.log_level = c.string(server, "log_level", "/server", "", false);
    if (!cfg.server.log_level.empty() && !parse_log_level(cfg.server.log_level))
      c.fail("/server/log_level", std::string("must be ") + kLogLevelWords + ", got \"" + cfg.server.log_level + "\"");
    cfg.server.idle_timeout_s = c.number(server, "idle_timeout_s", "/server", cfg.server.idle_timeout_s, false, 0, true);
    if (cfg.server.idle_timeout_s > 86400) c.fail("/server/idle_timeout_s", "must be at most 86400 (a day; 0 = never)");
  } });

  section(problems, [&] {
    if (doc.contains("lab")) cfg.lab = parse_lab(c, c.object(doc, "lab", "/lab"));
  });

  cfg.paths = default_paths();
  section(problems, [&] { if (doc.contains("paths")) {
    const Json& paths = c.object(doc, "paths", "/paths");
    c.only_keys(paths, "/paths", {"database", "socket", "socket_group"});
    if (paths.contains("database")) cfg.paths.database = resolve(c.string(paths, "database", "/paths", "", true), dir);
    if (paths.contains("socket")) cfg.paths.socket = resolve(c.string(paths, "socket", "/paths", "", true), dir);
    cfg.paths.socket_group = c.string(paths, "socket_group", "/paths", "", false);
    if (cfg.paths.database.empty() || paths.value("database", "x").empty()) c.fail("/paths/database", "must not be empty");
    if (paths.value("socket", "x").empty()) c.fail("/paths/socket", "must not be empty");
  } });
  return cfg;
}

}  // namespace

Config parse_config(const std::string& text, const fs::path& file) { return parse_config_impl(text, file, nullptr); }

std::vector<ConfigError> config_problems(const std::string& text, const fs::path& file, Config* parsed) {
  std::vector<ConfigError> problems;
  try {
    Config cfg = parse_config_impl(text, file, &problems);
    if (parsed) *parsed = std::move(cfg);
  } catch (const ConfigError& e) {  // the document itself (not JSON, not an object)
    problems.push_back(e);
  }
  return problems;
}

Config load_config(const fs::path& file) {
  std::string text;
  try {
    text = read_json_file(file.string());
  } catch (const JsonLimitError&) {
    throw ConfigError(file.string(), "", too_big_message("the config is", max_json_file_bytes));
  } catch (const std::exception&) {
    throw ConfigError(file.string(), "", "cannot read the file");
  }
  return parse_config(text, file);
}

}  // namespace junco::daemon
