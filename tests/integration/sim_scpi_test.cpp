// IEEE 488.2 / SCPI conformance of junco-sim, seen from a raw socket and a
// raw pseudo-terminal client (docs/references.md §5:
// IEEE 488.2-1992 and SCPI-99 as quoted there).
#include "tests/support/sim_process.hpp"

#include <catch2/catch.hpp>

#include <regex>

using junco::test::LineClient;
using junco::test::SimProcess;
using namespace std::chrono_literals;

namespace {
std::string q(LineClient& c, const std::string& line) {
  const auto r = c.query(line, 2s);
  REQUIRE(r.has_value());
  return *r;
}
}  // namespace

TEST_CASE("every instrument answers *IDN? with four fields within 72 characters", "[sim][scpi]") {
  // Source: IEEE 488.2 §10.14 as quoted in docs/references.md §5.
  SimProcess sim({"--serial", "meter"});
  for (const char* role : {"source", "meter", "scanner", "siggen", "levelmeter"}) {
    LineClient c(sim.endpoint(role));
    const std::string idn = q(c, "*IDN?");
    INFO(role << ": " << idn);
    CHECK(idn.size() <= 72);
    CHECK(std::regex_match(idn, std::regex(R"([\x20-\x7e]+,[\x20-\x7e]+,[\x20-\x7e]+,[\x20-\x7e]+)")));
    CHECK(std::count(idn.begin(), idn.end(), ',') == 3);
    CHECK(idn.find(';') == std::string::npos);
    CHECK(idn.find('\r') == std::string::npos);  // the terminator is LF alone
  }
  CHECK(sim.endpoint("meter").rfind("serial:/dev/pts/", 0) == 0);
}

TEST_CASE("error queue: empty reply, -113, FIFO, overflow -350, *CLS clears, *RST does not", "[sim][scpi]") {
  // Source: SCPI-99 error queue rules and IEEE 488.2 §11.4.3.4 (docs/references.md §5).
  SimProcess sim;
  LineClient c(sim.endpoint("source"));
  CHECK(q(c, "SYST:ERR?") == "0,\"No error\"");
  c.send("*XYZ");
  CHECK(q(c, "SYST:ERR?") == "-113,\"Undefined header\"");
  CHECK(q(c, "SYST:ERR?") == "0,\"No error\"");

  c.send("*XYZ");
  c.send("VOLT 1e6");  // out of range: -222, nothing changes
  CHECK(q(c, "VOLT?") == "+0.00000E+00");
  CHECK(q(c, "SYST:ERR?") == "-113,\"Undefined header\"");  // oldest first
  CHECK(q(c, "SYSTem:ERRor:NEXT?") == "-222,\"Data out of range\"");

  for (int i = 0; i < 20; ++i) c.send("*XYZ");  // depth 16
  c.send("*RST");
  std::vector<std::string> drained;
  for (int i = 0; i < 17; ++i) drained.push_back(q(c, "SYST:ERR?"));
  CHECK(drained[0] == "-113,\"Undefined header\"");  // *RST kept the queue
  CHECK(drained[14] == "-113,\"Undefined header\"");
  CHECK(drained[15] == "-350,\"Queue overflow\"");  // newest slot replaced
  CHECK(drained[16] == "0,\"No error\"");

  c.send("*XYZ");
  c.send("*CLS");
  CHECK(q(c, "SYST:ERR?") == "0,\"No error\"");
}

TEST_CASE("*OPC? answers 1 and *ESR? reports CME, EXE, QYE bits then clears", "[sim][scpi]") {
  // Source: IEEE 488.2 ESR bits as in docs/references.md §5 (CME 5, EXE 4, QYE 2).
  SimProcess sim;
  LineClient c(sim.endpoint("siggen"));
  CHECK(q(c, "*OPC?") == "1");
  CHECK(q(c, "*ESR?") == "0");
  c.send("*XYZ");
  CHECK(q(c, "*ESR?") == std::to_string(1 << 5));
  c.send("FREQ -5");
  CHECK(q(c, "*ESR?") == std::to_string(1 << 4));
  // A query error, injected through the control endpoint, sets QYE.
  REQUIRE(sim.control("fault siggen error -410 Query INTERRUPTED")["ok"] == true);
  CHECK(q(c, "*ESR?") == std::to_string(1 << 2));
  CHECK(q(c, "*ESR?") == "0");
  CHECK(q(c, "SYST:ERR?") == "-113,\"Undefined header\"");  // reading ESR left the queue alone
  CHECK(q(c, "SYST:ERR?") == "-222,\"Data out of range\"");
  CHECK(q(c, "SYST:ERR?") == "-410,\"Query INTERRUPTED\"");
}

TEST_CASE("keywords are case-insensitive in short and long form; ';' joins replies", "[sim][scpi]") {
  // Source: SCPI-99 syntax rules as quoted in docs/references.md §5.
  SimProcess sim;
  LineClient c(sim.endpoint("source"));
  c.send("volt 1.5");
  CHECK(q(c, "SOURce:VOLTage?") == "+1.50000E+00");
  CHECK(q(c, "sour:volt?") == "+1.50000E+00");
  CHECK(q(c, "*OPC?;syst:err?") == "1;0,\"No error\"");
  c.send_raw("*IDN?\r\n");  // CR LF accepted on input (common practice)
  CHECK(c.read_line(2s) == std::optional<std::string>("junco-sim,SRC-100,SIM-S001,1.0"));
  CHECK(q(c, "*OPC?") == "1");
}

TEST_CASE("the second family of each role speaks its own commands", "[sim][scpi]") {
  // Command sets from docs/command-sets.md.
  SimProcess sim({"--family", "source=psu-compact", "--family", "meter=dmm-prefixed", "--family",
                  "scanner=relay-bank", "--family", "siggen=gen-channel", "--family", "levelmeter=scope-meas",
                  "--settle-ms", "0"});
  CHECK(sim.family("meter") == "dmm-prefixed");
  LineClient src(sim.endpoint("source")), dmm(sim.endpoint("meter")), sw(sim.endpoint("scanner")),
      gen(sim.endpoint("siggen")), lvl(sim.endpoint("levelmeter"));
  CHECK(q(src, "*IDN?") == "junco-sim,PSU-C2,SIM-S002,2.1");
  CHECK(q(sw, "RELAY:SEL 2;*OPC?") == "1");
  src.send("ISET 0.05");
  src.send("VSET 1.2");
  src.send("OUT 1");
  CHECK(q(src, "MODE?") == "CV");
  CHECK(std::regex_match(q(src, "VOUT?"), std::regex(R"(1\.2\d\d)")));
  dmm.send(":SENS:FUNC 'VOLT:DC'");
  CHECK(std::regex_match(q(dmm, ":READ?"), std::regex(R"(\+[0-9]\.[0-9]{6}E[-+][0-9]{2}VDC)")));
  dmm.send(":SENS:FUNC 'CURR:DC'");
  CHECK(std::regex_match(q(dmm, ":READ?"), std::regex(R"(\+[0-9]\.[0-9]{6}E[-+][0-9]{2}ADC)")));
  gen.send(":SOUR1:FREQ 1e6");
  gen.send(":SOUR1:VOLT 0.1VPP");
  gen.send(":OUTP1 ON");
  REQUIRE(q(gen, "*OPC?") == "1");  // each connection has its own thread: sync before reading
  const double vpp_in = std::stod(q(lvl, ":MEAS:VPP? CHAN1"));
  const double vrms_out = std::stod(q(lvl, ":MEAS:VRMS? CHAN2"));
  CHECK(vpp_in > 0.04);
  CHECK(vpp_in < 0.1);
  CHECK(vrms_out > 0.01);
  CHECK(q(src, "SYST:ERR?") == "0,\"No error\"");
  src.send("VSET -1");  // this family is single quadrant
  CHECK(q(src, "SYST:ERR?") == "-222,\"Data out of range\"");
  CHECK(q(sw, "RELAY:OFF;*OPC?") == "1");
  CHECK(sim.control("state?")["scanner"]["slot"] == 0);
}

TEST_CASE("*RST returns to the power-up state: outputs off, 0 V, no slot", "[sim][scpi]") {
  // Power-up state as specified in docs/sim.md (design rule: output off at power-up).
  SimProcess sim({"--settle-ms", "0"});
  LineClient src(sim.endpoint("source")), sw(sim.endpoint("scanner")), gen(sim.endpoint("siggen"));
  auto st = sim.control("state?");
  CHECK(st["source"]["output_on"] == false);
  CHECK(st["siggen"]["output_on"] == false);
  sw.send("ROUT:CLOS (@3)");
  src.send("VOLT 2;CURR 0.01;OUTP ON");
  CHECK(q(gen, "OUTP ON;*OPC?") == "1");
  CHECK(q(sw, "*OPC?") == "1");
  CHECK(q(src, "*OPC?") == "1");
  st = sim.control("state?");
  CHECK(st["source"]["output_on"] == true);
  CHECK(st["source"]["in_current_limit"] == true);  // 2 V into 100 Ω + diode wants > 10 mA
  CHECK(q(src, "STAT:QUES:COND?") == "2");
  CHECK(std::stod(q(src, "MEAS:CURR?")) == Approx(0.01).epsilon(1e-3));
  CHECK(std::stod(q(src, "MEAS:VOLT?")) < 2.0);  // folded back
  for (LineClient* c : {&src, &sw, &gen}) CHECK(q(*c, "*RST;*OPC?") == "1");
  st = sim.control("state?");
  CHECK(st["source"]["output_on"] == false);
  CHECK(st["source"]["voltage_v"] == 0.0);
  CHECK(st["scanner"]["slot"] == 0);
  CHECK(st["siggen"]["output_on"] == false);
}

TEST_CASE("the generator takes frequencies up to 3 GHz and refuses above", "[sim][scpi]") {
  // docs/command-sets.md (sim ranges): 1 Hz … 3 GHz; out of range is -222
  // (SCPI-99 error list, docs/references.md §5) and leaves the setting alone.
  SimProcess sim;
  LineClient c(sim.endpoint("siggen"));
  c.send("FREQ 1e9");
  CHECK(std::stod(q(c, "FREQ?")) == 1e9);
  c.send("FREQ 3e9");
  CHECK(std::stod(q(c, "FREQ?")) == 3e9);
  CHECK(q(c, "SYST:ERR?") == "0,\"No error\"");
  c.send("FREQ 3.1e9");
  CHECK(q(c, "SYST:ERR?") == "-222,\"Data out of range\"");
  CHECK(std::stod(q(c, "FREQ?")) == 3e9);
}
