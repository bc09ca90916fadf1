// Dialect files: one JSON file (comments allowed) per instrument family
// maps each operation of a role to SCPI command templates and says how to
// read the reply. The format is documented in dialects/template.json.
// Loading validates everything up front; a bad file gives
// DriverError(config) "FILE: /json/pointer: what is wrong".
#pragma once

#include "drivers/roles.hpp"

#include <chrono>
#include <map>
#include <optional>
#include <regex>
#include <string>
#include <string_view>
#include <vector>

namespace junco::drivers {

enum class Role { source, meter, scanner, siggen, levelmeter, chamber, vectormeter };
const char* to_string(Role role);

struct ReplySpec {
  enum class Kind { none, number, bits, enumeration };
  Kind kind = Kind::none;
  std::string suffix;               // number: unit suffix the reply must end in ("VDC")
  std::string regex_text;           // number: pattern whose group 1 is the number
  std::optional<std::regex> regex;  //   compiled form of regex_text
  long long mask = 0;               // bits: result is (value & mask) != 0
  std::map<std::string, bool> values;  // enumeration: upper-cased reply -> result
};

struct Operation {
  std::vector<std::string> commands;  // templates, sent in order
  std::string query;                  // template of the final query; empty: none
  ReplySpec reply;                    // how to read the query's reply
  std::chrono::milliseconds delay{0}; // wait after each command (settling)
  bool drain_errors = true;           // SYST:ERR? until empty after the group
  bool sync = false;                  // *OPC? after the commands
  std::string unit_vpp = "VPP";       // what {unit} becomes for Vpp
  std::string unit_vrms = "VRMS";     //   and for Vrms
  std::string unit_dbm = "DBM";       //   and for dBm
};

struct Dialect {
  std::string path;  // where it was loaded from (for messages)
  std::string name;  // "scpi-source"
  Role role = Role::source;
  std::string description;
  std::string idn_match_text;  // regex searched in the *IDN? reply; empty: none
  std::optional<std::regex> idn_match;
  std::optional<std::string> write_terminator;  // unset: the transport's
  std::optional<std::string> read_terminator;
  std::vector<std::string> reset_commands{"*RST", "*CLS"};
  // Source without an in_current_limit query: a reading counts as limited
  // when |measured current| >= (1 − this) × the programmed limit.
  double current_limit_tolerance = 0.02;
  // Siggen: the unit set_amplitude's {v} is in when the generator takes only
  // one ("amplitude_unit"); unset: the plan's unit, named by {unit}.
  std::optional<LevelUnit> amplitude_unit;
  // Siggen with amplitude_unit dbm, levelmeter with measure_dbm: the
  // resistance the instrument states its dBm into ("impedance_ohm").
  double impedance_ohm = 0.0;
  // Chamber only: the unit of {t} in set_temperature and of the
  // measure_temperature reply: "C" (degrees Celsius, default) or "K".
  bool temperature_in_kelvin = false;
  std::map<std::string, Operation, std::less<>> operations;

  // nullptr when the dialect does not offer the (optional) operation.
  const Operation* find(std::string_view operation) const;
};

// Reads and validates a dialect file. Throws DriverError(config).
Dialect load_dialect(const std::string& path);
// Same from text; `origin` names the source in messages.
Dialect parse_dialect(std::string_view text, const std::string& origin);

// Values for template placeholders, already formatted.
using Placeholders = std::map<std::string, std::string, std::less<>>;
// Replaces {name} by its value; throws DriverError(config) for a name not given.
std::string expand_template(std::string_view text, const Placeholders& values);
// Formats a number for a command: shortest round-tripping %g-style text.
std::string format_number(double value);

}  // namespace junco::drivers
