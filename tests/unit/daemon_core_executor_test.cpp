// ctest: RUN_SERIAL (bounds on a job's wall-clock duration)
// The executor and the Service against in-process fake instruments: the
// safety order (current limit before output on, outputs off at every end),
// faults (retried, then paused), cancel, current limit, shutdown, and resume
// after a SIGKILLed daemon without a duplicated or lost reading.
#include "daemon/bench.hpp"
#include "daemon/core_service.hpp"
#include "daemon/store.hpp"
#include "drivers/errors.hpp"
#include "units/si_text.hpp"
#include "fitting/diode.hpp"
#include "formats/model_document.hpp"
#include "tests/support/process.hpp"

#include <catch2/catch.hpp>

#include <signal.h>
#include <sqlite3.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <filesystem>
#include <fstream>
#include <regex>
#include <mutex>
#include <set>
#include <thread>

using namespace junco::daemon;
using namespace std::chrono_literals;
namespace fs = std::filesystem;
namespace drv = junco::drivers;
namespace fit = junco::fitting;

namespace {

// One fixture: supply → R → diode → ground. Every instrument call is logged.
struct FakeLab {
  std::mutex m;
  std::vector<std::string> log;
  fit::DiodeParams diode{2e-9, 1.9, 1.5};  // invented PIN-like part
  double r_ohm = 100;
  double v_set = 0, i_limit = 0;
  bool out_on = false;
  int slot = 0;
  int meter_fail_after = -1;   // meter readings before faults start (-1 = never)
  int meter_fail_count = 0;    // how many consecutive failures then (huge = persistent)
  int meter_reads = 0;
  std::atomic<int> delay_ms{0};
  std::atomic<bool> meter_mistyped{false};  // every voltage reading refused with -113 (a command error)
  std::atomic<int> meter_mistyped_calls{0};
  std::atomic<int> scanner_open_errors{0};  // disconnect_all calls still to fail with -222
  std::atomic<bool> source_mute{false};  // the supply stops answering: every call times out, nothing changes
  double gen_amplitude = 0;
  bool gen_on = false;
  std::atomic<int> level_reads{0};
  std::atomic<int> level_fail_after{-1};  // level readings before they fail for good (-1 = never)

  void source_call() {
    if (source_mute) throw drv::DriverError(drv::ErrorKind::timeout, "instrument 'source' (fake): timeout: no reply within 2000 ms");
  }

  void note(const std::string& s) {
    std::lock_guard l(m);
    log.push_back(s);
  }
  // Diode current and voltage at the present setting (exact, Lambert W).
  std::pair<double, double> op() {
    if (!out_on || slot == 0) return {0.0, 0.0};
    fit::DiodeParams total = diode;
    total.rs_ohm += r_ohm;
    double i = fit::diode_current_a(total, v_set, 300.15);
    if (i > i_limit) i = i_limit;
    return {fit::diode_voltage_v(diode, i, 300.15), i};
  }
  bool limited() {
    if (!out_on || slot == 0) return false;
    fit::DiodeParams total = diode;
    total.rs_ohm += r_ohm;
    return fit::diode_current_a(total, v_set, 300.15) > i_limit;
  }
};

struct FakeSource final : drv::Source {
  FakeLab& lab;
  explicit FakeSource(FakeLab& l) : lab(l) {}
  drv::Identity identify() override { return {"fake", "SRC", "S1", "1"}; }
  void reset() override {}
  void set_voltage_v(double v) override { lab.source_call(); lab.note("source.voltage " + std::to_string(v)); lab.v_set = v; }
  void set_current_limit_a(double a) override { lab.source_call(); lab.note("source.current_limit"); lab.i_limit = a; }
  void set_output(bool on) override { lab.source_call(); lab.note(on ? "source.on" : "source.off"); lab.out_on = on; }
  double measure_voltage_v() override { lab.source_call(); return lab.v_set; }
  double measure_current_a() override { lab.source_call(); return lab.op().second; }
  bool in_current_limit() override { return lab.limited(); }
};

struct FakeMeter final : drv::Meter {
  FakeLab& lab;
  explicit FakeMeter(FakeLab& l) : lab(l) {}
  drv::Identity identify() override { return {"fake", "DMM", "M1", "1"}; }
  void reset() override {}
  double measure_dc_voltage_v() override {
    if (int d = lab.delay_ms.load()) std::this_thread::sleep_for(std::chrono::milliseconds(d));
    if (lab.meter_mistyped) {
      ++lab.meter_mistyped_calls;
      throw drv::DriverError(drv::ErrorKind::instrument,
                             "instrument 'meter' (fake): measure_dc_voltage: instrument error: instrument error -113,\"Undefined header\"", -113);
    }
    const int n = lab.meter_reads++;
    if (lab.meter_fail_after >= 0 && n >= lab.meter_fail_after && n < lab.meter_fail_after + lab.meter_fail_count)
      // Worded as the real drivers word it: the kind is already in the message.
      throw drv::DriverError(drv::ErrorKind::timeout, "instrument 'meter' (fake): measure_voltage: timeout: no reply within 2000 ms");
    return lab.op().first;
  }
  double measure_dc_current_a() override { return lab.op().second; }
  void set_range(drv::MeterFunction, double) override {}
  void set_integration_nplc(double) override {}
  void set_averaging(int) override {}
};

struct FakeScanner final : drv::Scanner {
  FakeLab& lab;
  explicit FakeScanner(FakeLab& l) : lab(l) {}
  drv::Identity identify() override { return {"fake", "SW", "X1", "1"}; }
  void reset() override {}
  void connect_slot(int s) override {
    lab.note(std::string("scanner.connect") + (lab.out_on ? " HOT" : ""));
    lab.slot = s;
  }
  void disconnect_all() override {
    if (lab.scanner_open_errors > 0) {
      --lab.scanner_open_errors;
      throw drv::DriverError(drv::ErrorKind::instrument, "instrument 'scanner' (fake): disconnect_all: instrument error -222,\"Data out of range\"", -222);
    }
    lab.note("scanner.open");
    lab.slot = 0;
  }
};

// A generator and a two-channel level meter: off (reverse bias) the part
// passes 1 % of the signal, on it passes 90 %. The level meter can be made
// to fail after some reads, as the DC meter can.
struct FakeSiggen final : drv::SignalGen {
  FakeLab& lab;
  explicit FakeSiggen(FakeLab& l) : lab(l) {}
  drv::Identity identify() override { return {"fake", "GEN", "G1", "1"}; }
  void reset() override {}
  void set_frequency_hz(double hz) override { lab.note("siggen.freq " + std::to_string(hz)); }
  void set_amplitude(double v, drv::LevelUnit) override { lab.note("siggen.amplitude " + std::to_string(v)); lab.gen_amplitude = v; }
  void set_output(bool on) override { lab.note(on ? "siggen.on" : "siggen.off"); lab.gen_on = on; }
};

struct FakeLevelMeter final : drv::LevelMeter {
  FakeLab& lab;
  explicit FakeLevelMeter(FakeLab& l) : lab(l) {}
  drv::Identity identify() override { return {"fake", "LVL", "L1", "1"}; }
  void reset() override {}
  drv::Level measure_level(int channel, drv::LevelUnit unit) override {
    const int n = lab.level_reads++;
    if (lab.level_fail_after >= 0 && n >= lab.level_fail_after)
      throw drv::DriverError(drv::ErrorKind::timeout, "instrument 'levelmeter' (fake): measure_vrms: timeout: no reply within 2000 ms");
    lab.note("level " + std::to_string(channel) + " at " + std::to_string(lab.v_set) + " V");
    const double in = lab.gen_on ? lab.gen_amplitude : 0.0;
    return {channel == 1 ? in : in * (lab.v_set < 0 ? 0.01 : 0.9), unit};
  }
};

ServiceOptions fake_options(FakeLab& lab) {
  ServiceOptions o;
  o.open_bench = [&lab](const Config&) {
    auto b = std::make_unique<Bench>();
    b->source = std::make_unique<FakeSource>(lab);
    b->meter = std::make_unique<FakeMeter>(lab);
    b->scanner = std::make_unique<FakeScanner>(lab);
    b->siggen = std::make_unique<FakeSiggen>(lab);
    b->levelmeter = std::make_unique<FakeLevelMeter>(lab);
    return b;
  };
  o.log = [](std::string_view) {};
  return o;
}

struct TempDir {
  fs::path path;
  TempDir() {
    char tmpl[] = "/tmp/junco-exec-XXXXXX";
    path = ::mkdtemp(tmpl);
  }
  ~TempDir() { fs::remove_all(path); }
};

Config config_in(const fs::path& dir) {
  Config c;
  c.fixture.bias_resistor_ohm = 100;
  c.fixture.slots = 4;
  c.safety = {10.0, 0.1, 0.5, 5.0, 600.0};
  c.paths.database = dir / "junco.db";
  return c;
}

Json plan(int count = 30, double settle_s = 0.0, int parts = 2) {
  Json p{{"lot", "QX-7"}, {"parts", Json::array()},
         {"sweep", {{"mode", "voltage"}, {"start", 0.5}, {"stop", 8.0}, {"count", count}, {"settle_s", settle_s}}}};
  for (int k = 1; k <= parts; ++k) p["parts"].push_back({{"slot", k}, {"label", "QX-7-0" + std::to_string(k)}});
  return p;
}

const Caller kCaller{4242, 1000, 1000};

Json wait_for_state(Service& s, Id job, const std::set<std::string>& states, std::chrono::seconds timeout = 20s) {
  const auto until = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    Json j = s.call("job.get", {{"job_id", job}}, kCaller);
    if (states.count(j["state"].get<std::string>())) return j;
    if (std::chrono::steady_clock::now() > until) FAIL("job stayed " << j["state"] << ": " << j.dump());
    std::this_thread::sleep_for(10ms);
  }
}

// Checks the safety order over a whole instrument log.
void check_safety_order(const std::vector<std::string>& log) {
  bool limit_since_off = false, on = false;
  for (const auto& e : log) {
    if (e == "source.current_limit") limit_since_off = true;
    if (e == "source.off") { on = false; limit_since_off = false; }
    if (e == "source.on") {
      CHECK(limit_since_off);  // current limit programmed before output on
      on = true;
    }
    CHECK(e != "scanner.connect HOT");  // relays never switched live
  }
  CHECK_FALSE(on);
  REQUIRE(!log.empty());
  CHECK(log.back() == "scanner.open");
}

}  // namespace

// Starts a long job (200 points × 20 ms), lets a few points in, then the
// supply stops answering; returns once the job has paused on it.
Id mute_mid_job(Service& svc, FakeLab& lab) {
  const Id job = svc.call("job.submit", {{"plan", plan(200, 0.02, 1)}}, kCaller)["job_id"];
  wait_for_state(svc, job, {"running"});
  while (svc.call("job.get", {{"job_id", job}}, kCaller)["points_done"].get<long>() < 3) std::this_thread::sleep_for(5ms);
  lab.source_mute = true;
  const Json j = wait_for_state(svc, job, {"paused", "done", "failed"});
  INFO(j.dump());
  REQUIRE(j["state"] == "paused");
  return job;
}

// A service whose log lines the test reads (thread-safe: the executor logs).
struct LoggedService {
  std::mutex m;
  std::vector<std::string> lines;
  std::unique_ptr<Service> svc;
  LoggedService(const Config& config, FakeLab& lab) {
    ServiceOptions o = fake_options(lab);
    o.log = [this](std::string_view line) {
      std::lock_guard l(m);
      lines.emplace_back(line);
    };
    svc = make_service(config, std::move(o));
  }
  std::vector<std::string> snapshot() {
    std::lock_guard l(m);
    return lines;
  }
};

TEST_CASE("a job runs to done in the safe order, readings stored and each part fitted") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  std::vector<Event> events;
  std::mutex em;
  svc->events().subscribe([&](const Event& e) { std::lock_guard l(em); events.push_back(e); });
  const Id job = svc->call("job.submit", {{"plan", plan()}}, kCaller)["job_id"];
  const Json j = wait_for_state(*svc, job, {"done", "failed", "paused"});
  CHECK(j["state"] == "done");
  CHECK(j["points_done"] == 60);
  CHECK(j["submitted_by"]["uid"] == 1000);
  { std::lock_guard l(lab.m); check_safety_order(lab.log); }

  const Json parts = svc->call("part.list", {{"lot", "QX-7"}}, kCaller)["parts"];
  REQUIRE(parts.size() == 2);
  const Json readings = svc->call("part.readings", {{"part_id", parts[0]["part_id"]}}, kCaller);
  CHECK(readings["points"].size() == 30);
  // The fit recovers the fake part's own parameters (inputs of the fake, not outputs of the code).
  const Json f = svc->call("part.fit", {{"part_id", parts[0]["part_id"]}}, kCaller);
  REQUIRE(f["status"] == "converged");
  CHECK(f["n"]["value"].get<double>() == Approx(lab.diode.n).epsilon(0.01));
  CHECK(f["rs_ohm"]["value"].get<double>() == Approx(lab.diode.rs_ohm).epsilon(0.05));
  // Figures from the fit agree with the model of the fake part (Lambert W, fitting/diode.hpp).
  const Json fig = svc->call("part.figures", {{"part_id", parts[0]["part_id"]}, {"currents_a", {1e-2}}}, kCaller);
  CHECK(fig["figures"][0]["vf_v"]["value"].get<double>() == Approx(fit::diode_voltage_v(lab.diode, 1e-2, 300.15)).epsilon(1e-3));
  const Json spice = svc->call("part.export", {{"part_id", parts[0]["part_id"]}, {"format", "spice"}}, kCaller);
  CHECK(spice["content"].get<std::string>().find(".model D_QX_7_QX_7_01 D(IS=") != std::string::npos);
  const Json csv = svc->call("part.export", {{"part_id", parts[0]["part_id"]}, {"format", "csv"}}, kCaller);
  const std::string csv_text = csv["content"];
  CHECK(std::count(csv_text.begin(), csv_text.end(), '\n') == 31);  // header + 30 readings

  // The last event is published just after the state is stored: give it a moment.
  for (int k = 0; k < 200; ++k) {
    {
      std::lock_guard l(em);
      if (!events.empty() && events.back().kind == "job.state" && events.back().data["state"] == "done") break;
    }
    std::this_thread::sleep_for(10ms);
  }
  std::lock_guard l(em);
  int added = 0;
  std::vector<std::string> states;
  for (const auto& e : events) {
    if (e.kind == "point.added") ++added;
    if (e.kind == "job.state") states.push_back(e.data["state"]);
  }
  CHECK(added == 60);
  CHECK(states == std::vector<std::string>{"queued", "running", "done"});
}

TEST_CASE("heating.pulse: each pulsed reading is taken in its own pulse, the output off between, in the safe order") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  Json p = plan(12, 0.0, 1);
  // Voltage steps 0.5..8 V; from 6 V on: pulsed, 20 ms off, read at once, dwells 5 and 15 ms.
  p["heating"] = {{"pulse", {{"from", 6.0}, {"on_s", 0.0}, {"off_s", 0.02}}}, {"dwell", {{"short_s", 0.005}, {"long_s", 0.015}}},
                  {"down_sweep", true}};
  const Id job = svc->call("job.submit", {{"plan", p}}, kCaller)["job_id"];
  const Json j = wait_for_state(*svc, job, {"done", "failed", "paused"});
  REQUIRE(j["state"] == "done");
  std::vector<std::string> log;
  {
    std::lock_guard l(lab.m);
    log = lab.log;
  }
  check_safety_order(log);  // current limit before every output on, pulses included
  // Steps ≥ 6 V of 0.5 + k·7.5/11 (6.64, 7.32, 8 V): k = 9..11, three pulsed up and three down.
  const Json r = svc->call("part.readings", {{"part_id", 1}}, kCaller);
  int pulsed = 0, dwell = 0, down = 0;
  for (const auto& q : r["points"]) {
    if (q["series"] == "dwell") ++dwell;
    if (q["series"] == "down") ++down;
    if (q["series"] == "up" && q["dwell_s"].is_number()) ++pulsed;
    // Never a reading of an output that is off (the fake reads 0 V then).
    CHECK(q["v"].get<double>() > 0.1);
    if (q["series"] == "dwell") CHECK(q["dwell_s"].get<double>() >= 0.005);
  }
  CHECK(pulsed == 3);
  CHECK(dwell == 6);
  CHECK(down == 12);
  // One output on per pulse (3 up + 3 down) after an off, plus the part's
  // first, the return to held steps going down and nothing else.
  const auto ons = std::count(log.begin(), log.end(), "source.on");
  CHECK(ons == 1 + 3 + 1 + 3);
  const Json f = svc->call("part.fit", {{"part_id", 1}}, kCaller);
  CHECK(f["detail"]["heating"]["pulsed_readings"] == 3);
  CHECK(f["detail"]["heating"]["hysteresis"]["pairs"] == 12);
  CHECK(f["detail"]["heating"]["hysteresis"]["flagged"] == false);  // the fake does not heat
  CHECK(f["detail"]["heating"]["dwell"]["status"] == "not_determined");
}

TEST_CASE("params are validated: wrong types, unknown ids and wrong states") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  auto code_of = [&](std::string_view m, const Json& p) {
    try {
      svc->call(m, p, kCaller);
    } catch (const RequestError& e) {
      return std::pair{e.code(), std::string(e.what())};
    }
    return std::pair{RpcCode::internal_error, std::string("(accepted)")};
  };
  CHECK(code_of("job.get", {{"job_id", "7"}}) == std::pair{RpcCode::invalid_params, std::string("job_id: must be a positive integer")});
  CHECK(code_of("job.get", Json::object()) == std::pair{RpcCode::invalid_params, std::string("job_id: missing (required)")});
  CHECK(code_of("job.get", {{"job_id", 99}}) == std::pair{RpcCode::not_found, std::string("no job 99")});
  CHECK(code_of("part.fit", {{"part_id", 5}}).first == RpcCode::not_found);
  CHECK(code_of("job.submit", Json::object()).second == "plan: missing (required)");
  CHECK(code_of("job.list", {{"state", "sleeping"}}).first == RpcCode::invalid_params);
  CHECK(code_of("no.such", Json::object()).first == RpcCode::method_not_found);
  Json big = plan();
  big["sweep"]["stop"] = 12;
  CHECK(code_of("job.submit", {{"plan", big}}) == std::pair{RpcCode::plan_refused, std::string("sweep stop 12 V exceeds safety limit max_supply_v = 10 V")});
  const Id job = svc->call("job.submit", {{"plan", plan(5)}}, kCaller)["job_id"];
  wait_for_state(*svc, job, {"done"});
  CHECK(code_of("job.resume", {{"job_id", job}}) ==
        std::pair{RpcCode::wrong_state, "job " + std::to_string(job) + " is done; only paused jobs can be resumed"});
  CHECK(code_of("job.cancel", {{"job_id", job}}).first == RpcCode::wrong_state);
  CHECK(code_of("part.export", {{"part_id", 1}, {"format", "xls"}}).first == RpcCode::invalid_params);
}

TEST_CASE("transient faults are retried and flagged; a persistent one pauses the job with outputs off") {
  TempDir dir;
  FakeLab lab;
  lab.meter_fail_after = 5;
  lab.meter_fail_count = 2;  // two timeouts, then fine
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  Id job = svc->call("job.submit", {{"plan", plan(10, 0.0, 1)}}, kCaller)["job_id"];
  CHECK(wait_for_state(*svc, job, {"done", "paused"})["state"] == "done");
  const Json pts = svc->call("part.readings", {{"part_id", 1}}, kCaller)["points"];
  REQUIRE(pts.size() == 10);
  CHECK((pts[5]["flags"].get<int>() & flag_retried) != 0);
  CHECK((pts[4]["flags"].get<int>() & flag_retried) == 0);

  lab.meter_reads = 0;
  lab.meter_fail_after = 3;
  lab.meter_fail_count = 1000000;  // persistent
  job = svc->call("job.submit", {{"plan", plan(10, 0.0, 1)}}, kCaller)["job_id"];
  const Json j = wait_for_state(*svc, job, {"done", "paused"});
  CHECK(j["state"] == "paused");
  const std::string error = j["error"];
  CHECK(error.find("instrument 'meter' (fake): measure_voltage: timeout: no reply within 2000 ms") != std::string::npos);
  CHECK(error.find("timeout") == error.rfind("timeout"));  // the kind once, not prefixed again
  CHECK(j["points_done"] == 3);
  CHECK_FALSE(lab.out_on);
  { std::lock_guard l(lab.m); check_safety_order(lab.log); }

  // Fault cleared, resumed: continues after the last committed reading.
  lab.meter_fail_after = -1;
  CHECK(svc->call("job.resume", {{"job_id", job}}, kCaller)["state"] == "queued");
  CHECK(wait_for_state(*svc, job, {"done", "paused"})["state"] == "done");
  const Json runs = svc->call("job.get", {{"job_id", job}}, kCaller)["runs"];
  const Json pts2 = svc->call("part.readings", {{"part_id", 1}, {"run_id", runs[0]["run_id"]}}, kCaller)["points"];
  REQUIRE(pts2.size() == 10);
  for (int k = 0; k < 10; ++k) CHECK(pts2[k]["seq"] == k);
}

TEST_CASE("cancel and shutdown stop a running job with outputs off") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  Id job = svc->call("job.submit", {{"plan", plan(200, 0.02, 1)}}, kCaller)["job_id"];
  wait_for_state(*svc, job, {"running"});
  std::this_thread::sleep_for(100ms);
  svc->call("job.cancel", {{"job_id", job}}, kCaller);
  CHECK(wait_for_state(*svc, job, {"cancelled", "done"})["state"] == "cancelled");
  CHECK_FALSE(lab.out_on);
  CHECK(lab.slot == 0);

  job = svc->call("job.submit", {{"plan", plan(200, 0.02, 1)}}, kCaller)["job_id"];
  wait_for_state(*svc, job, {"running"});
  std::this_thread::sleep_for(100ms);
  svc->shutdown();
  CHECK_FALSE(lab.out_on);
  CHECK(lab.slot == 0);
  { std::lock_guard l(lab.m); check_safety_order(lab.log); }
  Store s(dir.path / "junco.db");
  CHECK(s.job(job)->state == JobState::queued);  // resumable plan: back in the queue for the next start
}

TEST_CASE("supply in current limit: the point is flagged, the sweep goes no higher, the fit leaves it out") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  Json p = plan(30, 0.0, 1);
  p["sweep"]["compliance_a"] = 0.02;  // reached near 3.5 V through 100 Ω
  const Id job = svc->call("job.submit", {{"plan", p}}, kCaller)["job_id"];
  CHECK(wait_for_state(*svc, job, {"done", "paused"})["state"] == "done");
  const Json pts = svc->call("part.readings", {{"part_id", 1}}, kCaller)["points"];
  REQUIRE(!pts.empty());
  CHECK(pts.size() < 30);
  CHECK((pts.back()["flags"].get<int>() & flag_current_limit) != 0);
  for (std::size_t k = 0; k + 1 < pts.size(); ++k) CHECK((pts[k]["flags"].get<int>() & flag_current_limit) == 0);
  const Json f = svc->call("part.fit", {{"part_id", 1}}, kCaller);
  CHECK(f["points_used"].get<int>() <= static_cast<int>(pts.size()) - 1);
}

TEST_CASE("a daemon SIGKILLed mid-job resumes from the last committed reading, none duplicated or lost") {
  TempDir dir;
  const Config cfg = config_in(dir.path);
  const pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    FakeLab lab;
    lab.delay_ms = 2;
    auto svc = make_service(cfg, fake_options(lab));
    svc->call("job.submit", {{"plan", plan(60, 0.0, 2)}}, kCaller);
    std::this_thread::sleep_for(60s);  // killed long before
    ::_exit(0);
  }
  {
    // Wait until some readings are committed, then kill without warning.
    const auto until = std::chrono::steady_clock::now() + 20s;
    for (;;) {
      std::this_thread::sleep_for(20ms);
      if (!fs::exists(cfg.paths.database)) continue;
      Store s(cfg.paths.database);
      auto j = s.job(1);
      if (j && j->points_done >= 70) break;  // into the second part
      REQUIRE(std::chrono::steady_clock::now() < until);
    }
  }
  ::kill(child, SIGKILL);
  int status = 0;
  ::waitpid(child, &status, 0);
  REQUIRE(WIFSIGNALED(status));

  FakeLab lab;
  lab.out_on = true;  // as a killed daemon may leave it
  auto svc = make_service(cfg, fake_options(lab));
  {
    std::lock_guard l(lab.m);
    REQUIRE(!lab.log.empty());
    CHECK(lab.log.front() == "source.off");  // outputs off first thing on start
  }
  const Json j = wait_for_state(*svc, 1, {"done", "paused", "failed"});
  CHECK(j["state"] == "done");
  CHECK(j["points_done"] == 120);
  for (const auto& run : j["runs"]) {
    const Json pts = svc->call("part.readings", {{"part_id", run["part_id"]}, {"run_id", run["run_id"]}}, kCaller)["points"];
    REQUIRE(pts.size() == 60);
    for (int k = 0; k < 60; ++k) CHECK(pts[k]["seq"] == k);
  }
}

TEST_CASE("a plan that forbids resuming is marked interrupted after a restart") {
  TempDir dir;
  const Config cfg = config_in(dir.path);
  {
    Store s(cfg.paths.database);
    Json p = plan(5, 0.0, 1);
    p["resume"] = false;
    const Id id = s.insert_job(parse_plan(p), 5, 0, 0);
    s.set_job_state(id, JobState::running);  // as a dead daemon left it
  }
  FakeLab lab;
  auto svc = make_service(cfg, fake_options(lab));
  const Json j = svc->call("job.get", {{"job_id", 1}}, kCaller);
  CHECK(j["state"] == "interrupted");
  CHECK(j["error"].get<std::string>().find("forbids resuming") != std::string::npos);
}

TEST_CASE("max_job_s counts from the job's first start: a paused and resumed job gets only what is left") {
  TempDir dir;
  FakeLab lab;
  Config cfg = config_in(dir.path);
  cfg.safety.max_job_s = 1.5;
  auto svc = make_service(cfg, fake_options(lab));
  // Settle times alone (1 s) pass the plan check; the slow meter (30 ms per
  // reading) makes the job ≈ 4 s, longer than the limit.
  lab.delay_ms = 30;
  const Id job = svc->call("job.submit", {{"plan", plan(100, 0.01, 1)}}, kCaller)["job_id"];
  wait_for_state(*svc, job, {"running"});
  const auto first_start = std::chrono::steady_clock::now();
  std::this_thread::sleep_for(700ms);
  svc->call("job.pause", {{"job_id", job}}, kCaller);
  REQUIRE(wait_for_state(*svc, job, {"paused", "failed", "done"})["state"] == "paused");
  std::this_thread::sleep_for(400ms);  // paused time counts too: the limit is wall-clock from the first start
  const auto resumed = std::chrono::steady_clock::now();
  svc->call("job.resume", {{"job_id", job}}, kCaller);
  const Json j = wait_for_state(*svc, job, {"failed", "done"}, 10s);
  const double after_resume_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - resumed).count();
  const double total_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - first_start).count();
  INFO(j.dump());
  REQUIRE(j["state"] == "failed");
  CHECK(j["error"].get<std::string>().find("max_job_s") != std::string::npos);
  CHECK(j["points_done"].get<long>() < 100);
  // ≈ 0.4 s were left; timed from the resume it would have run another 1.5 s.
  CHECK(after_resume_s < 1.0);
  CHECK(total_s >= 1.5 - 0.05);
  CHECK(total_s < 2.3);
  CHECK_FALSE(lab.out_on);
  { std::lock_guard l(lab.m); check_safety_order(lab.log); }
}

TEST_CASE("part.export json is a model document that junco design op reads; spice is the shared card") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  const Id job = svc->call("job.submit", {{"plan", plan(30, 0.0, 1)}}, kCaller)["job_id"];
  REQUIRE(wait_for_state(*svc, job, {"done", "failed", "paused"})["state"] == "done");
  const Json fit = svc->call("part.fit", {{"part_id", 1}}, kCaller);
  const std::string doc = svc->call("part.export", {{"part_id", 1}, {"format", "json"}}, kCaller)["content"];
  std::string why;
  const auto model = fit::parse_model_document(doc, &why);
  INFO(why << "\n" << doc);
  REQUIRE(model);
  CHECK(model->params.is_a == fit["is_a"]["value"].get<double>());
  CHECK(model->params.rs_ohm == fit["rs_ohm"]["value"].get<double>());
  CHECK(model->part_label == "QX-7-01");
  CHECK(model->lot == "QX-7");

  // The junco binary (a real process) reads the exported file.
  const fs::path file = dir.path / "QX-7-01.json";
  std::ofstream(file) << doc;
  junco::test::ChildProcess cli({std::string(JUNCO_BIN_DIR) + "/junco", "design", "op", "--model", file.string(), "--supply", "5",
                                 "--bias-resistor", "100"});
  std::string out;
  while (auto line = cli.read_line(5000ms)) out += *line + "\n";
  INFO(out);
  REQUIRE(cli.wait(5000ms) == 0);
  std::smatch m;
  // The value alone: a version-2 document carries the covariance, so the line
  // goes on with "+- <standard error>".
  REQUIRE(std::regex_search(out, m, std::regex("bias current +([^ \n]+ *[^ \n+]*)")));
  CHECK(out.find("+- ") != std::string::npos);
  const auto i_a = junco::units::parse_si(m[1].str(), "A");
  REQUIRE(i_a);
  // Against the fake part itself: supply 5 V through 100 Ω into the diode (Lambert W, fitting/diode.hpp).
  fit::DiodeParams total = lab.diode;
  total.rs_ohm += 100;
  CHECK(*i_a == Approx(fit::diode_current_a(total, 5.0, 300.15)).epsilon(2e-3));

  const std::string card = svc->call("part.export", {{"part_id", 1}, {"format", "spice"}}, kCaller)["content"];
  CHECK(card.find(".model D_QX_7_QX_7_01 D(IS=") != std::string::npos);
  CHECK(card.find("TNOM=27") != std::string::npos);  // 300.15 K in °C (SPICE TNOM is °C)

  const std::string iv = svc->call("part.export", {{"part_id", 1}, {"format", "iv-csv"}}, kCaller)["content"];
  CHECK(iv.rfind("v,i_a\n", 0) == 0);
  CHECK(std::count(iv.begin(), iv.end(), '\n') == 31);
}

TEST_CASE("a supply that stops answering: the job pauses, and once it answers again its output goes off without a new job") {
  TempDir dir;
  FakeLab lab;
  LoggedService logged(config_in(dir.path), lab);
  auto& svc = logged.svc;
  const Id job = mute_mid_job(*svc, lab);
  // The premise: make-safe could not reach the supply, its output is still on.
  REQUIRE(lab.out_on);
  std::this_thread::sleep_for(1600ms);  // ≥ 3 retries while mute
  CHECK(lab.out_on);
  std::size_t while_mute = 0;
  for (const auto& line : logged.snapshot())
    if (line.rfind("bench: still not safe", 0) == 0) ++while_mute;
  CHECK(while_mute <= 1);  // the same failure is logged once, not every 0.5 s

  lab.source_mute = false;  // answers again; no job is submitted or resumed
  const auto until = std::chrono::steady_clock::now() + 3s;
  while ((lab.out_on || lab.slot != 0) && std::chrono::steady_clock::now() < until) std::this_thread::sleep_for(10ms);
  CHECK_FALSE(lab.out_on);
  CHECK(lab.slot == 0);
  CHECK(svc->call("job.get", {{"job_id", job}}, kCaller)["state"] == "paused");
  { std::lock_guard l(lab.m); check_safety_order(lab.log); }
  std::this_thread::sleep_for(1200ms);  // safe now: no more attempts, no more lines
  const auto lines = logged.snapshot();
  CHECK(std::count(lines.begin(), lines.end(), "bench: every output off, scanner open (make-safe retried)") == 1);
  std::size_t attempts_logged = 0;
  // Identities found at open ("bench: source is fake,...") are not attempts.
  const std::regex identity("^bench: [a-z]+ is ");
  for (const auto& line : lines)
    if (line.rfind("bench:", 0) == 0 && !std::regex_search(line, identity)) ++attempts_logged;
  INFO(lines.size());
  CHECK(attempts_logged <= 4);  // start, (maybe) one failure, the success
}

TEST_CASE("shutdown with a mute supply says the outputs are not known to be off") {
  TempDir dir;
  FakeLab lab;
  LoggedService logged(config_in(dir.path), lab);
  mute_mid_job(*logged.svc, lab);
  REQUIRE(lab.out_on);  // make-safe could not reach it
  logged.svc->shutdown();
  const auto lines = logged.snapshot();
  CHECK(std::count(lines.begin(), lines.end(), "shut down: outputs off") == 0);
  bool warned = false;
  for (const auto& line : lines) warned = warned || line.rfind("shut down: outputs NOT known to be off", 0) == 0;
  CHECK(warned);
}

TEST_CASE("shutdown after a clean job says the outputs are off") {
  TempDir dir;
  FakeLab lab;
  LoggedService logged(config_in(dir.path), lab);
  const Id job = logged.svc->call("job.submit", {{"plan", plan(5, 0.0, 1)}}, kCaller)["job_id"];
  wait_for_state(*logged.svc, job, {"done"});
  logged.svc->shutdown();
  CHECK_FALSE(lab.out_on);
  const auto lines = logged.snapshot();
  CHECK(std::count(lines.begin(), lines.end(), "shut down: outputs off") == 1);
}

TEST_CASE("the bench's declared accuracy reaches the fit: its noise floor excludes the readings below it") {
  // fitting/extract.hpp: the noise floor is 10 × the current offset term, so
  // i_abs_a = 2 mA leaves out every reading below 20 mA (our rule).
  TempDir dir;
  FakeLab lab;
  Config cfg = config_in(dir.path);
  cfg.accuracy.i_abs_a = 2e-3;
  auto svc = make_service(cfg, fake_options(lab));
  const Id job = svc->call("job.submit", {{"plan", plan(30, 0.0, 1)}}, kCaller)["job_id"];
  REQUIRE(wait_for_state(*svc, job, {"done", "failed", "paused"})["state"] == "done");
  const Json points = svc->call("part.readings", {{"part_id", 1}}, kCaller)["points"];
  long below = 0, forward = 0;
  for (const auto& p : points) {
    if (!(p["i_a"].is_number() && p["v"].is_number()) || p["i_a"].get<double>() <= 0 || p["v"].get<double>() <= 0) continue;
    ++forward;
    below += p["i_a"].get<double>() < 20e-3;
  }
  REQUIRE(below >= 3);
  const Json f = svc->call("part.fit", {{"part_id", 1}}, kCaller);
  long floor_exclusions = 0;
  for (const auto& e : f["detail"]["excluded"]) floor_exclusions += e["reason"].get<std::string>().find("noise floor") != std::string::npos;
  CHECK(floor_exclusions == below);
  CHECK(f["points_used"].get<long>() == forward - below);
  CHECK(svc->call("bench.describe", Json::object(), kCaller)["accuracy"]["i_abs_a"] == 2e-3);
}

TEST_CASE("off-state readings: generator at its own amplitude at each reverse bias; a resume sets the bias again first") {
  TempDir dir;
  FakeLab lab;
  Config c = config_in(dir.path);
  c.bench["siggen"] = {};
  c.bench["levelmeter"] = {};
  Json p = plan(3, 0.0, 1);
  p["reverse_v"] = {1, 2};
  p["ac"] = {{"freqs_hz", {1e6}}, {"amplitude", 0.002}, {"settle_s", 0}, {"off_state", {{"freqs_hz", {1e6, 1e7}}, {"amplitude", 0.05}}}};
  // Forward: 3 steps × 2 channels = 6 level reads; off at 1 V: 4 more. The
  // 9th read (the second off-state frequency at 1 V) fails for good.
  lab.level_fail_after = 8;
  auto svc = make_service(c, fake_options(lab));
  const Id job = svc->call("job.submit", {{"plan", p}}, kCaller)["job_id"];
  const Json paused = wait_for_state(*svc, job, {"paused", "done", "failed"});
  REQUIRE(paused["state"] == "paused");
  CHECK(paused["points_done"] == 8);  // 3 × (dc + ac), the reverse point at 1 V and its first off-state reading
  CHECK_FALSE(lab.out_on);
  CHECK_FALSE(lab.gen_on);

  std::size_t resumed_at = 0;
  {
    std::lock_guard l(lab.m);
    resumed_at = lab.log.size();
  }
  lab.level_fail_after = -1;
  svc->call("job.resume", {{"job_id", job}}, kCaller);
  REQUIRE(wait_for_state(*svc, job, {"done", "paused", "failed"})["state"] == "done");
  std::vector<std::string> after;
  {
    std::lock_guard l(lab.m);
    after.assign(lab.log.begin() + static_cast<long>(resumed_at), lab.log.end());
    check_safety_order(lab.log);
  }
  const auto first_level = std::find_if(after.begin(), after.end(), [](const std::string& e) { return e.rfind("level ", 0) == 0; });
  REQUIRE(first_level != after.end());
  CHECK(*first_level == "level 1 at -1.000000 V");  // back at the reverse bias before reading on

  const Json runs = svc->call("job.get", {{"job_id", job}}, kCaller)["runs"];
  const Json pts = svc->call("part.readings", {{"part_id", 1}, {"run_id", runs[0]["run_id"]}}, kCaller)["points"];
  REQUIRE(pts.size() == 12);
  for (int k = 0; k < 12; ++k) CHECK(pts[k]["seq"] == k);
  int off = 0;
  for (const auto& pt : pts) {
    if (pt["kind"] == "ac") CHECK(pt["ac_in_v"] == 0.002);
    if (pt["kind"] != "reverse_ac") continue;
    ++off;
    CHECK(pt["ac_in_v"] == 0.05);  // the off-state amplitude
    CHECK(pt["ac_out_v"].get<double>() == Approx(0.0005));
    CHECK(pt["set_value"].get<double>() < 0);
  }
  CHECK(off == 4);
  // The fit carries the capacitance report (two biases: the law held).
  const Json fit = svc->call("part.fit", {{"part_id", 1}}, kCaller);
  CHECK(fit["detail"]["junction_cap"]["law_held"] == true);
}

TEST_CASE("a command error (-113) is not retried: the job pauses after one attempt") {
  TempDir dir;
  FakeLab lab;
  auto svc = make_service(config_in(dir.path), fake_options(lab));
  lab.meter_mistyped = true;
  const Id job = svc->call("job.submit", {{"plan", plan(10, 0.0, 1)}}, kCaller)["job_id"];
  const Json j = wait_for_state(*svc, job, {"done", "paused"});
  CHECK(j["state"] == "paused");
  CHECK(j["error"].get<std::string>().find("-113") != std::string::npos);
  CHECK(lab.meter_mistyped_calls == 1);  // kPointAttempts would have made it 4
  CHECK_FALSE(lab.out_on);
}

TEST_CASE("make-safe steps are retried on an instrument error; one that persists still pauses the job") {
  TempDir dir;
  FakeLab lab;
  LoggedService ls(config_in(dir.path), lab);
  // Fails once at the first make-safe of the job (before the part), then works.
  lab.scanner_open_errors = 1;
  Id job = ls.svc->call("job.submit", {{"plan", plan(10, 0.0, 2)}}, kCaller)["job_id"];
  CHECK(wait_for_state(*ls.svc, job, {"done", "paused"})["state"] == "done");
  int retried = 0;
  for (const auto& line : ls.snapshot()) retried += line.find("make-safe step 'scanner open' failed") != std::string::npos;
  CHECK(retried == 1);

  lab.scanner_open_errors = 1000;  // persistent: kMakeSafeAttempts each time, then the job pauses
  job = ls.svc->call("job.submit", {{"plan", plan(10, 0.0, 2)}}, kCaller)["job_id"];
  const Json j = wait_for_state(*ls.svc, job, {"done", "paused"});
  CHECK(j["state"] == "paused");
  CHECK(j["error"].get<std::string>().find("scanner open") != std::string::npos);
  CHECK(j["error"].get<std::string>().find("(after 3 attempts)") != std::string::npos);
  CHECK_FALSE(lab.out_on);
  lab.scanner_open_errors = 0;
}

TEST_CASE("a run a previous daemon marked done without its fit is fitted at start; a job done keeps no old error") {
  TempDir dir;
  const Config cfg = config_in(dir.path);
  {
    // What an older juncod could leave: every reading, run and job done, no fit.
    FakeLab lab;
    auto svc = make_service(cfg, fake_options(lab));
    const Id job = svc->call("job.submit", {{"plan", plan(30, 0.0, 1)}}, kCaller)["job_id"];
    REQUIRE(wait_for_state(*svc, job, {"done", "paused"})["state"] == "done");
  }
  {
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(cfg.paths.database.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "DELETE FROM fits; UPDATE jobs SET error = 'paused by request'", nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  FakeLab lab;
  LoggedService ls(cfg, lab);
  const auto until = std::chrono::steady_clock::now() + 20s;
  Json fit;
  for (;;) {
    try {
      fit = ls.svc->call("part.fit", {{"part_id", 1}}, kCaller);
      break;
    } catch (const RequestError&) {
    }
    REQUIRE(std::chrono::steady_clock::now() < until);
    std::this_thread::sleep_for(10ms);
  }
  CHECK(fit["status"] == "converged");
  CHECK(fit["run_id"] == 1);
  bool logged = false;
  for (const auto& line : ls.snapshot()) logged = logged || line.find("recovered: run 1 of job 1 was done without its fit") != std::string::npos;
  CHECK(logged);

  // A job resumed after a pause ends done with its error cleared.
  lab.delay_ms = 1;
  const Id job = ls.svc->call("job.submit", {{"plan", plan(100, 0.0, 1)}}, kCaller)["job_id"];
  wait_for_state(*ls.svc, job, {"running"});
  ls.svc->call("job.pause", {{"job_id", job}}, kCaller);
  CHECK(wait_for_state(*ls.svc, job, {"paused", "done"})["error"] == "paused by request");
  ls.svc->call("job.resume", {{"job_id", job}}, kCaller);
  const Json j = wait_for_state(*ls.svc, job, {"done", "paused"});
  CHECK(j["state"] == "done");
  CHECK(j["error"].is_null());
}

TEST_CASE("a store that cannot keep an instrument's identity is logged as a storage failure, not as a failed *IDN?") {
  TempDir dir;
  const Config cfg = config_in(dir.path);
  { Store s(cfg.paths.database); }  // schema in place
  {
    // Every write to instruments fails as a full disk would make it fail.
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(cfg.paths.database.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "CREATE TRIGGER full_disk BEFORE INSERT ON instruments BEGIN SELECT RAISE(ABORT, 'database or disk is full'); END",
                         nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  FakeLab lab;
  LoggedService ls(cfg, lab);
  const auto lines = ls.snapshot();
  bool storage_line = false;
  for (const auto& line : lines) {
    INFO(line);
    CHECK(line.find("*IDN? failed") == std::string::npos);  // the instrument answered
    if (line.find("bench: source identified as fake SRC, but storing its identity failed: storage: ") != std::string::npos &&
        line.find("database or disk is full") != std::string::npos)
      storage_line = true;
  }
  CHECK(storage_line);
}
