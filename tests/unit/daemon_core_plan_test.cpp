// Plan validation: types and presence (invalid_params naming the field), then
// ranges and each safety limit (plan_refused naming the limit and the value).
#include "daemon/error_codes.hpp"
#include "daemon/plan.hpp"

#include <catch2/catch.hpp>

#include <chrono>
#include <fstream>

using namespace junco::daemon;

namespace {

Config bench() {
  Config c;
  c.fixture.bias_resistor_ohm = 100;
  c.fixture.slots = 8;
  c.safety = {10.0, 0.1, 0.25, 5.0, 3600.0};  // max_supply_v, current_limit_a, max_power_w, max_reverse_v, max_job_s
  return c;
}

Json plan() {
  return Json::parse(R"({"lot": "QX-7", "parts": [{"slot": 1, "label": "QX-7-01"}, {"slot": 2, "label": "QX-7-02"}],
    "sweep": {"mode": "voltage", "spacing": "linear", "start": 0.0, "stop": 5.0, "count": 11, "settle_s": 0.01}})");
}

// The plan code throws domain errors; the code a client sees is the one
// mapping's (daemon/error_codes.hpp).
std::pair<RpcCode, std::string> outcome(const Json& j, const Config& c = bench()) {
  try {
    check_plan(parse_plan(j), c);
  } catch (const DomainError& e) {
    const RequestError r = to_request_error(e);
    return {r.code(), r.what()};
  }
  return {RpcCode::internal_error, "(accepted)"};
}

}  // namespace

TEST_CASE("a sensible plan is accepted and expands to its steps") {
  const Plan p = parse_plan(plan());
  REQUIRE_NOTHROW(check_plan(p, bench()));
  const auto v = sweep_values(p.sweep);
  REQUIRE(v.size() == 11);
  CHECK(v.front() == 0.0);
  CHECK(v[1] == Approx(0.5));
  CHECK(v.back() == 5.0);
  CHECK(expand_steps(p).size() == 11);
  // to_json round-trips
  CHECK(to_json(parse_plan(to_json(p))) == to_json(p));
}

TEST_CASE("log spacing is geometric; AC and reverse points join the expansion in order") {
  Json j = plan();
  j["sweep"] = {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 1e-2}, {"count", 4}};
  j["ac"] = {{"freqs_hz", {1e6, 1e7}}, {"amplitude", 0.05}};
  j["reverse_v"] = {1, 2};
  const Plan p = parse_plan(j);
  const auto v = sweep_values(p.sweep);
  CHECK(v[1] == Approx(1e-4));
  CHECK(v[2] == Approx(1e-3));
  const auto steps = expand_steps(p);
  REQUIRE(steps.size() == 4 * 3 + 2);
  CHECK(steps[0].kind == Step::Kind::dc);
  CHECK(steps[1].kind == Step::Kind::ac);
  CHECK(steps[1].freq_hz == 1e6);
  CHECK(steps[2].freq_hz == 1e7);
  CHECK(steps[3].dc_index == 1);
  CHECK(steps[12].kind == Step::Kind::reverse);
  CHECK(steps[13].set_value == -2.0);
}

TEST_CASE("wrong types and missing fields are invalid_params naming the field") {
  Json j = plan();
  j["sweep"]["count"] = "eleven";
  CHECK(outcome(j) == std::pair{RpcCode::invalid_params, std::string("plan.sweep.count: must be an integer, not string")});
  j = plan();
  j.erase("lot");
  CHECK(outcome(j) == std::pair{RpcCode::invalid_params, std::string("plan.lot: missing (required)")});
  j = plan();
  j["parts"][1].erase("label");
  CHECK(outcome(j) == std::pair{RpcCode::invalid_params, std::string("plan.parts[1].label: missing (required)")});
  j = plan();
  j["sweep"]["mode"] = "power";
  CHECK(outcome(j) == std::pair{RpcCode::invalid_params, std::string("plan.sweep.mode: must be \"voltage\" or \"current\", got \"power\"")});
  j = plan();
  j["sweep"]["stpo"] = 3;
  CHECK(outcome(j) == std::pair{RpcCode::invalid_params, std::string("plan.sweep.stpo: unknown field")});
}

TEST_CASE("each safety limit refuses a plan that would exceed it, naming limit and value") {
  Json j = plan();
  j["sweep"]["stop"] = 12;
  CHECK(outcome(j) == std::pair{RpcCode::plan_refused, std::string("sweep stop 12 V exceeds safety limit max_supply_v = 10 V")});
  // The refusal names the bench's limit and the plan's field, for the client's data object.
  try {
    check_plan(parse_plan(j), bench());
    FAIL("accepted");
  } catch (const PlanRefused& e) {
    CHECK(e.limit() == "max_supply_v");
    CHECK(e.field() == "plan.sweep.stop");
    CHECK(to_request_error(e).data() == Json{{"field", "plan.sweep.stop"}, {"limit", "max_supply_v"}});
  }
  // A wrong type is bad input naming the field, never a refusal.
  j = plan();
  j["sweep"]["count"] = "eleven";
  try {
    parse_plan(j);
    FAIL("accepted");
  } catch (const DomainError& e) {
    CHECK(e.kind() == ErrorKind::bad_input);
    CHECK(to_request_error(e).data() == Json{{"field", "plan.sweep.count"}});
  }

  // Power: at 10 V through 100 Ω the part could carry 0.1 A (compliance), × vf_max 1.5 V = 0.15 W: fine at 0.25 W ...
  j = plan();
  j["sweep"]["stop"] = 10;
  CHECK(outcome(j).second == "(accepted)");
  // ... but not on a bench allowing only 0.1 W.
  Config tight = bench();
  tight.safety.max_power_w = 0.1;
  CHECK(outcome(j, tight) == std::pair{RpcCode::plan_refused,
                                       std::string("sweep stop 10 V may put 0.15 W in the part (vf_max_v 1.5 V × 0.1 A), exceeding safety limit max_power_w = 0.1 W")});

  j = plan();
  j["sweep"] = {{"mode", "current"}, {"start", 1e-3}, {"stop", 0.2}, {"count", 5}};
  CHECK(outcome(j) == std::pair{RpcCode::plan_refused, std::string("sweep stop 0.2 A exceeds safety limit current_limit_a = 0.1 A")});

  // Current-targeted: power is estimated as vf_max_v · I (1.5 V × 0.09 A = 0.135 W > 0.1 W).
  j["sweep"]["stop"] = 0.09;
  CHECK(outcome(j, tight) == std::pair{RpcCode::plan_refused,
                                       std::string("sweep stop 0.09 A may put 0.135 W in the part (vf_max_v 1.5 V × 0.09 A), exceeding safety limit max_power_w = 0.1 W")});
  // Current-targeted: 0.09 A through 200 Ω needs 18 V even before the diode's drop.
  Config high_r = bench();
  high_r.fixture.bias_resistor_ohm = 200;
  CHECK(outcome(j, high_r) == std::pair{RpcCode::plan_refused,
                                        std::string("sweep stop 0.09 A needs at least 18 V across 200 Ω, exceeding safety limit max_supply_v = 10 V")});

  j = plan();
  j["sweep"]["compliance_a"] = 0.5;
  CHECK(outcome(j) == std::pair{RpcCode::plan_refused, std::string("sweep compliance_a 0.5 A exceeds safety limit current_limit_a = 0.1 A")});

  j = plan();
  j["reverse_v"] = {1, 8};
  CHECK(outcome(j) == std::pair{RpcCode::plan_refused, std::string("reverse_v 8 V exceeds safety limit max_reverse_v = 5 V")});

  j = plan();
  j["sweep"]["count"] = 1000;
  j["sweep"]["settle_s"] = 2.0;  // 2 parts × 1000 × 2 s = 4000 s > 3600 s
  CHECK(outcome(j) == std::pair{RpcCode::plan_refused, std::string("estimated duration 4000 s exceeds safety limit max_job_s = 3600 s")});
}

TEST_CASE("malformed ranges are refused") {
  Json j = plan();
  j["parts"][1]["slot"] = 9;
  CHECK(outcome(j).second == "slot 9 is not on the fixture (slots 1..8)");
  j = plan();
  j["parts"][1]["slot"] = 1;
  CHECK(outcome(j).second == "slot 1 is named twice");
  j = plan();
  j["sweep"]["start"] = -1;
  CHECK(outcome(j).second == "sweep start/stop must be >= 0 V (reverse bias goes in reverse_v)");
  j = plan();
  j["sweep"]["spacing"] = "log";
  CHECK(outcome(j).second == "log spacing needs start and stop > 0 V");
  j = plan();
  j["ac"] = {{"freqs_hz", {1e6}}, {"amplitude", 0.1}};
  CHECK(outcome(j).second == "plan.ac needs a siggen and a levelmeter in the bench config");
}

TEST_CASE("off-state readings: after each reverse point, their own frequencies and amplitude") {
  Config c = bench();
  c.bench["siggen"] = {};
  c.bench["levelmeter"] = {};
  Json j = plan();
  j["ac"] = {{"freqs_hz", {1e6, 1e7}}, {"amplitude", 0.002}, {"off_state", Json::object()}};
  j["reverse_v"] = {0.5, 2};
  Plan p = parse_plan(j);
  REQUIRE(p.ac->off_state);
  CHECK(p.ac->off_state->freqs_hz == std::vector<double>{1e6, 1e7});  // defaults: the forward readings'
  CHECK(p.ac->off_state->amplitude == 0.002);
  j["ac"]["off_state"] = {{"freqs_hz", {1e8}}, {"amplitude", 0.05}};
  p = parse_plan(j);
  REQUIRE_NOTHROW(check_plan(p, c));
  const auto steps = expand_steps(p);
  REQUIRE(steps.size() == 11 * 3 + 2 * 2);
  CHECK(steps[33].kind == Step::Kind::reverse);
  CHECK(steps[34].kind == Step::Kind::reverse_ac);
  CHECK(steps[34].freq_hz == 1e8);
  CHECK(steps[34].set_value == -0.5);
  CHECK(steps[34].dc_index == 0);
  CHECK(steps[36].kind == Step::Kind::reverse_ac);
  CHECK(steps[36].dc_index == 1);
  CHECK(std::string(to_string(steps[36].kind)) == "reverse_ac");
  CHECK(to_json(parse_plan(to_json(p))) == to_json(p));
  // Each settle counts: 2 × (11 × (0.01 + 2 × 0.01) + 2 × (0.01 + 1 × 0.01)).
  CHECK(min_duration_s(p) == Approx(2 * (11 * 0.03 + 2 * 0.02)));

  j["ac"]["off_state"] = true;
  CHECK(outcome(j, c) == std::pair{RpcCode::invalid_params, std::string("plan.ac.off_state: must be an object ({} for the forward readings' frequencies and amplitude), not boolean")});
  j["ac"]["off_state"] = {{"amplitud", 0.05}};
  CHECK(outcome(j, c) == std::pair{RpcCode::invalid_params, std::string("plan.ac.off_state.amplitud: unknown field")});
  j["ac"]["off_state"] = {{"amplitude", 0.5}};  // 0.71 V peak against 0.5 V reverse
  CHECK(outcome(j, c) == std::pair{RpcCode::plan_refused,
                                   std::string("plan.ac.off_state amplitude peak 0.707107 V is above the smallest reverse bias 0.5 V + 0.1 V: "
                                               "the junction would conduct on the signal peaks of the off-state readings")});
  j["ac"]["off_state"] = Json::object();
  j.erase("reverse_v");
  CHECK(outcome(j, c) == std::pair{RpcCode::plan_refused, std::string("plan.ac.off_state needs reverse_v: the reverse biases to read the levels at")});
}

TEST_CASE("the shipped example plan parses and passes on a bench that has what it asks for") {
  std::ifstream f(std::string(JUNCO_SOURCE_DIR) + "/tools/examples/plan.jsonc");
  REQUIRE(f);
  const Json j = Json::parse(f, nullptr, true, /*ignore_comments=*/true);
  Config c = bench();
  c.bench["siggen"] = {};
  c.bench["levelmeter"] = {};
  const Plan p = parse_plan(j);
  CHECK_NOTHROW(check_plan(p, c));
  REQUIRE(p.ac);
  CHECK(p.ac->off_state);
  std::size_t off = 0;
  for (const auto& s : expand_steps(p)) off += s.kind == Step::Kind::reverse_ac;
  CHECK(off == p.reverse_v.size() * p.ac->off_state->freqs_hz.size());
}

TEST_CASE("plan size limits: points per job and memory, refused by arithmetic before any expansion") {
  // Issue 10: count 100000 × 200 frequencies × 8 parts was accepted and took
  // 850 MB; with 2000 frequencies juncod died of bad_alloc.
  Config c = bench();
  c.bench["siggen"] = InstrumentConfig{"siggen", "sim", {}, 2000, 2};
  c.bench["levelmeter"] = InstrumentConfig{"levelmeter", "sim", {}, 2000, 2};
  Json j = plan();
  j["parts"] = Json::array();
  for (int s = 1; s <= 8; ++s) j["parts"].push_back({{"slot", s}, {"label", "QX-7-0" + std::to_string(s)}});
  j["sweep"]["count"] = 100000;
  j["sweep"]["settle_s"] = 0;
  j["ac"] = {{"freqs_hz", Json::array()}, {"amplitude", 0.1}, {"settle_s", 0}};
  for (int k = 0; k < 2000; ++k) j["ac"]["freqs_hz"].push_back(1e6 + k);
  const Plan p = parse_plan(j);
  CHECK(steps_per_part(p) == 100000.0 * 2001);  // dc step + one per frequency, per sweep step
  CHECK(points_per_job(p) == 100000.0 * 2001 * 8);
  const auto t0 = std::chrono::steady_clock::now();
  try {
    check_plan(p, c);
    FAIL("accepted");
  } catch (const PlanRefused& e) {
    CHECK(to_request_error(e).code() == RpcCode::plan_refused);
    CHECK(std::string(e.what()) == "plan takes 1600800000 readings (200100000 per part × 8 parts), over limits.max_points_per_job = 1000000");
    CHECK(to_request_error(e).data()["limit"] == "max_points_per_job");
  }
  // Arithmetic only: far below what expanding 200 million steps would take.
  CHECK(std::chrono::steady_clock::now() - t0 < std::chrono::milliseconds(50));

  // One part of 100000 steps × 3 frequencies: 400000 points (under the
  // points cap) but ~113 MiB to run (40 B per step), over the 64 MiB default.
  Json one = plan();
  one["parts"] = Json::array({{{"slot", 1}, {"label", "QX-7-01"}}});
  one["sweep"]["count"] = 100000;
  one["sweep"]["settle_s"] = 0;
  one["ac"] = {{"freqs_hz", {1e6, 2e6, 3e6}}, {"amplitude", 0.1}, {"settle_s", 0}};
  const Plan q = parse_plan(one);
  CHECK(plan_memory_bytes(q) == 400000.0 * (sizeof(Step) + kReadingBytes));
  try {
    check_plan(q, c);
    FAIL("accepted");
  } catch (const PlanRefused& e) {
    CHECK_THAT(std::string(e.what()), Catch::StartsWith("plan needs about 113 MiB to run (400000 steps per part), over limits.max_plan_memory_bytes = "));
    CHECK(e.limit() == "max_plan_memory_bytes");
  }
  // The same plan passes when the bench's config allows it.
  c.limits.max_plan_memory_bytes = 256.0 * 1024 * 1024;
  CHECK_NOTHROW(check_plan(q, c));
  // And the points cap is configurable too.
  c.limits.max_points_per_job = 399999;
  CHECK_THROWS_WITH(check_plan(q, c), Catch::StartsWith("plan takes 400000 readings"));
}

TEST_CASE("temps_k: every part at every set point, soaks counted, chamber limits enforced", "[plan][chamber]") {
  Config c = bench();
  Json j = plan();
  j["temps_k"] = {253.15, 298.15, 358.15};
  j["soak"] = {{"tolerance_k", 0.2}, {"hold_s", 30}};
  // No chamber in the bench: refused by name.
  CHECK(outcome(j, c) == std::pair{RpcCode::plan_refused, std::string("plan.temps_k needs a chamber in the bench config (bench.chamber)")});
  c.bench["chamber"] = InstrumentConfig{"chamber", "tcp:127.0.0.1:1", "/dev/null", 2000, 2};
  c.safety.chamber_min_k = 233.15;
  c.safety.chamber_max_k = 398.15;
  c.safety.max_soak_s = 1800;
  const Plan p = parse_plan(j);
  REQUIRE_NOTHROW(check_plan(p, c));
  CHECK(temperature_count(p) == 3);
  CHECK(points_per_job(p) == 11.0 * 2 * 3);
  // The hold times count in the lower bound; the ramps (45 + 45 + 60 K from
  // the idle 298.15 K at the assumed 2 K/min) only in the estimate.
  CHECK(min_duration_s(p) == Approx(3 * 2 * 11 * 0.01 + 3 * 30));
  CHECK(soak_s(p, c, false) == Approx(90));
  CHECK(soak_s(p, c, true) == Approx(90 + (45.0 + 45.0 + 60.0) / 2.0 * 60.0));
  c.safety.chamber_max_rate_k_per_min = 5;
  CHECK(soak_s(p, c, true) == Approx(90 + (45.0 + 45.0 + 60.0) / 5.0 * 60.0));
  CHECK(to_json(parse_plan(to_json(p))) == to_json(p));
  CHECK_FALSE(to_json(p).contains("temp_k"));

  j["temps_k"] = {253.15, 400.0};
  CHECK(outcome(j, c).second == "plan.temps_k 400 K is outside safety limits chamber_min_k..chamber_max_k = 233.15..398.15 K");
  j["temps_k"] = {"cold"};
  CHECK(outcome(j, c) == std::pair{RpcCode::invalid_params, std::string("plan.temps_k[0]: must be a number, not string")});
  j["temps_k"] = {253.15};
  j["soak"]["hold_s"] = 1800;
  CHECK(outcome(j, c).second == "plan.soak.hold_s 1800 s must be in 0..safety limit max_soak_s = 1800 s (exclusive)");
  j["soak"] = {{"tolerance_k", 0}};
  CHECK(outcome(j, c).second == "plan.soak.tolerance_k 0 K must be in (0, 20]");
  j["soak"] = {{"settle", 1}};
  CHECK(outcome(j, c) == std::pair{RpcCode::invalid_params, std::string("plan.soak.settle: unknown field")});
}

TEST_CASE("plan.vector.forward_i_a: forward_vector steps after the sweep, each current within the sweep's limits") {
  Config c = bench();
  c.bench["siggen"] = {};
  c.bench["vectormeter"] = {};
  Json j = plan();
  j["reverse_v"] = {1, 2};
  j["vector"] = {{"freqs_hz", {1e6, 1e8}}, {"amplitude", 0.02}, {"forward_i_a", {1e-3, 1e-2}}};
  const Plan p = parse_plan(j);
  REQUIRE_NOTHROW(check_plan(p, c));
  const auto steps = expand_steps(p);
  // 11 sweep steps, 2 currents × 2 frequencies, then 2 reverse points with 2 vector readings each.
  REQUIRE(steps.size() == 11 + 4 + 2 * 3);
  CHECK(static_cast<double>(steps.size()) == steps_per_part(p));
  CHECK(steps[11].kind == Step::Kind::forward_vector);
  CHECK(steps[11].set_value == 1e-3);
  CHECK(steps[11].freq_hz == 1e6);
  CHECK(steps[14].set_value == 1e-2);
  CHECK(steps[14].dc_index == 1);
  CHECK(steps[15].kind == Step::Kind::reverse);
  CHECK_FALSE(is_reverse(Step::Kind::forward_vector));
  CHECK(is_vector(Step::Kind::forward_vector));
  CHECK(std::string(to_string(Step::Kind::forward_vector)) == "forward_vector");
  CHECK(to_json(parse_plan(to_json(p))) == to_json(p));

  // Types name the field; limits name the limit and the field.
  j["vector"]["forward_i_a"] = "1e-3";
  CHECK(outcome(j, c).second.find("plan.vector.forward_i_a") != std::string::npos);
  j["vector"]["forward_i_a"] = {1e-3, "x"};
  CHECK(outcome(j, c).second.find("plan.vector.forward_i_a[1]") != std::string::npos);
  j["vector"]["forward_i_a"] = {1e-3, 0.2};  // current_limit_a 0.1
  auto [code, message] = outcome(j, c);
  CHECK(code == RpcCode::plan_refused);
  CHECK(message.find("plan.vector.forward_i_a[1] 0.2 A exceeds safety limit current_limit_a = 0.1 A") != std::string::npos);
  j["vector"]["forward_i_a"] = {-1e-3};
  CHECK(outcome(j, c).second.find("plan.vector.forward_i_a[0] -0.001 A must be > 0") != std::string::npos);
  j["vector"]["forward_i_a"] = {0.09};  // 1.5 V × 0.09 A = 0.135 W, max_power_w 0.25: fine; 9 V across 100 Ω: fine
  CHECK(outcome(j, c).second == "(accepted)");
  c.safety.max_power_w = 0.1;
  CHECK(outcome(j, c).second.find("max_power_w") != std::string::npos);
  c.safety.max_power_w = 0.25;
  // 0.02 Vpp: 0.01 V peak over source + load 100 Ω = 0.1 mA, not below 0.05 mA.
  j["vector"]["forward_i_a"] = {0.05e-3, 1e-3};
  const std::string trough = outcome(j, c).second;
  CHECK(trough.find("switch off on the signal's troughs") != std::string::npos);
  CHECK(trough.find("0.0001 A") != std::string::npos);
}
