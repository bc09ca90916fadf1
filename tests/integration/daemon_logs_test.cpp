// juncod's levelled log and its start order, with real processes: juncod on
// a real Unix socket, junco-sim instruments over real TCP (or a TCP port
// that accepts and never answers).
//  - a make-safe that fails (junco-sim's supply silent: it reads OUTP OFF and
//    never answers, not even *IDN? at open) is logged at error
//    and still appears with --log-level error, while info lines do not;
//    so is OUTP OFF unanswered at shutdown (the supply silenced while idle);
//  - with JOURNAL_STREAM naming stderr's device and inode, every line starts
//    with its sd-daemon priority (<3> error, <4> warning, <6> info) and
//    carries no timestamp; without it, an ISO 8601 UTC time with ms;
//  - at debug the SCPI traffic to and from each instrument is logged;
//  - server.log_level in the config sets the level, --log-level wins;
//  - with instruments that accept TCP and never answer, the socket answers
//    daemon.status within 1 s and says the bench is being opened.
// Sources: the `<N>` prefixes and the JOURNAL_STREAM "device:inode"
// comparison are systemd's (sd-daemon(3), systemd.exec(5); docs/references.md
// lists neither, so: systemd's manual pages, read for this); the ISO 8601
// shape is the standard's extended format. Levels per message are the
// project's own rule (daemon/log.hpp).
#include "tests/integration/daemon_api_test_support.hpp"
#include "tests/support/process.hpp"
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <netinet/in.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <unistd.h>

#include <chrono>
#include <fstream>
#include <regex>
#include <sstream>
#include <thread>

using junco::test::ChildOptions;
using junco::test::ChildProcess;
using junco::test::SimProcess;
using junco::cli::RpcClient;
using Json = nlohmann::json;
using namespace std::chrono_literals;

namespace {

std::string read_text(const std::filesystem::path& p) {
  std::ifstream in(p);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  for (std::string l; std::getline(in, l);)
    if (!l.empty()) out.push_back(l);
  return out;
}

// A scratch directory with a bench config naming `address_of(role)` for
// source, meter and scanner; short timeouts so a silent instrument fails fast.
struct Scratch {
  std::filesystem::path dir;
  explicit Scratch(const std::string& tag) : dir(junco::test::scratch_dir(tag)) {}
  ~Scratch() { std::filesystem::remove_all(dir); }
  std::string socket() const { return (dir / "run" / "juncod.sock").string(); }
  std::filesystem::path log() const { return dir / "juncod.log"; }
  std::string config() const { return (dir / "bench.jsonc").string(); }

  void write_config(const std::map<std::string, std::pair<std::string, std::string>>& roles, int reply_timeout_ms,
                    int max_retries, Json extra = Json::object()) {
    Json bench = Json::object();
    for (const auto& [role, ad] : roles)
      bench[role] = {{"address", ad.first}, {"dialect", ad.second}, {"reply_timeout_ms", reply_timeout_ms}, {"max_retries", max_retries}};
    Json c{{"bench", bench},
           {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}}},
           {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.25}, {"max_reverse_v", 5.0}, {"max_job_s", 600.0}}},
           {"paths", {{"database", (dir / "junco.db").string()}, {"socket", socket()}}}};
    c.update(extra);
    std::ofstream(config()) << "// daemon_logs_test\n" << c.dump(2);
  }
  void write_sim_config(SimProcess& sim, int reply_timeout_ms = 150, int max_retries = 1, Json extra = Json::object()) {
    std::map<std::string, std::pair<std::string, std::string>> roles;
    for (const char* r : {"source", "meter", "scanner"}) roles[r] = {sim.endpoint(r), sim.family(r)};
    write_config(roles, reply_timeout_ms, max_retries, std::move(extra));
  }
};

// Waits until `path` contains `text`; FAILs after `limit` with the log.
void wait_for_text(const std::filesystem::path& path, const std::string& text, std::chrono::seconds limit = 20s) {
  const auto until = std::chrono::steady_clock::now() + limit;
  while (read_text(path).find(text) == std::string::npos) {
    if (std::chrono::steady_clock::now() > until) FAIL("never logged '" << text << "'; log:\n" << read_text(path));
    std::this_thread::sleep_for(20ms);
  }
}

std::vector<std::string> juncod(const Scratch& s, std::vector<std::string> more) {
  std::vector<std::string> argv{std::string(JUNCO_BIN_DIR) + "/juncod", "--config", s.config()};
  argv.insert(argv.end(), more.begin(), more.end());
  return argv;
}

// A timestamped line: "2026-12-03T11:06:42.123Z juncod: LEVEL: message".
const std::regex kStamped(R"(^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z juncod: (error|warn|info|debug): .+)");

}  // namespace

TEST_CASE("a make-safe that fails is logged at error and shows with --log-level error; info does not", "[logs]") {
  // The supply reads every command and answers none: OUTP OFF times out.
  SimProcess sim({"--settle-ms", "0", "--fault", "source:silent"});
  Scratch s("logs-err");
  s.write_sim_config(sim);
  ChildOptions o;
  o.stderr_path = s.log().string();
  o.stop_grace = 20s;  // stopping makes the bench safe again: silent instruments take their timeouts

  SECTION("the daemon's make-safe at start") {
    ChildProcess d(juncod(s, {"--no-supervisor", "--log-level", "error"}), o);
    wait_for_text(s.log(), "could not make every instrument safe at start");
    // The socket answers too (it listens before the bench is opened) and
    // says why the bench is not safe.
    Json status;
    for (int i = 0; i < 100; ++i) {
      try {
        RpcClient c(s.socket());
        status = c.request("daemon.status")["result"];
        if (status["schema_version"] != 0) break;  // past the start
      } catch (const std::exception&) {
      }
      std::this_thread::sleep_for(50ms);
    }
    CHECK_THAT(status.value("bench_problem", std::string()), Catch::Contains("source"));
    CHECK(d.stop() == 0);
    const std::string log = read_text(s.log());
    INFO(log);
    const auto lines = lines_of(log);
    REQUIRE(!lines.empty());
    for (const auto& l : lines) {
      CHECK(std::regex_match(l, kStamped));
      CHECK_THAT(l, Catch::Contains(" juncod: error: "));  // nothing below error
    }
    CHECK(log.find("listening on") == std::string::npos);  // an info line
    CHECK(log.find("shut down: outputs NOT known to be off") != std::string::npos);
  }

  SECTION("juncod --make-safe (the unit's ExecStopPost=)") {
    ChildProcess d(juncod(s, {"--make-safe", "--log-level", "error"}), o);
    CHECK(d.wait(30s) == std::optional<int>(1));
    const std::string log = read_text(s.log());
    INFO(log);
    CHECK_THAT(log, Catch::Contains("juncod: error: make-safe failed: source"));
    CHECK_THAT(log, Catch::Contains("outputs not known to be off"));
    for (const auto& l : lines_of(log)) CHECK_THAT(l, Catch::Contains(" juncod: error: "));
  }
}

TEST_CASE("a supply that stops answering before juncod stops: OUTP OFF fails, logged at error", "[logs]") {
  // Healthy at start; the supply goes silent while juncod is idle, so the
  // make-safe at shutdown sends OUTP OFF and gets no answer.
  SimProcess sim({"--settle-ms", "0"});
  Scratch s("logs-stop");
  s.write_sim_config(sim);
  ChildOptions o;
  o.stderr_path = s.log().string();
  o.stop_grace = 20s;
  ChildProcess d(juncod(s, {"--no-supervisor", "--log-level", "error"}), o);
  bool up = false;
  for (int i = 0; i < 200 && !up; ++i) {
    try {
      RpcClient c(s.socket());
      up = c.request("daemon.status")["result"].value("bench_open", false);
    } catch (const std::exception&) {
    }
    if (!up) std::this_thread::sleep_for(50ms);
  }
  REQUIRE(up);
  REQUIRE(read_text(s.log()).empty());  // a healthy start logs nothing at error
  sim.control("fault source silent");
  CHECK(d.stop() == 0);
  const std::string log = read_text(s.log());
  INFO(log);
  CHECK_THAT(log, Catch::Contains("juncod: error: bench: could not make every instrument safe at shutdown: source output off"));
  CHECK_THAT(log, Catch::Contains("juncod: error: shut down: outputs NOT known to be off"));
  for (const auto& l : lines_of(log)) CHECK(std::regex_match(l, kStamped));
  CHECK(log.find(": info: ") == std::string::npos);
  CHECK(log.find(": warn: ") == std::string::npos);
}

TEST_CASE("under systemd (JOURNAL_STREAM names stderr) lines carry <3> <4> <6> and no timestamp", "[logs]") {
  // Supply silent (an error at start), a stale error in the meter's queue
  // (a warning when it is cleared at bench open), the rest info.
  SimProcess sim({"--settle-ms", "0", "--fault", "source:silent", "--fault", "meter:error:-222:Data out of range"});
  Scratch s("logs-journal");
  s.write_sim_config(sim);
  // The stream juncod's stderr will be: its device and inode go in
  // JOURNAL_STREAM as systemd sets them. O_TRUNC at spawn keeps the inode.
  std::ofstream(s.log()).put('\n');
  struct stat st {};
  REQUIRE(::stat(s.log().c_str(), &st) == 0);
  ChildOptions o;
  o.stderr_path = s.log().string();
  o.stop_grace = 20s;  // stopping makes the bench safe again: silent instruments take their timeouts

  SECTION("the stream is stderr: journald prefixes") {
    const std::string stream = std::to_string(st.st_dev) + ":" + std::to_string(st.st_ino);
    ChildProcess d({"/usr/bin/env", "JOURNAL_STREAM=" + stream, std::string(JUNCO_BIN_DIR) + "/juncod", "--config", s.config(),
                    "--no-supervisor"},
                   o);
    wait_for_text(s.log(), "had 1 stale error");
    wait_for_text(s.log(), "could not make every instrument safe at start");
    CHECK(d.stop() == 0);
    const std::string log = read_text(s.log());
    INFO(log);
    const std::regex prefixed(R"(^<[3467]>[^<].*)");
    for (const auto& l : lines_of(log)) {
      CHECK(std::regex_match(l, prefixed));
      CHECK_FALSE(std::regex_search(l, std::regex(R"(\d\d:\d\d:\d\d\.\d{3}Z)")));  // journald stamps it
    }
    CHECK_THAT(log, Catch::Contains("<3>bench: could not make every instrument safe at start: cannot open: source"));
    CHECK_THAT(log, Catch::Contains("<4>bench: meter had 1 stale error in its queue at bench open"));
    CHECK_THAT(log, Catch::Contains("<6>listening on " + s.socket()));
  }

  SECTION("JOURNAL_STREAM of another stream (a shell started from the unit): timestamps") {
    const std::string stream = std::to_string(st.st_dev) + ":" + std::to_string(st.st_ino + 1);
    ChildProcess d({"/usr/bin/env", "JOURNAL_STREAM=" + stream, std::string(JUNCO_BIN_DIR) + "/juncod", "--config", s.config(),
                    "--no-supervisor"},
                   o);
    wait_for_text(s.log(), "could not make every instrument safe at start");
    CHECK(d.stop() == 0);
    const std::string log = read_text(s.log());
    INFO(log);
    for (const auto& l : lines_of(log)) CHECK(std::regex_match(l, kStamped));
    CHECK_THAT(log, Catch::Contains(" juncod: error: bench: could not make every instrument safe at start"));
    CHECK_THAT(log, Catch::Contains(" juncod: warn: bench: meter had 1 stale error"));
  }
}

TEST_CASE("at debug the SCPI traffic is logged; the config's server.log_level sets the level, --log-level wins", "[logs]") {
  SimProcess sim({"--settle-ms", "0"});
  Scratch s("logs-debug");
  ChildOptions o;
  o.stderr_path = s.log().string();
  o.stop_grace = 20s;  // stopping makes the bench safe again: silent instruments take their timeouts
  const std::string idn = sim.family("source");

  SECTION("--log-level debug") {
    s.write_sim_config(sim, 2000, 2);
    ChildProcess d(juncod(s, {"--no-supervisor", "--log-level", "debug"}), o);
    wait_for_text(s.log(), "bench: every output off");
    wait_for_text(s.log(), "scpi meter < ");
    CHECK(d.stop() == 0);
    const std::string log = read_text(s.log());
    INFO(log);
    // The supply's make-safe commands go out, and each instrument's *IDN? reply comes back.
    CHECK(std::regex_search(log, std::regex(R"(juncod: debug: scpi source > [^\n]*OUTP[^\n]* (OFF|0))")));
    CHECK(std::regex_search(log, std::regex(R"(juncod: debug: scpi source > \*IDN\?)")));
    CHECK(std::regex_search(log, std::regex(R"(juncod: debug: scpi scanner < [^\n]+)")));
  }

  SECTION("server.log_level \"warn\" in the config: no info, no traffic") {
    s.write_sim_config(sim, 2000, 2, {{"server", {{"log_level", "warn"}}}});
    ChildProcess d(juncod(s, {"--no-supervisor"}), o);
    {
      // Serving means started: the log has had its chance to fill.
      bool up = false;
      for (int i = 0; i < 200 && !up; ++i) {
        try {
          RpcClient c(s.socket());
          up = c.request("daemon.status")["result"].value("schema_version", 0) > 0;
        } catch (const std::exception&) {
        }
        if (!up) std::this_thread::sleep_for(50ms);
      }
      REQUIRE(up);
    }
    CHECK(d.stop() == 0);
    const std::string log = read_text(s.log());
    INFO(log);
    CHECK(log.find(": info: ") == std::string::npos);
    CHECK(log.find("scpi ") == std::string::npos);
  }

  SECTION("server.log_level \"warn\", --log-level debug on the command line: traffic") {
    s.write_sim_config(sim, 2000, 2, {{"server", {{"log_level", "warn"}}}});
    ChildProcess d(juncod(s, {"--no-supervisor", "--log-level", "debug"}), o);
    wait_for_text(s.log(), "scpi source > ");
    CHECK(d.stop() == 0);
  }

  SECTION("a bad server.log_level is refused by name") {
    s.write_sim_config(sim, 2000, 2, {{"server", {{"log_level", "loud"}}}});
    ChildProcess d(juncod(s, {"--check-config"}), o);
    CHECK(d.wait(10s) == std::optional<int>(2));
    CHECK_THAT(read_text(s.log()), Catch::Contains("/server/log_level: must be error, warn, info or debug, got \"loud\""));
  }
  (void)idn;
}

namespace {

// A TCP port on 127.0.0.1 whose connections the kernel accepts (listen
// backlog) and nobody ever reads or answers: a mute instrument.
class MutePort {
 public:
  MutePort() {
    fd_ = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    REQUIRE(::bind(fd_, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0);
    REQUIRE(::listen(fd_, 64) == 0);
    socklen_t len = sizeof a;
    ::getsockname(fd_, reinterpret_cast<sockaddr*>(&a), &len);
    port_ = ntohs(a.sin_port);
  }
  ~MutePort() { ::close(fd_); }
  std::string address() const { return "tcp:127.0.0.1:" + std::to_string(port_); }

 private:
  int fd_ = -1;
  int port_ = 0;
};

}  // namespace

TEST_CASE("instruments that accept TCP and never answer: the socket answers daemon.status within 1 s", "[logs][start]") {
  MutePort mute;
  Scratch s("logs-mute");
  // The shipped generic dialects, 1 s reply timeout and 1 retry: making
  // this bench safe takes about 2 s per command, over 10 s in all (with the
  // defaults, 2 s and 2 retries, about 40 s).
  s.write_config({{"source", {mute.address(), "scpi-source"}},
                  {"meter", {mute.address(), "scpi-dmm"}},
                  {"scanner", {mute.address(), "scpi-switch"}}},
                 1000, 1);
  ChildOptions o;
  o.stderr_path = s.log().string();
  o.stop_grace = 20s;  // stopping makes the bench safe again: silent instruments take their timeouts
  const bool supervised = GENERATE(false, true);
  INFO((supervised ? "supervised" : "--no-supervisor"));
  const auto t0 = std::chrono::steady_clock::now();
  ChildProcess d(juncod(s, supervised ? std::vector<std::string>{} : std::vector<std::string>{"--no-supervisor"}), o);
  Json reply;
  double answered_s = -1;
  while (std::chrono::steady_clock::now() - t0 < 5s) {
    try {
      RpcClient c(s.socket());
      reply = c.request("daemon.status");
      answered_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
      break;
    } catch (const std::exception&) {
      std::this_thread::sleep_for(10ms);
    }
  }
  INFO("log:\n" << read_text(s.log()));
  WARN("daemon.status answered " << answered_s << " s after juncod started");
  REQUIRE(answered_s >= 0);
  CHECK(answered_s < 1.0);
  REQUIRE(reply.contains("result"));
  const Json r = reply["result"];
  CHECK(r["bench_open"] == false);
  CHECK_THAT(r["bench_problem"].get<std::string>(), Catch::Contains("opening the bench"));
  {
    // Anything else waits for the start (daemon/startup_gate.hpp kStartWait,
    // 5 s), then is refused as unavailable with the same reason.
    RpcClient c(s.socket());
    const auto t_ask = std::chrono::steady_clock::now();
    c.send_raw(R"({"jsonrpc":"2.0","id":7,"method":"job.list","params":{}})" "\n");
    const Json j = c.read_json(20s);
    const double waited_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_ask).count();
    WARN("job.list refused after " << waited_s << " s");
    REQUIRE(j.contains("error"));
    CHECK(j["error"]["code"] == -32005);
    CHECK_THAT(j["error"]["message"].get<std::string>(), Catch::Contains("opening the bench"));
    CHECK(waited_s >= 4.5);
    CHECK(waited_s < 10.0);
  }
  // Once the make-safe at start has failed, the store opens and status says why the bench is not open.
  std::string problem;
  const auto until = std::chrono::steady_clock::now() + 60s;
  while (std::chrono::steady_clock::now() < until) {
    try {
      RpcClient c(s.socket());
      const Json st = c.request("daemon.status")["result"];
      if (st["schema_version"] != 0) {
        problem = st.value("bench_problem", std::string());
        break;
      }
    } catch (const std::exception&) {
    }
    std::this_thread::sleep_for(100ms);
  }
  CHECK_THAT(problem, Catch::Contains("source"));
  CHECK_THAT(read_text(s.log()), Catch::Contains("error: bench: could not make every instrument safe at start"));
  CHECK(d.stop() == 0);
}
