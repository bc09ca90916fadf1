// Dialect files: every shipped file loads and says what docs/command-sets.md
// says; broken files are refused with "FILE: /json/pointer: what".
#include "drivers/dialect.hpp"
#include "drivers/errors.hpp"

#include <catch2/catch.hpp>

#include <cfloat>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <set>

using namespace junco::drivers;

namespace {

const std::string dialect_dir = std::string(JUNCO_SOURCE_DIR) + "/drivers/dialects/";

// A minimal valid scanner dialect; cases below break one thing in it.
const std::string good_scanner = R"J({
  // comment allowed
  "dialect": "t", "role": "scanner",
  "operations": {
    "connect_slot": { "commands": ["ROUT:CLOS (@{slot})"] },
    "disconnect_all": { "commands": ["ROUT:OPEN:ALL"] }
  }
})J";

std::string error_of(const std::string& text) {
  try {
    parse_dialect(text, "broken.json");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::config);
    return e.what();
  }
  return "no error";
}

std::string replaced(std::string text, const std::string& from, const std::string& to) {
  auto at = text.find(from);
  REQUIRE(at != std::string::npos);
  return text.replace(at, from.size(), to);
}

}  // namespace

TEST_CASE("every shipped dialect loads, one file per family", "[drivers][dialect]") {
  // Families per role from docs/command-sets.md.
  const std::map<std::string, Role> expected = {
      {"scpi-source", Role::source}, {"psu-compact", Role::source},   {"scpi-dmm", Role::meter},
      {"dmm-prefixed", Role::meter}, {"scpi-switch", Role::scanner},  {"relay-bank", Role::scanner},
      {"scpi-gen", Role::siggen},    {"gen-channel", Role::siggen},   {"scpi-acv", Role::levelmeter},
      {"scope-meas", Role::levelmeter}, {"scpi-chamber", Role::chamber}, {"template-source", Role::source},
      {"scpi-vvm", Role::vectormeter}};
  std::set<std::string> seen;
  for (const auto& entry : std::filesystem::directory_iterator(dialect_dir)) {
    if (entry.path().extension() != ".json") continue;
    INFO(entry.path().string());
    Dialect d = load_dialect(entry.path().string());
    REQUIRE(expected.count(d.name));
    CHECK(d.role == expected.at(d.name));
    if (d.name != "template-source") CHECK(entry.path().stem() == d.name);
    seen.insert(d.name);
  }
  CHECK(seen.size() == expected.size());
}

TEST_CASE("a chamber dialect: temperature unit, {t}, optional ramp rate", "[drivers][dialect][chamber]") {
  const Dialect d = load_dialect(dialect_dir + "scpi-chamber.json");
  CHECK(d.role == Role::chamber);
  CHECK_FALSE(d.temperature_in_kelvin);  // docs/command-sets.md: the generic chamber speaks degrees Celsius
  REQUIRE(d.find("set_temperature"));
  CHECK(d.find("set_temperature")->commands.at(0) == "TEMP:SETP {t}");
  CHECK(d.find("set_rate"));
  const std::string kelvin = R"({"dialect":"k","role":"chamber","temperature_unit":"K","operations":{
      "set_temperature":{"commands":["SP {t}"]},"measure_temperature":{"query":"PV?","reply":{"type":"number"}}}})";
  const Dialect k = parse_dialect(kelvin, "k.json");
  CHECK(k.temperature_in_kelvin);
  CHECK_FALSE(k.find("set_rate"));
  auto refused = [](const std::string& text) {
    try {
      (void)parse_dialect(text, "x.json");
    } catch (const junco::drivers::DriverError& e) {
      return std::string(e.what());
    }
    return std::string("accepted");
  };
  CHECK(refused(replaced(kelvin, "\"K\"", "\"F\"")) == "x.json: /temperature_unit: must be \"C\" or \"K\", got \"F\"");
  CHECK(refused(replaced(kelvin, "SP {t}", "SP {v}")).find("unknown placeholder {v} (allowed here: {t})") != std::string::npos);
  CHECK(refused(replaced(kelvin, R"("measure_temperature")", R"("measure_x")")).find("/operations/measure_x: unknown key") != std::string::npos);
  const std::string source_with_unit = R"({"dialect":"s","role":"source","temperature_unit":"C","operations":{}})";
  CHECK(refused(source_with_unit) == "x.json: /temperature_unit: only a chamber dialect takes it");
}

TEST_CASE("shipped dialects carry the command-sets.md commands", "[drivers][dialect]") {
  Dialect dmm = load_dialect(dialect_dir + "dmm-prefixed.json");
  const Operation* v = dmm.find("measure_dc_voltage");
  REQUIRE(v);
  CHECK(v->commands == std::vector<std::string>{":SENS:FUNC 'VOLT:DC'"});
  CHECK(v->query == ":READ?");
  CHECK(v->reply.kind == ReplySpec::Kind::number);
  CHECK(v->reply.suffix == "VDC");

  Dialect psu = load_dialect(dialect_dir + "psu-compact.json");
  const Operation* cc = psu.find("in_current_limit");
  REQUIRE(cc);
  CHECK(cc->reply.kind == ReplySpec::Kind::enumeration);
  CHECK(cc->reply.values.at("CC"));
  CHECK_FALSE(cc->reply.values.at("CV"));

  Dialect src = load_dialect(dialect_dir + "scpi-source.json");
  CHECK(src.find("in_current_limit")->reply.mask == 2);
  CHECK(expand_template(src.find("set_voltage")->commands[0], {{"v", format_number(0.65)}}) == "VOLT 0.65");

  Dialect acv = load_dialect(dialect_dir + "scpi-acv.json");
  CHECK(acv.find("measure_vpp") == nullptr);  // Vpp not offered (command-sets.md)
  CHECK(expand_template(acv.find("measure_vrms")->query, {{"ch", "2"}}) == "MEAS:VOLT:AC? (@2)");
}

TEST_CASE("numbers sent to instruments read back as what was meant", "[drivers][dialect]") {
  CHECK(format_number(0.65) == "0.65");
  CHECK(format_number(-2.5e-9) == "-2.5e-09");
  CHECK(format_number(1.0 / 3.0) == "0.3333333333");
  // Ten digits of ±DBL_MAX round past the largest double, which reads back as
  // infinity (found by the dialect fuzzer); the text must stay finite.
  for (double v : {DBL_MAX, -DBL_MAX, std::nextafter(DBL_MAX, 0.0)}) {
    const auto text = format_number(v);
    CAPTURE(text);
    CHECK(std::strtod(text.c_str(), nullptr) == v);
  }
  CHECK_THROWS_AS(format_number(std::nan("")), DriverError);
  CHECK_THROWS_AS(format_number(HUGE_VAL), DriverError);
}

TEST_CASE("broken dialects name file, key and what is wrong", "[drivers][dialect]") {
  REQUIRE_NOTHROW(parse_dialect(good_scanner, "good.json"));
  struct Case {
    const char* label;
    std::string text;
    const char* message;
  } cases[] = {
      {"unknown placeholder", replaced(good_scanner, "(@{slot})", "(@{channel})"),
       "broken.json: /operations/connect_slot/commands/0: unknown placeholder {channel} (allowed here: {slot})"},
      {"placeholder where none allowed", replaced(good_scanner, "ROUT:OPEN:ALL", "ROUT:OPEN {slot}"),
       "broken.json: /operations/disconnect_all/commands/0: unknown placeholder {slot} (allowed here: none)"},
      {"unclosed placeholder", replaced(good_scanner, "(@{slot})", "(@{slot"),
       "broken.json: /operations/connect_slot/commands/0: unclosed placeholder in \"ROUT:CLOS (@{slot\""},
      {"unknown operation",
       replaced(good_scanner, R"("disconnect_all": { "commands": ["ROUT:OPEN:ALL"] })", R"("x": 1)"),
       "broken.json: /operations/x: unknown key (known here: connect_slot, disconnect_all, query_state)"},
      {"missing required operation",
       replaced(good_scanner, R"(,
    "disconnect_all": { "commands": ["ROUT:OPEN:ALL"] })", ""),
       "broken.json: /operations/disconnect_all: missing (required for role scanner)"},
      {"wrong type", replaced(good_scanner, R"(["ROUT:OPEN:ALL"])", R"("ROUT:OPEN:ALL")"),
       "broken.json: /operations/disconnect_all/commands: wrong type: expected an array of strings, got string"},
      {"wrong element type", replaced(good_scanner, R"(["ROUT:OPEN:ALL"])", "[7]"),
       "broken.json: /operations/disconnect_all/commands/0: wrong type: expected a string, got number"},
      {"unknown top-level key", replaced(good_scanner, R"("role")", R"("colour": "red", "role")"),
       "broken.json: /colour: unknown key"},
      {"unknown operation key", replaced(good_scanner, R"({ "commands": ["ROUT:OPEN:ALL"] })",
                                         R"({ "commands": ["ROUT:OPEN:ALL"], "delay": 5 })"),
       "broken.json: /operations/disconnect_all/delay: unknown key"},
      {"unknown role", replaced(good_scanner, R"("scanner")", R"("mux")"),
       "broken.json: /role: unknown role \"mux\""},
      {"missing dialect name", replaced(good_scanner, R"("dialect": "t",)", ""),
       "broken.json: /dialect: missing (a string required)"},
      {"query on a set operation", replaced(good_scanner, R"({ "commands": ["ROUT:OPEN:ALL"] })",
                                            R"({ "commands": ["ROUT:OPEN:ALL"], "query": "X?" })"),
       "broken.json: /operations/disconnect_all/query: this operation returns nothing"},
      {"bad regex", replaced(good_scanner, R"("role")", R"("idn_match": "([", "role")"),
       "broken.json: /idn_match: not a valid regular expression"},
      // std::regex would read these numbers into a long unchecked (found by
      // the dialect fuzzer); refused before the library sees them.
      {"huge backreference", replaced(good_scanner, R"("role")", R"("idn_match": "(a)\\88888888888888888888", "role")"),
       "broken.json: /idn_match: not a valid regular expression: backreference \\88888888888888888888 out of range"},
      {"huge repeat", replaced(good_scanner, R"("role")", R"("idn_match": "a{2,99999999999999}", "role")"),
       "broken.json: /idn_match: not a valid regular expression: repeat count {99999999999999} above 1000"},
      {"repeat above the limit", replaced(good_scanner, R"("role")", R"("idn_match": "a{1001}", "role")"),
       "broken.json: /idn_match: not a valid regular expression: repeat count {1001} above 1000"},
      {"bad terminator", replaced(good_scanner, R"("role")", R"("read_terminator": ";", "role")"),
       "broken.json: /read_terminator: must be"},
      {"negative delay", replaced(good_scanner, R"({ "commands": ["ROUT:OPEN:ALL"] })",
                                  R"({ "commands": ["ROUT:OPEN:ALL"], "delay_ms": -1 })"),
       "broken.json: /operations/disconnect_all/delay_ms: must be 0..60000"},
      {"not JSON", "{ \"dialect\": ", "broken.json: not valid JSON"},
      {"not an object", "[1, 2]", "broken.json: /: wrong type: expected an object, got array"},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    CHECK_THAT(error_of(c.text), Catch::StartsWith(c.message));
  }
}

TEST_CASE("reply specs are checked against what the operation returns", "[drivers][dialect]") {
  const std::string levels = R"({ "dialect": "t", "role": "levelmeter",
    "operations": { "measure_vrms": { "query": "V? {ch}", "reply": REPLY } } })";
  CHECK_THAT(error_of(replaced(levels, "REPLY", R"({"type": "bits", "mask": 2})")),
             Catch::StartsWith("broken.json: /operations/measure_vrms/reply/type: this operation answers a number"));
  CHECK_THAT(error_of(replaced(levels, "REPLY", R"({"type": "text"})")),
             Catch::StartsWith("broken.json: /operations/measure_vrms/reply/type: unknown reply type \"text\""));
  CHECK_THAT(error_of(replaced(levels, "REPLY", R"({"type": "number", "regex": "V=\\S+"})")),
             Catch::StartsWith("broken.json: /operations/measure_vrms/reply/regex: needs a capture group"));
  CHECK_THAT(error_of(replaced(levels, "REPLY", R"({"type": "number", "unit": "V"})")),
             Catch::StartsWith("broken.json: /operations/measure_vrms/reply/unit: unknown key"));
  CHECK_THAT(error_of(replaced(levels, R"(, "reply": REPLY)", "")),
             Catch::StartsWith("broken.json: /operations/measure_vrms/reply: missing"));
  CHECK_NOTHROW(parse_dialect(replaced(levels, "REPLY", R"({"type": "number", "regex": "^V=(\\S+)$"})"), "ok"));
  // Ordinary counts and backreferences stay allowed.
  CHECK_NOTHROW(parse_dialect(replaced(levels, "REPLY", R"({"type": "number", "regex": "^(V)=([0-9.]{1,1000})\\1?$"})"), "ok"));
}

TEST_CASE("a file that cannot be read is named", "[drivers][dialect]") {
  try {
    load_dialect("/nonexistent/x.json");
    FAIL("no error");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::config);
    CHECK_THAT(std::string(e.what()), Catch::StartsWith("/nonexistent/x.json: cannot read dialect file"));
  }
}

// A bare supply and a bare meter: only what juncod always calls. Everything
// else (ranges, integration time, averaging, a limit query, a voltage
// readback) is optional and sent only when asked for.
TEST_CASE("a dialect with only the operations juncod always calls loads", "[drivers][dialect]") {
  const std::string supply = R"J({
    "dialect": "bare-supply", "role": "source",
    "operations": {
      "set_voltage": { "commands": ["VOLT {v}"] },
      "set_current_limit": { "commands": ["CURR {a}"] },
      "output_on": { "commands": ["OUTP ON"] },
      "output_off": { "commands": ["OUTP OFF"] },
      "measure_current": { "query": "MEAS:CURR?", "reply": { "type": "number" } }
    }
  })J";
  const Dialect s = parse_dialect(supply, "bare-supply.json");
  CHECK(s.find("in_current_limit") == nullptr);
  CHECK(s.current_limit_tolerance == 0.02);  // the documented default
  const Dialect tight = parse_dialect(replaced(supply, R"("operations")", R"("current_limit_tolerance": 0.005, "operations")"), "t.json");
  CHECK(tight.current_limit_tolerance == 0.005);

  const Dialect m = parse_dialect(R"J({
    "dialect": "bare-meter", "role": "meter",
    "operations": { "measure_dc_voltage": { "query": "MEAS:VOLT:DC?", "reply": { "type": "number" } } }
  })J", "bare-meter.json");
  CHECK(m.find("set_nplc") == nullptr);
  CHECK(m.find("measure_dc_current") == nullptr);

  CHECK(error_of(replaced(supply, R"("operations")", R"("current_limit_tolerance": 0.7, "operations")")) ==
        "broken.json: /current_limit_tolerance: must be between 0 and 0.5 (a fraction of the limit), got 0.7");
  CHECK(error_of(replaced(good_scanner, R"("operations")", R"("current_limit_tolerance": 0.01, "operations")")) ==
        "broken.json: /current_limit_tolerance: only a source dialect takes it");
  CHECK(error_of(replaced(supply, R"(,
      "measure_current": { "query": "MEAS:CURR?", "reply": { "type": "number" } })", "")) ==
        "broken.json: /operations/measure_current: missing (required for role source)");
}

TEST_CASE("the shipped generic dialects accept any instrument; model files keep their idn_match", "[drivers][dialect]") {
  for (const char* generic : {"scpi-source", "scpi-dmm", "scpi-switch", "scpi-gen", "scpi-acv"}) {
    INFO(generic);
    CHECK_FALSE(load_dialect(dialect_dir + generic + ".json").idn_match.has_value());
  }
  for (const char* model : {"psu-compact", "dmm-prefixed", "relay-bank", "gen-channel", "scope-meas"}) {
    INFO(model);
    CHECK(load_dialect(dialect_dir + model + ".json").idn_match.has_value());
  }
}

TEST_CASE("a dialect nested deeper than 64 levels is refused by name, never built", "[drivers][dialect][limits]") {
  const std::string deep = replaced(good_scanner, R"("ROUT:OPEN:ALL")", std::string(100000, '[') + std::string(100000, ']'));
  try {
    parse_dialect(deep, "deep.json");
    FAIL("accepted");
  } catch (const DriverError& e) {
    CHECK(e.kind() == ErrorKind::config);
    CHECK(std::string(e.what()) == "deep.json: dialect file nested deeper than 64 levels");
  }
}
