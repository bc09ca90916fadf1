// The instrument's error queue against junco-sim over real TCP: an error
// someone else left queued is cleared (and returned, to be logged) instead
// of being blamed on our next command; a query the instrument did not
// understand is reported as the instrument's own error (-113) after one
// reply timeout, not retried as a timeout.
//
// The SCPI behaviour relied on (IEEE 488.2 §10.3 *CLS clears the error/event
// queue; SCPI-99 §21.8 SYST:ERR? returns the oldest entry, "0,..." when empty;
// -113 "Undefined header" is a command error, -100 … -199) is from
// docs/references.md §5.
#include "drivers/errors.hpp"
#include "tests/integration/drivers_test_support.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <unistd.h>

using namespace junco::drivers;
using junco::test::SimProcess;
using junco::test::sim_spec;
using Clock = std::chrono::steady_clock;
using std::chrono::milliseconds;

namespace {

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

// The shipped scpi-source dialect with the measure_current query mistyped.
std::string mistyped_source_dialect() {
  std::ifstream in(junco::test::dialect_file("scpi-source"));
  std::stringstream text;
  text << in.rdbuf();
  std::string s = text.str();
  const auto at = s.find("\"MEAS:CURR?\"");
  REQUIRE(at != std::string::npos);
  s.replace(at, 12, "\"MEAS:CURRR?\"");
  const std::string path = "/tmp/junco-mistyped-" + std::to_string(::getpid()) + ".json";
  std::ofstream(path) << s;
  return path;
}

}  // namespace

TEST_CASE("a stale error left in the queue is cleared and returned, not blamed on the next command", "[drivers][integration]") {
  SimProcess sim({"--seed", "3", "--settle-ms", "0"});
  junco::test::TrafficLog log;
  auto source = open_source(sim_spec(sim, "source", &log, milliseconds(1000)));
  // Someone else's mistake, queued before we send anything.
  junco::test::inject_fault(sim, "source", "error -222 Data out of range");
  junco::test::inject_fault(sim, "source", "error -224 Illegal parameter value");

  SECTION("clear_errors returns both entries, oldest first; the next command succeeds") {
    const auto found = source->clear_errors();
    REQUIRE(found.size() == 2);
    CHECK(found[0] == "-222,\"Data out of range\"");
    CHECK(found[1] == "-224,\"Illegal parameter value\"");
    CHECK(log.contains("> *CLS"));
    CHECK_NOTHROW(source->set_output(false));
    CHECK(sim.control("state?")["source"]["output_on"] == false);
  }
  SECTION("without clearing, OUTP OFF is blamed for it (what the clear prevents)") {
    try {
      source->set_output(false);
      FAIL("the stale error was not reported");
    } catch (const DriverError& e) {
      CHECK(e.scpi_code() == -222);
      CHECK(std::string(e.what()).find("after 'OUTP OFF'") != std::string::npos);
    }
  }
}

TEST_CASE("a mistyped query is reported as the instrument's -113 after one reply timeout, never retried", "[drivers][integration]") {
  SimProcess sim({"--seed", "3", "--settle-ms", "0"});
  const std::string dialect = mistyped_source_dialect();
  junco::test::TrafficLog log;
  auto spec = sim_spec(sim, "source", &log, milliseconds(2000));  // the shipped default reply_timeout_ms
  spec.max_retries = 2;                                              // the shipped default max_retries
  spec.dialect_path = dialect;
  auto source = open_source(spec);

  const auto t0 = Clock::now();
  try {
    source->measure_current_a();
    FAIL("a mistyped query returned a number");
  } catch (const DriverError& e) {
    const double s = seconds_since(t0);
    INFO(e.what() << " after " << s << " s");
    CHECK(e.kind() == ErrorKind::instrument);
    CHECK(e.scpi_code() == -113);
    CHECK(e.command_error());
    CHECK(e.permanent());
    CHECK(std::string(e.what()).find("-113,\"Undefined header\" after 'MEAS:CURRR?'") != std::string::npos);
    // One 2 s reply timeout and one SYST:ERR? round trip. Before: every one
    // of the 1 + max_retries attempts waited out its timeout (≥ 6 s here),
    // and the executor repeated that kPointAttempts = 4 times (~24 s).
    CHECK(s >= 1.9);
    CHECK(s < 3.5);
    WARN("mistyped query reported as -113 after " << s << " s (reply timeout 2 s)");
  }
  CHECK(std::count(log.lines.begin(), log.lines.end(), "> MEAS:CURRR?") == 1);  // not retried
  // The session is usable right after: the next operation gets its answer.
  CHECK_NOTHROW(source->set_output(false));
  std::filesystem::remove(dialect);
}

TEST_CASE("a query that is only slow still ends as a timeout (an empty error queue explains nothing)", "[drivers][integration]") {
  SimProcess sim({"--seed", "3", "--settle-ms", "0"});
  junco::test::TrafficLog log;
  auto spec = sim_spec(sim, "source", &log, milliseconds(300));
  spec.max_retries = 0;
  auto source = open_source(spec);
  junco::test::inject_fault(sim, "source", "silent");
  try {
    source->measure_current_a();
    FAIL("a mute instrument returned a number");
  } catch (const DriverError& e) {
    INFO(e.what());
    CHECK(e.kind() == ErrorKind::timeout);
    CHECK_FALSE(e.permanent());
  }
  CHECK(log.contains("> SYST:ERR?"));  // it did ask
}
