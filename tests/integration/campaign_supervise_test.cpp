// Safe when juncod dies (docs/daemon-core.md, "Supervision and make-safe
// after a death"): with no person acting, the supply output goes off within
// 1 s of the daemon's death, by any signal, in both ways juncod is run.
//
// Real processes throughout: junco-sim (TCP instruments), juncod on a real
// Unix socket, SQLite as a real file. The output-on window is measured by
// the simulated supply itself: `outputs?` (docs/sim.md) stamps every
// on/off switch on CLOCK_MONOTONIC, the clock of this test's
// std::chrono::steady_clock, and the test stamps each kill on the same clock.
//
//  - supervised (juncod by hand / `junco demo`): ≥ 50 SIGKILL and SIGSEGV of
//    the worker at random moments of running jobs; the jobs still end done
//    with every reading once and their fits; the window after each death.
//  - supervisor SIGKILLed: the worker stops the job with the outputs off.
//  - damaged database at restart: outputs off, the error is named, the
//    supervisor gives up instead of looping; crash-loop limit.
//  - systemd: the shipped unit file is parsed; its ExecStart= is killed and
//    its ExecStopPost= run as systemd would, RestartSec= honoured.
//  - `juncod --make-safe` alone: a live supply off, no database created.
//
// The 1 s bound is the issue's target (issue 10), not a published figure.
#include "tests/support/campaign.hpp"

#include <catch2/catch.hpp>

#include <sys/resource.h>

#include <algorithm>
#include <cstdio>
#include <fstream>
#include <random>
#include <regex>
#include <sstream>

namespace fs = std::filesystem;
using namespace std::chrono_literals;
using junco::test::CampaignBench;
using junco::test::ChildOptions;
using junco::test::ChildProcess;
using junco::test::Json;
using junco::test::SimProcess;
using junco::cli::RpcClient;

namespace {

using Clock = std::chrono::steady_clock;

long long mono_ns() {
  return std::chrono::duration_cast<std::chrono::nanoseconds>(Clock::now().time_since_epoch()).count();
}

// Under ASan (preset debug) the programs this test starts would catch the
// SIGSEGV it sends, print a report and exit 1, slowly; handle_segv=0 lets the
// signal kill them as it kills a release build, which is what is being
// tested. Set before main(), while there is one thread; appended to what the
// caller gave.
const bool segv_kills_children = [] {
  if constexpr (junco::test::kAddressSanitizer) {
    const char* given = std::getenv("ASAN_OPTIONS");
    const std::string options = given && *given ? std::string(given) + ":" : std::string();
    ::setenv("ASAN_OPTIONS", (options + "handle_segv=0").c_str(), 1);
  }
  return true;
}();

// SIGSEGV of a worker must not spend seconds writing a core file (and CI
// must not fill up with them): no core dumps for this test and its children.
void no_core_dumps() {
  rlimit r{0, 0};
  ::setrlimit(RLIMIT_CORE, &r);
}

std::string read_text(const fs::path& p) {
  std::ifstream in(p);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

// A dead worker may still have an "output on" in flight when it dies (sent,
// not yet handled by the sim). Anything later than this after the death is
// from the next worker: the supervisor waits restart_delay (200 ms) and the
// systemd unit RestartSec= (≥ 500 ms, checked below) before starting one.
constexpr long long kInFlightNs = 100'000'000;

// Seconds the supply output stayed on after a death at t_kill_ns, from the
// sim's switch log: 0 when it was off at the death (and nothing in flight
// turned it on), nullopt when it was on and has not gone off yet.
std::optional<double> output_on_window_s(SimProcess& sim, long long t_kill_ns, bool* on_at_death = nullptr) {
  const Json switches = sim.control("outputs?")["source"]["switches"];  // in time order
  bool on = false;
  for (const auto& s : switches)
    if (s["t_ns"].get<long long>() <= t_kill_ns) on = s["on"];
  if (on_at_death) *on_at_death = on;
  bool on_after = false;
  for (const auto& s : switches) {
    const long long t = s["t_ns"];
    if (t <= t_kill_ns) continue;
    if (s["on"] == true) {
      if (t - t_kill_ns > kInFlightNs) break;  // the next worker's job, after the bench was made safe
      on_after = true;
    } else if (on || on_after) {
      return static_cast<double>(t - t_kill_ns) * 1e-9;
    }
  }
  if (on || on_after) return std::nullopt;
  return 0.0;
}

// Waits until the window is known (output went off) or `limit` passed.
std::optional<double> wait_window_s(SimProcess& sim, long long t_kill_ns, std::chrono::milliseconds limit,
                                    bool* on_at_death = nullptr) {
  const auto until = Clock::now() + limit;
  for (;;) {
    auto w = output_on_window_s(sim, t_kill_ns, on_at_death);
    if (w || Clock::now() >= until) return w;
    std::this_thread::sleep_for(10ms);
  }
}

Json rpc(const std::string& socket, const std::string& method, Json params = Json::object()) {
  RpcClient c(socket);
  Json r = c.request(method, std::move(params));
  if (!r.contains("result")) throw std::runtime_error(method + ": " + r.dump());
  return r["result"];
}

bool socket_answers(const std::string& socket) {
  try {
    rpc(socket, "daemon.status");
    return true;
  } catch (const std::exception&) {
    return false;
  }
}

// Keeps a job running: the id of a queued/running job, submitting a new one
// (8 parts × 40 points) when there is none.
struct JobFeeder {
  int submitted = 0;
  long current = 0;
  long ensure(const std::string& socket) {
    const Json jobs = rpc(socket, "job.list")["jobs"];
    for (const auto& j : jobs)
      if (j["state"] == "running" || j["state"] == "queued") return current = j["job_id"].get<long>();
    ++submitted;
    const Json plan = junco::test::campaign_plan("SV-" + std::to_string(submitted), 1, 8, 40);
    return current = rpc(socket, "job.submit", {{"plan", plan}})["job_id"].get<long>();
  }
};

// Until job `id` is running and has stored more than `after` points.
long wait_progress(const std::string& socket, long id, long after, std::chrono::milliseconds limit) {
  const auto until = Clock::now() + limit;
  while (Clock::now() < until) {
    try {
      const Json j = rpc(socket, "job.get", {{"job_id", id}});
      const long done = j["points_done"];
      if (j["state"] == "running" && done > after) return done;
      if (j["state"] == "done") return done;
    } catch (const std::exception&) {
    }
    std::this_thread::sleep_for(5ms);
  }
  return -1;
}

// Until every job is done (or failed/cancelled: returned as not done).
bool wait_all_done(const std::string& socket, std::chrono::seconds limit, int* done_jobs) {
  const auto until = Clock::now() + limit;
  while (Clock::now() < until) {
    try {
      int done = 0, open = 0;
      const Json jobs = rpc(socket, "job.list")["jobs"];  // a copy: the reply is a temporary
      for (const auto& j : jobs) {
        if (j["state"] == "done") ++done;
        else if (j["state"] == "running" || j["state"] == "queued") ++open;
      }
      if (open == 0) {
        *done_jobs = done;
        return true;
      }
    } catch (const std::exception&) {
    }
    std::this_thread::sleep_for(50ms);
  }
  return false;
}

// Parts of done jobs, and how many of them have a stored fit (read-only).
std::pair<long, long> parts_with_fit(const fs::path& db_file) {
  sqlite3* db = nullptr;
  std::pair<long, long> r{-1, -1};
  if (sqlite3_open_v2(db_file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_busy_timeout(db, 5000);
    sqlite3_stmt* st = nullptr;
    const char* sql =
        "SELECT COUNT(DISTINCT r.part_id), COUNT(DISTINCT CASE WHEN EXISTS (SELECT 1 FROM fits f WHERE f.part_id = r.part_id) "
        "THEN r.part_id END) FROM runs r JOIN jobs j ON j.id = r.job_id WHERE j.state = 'done'";
    if (sqlite3_prepare_v2(db, sql, -1, &st, nullptr) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW)
      r = {sqlite3_column_int64(st, 0), sqlite3_column_int64(st, 1)};
    sqlite3_finalize(st);
  }
  sqlite3_close(db);
  return r;
}

// juncod started as a person would (default: supervised), on a campaign bench.
class Supervised {
 public:
  Supervised(CampaignBench& b, std::vector<std::string> extra = {}) : b_(b), log_(b.dir() / "juncod.log") {
    ChildOptions o;
    o.stderr_path = log_.string();
    o.stop_grace = 10s;
    std::vector<std::string> argv{std::string(JUNCO_BIN_DIR) + "/juncod", "--config", b.config_path().string()};
    argv.insert(argv.end(), extra.begin(), extra.end());
    process_ = std::make_unique<ChildProcess>(argv, o);
  }
  ChildProcess& process() { return *process_; }
  std::string log() const { return read_text(log_); }

  // The pid of the last worker that reported serving (-1: none yet).
  pid_t serving_worker() const {
    static const std::regex re("supervisor: worker pid ([0-9]+) serving");
    const std::string text = log();
    pid_t last = -1;
    for (auto it = std::sregex_iterator(text.begin(), text.end(), re); it != std::sregex_iterator(); ++it)
      last = static_cast<pid_t>(std::stol((*it)[1]));
    return last;
  }
  // Until a worker other than `not_this` serves and the socket answers.
  pid_t wait_serving(pid_t not_this, std::chrono::milliseconds limit) {
    const auto until = Clock::now() + limit;
    while (Clock::now() < until && process_->running()) {
      const pid_t w = serving_worker();
      if (w > 0 && w != not_this && socket_answers(b_.socket_path())) return w;
      std::this_thread::sleep_for(10ms);
    }
    return -1;
  }

 private:
  CampaignBench& b_;
  fs::path log_;
  std::unique_ptr<ChildProcess> process_;
};

struct Figures {
  std::vector<double> windows_s;  // one per death
  int on_at_death = 0;
  double max() const { return windows_s.empty() ? 0 : *std::max_element(windows_s.begin(), windows_s.end()); }
  double median() const {
    if (windows_s.empty()) return 0;
    auto v = windows_s;
    std::sort(v.begin(), v.end());
    return v[v.size() / 2];
  }
};

bool process_gone(pid_t pid) {
  if (::kill(pid, 0) != 0) return errno == ESRCH;
  const std::string stat = read_text("/proc/" + std::to_string(pid) + "/stat");
  const auto close = stat.rfind(')');
  return close != std::string::npos && close + 2 < stat.size() && stat[close + 2] == 'Z';  // zombie: dead, not yet reaped
}

// The shipped unit's lines, "Key" → values in order (Exec*= may repeat).
std::map<std::string, std::vector<std::string>> unit_settings() {
  std::ifstream in(std::string(JUNCO_SOURCE_DIR) + "/tools/systemd/juncod.service");
  std::map<std::string, std::vector<std::string>> m;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line[0] == '[') continue;
    const auto eq = line.find('=');
    if (eq != std::string::npos) m[line.substr(0, eq)].push_back(line.substr(eq + 1));
  }
  return m;
}

// An Exec*= command line of the unit with its install paths pointed at this
// build and this bench's config; systemd's prefixes (-, @, +, !) refused
// here so the test notices if the unit starts to rely on one.
std::vector<std::string> unit_command(const std::string& value, const std::string& config) {
  std::string cmd = value;
  auto replace = [&](const std::string& from, const std::string& to) {
    for (auto p = cmd.find(from); p != std::string::npos; p = cmd.find(from, p + to.size())) cmd.replace(p, from.size(), to);
  };
  replace("@CMAKE_INSTALL_FULL_SYSCONFDIR@/junco/bench.jsonc", config);
  replace("@CMAKE_INSTALL_FULL_SBINDIR@", JUNCO_BIN_DIR);
  std::istringstream words(cmd);
  std::vector<std::string> argv;
  for (std::string w; words >> w;) argv.push_back(w);
  REQUIRE_FALSE(argv.empty());
  REQUIRE(std::string("-@+!").find(argv[0][0]) == std::string::npos);
  return argv;
}

// systemd time span: "500ms", "1s", "2" (seconds).
std::chrono::milliseconds time_span(const std::string& v) {
  const double x = std::stod(v);
  if (v.find("ms") != std::string::npos) return std::chrono::milliseconds(static_cast<long>(x));
  return std::chrono::milliseconds(static_cast<long>(x * 1000));
}

}  // namespace

TEST_CASE("juncod --make-safe turns a live bench off and never opens the database", "[supervise]") {
  CampaignBench b("makesafe", 3);
  // A database path in a directory that does not exist: opening it would create both.
  b.config()["paths"]["database"] = (b.dir() / "nowhere" / "junco.db").string();
  b.write_config();
  junco::test::LineClient src(b.sim().endpoint("source"));
  junco::test::LineClient scan(b.sim().endpoint("scanner"));
  REQUIRE(src.query("VOLT 0.9;CURR 0.05;OUTP ON;*OPC?") == std::optional<std::string>("1"));
  REQUIRE(scan.query("ROUT:CLOS (@3);*OPC?").has_value());
  REQUIRE(b.source_on());
  REQUIRE(b.scanner_slot() == 3);

  ChildOptions o;
  o.stderr_path = (b.dir() / "make-safe.log").string();
  ChildProcess p({std::string(JUNCO_BIN_DIR) + "/juncod", "--config", b.config_path().string(), "--make-safe"}, o);
  CHECK(p.wait(10s) == std::optional<int>(0));
  const Json st = b.sim().control("state?");
  CHECK(st["source"]["output_on"] == false);
  CHECK(st["source"]["voltage_v"] == 0.0);
  CHECK(st["scanner"]["slot"] == 0);
  CHECK_FALSE(fs::exists(b.dir() / "nowhere"));
  CHECK_THAT(read_text(o.stderr_path), Catch::Contains("make-safe: every output off"));

  // A supply that does not answer: exit 1, and the log names it.
  REQUIRE(src.query("OUTP ON;*OPC?") == std::optional<std::string>("1"));
  b.sim().control("fault source silent");
  ChildProcess mute({std::string(JUNCO_BIN_DIR) + "/juncod", "--config", b.config_path().string(), "--make-safe"}, o);
  CHECK(mute.wait(20s) == std::optional<int>(1));
  CHECK_THAT(read_text(o.stderr_path), Catch::Contains("source"));
  CHECK_FALSE(fs::exists(b.dir() / "nowhere"));
}

TEST_CASE("supervised juncod: 50 worker kills mid-job, outputs off within 1 s of each, jobs complete with fits",
          "[supervise][campaign]") {
  no_core_dumps();
  CampaignBench b("supervise", 41);
  Supervised s(b, {"--restart-limit", "1000"});
  pid_t worker = s.wait_serving(-1, 15s);
  REQUIRE(worker > 0);
  CHECK_THAT(s.log(), Catch::Contains("bench: every output off"));  // the worker's make-safe at start

  std::mt19937 rng(20261203);  // fixed: a failure can be replayed
  std::uniform_int_distribution<int> delay_ms(0, 300);
  JobFeeder feeder;
  Figures fig;
  int sigkills = 0, sigsegvs = 0;
  constexpr int kKills = 50;
  const auto t0 = Clock::now();
  for (int k = 0; k < kKills; ++k) {
    INFO("kill " << k << "; log:\n" << s.log().substr(s.log().size() > 3000 ? s.log().size() - 3000 : 0));
    const long job = feeder.ensure(b.socket_path());
    REQUIRE(wait_progress(b.socket_path(), job, 0, 15s) >= 0);
    std::this_thread::sleep_for(std::chrono::milliseconds(delay_ms(rng)));
    const int sig = rng() % 2 ? SIGKILL : SIGSEGV;
    (sig == SIGKILL ? sigkills : sigsegvs)++;
    const long long t_kill = mono_ns();
    REQUIRE(::kill(worker, sig) == 0);
    const pid_t next = s.wait_serving(worker, 15s);
    REQUIRE(next > 0);
    bool on = false;
    const auto w = wait_window_s(b.sim(), t_kill, 2s, &on);
    REQUIRE(w.has_value());  // nullopt: the output is still on after a death
    CHECK(*w <= 1.0);
    fig.windows_s.push_back(*w);
    fig.on_at_death += on;
    worker = next;
  }
  const double kill_phase_s = std::chrono::duration<double>(Clock::now() - t0).count();
  int done_jobs = 0;
  REQUIRE(wait_all_done(b.socket_path(), 120s, &done_jobs));
  CHECK(done_jobs == feeder.submitted);  // none failed, none left interrupted
  CHECK(s.process().running());          // the supervisor lived through all of it
  // Each death was handled by the supervisor's own make-safe, not left to the next worker's start.
  {
    const std::string log = s.log();
    int handled = 0;
    for (auto p = log.find("make-safe after the worker's death: every output off"); p != std::string::npos;
         p = log.find("make-safe after the worker's death: every output off", p + 1))
      ++handled;
    CHECK(handled == kKills);
  }

  // SIGTERM: the worker stops cleanly, the supervisor exits 0, outputs off.
  CHECK(s.process().stop() == 0);
  CHECK_FALSE(b.source_on());

  const auto db = junco::test::check_database(b.db_path(), b.truth(), junco::test::kCampaignRbOhm, 0.05);
  INFO("database problems: " << [&] {
    std::string all;
    for (const auto& p : db.problems) all += p + "\n";
    return all;
  }());
  CHECK(db.integrity == "ok");
  CHECK(db.duplicates == 0);
  CHECK(db.gaps == 0);
  CHECK(db.points_done_mismatch == 0);
  CHECK(junco::test::points_lost(b.db_path(), 40) == 0);
  const auto [parts, fitted] = parts_with_fit(b.db_path());
  CHECK(parts == 8L * feeder.submitted);
  std::printf("supervised campaign: %d kills (%d SIGKILL, %d SIGSEGV) in %.1f s, output on at %d deaths; "
              "output-on window max %.0f ms, median %.0f ms; %d jobs done of %d; %ld of %ld parts with a fit\n",
              kKills, sigkills, sigsegvs, kill_phase_s, fig.on_at_death, fig.max() * 1e3, fig.median() * 1e3, done_jobs,
              feeder.submitted, fitted, parts);
  // Kills land in the middle of sweeps mostly: the window was measured, not assumed.
  CHECK(fig.on_at_death >= kKills / 3);
  CHECK(fig.max() <= 1.0);
  // A run's end and its fit are one transaction (Store::finish_run_with_fit),
  // so no kill can leave a part of a done job without its fit.
  CHECK(fitted == parts);
}

TEST_CASE("supervisor SIGKILLed mid-job: the worker stops the job and turns the outputs off", "[supervise]") {
  no_core_dumps();
  CampaignBench b("supervise-orphan", 44);
  Supervised s(b);
  const pid_t worker = s.wait_serving(-1, 15s);
  REQUIRE(worker > 0);
  JobFeeder feeder;
  const long job = feeder.ensure(b.socket_path());
  REQUIRE(wait_progress(b.socket_path(), job, 20, 15s) > 0);
  // Kill while the supply is on (a sweep is running).
  for (int i = 0; i < 200 && !b.source_on(); ++i) std::this_thread::sleep_for(2ms);
  const long long t_kill = mono_ns();
  s.process().signal(SIGKILL);
  REQUIRE(s.process().wait(5s) == std::optional<int>(128 + SIGKILL));
  bool on = false;
  const auto w = wait_window_s(b.sim(), t_kill, 3s, &on);
  REQUIRE(w.has_value());
  CHECK(*w <= 1.0);
  std::printf("supervisor SIGKILL: output on at the death: %s, off after %.0f ms\n", on ? "yes" : "no", *w * 1e3);
  // The job stopped: nothing turns the supply on again (checked over 1.5 s).
  std::this_thread::sleep_for(1500ms);
  const Json switches = b.sim().control("outputs?")["source"]["switches"];
  for (const auto& sw : switches)
    if (sw["t_ns"].get<long long>() > t_kill + kInFlightNs) CHECK(sw["on"] == false);
  // The worker is gone too: nothing is left holding the bench or the socket.
  const auto until = Clock::now() + 10s;
  while (!process_gone(worker) && Clock::now() < until) std::this_thread::sleep_for(10ms);
  CHECK(process_gone(worker));
  CHECK_FALSE(socket_answers(b.socket_path()));
  CHECK_FALSE(b.source_on());
  CHECK_THAT(read_text(b.dir() / "juncod.log"), Catch::Contains("stopping, outputs off"));
}

TEST_CASE("damaged database at restart: outputs off, the error named, no endless restarts", "[supervise]") {
  no_core_dumps();
  CampaignBench b("supervise-db", 43);
  Supervised s(b);
  const pid_t worker = s.wait_serving(-1, 15s);
  REQUIRE(worker > 0);
  JobFeeder feeder;
  REQUIRE(wait_progress(b.socket_path(), feeder.ensure(b.socket_path()), 20, 15s) > 0);
  for (int i = 0; i < 200 && !b.source_on(); ++i) std::this_thread::sleep_for(2ms);
  // Garbage over the file header and the WAL header: every later open fails.
  for (const auto& f : {b.db_path(), fs::path(b.db_path().string() + "-wal")}) {
    std::fstream io(f, std::ios::in | std::ios::out | std::ios::binary);
    if (!io) continue;
    const std::string junk(4096, '\xA5');
    io.write(junk.data(), static_cast<std::streamsize>(junk.size()));
  }
  const long long t_kill = mono_ns();
  REQUIRE(::kill(worker, SIGKILL) == 0);
  const auto w = wait_window_s(b.sim(), t_kill, 3s);
  REQUIRE(w.has_value());
  CHECK(*w <= 1.0);
  // Start failures back off 0.5, 1, 2, 4 s; the fifth gives up (exit 1).
  const auto code = s.process().wait(40s);
  REQUIRE(code.has_value());
  CHECK(*code == 1);
  const std::string log = s.log();
  INFO(log);
  CHECK_THAT(log, Catch::Contains("cannot start"));
  CHECK_THAT(log, Catch::Contains(b.db_path().string()) || Catch::Contains("database"));
  CHECK_THAT(log, Catch::Contains("giving up: the worker failed to start 5 times"));
  // Never on again after the death.
  const Json switches = b.sim().control("outputs?")["source"]["switches"];
  for (const auto& sw : switches)
    if (sw["t_ns"].get<long long>() > t_kill) CHECK(sw["on"] == false);
  CHECK_FALSE(b.source_on());
  const auto cannot = log.find("cannot start");
  std::printf("damaged database: output off %.0f ms after the death; supervisor gave up with exit 1; worker said: %s\n",
              *w * 1e3, log.substr(cannot, log.find('\n', cannot) - cannot).c_str());
}

TEST_CASE("crash loop: more worker deaths than --restart-limit, the supervisor gives up with the outputs off",
          "[supervise]") {
  no_core_dumps();
  CampaignBench b("supervise-loop", 45);
  Supervised s(b, {"--restart-limit", "2"});
  pid_t worker = s.wait_serving(-1, 15s);
  REQUIRE(worker > 0);
  for (int k = 0; k < 3; ++k) {
    REQUIRE(worker > 0);
    REQUIRE(::kill(worker, SIGSEGV) == 0);
    if (k < 2) worker = s.wait_serving(worker, 15s);
  }
  CHECK(s.process().wait(10s) == std::optional<int>(1));
  CHECK_THAT(s.log(), Catch::Contains("giving up: 3 worker deaths"));
  CHECK_FALSE(b.source_on());
}

TEST_CASE("systemd: the shipped unit's ExecStopPost= turns the outputs off within 1 s of any death", "[supervise][campaign]") {
  no_core_dumps();
  const auto unit = unit_settings();
  REQUIRE(unit.count("ExecStart") == 1);
  REQUIRE(unit.count("ExecStopPost") == 1);
  REQUIRE(unit.count("RestartSec") == 1);
  CHECK(unit.at("Restart").at(0) == "on-failure");
  CHECK(unit.count("StartLimitBurst") == 1);
  const auto restart_after = time_span(unit.at("RestartSec").at(0));
  CHECK(restart_after <= 1000ms);
  CHECK(restart_after.count() * 1'000'000 >= kInFlightNs);  // see kInFlightNs

  CampaignBench b("supervise-systemd", 42);
  const std::string config = b.config_path().string();
  std::vector<std::vector<std::string>> pre;
  for (const auto& v : unit.count("ExecStartPre") ? unit.at("ExecStartPre") : std::vector<std::string>{})
    pre.push_back(unit_command(v, config));
  const auto start = unit_command(unit.at("ExecStart").at(0), config);
  const auto stop_post = unit_command(unit.at("ExecStopPost").at(0), config);

  std::mt19937 rng(20261204);
  std::uniform_int_distribution<int> delay_ms(0, 300);
  JobFeeder feeder;
  Figures fig;
  constexpr int kKills = 30;
  std::unique_ptr<ChildProcess> daemon;
  for (int k = 0; k <= kKills; ++k) {
    INFO("start " << k);
    for (const auto& argv : pre) {
      ChildProcess p(argv);
      REQUIRE(p.wait(10s) == std::optional<int>(0));
    }
    ChildOptions o;
    o.stderr_path = (b.dir() / ("juncod-" + std::to_string(k) + ".log")).string();
    daemon = std::make_unique<ChildProcess>(start, o);
    const auto until = Clock::now() + 15s;
    while (!socket_answers(b.socket_path()) && Clock::now() < until) {
      REQUIRE(daemon->running());
      std::this_thread::sleep_for(10ms);
    }
    const long job = feeder.ensure(b.socket_path());
    if (k == kKills) break;  // the last start runs the jobs to their end
    REQUIRE(wait_progress(b.socket_path(), job, 0, 15s) >= 0);
    std::this_thread::sleep_for(std::chrono::milliseconds(delay_ms(rng)));
    const long long t_kill = mono_ns();
    daemon->signal(rng() % 2 ? SIGKILL : SIGSEGV);
    // systemd sees the main process die (SIGCHLD), then runs ExecStopPost=.
    REQUIRE(daemon->wait(5s).has_value());
    ChildOptions po;
    po.stderr_path = (b.dir() / ("stop-post-" + std::to_string(k) + ".log")).string();
    ChildProcess post(stop_post, po);
    CHECK(post.wait(10s) == std::optional<int>(0));
    // Off already, before any restart: ExecStopPost= did it, not the next start.
    CHECK_FALSE(b.source_on());
    bool on = false;
    const auto w = wait_window_s(b.sim(), t_kill, 2s, &on);
    REQUIRE(w.has_value());
    CHECK(*w <= 1.0);
    fig.windows_s.push_back(*w);
    fig.on_at_death += on;
    if (*w > 0.1) std::printf("slow make-safe (%.0f ms):\n%s", *w * 1e3, read_text(po.stderr_path).c_str());
    std::this_thread::sleep_for(restart_after);
  }
  int done_jobs = 0;
  CHECK(wait_all_done(b.socket_path(), 120s, &done_jobs));
  CHECK(done_jobs == feeder.submitted);
  const auto [parts, fitted] = parts_with_fit(b.db_path());
  std::printf("systemd campaign: %d kills, output on at %d deaths; output-on window max %.0f ms, median %.0f ms; "
              "%d jobs done of %d; %ld of %ld parts with a fit\n",
              kKills, fig.on_at_death, fig.max() * 1e3, fig.median() * 1e3, done_jobs, feeder.submitted, fitted, parts);
  CHECK(fitted == parts);
  CHECK(fig.on_at_death >= kKills / 3);
  CHECK(fig.max() <= 1.0);
  CHECK(daemon->stop() == 0);  // systemctl stop: SIGTERM, outputs off, exit 0
  CHECK_FALSE(b.source_on());
}
