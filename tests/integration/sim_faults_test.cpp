// Fault injection, reconnection, concurrency, the pty endpoint and
// determinism of junco-sim, observed from raw clients on a real process.
// Behaviour as specified in docs/command-sets.md and docs/sim.md.
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <thread>

using junco::test::LineClient;
using junco::test::SimProcess;
using namespace std::chrono_literals;

namespace {
bool parses_as_number(const std::string& s) {
  // strtod-style acceptance of the whole reply, as a lenient driver might.
  if (s.empty()) return false;
  char* end = nullptr;
  std::strtod(s.c_str(), &end);
  return end == s.c_str() + s.size();
}
}  // namespace

TEST_CASE("drop-after N: N commands answered, then the connection closes; a reconnect gets back in", "[sim][fault]") {
  SimProcess sim;
  REQUIRE(sim.control("fault meter drop-after 2")["ok"] == true);
  LineClient c(sim.endpoint("meter"));
  CHECK(c.query("*OPC?", 2s) == std::optional<std::string>("1"));
  CHECK(c.query("*OPC?", 2s) == std::optional<std::string>("1"));
  CHECK_FALSE(c.query("*OPC?", 2s).has_value());
  CHECK(c.peer_closed());
  LineClient again(sim.endpoint("meter"));
  CHECK(again.query("*OPC?", 2s) == std::optional<std::string>("1"));
}

TEST_CASE("late MS delays only the next reply", "[sim][fault]") {
  SimProcess sim({"--fault", "source:late:300"});
  LineClient c(sim.endpoint("source"));
  const auto t0 = std::chrono::steady_clock::now();
  CHECK_FALSE(c.query("*OPC?", 100ms).has_value());  // not yet
  CHECK(c.read_line(2s) == std::optional<std::string>("1"));
  CHECK(std::chrono::steady_clock::now() - t0 >= 290ms);
  const auto t1 = std::chrono::steady_clock::now();
  CHECK(c.query("*OPC?", 2s) == std::optional<std::string>("1"));
  CHECK(std::chrono::steady_clock::now() - t1 < 250ms);
}

TEST_CASE("garble N corrupts N replies, never into a valid number", "[sim][fault]") {
  SimProcess sim({"--settle-ms", "0"});
  LineClient src(sim.endpoint("source"));
  src.send("VOLT 0.8;CURR 0.05;OUTP ON");
  const std::string clean = *src.query("MEAS:VOLT?");
  REQUIRE(parses_as_number(clean));
  REQUIRE(sim.control("fault source garble 6")["ok"] == true);
  for (int i = 0; i < 6; ++i) {
    const auto r = src.query(i % 2 ? "MEAS:CURR?" : "MEAS:VOLT?");
    REQUIRE(r.has_value());  // one reply per query, still
    INFO("garbled reply: " << *r);
    CHECK_FALSE(parses_as_number(*r));
  }
  CHECK(parses_as_number(*src.query("MEAS:VOLT?")));  // the seventh is clean
}

TEST_CASE("error CODE TEXT goes into the queue; silent stops replies; clear restores", "[sim][fault]") {
  SimProcess sim({"--fault", "scanner:error:-310:System error"});
  LineClient c(sim.endpoint("scanner"));
  CHECK(c.query("SYST:ERR?") == std::optional<std::string>("-310,\"System error\""));
  REQUIRE(sim.control("fault scanner silent")["ok"] == true);
  CHECK_FALSE(c.query("*IDN?", 300ms).has_value());
  REQUIRE(sim.control("fault scanner clear")["ok"] == true);
  CHECK(c.query("*OPC?") == std::optional<std::string>("1"));
  CHECK(sim.control("fault nosuch silent")["ok"] == false);
  CHECK(sim.control("bogus")["ok"] == false);
}

TEST_CASE("several concurrent clients on one TCP endpoint each get their own replies", "[sim]") {
  SimProcess sim;
  std::vector<std::thread> threads;
  std::atomic<int> good{0};
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&] {
      LineClient c(sim.endpoint("siggen"));
      for (int i = 0; i < 25; ++i)
        if (c.query("*IDN?") == std::optional<std::string>("junco-sim,GEN-1,SIM-G001,1.0")) ++good;
    });
  }
  for (auto& t : threads) t.join();
  CHECK(good == 100);
}

TEST_CASE("the pty endpoint works as a raw serial line and survives reopening", "[sim]") {
  SimProcess sim({"--serial", "source", "--serial", "levelmeter"});
  const std::string addr = sim.endpoint("source");
  REQUIRE(addr.rfind("serial:/dev/pts/", 0) == 0);
  {
    LineClient c(addr);
    CHECK(c.query("*IDN?") == std::optional<std::string>("junco-sim,SRC-100,SIM-S001,1.0"));
  }
  LineClient c(addr);
  CHECK(c.query("*OPC?") == std::optional<std::string>("1"));
}

TEST_CASE("same seed, same lot and same readings; another seed, another lot", "[sim]") {
  auto run = [](const std::string& seed) {
    SimProcess sim({"--seed", seed, "--settle-ms", "0", "--config", JUNCO_SOURCE_DIR "/tools/sim/no-heating.json"});
    LineClient sw(sim.endpoint("scanner")), src(sim.endpoint("source")), dmm(sim.endpoint("meter"));
    REQUIRE(sw.query("ROUT:CLOS (@4);*OPC?") == std::optional<std::string>("1"));
    REQUIRE(src.query("CURR 0.05;VOLT 1.0;OUTP ON;*OPC?") == std::optional<std::string>("1"));
    std::vector<std::string> out{sim.control("lot?").dump()};
    for (int i = 0; i < 5; ++i) {
      out.push_back(*dmm.query("MEAS:VOLT:DC?"));
      out.push_back(*dmm.query("MEAS:CURR:DC?"));
    }
    return out;
  };
  const auto a = run("42"), b = run("42"), c = run("43");
  CHECK(a == b);
  CHECK(a[0] != c[0]);
  CHECK(a[1] != a[3]);  // noise is present (it is seeded, not absent)
}

TEST_CASE("a silicon signal diode drops 0.6–0.7 V at a few mA, in every slot", "[sim]") {
  // Rule of thumb (common practice, no source); and VF(10 mA) ≤ 1 V, the
  // plausibility bound of docs/references.md E14.
  SimProcess sim({"--settle-ms", "1"});
  LineClient sw(sim.endpoint("scanner")), src(sim.endpoint("source")), dmm(sim.endpoint("meter"));
  REQUIRE(src.query("CURR 0.05;VOLT 0.9;OUTP ON;*OPC?") == std::optional<std::string>("1"));
  for (int slot = 1; slot <= 8; ++slot) {
    REQUIRE(sw.query("ROUT:CLOS (@" + std::to_string(slot) + ");*OPC?") == std::optional<std::string>("1"));
    std::this_thread::sleep_for(20ms);
    const double v = std::stod(*dmm.query("MEAS:VOLT:DC?"));
    const double i = std::stod(*dmm.query("MEAS:CURR:DC?"));
    INFO("slot " << slot << ": " << v << " V at " << i << " A");
    CHECK(i > 1e-3);
    CHECK(i < 5e-3);
    CHECK(v > 0.6);
    CHECK(v < 0.7);
  }
  REQUIRE(src.query("VOLT 1.8;*OPC?") == std::optional<std::string>("1"));
  std::this_thread::sleep_for(20ms);
  CHECK(std::stod(*dmm.query("MEAS:VOLT:DC?")) < 1.0);
}

TEST_CASE("readings settle first-order in wall-clock time after a change", "[sim]") {
  // First-order settling with τ = --settle-ms (docs/sim.md).
  SimProcess sim({"--settle-ms", "200", "--config", JUNCO_SOURCE_DIR "/tools/sim/no-heating.json"});
  LineClient sw(sim.endpoint("scanner")), src(sim.endpoint("source")), dmm(sim.endpoint("meter"));
  REQUIRE(sw.query("ROUT:CLOS (@1);*OPC?") == std::optional<std::string>("1"));
  REQUIRE(src.query("CURR 0.05;VOLT 2.0;OUTP ON;*OPC?") == std::optional<std::string>("1"));
  const double early = std::stod(*dmm.query("MEAS:CURR:DC?"));
  std::this_thread::sleep_for(1500ms);
  const double late = std::stod(*dmm.query("MEAS:CURR:DC?"));
  const double truth = sim.control("state?")["diode"]["i_a"];
  CHECK(early < 0.5 * truth);
  CHECK(late == Approx(truth).epsilon(2e-3));
}

TEST_CASE("self-heating at high current raises the junction temperature", "[sim]") {
  // θ = 400 K/W default (docs/sim.md); IS(T) law raises the current at
  // fixed supply voltage as the junction warms.
  SimProcess sim({"--settle-ms", "0"});
  LineClient sw(sim.endpoint("scanner")), src(sim.endpoint("source"));
  REQUIRE(sw.query("ROUT:CLOS (@1);*OPC?") == std::optional<std::string>("1"));
  REQUIRE(src.query("CURR 0.5;VOLT 10;OUTP ON;*OPC?") == std::optional<std::string>("1"));
  CHECK(src.query("*OPC?") == std::optional<std::string>("1"));
  std::this_thread::sleep_for(600ms);  // > 10 thermal time constants
  const auto st = sim.control("state?");
  const double i = st["diode"]["i_a"], v = st["diode"]["v"], t = st["diode"]["temp_k"];
  CHECK(t - 300.15 == Approx(400.0 * i * v).epsilon(0.02));
  CHECK(t > 310);
}

TEST_CASE("outputs? stamps every supply and generator switch on the test's monotonic clock", "[sim]") {
  // The stamps are what the supervision campaign measures output-on windows
  // with (docs/sim.md); here they are bracketed by the test's own
  // steady_clock (CLOCK_MONOTONIC on Linux/libstdc++, common practice).
  SimProcess sim;
  LineClient src(sim.endpoint("source"));
  LineClient gen(sim.endpoint("siggen"));
  auto now_ns = [] {
    return std::chrono::duration_cast<std::chrono::nanoseconds>(std::chrono::steady_clock::now().time_since_epoch()).count();
  };
  const auto before_on = now_ns();
  REQUIRE(src.query("OUTP ON;*OPC?") == std::optional<std::string>("1"));
  const auto after_on = now_ns();
  REQUIRE(src.query("OUTP ON;*OPC?") == std::optional<std::string>("1"));  // no change: no new switch
  std::this_thread::sleep_for(50ms);
  const auto before_off = now_ns();
  REQUIRE(src.query("OUTP OFF;*OPC?") == std::optional<std::string>("1"));
  const auto after_off = now_ns();
  REQUIRE(gen.query("OUTP ON;*OPC?") == std::optional<std::string>("1"));

  const auto log = sim.control("outputs?");
  CHECK(log["clock"] == "CLOCK_MONOTONIC");
  CHECK(log["now_ns"].get<long long>() >= after_off);
  const auto& sw = log["source"]["switches"];
  REQUIRE(sw.size() == 2);
  CHECK(sw[0]["on"] == true);
  CHECK(sw[0]["t_ns"].get<long long>() >= before_on);
  CHECK(sw[0]["t_ns"].get<long long>() <= after_on);
  CHECK(sw[1]["on"] == false);
  CHECK(sw[1]["t_ns"].get<long long>() >= before_off);
  CHECK(sw[1]["t_ns"].get<long long>() <= after_off);
  CHECK(log["source"]["output_on"] == false);
  REQUIRE(log["siggen"]["switches"].size() == 1);
  CHECK(log["siggen"]["output_on"] == true);
}
