// ScpiSession over a scripted in-memory Transport: error-queue draining,
// *OPC?, number replies and the resynchronisation after reconnect, with
// replies junco-sim does not produce (queue overflow, stuck queue, stale
// lines). The real-process tests are in tests/integration/drivers_*.
#include "drivers/errors.hpp"
#include "drivers/scpi.hpp"

#include <catch2/catch.hpp>

#include <deque>
#include <functional>

using namespace junco::drivers;

namespace {

// Answers each message through `respond` (which may queue 0..n lines);
// read_message pops queued lines or times out at once.
struct ScriptedTransport : Transport {
  std::function<std::vector<std::string>(const std::string&)> respond;
  std::deque<std::string>* pending;
  std::vector<std::string>* sent;
  bool clean = false;
  int reconnects = 0;
  void write_message(std::string_view m) override {
    sent->emplace_back(m);
    for (auto& line : respond(std::string(m))) pending->push_back(line);
  }
  std::string read_message(std::chrono::milliseconds) override {
    if (pending->empty()) throw DriverError(ErrorKind::timeout, "scripted: no reply");
    std::string line = pending->front();
    pending->pop_front();
    return line;
  }
  void close() override {}
  void reconnect() override { ++reconnects; }
  std::string describe() const override { return "scripted"; }
  bool clean_after_reconnect() const override { return clean; }
};

struct Rig {
  std::deque<std::string> pending;
  std::vector<std::string> sent;
  std::vector<std::string> log;
  ScriptedTransport* transport = nullptr;
  std::unique_ptr<ScpiSession> session;
  explicit Rig(std::function<std::vector<std::string>(const std::string&)> respond) {
    auto t = std::make_unique<ScriptedTransport>();
    t->respond = std::move(respond);
    t->pending = &pending;
    t->sent = &sent;
    transport = t.get();
    SessionOptions o;
    o.reply_timeout = std::chrono::milliseconds(50);
    o.traffic_log = [this](std::string_view d, std::string_view l) { log.push_back(std::string(d) + " " + std::string(l)); };
    session = std::make_unique<ScpiSession>(std::move(t), o);
  }
};

template <class F>
DriverError error_from(F&& f) {
  try {
    f();
  } catch (const DriverError& e) {
    return e;
  }
  FAIL("no DriverError");
  return DriverError(ErrorKind::config, "unreachable");
}

}  // namespace

TEST_CASE("drain_errors reports the first queued error and how many more", "[drivers][scpi]") {
  std::deque<std::string> queue = {"-113,\"Undefined header\"", "-222,\"Data out of range\"",
                                   "-350,\"Queue overflow\""};
  Rig rig([&](const std::string& m) -> std::vector<std::string> {
    if (m != "SYST:ERR?") return {};
    if (queue.empty()) return {"0,\"No error\""};
    std::string e = queue.front();
    queue.pop_front();
    return {e};
  });
  DriverError e = error_from([&] { rig.session->drain_errors(); });
  CHECK(e.kind() == ErrorKind::instrument);
  CHECK(e.scpi_code() == -113);
  CHECK(std::string(e.what()) == "instrument error -113,\"Undefined header\" (and 2 more in the error queue)");
  CHECK(queue.empty());  // drained completely, so the next group starts clean
  CHECK_NOTHROW(rig.session->drain_errors());
}

TEST_CASE("an error queue that never empties or answers garbage is garbled", "[drivers][scpi]") {
  Rig stuck([](const std::string&) -> std::vector<std::string> { return {"-100,\"Command error\""}; });
  DriverError e = error_from([&] { stuck.session->drain_errors(); });
  CHECK(e.kind() == ErrorKind::garbled);
  CHECK_THAT(std::string(e.what()), Catch::Contains("did not empty"));

  Rig garbage([](const std::string&) -> std::vector<std::string> { return {"+1.0E+00"}; });
  CHECK(error_from([&] { garbage.session->drain_errors(); }).kind() == ErrorKind::garbled);
}

TEST_CASE("numbers, overload, *OPC? and *IDN? through the session", "[drivers][scpi]") {
  Rig rig([](const std::string& m) -> std::vector<std::string> {
    if (m == "V?") return {"+6.52301E-01VDC"};
    if (m == "OVL?") return {"+9.90000E+37"};
    if (m == "*OPC?") return {"0"};
    if (m == "*IDN?") return {"ACME,X1,42"};
    return {};
  });
  CHECK(rig.session->query_number("V?", "VDC") == Approx(0.652301));
  CHECK(error_from([&] { rig.session->query_number("V?"); }).kind() == ErrorKind::garbled);
  CHECK(error_from([&] { rig.session->query_number("OVL?"); }).kind() == ErrorKind::overrange);
  CHECK(error_from([&] { rig.session->sync(); }).kind() == ErrorKind::garbled);
  DriverError idn = error_from([&] { rig.session->identify(); });
  CHECK(idn.kind() == ErrorKind::garbled);
  CHECK_THAT(std::string(idn.what()), Catch::Contains("3 fields"));
  DriverError silent = error_from([&] { rig.session->query("NOTHING?"); });
  CHECK(silent.kind() == ErrorKind::timeout);
  CHECK_THAT(std::string(silent.what()), Catch::StartsWith("query 'NOTHING?': "));
  CHECK(std::find(rig.log.begin(), rig.log.end(), "> V?") != rig.log.end());
  CHECK(std::find(rig.log.begin(), rig.log.end(), "< +6.52301E-01VDC") != rig.log.end());
}

TEST_CASE("reconnect resynchronises past stale replies on a non-TCP link", "[drivers][scpi]") {
  // A late reading and an earlier resync's "1" are still queued.
  Rig rig([](const std::string& m) -> std::vector<std::string> {
    if (m == "*OPC?") return {"1"};
    if (m == "V?") return {"0.5"};
    return {};
  });
  rig.pending = {"+7.77E-01", "1"};
  rig.session->reconnect();
  CHECK(rig.transport->reconnects == 1);
  CHECK(rig.pending.empty());  // stale lines and the extra "1" all absorbed
  CHECK(rig.session->query_number("V?") == Approx(0.5));

  Rig clean([](const std::string&) -> std::vector<std::string> { return {}; });
  clean.transport->clean = true;
  clean.session->reconnect();
  CHECK(std::find(clean.sent.begin(), clean.sent.end(), "*OPC?") == clean.sent.end());

  Rig junk([](const std::string& m) -> std::vector<std::string> {
    if (m == "*OPC?") return {"\x7f~"};
    return {};
  });
  CHECK(error_from([&] { junk.session->reconnect(); }).kind() == ErrorKind::garbled);
  Rig mute([](const std::string&) -> std::vector<std::string> { return {}; });
  CHECK(error_from([&] { mute.session->reconnect(); }).kind() == ErrorKind::timeout);
}
