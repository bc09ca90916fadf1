// ctest: RUN_SERIAL (deadline bounds on timeouts and reconnects)
// Every fault mode of junco-sim's control endpoint against the real driver
// stack: the driver reports a typed DriverError with a clear message within
// its deadline, reconnects where it can, and never returns a garbled reply
// as a number.
#include "drivers/errors.hpp"
#include "tests/integration/drivers_test_support.hpp"

#include <catch2/catch.hpp>

#include <thread>

using namespace junco::drivers;
using junco::test::SimProcess;
using junco::test::sim_spec;
using Clock = std::chrono::steady_clock;
using std::chrono::milliseconds;

namespace {

constexpr milliseconds reply_timeout{300};

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

// Bias the part so MEAS:CURR? has a known true value to compare with.
double bias(Source& source, Scanner& scanner, SimProcess& sim) {
  scanner.connect_slot(1);
  source.set_current_limit_a(0.05);
  source.set_voltage_v(2.0);
  source.set_output(true);
  return sim.control("state?")["diode"]["i_a"].get<double>();
}

}  // namespace

TEST_CASE("junco-sim faults give typed errors or recover", "[drivers][integration][faults]") {
  // The source over TCP; the meter over the sim's pseudo-terminal (termios
  // path) so the serial reconnect and resynchronisation are exercised too.
  const bool serial = GENERATE(false, true);
  const std::string role = serial ? "meter" : "source";
  INFO("role " << role << (serial ? " over a pty" : " over TCP"));
  SimProcess sim({"--seed", "5", "--settle-ms", "0", "--serial", "meter"});
  junco::test::TrafficLog log;
  auto spec = sim_spec(sim, role, &log, reply_timeout);
  spec.max_retries = 2;
  auto source = open_source(sim_spec(sim, "source"));
  auto scanner = open_scanner(sim_spec(sim, "scanner"));
  const double i_true = bias(*source, *scanner, sim);
  REQUIRE(i_true > 1e-4);

  std::unique_ptr<Source> src_under_test;
  std::unique_ptr<Meter> meter_under_test;
  if (serial) meter_under_test = open_meter(spec);
  else src_under_test = open_source(spec);
  auto read_current = [&] {
    return serial ? meter_under_test->measure_dc_current_a() : src_under_test->measure_current_a();
  };
  const char* operation = serial ? "measure_dc_current" : "measure_current";
  REQUIRE(read_current() == Approx(i_true).epsilon(0.02));
  // Worst case: every attempt waits a full reply timeout, plus a
  // resynchronising *OPC? on serial, plus reconnect time.
  const double deadline_s = (spec.max_retries + 1) * 2 * reply_timeout.count() / 1000.0 + 1.0;

  SECTION("drop-after: the link closes, the driver reconnects and carries on") {
    junco::test::inject_fault(sim, role, "drop-after 1");
    for (int k = 0; k < 3; ++k) CHECK(read_current() == Approx(i_true).epsilon(0.02));
    CHECK(log.contains("# reconnect"));
  }

  SECTION("late beyond the deadline: timeout, reconnect, the stale reply is not taken") {
    junco::test::inject_fault(sim, role, "late 700");
    auto t0 = Clock::now();
    CHECK(read_current() == Approx(i_true).epsilon(0.02));
    CHECK(seconds_since(t0) < deadline_s);
    CHECK(log.contains("failed (timeout)"));
    // The late reply must not be the answer to the next, different query.
    if (serial) {
      CHECK(meter_under_test->measure_dc_voltage_v() == Approx(sim.control("state?")["diode"]["v"].get<double>()).epsilon(0.01));
    } else {
      CHECK_FALSE(src_under_test->in_current_limit());
    }
  }

  SECTION("late with no retries left: a timeout naming instrument, operation and command") {
    spec.max_retries = 0;
    auto once = serial ? std::unique_ptr<Instrument>(open_meter(spec)) : std::unique_ptr<Instrument>(open_source(spec));
    junco::test::inject_fault(sim, role, "late 1000");
    auto t0 = Clock::now();
    try {
      double v = serial ? dynamic_cast<Meter&>(*once).measure_dc_current_a() : dynamic_cast<Source&>(*once).measure_current_a();
      FAIL("a late reply returned " << v);
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::timeout);
      std::string m = e.what();
      CHECK_THAT(m, Catch::Contains("instrument '" + role + "'") && Catch::Contains(operation) &&
                        Catch::Contains(serial ? "MEAS:CURR:DC?" : "MEAS:CURR?") && Catch::Contains("300 ms"));
    }
    CHECK(seconds_since(t0) < 0.3 + 0.5);
    // The late reply, still on its way, is not the answer to the next query.
    std::this_thread::sleep_for(std::chrono::milliseconds(800));
    if (serial) {
      auto& m = dynamic_cast<Meter&>(*once);
      CHECK(m.measure_dc_voltage_v() == Approx(sim.control("state?")["diode"]["v"].get<double>()).epsilon(0.01));
    } else {
      CHECK_FALSE(dynamic_cast<Source&>(*once).in_current_limit());
      CHECK(dynamic_cast<Source&>(*once).measure_voltage_v() == Approx(2.0).epsilon(0.01));
    }
  }

  SECTION("garble once: retried, the true value comes back") {
    junco::test::inject_fault(sim, role, "garble 1");
    CHECK(read_current() == Approx(i_true).epsilon(0.02));
    CHECK(log.contains("failed (garbled reply)"));
  }

  SECTION("garble more often than the retries: a garbled error, never a number") {
    junco::test::inject_fault(sim, role, "garble 20");
    auto t0 = Clock::now();
    try {
      double v = read_current();
      FAIL("garbled reply returned as " << v);
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::garbled);
      CHECK_THAT(std::string(e.what()), Catch::Contains(operation) && Catch::Contains("after 3 attempts"));
    }
    CHECK(seconds_since(t0) < deadline_s);
    junco::test::inject_fault(sim, role, "clear");
  }

  SECTION("error in the queue: an instrument error with code and text, not retried") {
    junco::test::inject_fault(sim, role, "error -222 Data out of range");
    try {
      read_current();
      FAIL("queued error not reported");
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::instrument);
      CHECK(e.scpi_code() == -222);
      CHECK_THAT(std::string(e.what()), Catch::Contains("-222,\"Data out of range\""));
      CHECK_FALSE(e.transient());
    }
    // Drained: the next operation is clean.
    CHECK(read_current() == Approx(i_true).epsilon(0.02));
  }

  SECTION("silent: a timeout within the deadline; after clear the driver works again") {
    junco::test::inject_fault(sim, role, "silent");
    auto t0 = Clock::now();
    try {
      double v = read_current();
      FAIL("silent instrument returned " << v);
    } catch (const DriverError& e) {
      CHECK(e.kind() == ErrorKind::timeout);
      CHECK_THAT(std::string(e.what()), Catch::Contains("instrument '" + role + "'"));
    }
    CHECK(seconds_since(t0) < deadline_s);
    junco::test::inject_fault(sim, role, "clear");
    CHECK(read_current() == Approx(i_true).epsilon(0.02));
  }
}

TEST_CASE("an instrument that is not there is a disconnected error", "[drivers][integration][faults]") {
  SimProcess sim({"--seed", "5"});
  auto spec = sim_spec(sim, "source");
  sim.control("quit");
  sim.process().wait(std::chrono::seconds(5));
  spec.max_retries = 1;
  try {
    open_source(spec);
    FAIL("opened a closed port");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::disconnected);
    CHECK_THAT(std::string(e.what()), Catch::Contains("instrument 'source'") && Catch::Contains("open"));
  }
}
