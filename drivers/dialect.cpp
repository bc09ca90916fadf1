#include "drivers/dialect.hpp"

#include "drivers/errors.hpp"
#include "drivers/levels.hpp"
#include "formats/json_limits.hpp"  // header-only: no link dependency on junco_fitting

#include <nlohmann/json.hpp>

#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <optional>
#include <set>
#include <sstream>

namespace junco::drivers {

namespace {

using nlohmann::json;

// What a role's operations look like: name, required, placeholders allowed
// in its templates, and what its reply must be.
// text: the reply is kept as sent (query_state, shown by `junco bench`).
enum class Returns { nothing, number, boolean, text };
struct OperationRule {
  const char* name;
  bool required;
  std::set<std::string> placeholders;
  Returns returns;
};

const std::vector<OperationRule>& rules_for(Role role) {
  static const std::vector<OperationRule> source = {
      {"set_voltage", true, {"v"}, Returns::nothing},
      {"set_current_limit", true, {"a"}, Returns::nothing},
      {"output_on", true, {}, Returns::nothing},
      {"output_off", true, {}, Returns::nothing},
      {"measure_voltage", false, {}, Returns::number},
      {"measure_current", true, {}, Returns::number},
      // Without it, a reading counts as current-limited when the measured
      // current is within current_limit_tolerance of the programmed limit.
      {"in_current_limit", false, {}, Returns::boolean},
      {"query_state", false, {}, Returns::text},  // e.g. OUTP? (bench check only)
  };
  static const std::vector<OperationRule> meter = {
      {"measure_dc_voltage", true, {}, Returns::number},
      // Needed only with fixture.current_from = "meter".
      {"measure_dc_current", false, {}, Returns::number},
      // Sent only when something asks for them; a meter left in its own
      // (auto)range and integration time works without.
      {"set_voltage_range", false, {"range"}, Returns::nothing},
      {"set_voltage_autorange", false, {}, Returns::nothing},
      {"set_current_range", false, {"range"}, Returns::nothing},
      {"set_current_autorange", false, {}, Returns::nothing},
      {"set_nplc", false, {"nplc"}, Returns::nothing},
      {"set_averaging", false, {"count"}, Returns::nothing},
      {"set_averaging_off", false, {}, Returns::nothing},
  };
  static const std::vector<OperationRule> scanner = {
      {"connect_slot", true, {"slot"}, Returns::nothing},
      {"disconnect_all", true, {}, Returns::nothing},
      {"query_state", false, {}, Returns::text},  // e.g. ROUT:CLOS:STAT? (bench check only)
  };
  static const std::vector<OperationRule> siggen = {
      {"set_frequency", true, {"hz"}, Returns::nothing},
      {"set_amplitude", true, {"v", "unit"}, Returns::nothing},
      {"output_on", true, {}, Returns::nothing},
      {"output_off", true, {}, Returns::nothing},
      {"query_state", false, {}, Returns::text},  // e.g. OUTP? (bench check only)
  };
  // At least one of the three (checked in parse_dialect).
  static const std::vector<OperationRule> levelmeter = {
      {"measure_vrms", false, {"ch"}, Returns::number},
      {"measure_vpp", false, {"ch"}, Returns::number},
      {"measure_dbm", false, {"ch"}, Returns::number},  // needs impedance_ohm
  };
  static const std::vector<OperationRule> chamber = {
      {"set_temperature", true, {"t"}, Returns::nothing},      // {t} in temperature_unit
      {"measure_temperature", true, {}, Returns::number},      // the air (or plate) sensor
      // Ramp-rate limit in K/min; needed when safety.chamber_max_rate_k_per_min is set.
      {"set_rate", false, {"k_per_min"}, Returns::nothing},
  };
  // Both halves of one complex reading: ratio (linear) and phase (degrees).
  static const std::vector<OperationRule> vectormeter = {
      {"measure_ratio", true, {}, Returns::number},
      {"measure_phase", true, {}, Returns::number},
  };
  switch (role) {
    case Role::vectormeter: return vectormeter;
    case Role::source: return source;
    case Role::meter: return meter;
    case Role::scanner: return scanner;
    case Role::siggen: return siggen;
    case Role::levelmeter: return levelmeter;
    case Role::chamber: return chamber;
  }
  return source;
}

// std::regex reads the number of a backreference (\12) or a repeat count
// ({2,5}) into a long without a range check, so a long digit run is
// undefined behaviour inside the library (found by the dialect fuzzer), and
// a huge count builds a huge state machine. No reply pattern needs either.
std::optional<std::string> regex_number_problem(const std::string& text) {
  constexpr std::size_t max_backref_digits = 2;  // \1 .. \99
  constexpr long max_repeat = 1000;
  const auto digits_at = [&](std::size_t i) {
    std::size_t n = 0;
    while (i + n < text.size() && std::isdigit(static_cast<unsigned char>(text[i + n]))) ++n;
    return n;
  };
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '\\' && i + 1 < text.size()) {
      const std::size_t n = digits_at(i + 1);
      if (n > max_backref_digits) return "backreference \\" + text.substr(i + 1, n) + " out of range";
      i += n ? n : 1;
    } else if (text[i] == '{') {
      for (std::size_t j = i + 1, part = 0; part < 2; ++part) {
        const std::size_t n = digits_at(j);
        if (n > 4 || (n && std::stol(text.substr(j, n)) > max_repeat))
          return "repeat count {" + text.substr(j, n) + "} above " + std::to_string(max_repeat);
        j += n;
        if (j >= text.size() || text[j] != ',') break;
        ++j;
      }
    }
  }
  return std::nullopt;
}

// Collects the context of one file so every message names file and key.
class Checker {
 public:
  explicit Checker(std::string origin) : origin_(std::move(origin)) {}
  [[noreturn]] void fail(const std::string& pointer, const std::string& what) const {
    throw DriverError(ErrorKind::config, origin_ + ": " + (pointer.empty() ? "/" : pointer) + ": " + what);
  }
  void only_keys(const json& object, const std::string& pointer, const std::set<std::string>& known) const {
    for (auto it = object.begin(); it != object.end(); ++it) {
      if (!known.count(it.key())) {
        std::string list;
        for (const auto& k : known) list += (list.empty() ? "" : ", ") + k;
        fail(pointer + "/" + it.key(), "unknown key (known here: " + list + ")");
      }
    }
  }
  const json& member(const json& object, const std::string& pointer, const char* key, json::value_t type,
                     const char* type_name) const {
    if (!object.contains(key)) fail(pointer + "/" + key, std::string("missing (") + type_name + " required)");
    return typed(object.at(key), pointer + "/" + key, type, type_name);
  }
  const json& typed(const json& value, const std::string& pointer, json::value_t type, const char* type_name) const {
    bool ok = value.type() == type ||
              (type == json::value_t::number_integer && value.type() == json::value_t::number_unsigned) ||
              (type == json::value_t::number_float && value.is_number());
    if (!ok) fail(pointer, std::string("wrong type: expected ") + type_name + ", got " + value.type_name());
    return value;
  }
  std::string string_at(const json& object, const std::string& pointer, const char* key) const {
    return member(object, pointer, key, json::value_t::string, "a string").get<std::string>();
  }
  std::regex regex_at(const std::string& text, const std::string& pointer) const {
    if (const auto why = regex_number_problem(text)) fail(pointer, "not a valid regular expression: " + *why);
    try {
      return std::regex(text, std::regex::ECMAScript);
    } catch (const std::regex_error& e) {
      fail(pointer, "not a valid regular expression: " + std::string(e.what()));
    }
  }

 private:
  std::string origin_;
};

void check_template(const Checker& c, const std::string& text, const std::string& pointer,
                    const std::set<std::string>& allowed) {
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '}') c.fail(pointer, "'}' without '{' in \"" + text + "\"");
    if (text[i] != '{') continue;
    auto close = text.find('}', i);
    if (close == std::string::npos) c.fail(pointer, "unclosed placeholder in \"" + text + "\"");
    std::string name = text.substr(i + 1, close - i - 1);
    if (!allowed.count(name)) {
      std::string list;
      for (const auto& a : allowed) list += (list.empty() ? "{" : ", {") + a + "}";
      c.fail(pointer, "unknown placeholder {" + name + "} (allowed here: " + (list.empty() ? "none" : list) + ")");
    }
    i = close;
  }
  if (text.empty()) c.fail(pointer, "empty command");
}

ReplySpec parse_reply(const Checker& c, const json& j, const std::string& pointer, Returns returns) {
  c.typed(j, pointer, json::value_t::object, "an object");
  ReplySpec r;
  std::string type = c.string_at(j, pointer, "type");
  if (type == "number") {
    if (returns != Returns::number) c.fail(pointer + "/type", "this operation answers true/false: use \"bits\" or \"enum\"");
    c.only_keys(j, pointer, {"type", "suffix", "regex"});
    r.kind = ReplySpec::Kind::number;
    if (j.contains("suffix")) r.suffix = c.string_at(j, pointer, "suffix");
    if (j.contains("regex")) {
      r.regex_text = c.string_at(j, pointer, "regex");
      r.regex = c.regex_at(r.regex_text, pointer + "/regex");
      if (r.regex->mark_count() < 1) c.fail(pointer + "/regex", "needs a capture group holding the number");
    }
    if (!r.suffix.empty() && r.regex) c.fail(pointer, "give either suffix or regex, not both");
  } else if (type == "bits" || type == "enum") {
    if (returns != Returns::boolean) c.fail(pointer + "/type", "this operation answers a number: use \"number\"");
    if (type == "bits") {
      c.only_keys(j, pointer, {"type", "mask"});
      r.kind = ReplySpec::Kind::bits;
      r.mask = c.member(j, pointer, "mask", json::value_t::number_integer, "an integer").get<long long>();
      if (r.mask <= 0) c.fail(pointer + "/mask", "must be a positive bit mask, e.g. 2 for bit 1");
    } else {
      c.only_keys(j, pointer, {"type", "values"});
      r.kind = ReplySpec::Kind::enumeration;
      const json& values = c.member(j, pointer, "values", json::value_t::object, "an object");
      if (values.empty()) c.fail(pointer + "/values", "needs at least one reply, e.g. {\"CV\": false, \"CC\": true}");
      for (auto it = values.begin(); it != values.end(); ++it) {
        c.typed(it.value(), pointer + "/values/" + it.key(), json::value_t::boolean, "true or false");
        std::string key = it.key();
        for (auto& ch : key) ch = static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
        r.values[key] = it.value().get<bool>();
      }
    }
  } else {
    c.fail(pointer + "/type", "unknown reply type \"" + type + "\" (known: number, bits, enum)");
  }
  return r;
}

Operation parse_operation(const Checker& c, const json& j, const std::string& pointer, const OperationRule& rule,
                          bool default_drain) {
  c.typed(j, pointer, json::value_t::object, "an object");
  c.only_keys(j, pointer, {"commands", "query", "reply", "delay_ms", "drain_errors", "sync", "unit_names"});
  Operation op;
  op.drain_errors = default_drain;
  if (j.contains("commands")) {
    const json& list = c.member(j, pointer, "commands", json::value_t::array, "an array of strings");
    for (std::size_t k = 0; k < list.size(); ++k) {
      std::string p = pointer + "/commands/" + std::to_string(k);
      op.commands.push_back(c.typed(list[k], p, json::value_t::string, "a string").get<std::string>());
      check_template(c, op.commands.back(), p, rule.placeholders);
    }
  }
  if (j.contains("query")) {
    op.query = c.string_at(j, pointer, "query");
    check_template(c, op.query, pointer + "/query", rule.placeholders);
  }
  if (rule.returns == Returns::text) {
    if (op.query.empty()) c.fail(pointer + "/query", "missing (this operation reads a reply)");
    if (j.contains("reply")) c.fail(pointer + "/reply", "the reply of this operation is shown as the instrument sends it; leave \"reply\" out");
  } else if (rule.returns == Returns::nothing) {
    if (!op.query.empty()) c.fail(pointer + "/query", "this operation returns nothing; put commands in \"commands\"");
    if (j.contains("reply")) c.fail(pointer + "/reply", "this operation returns nothing");
    if (op.commands.empty()) c.fail(pointer + "/commands", "missing (at least one command required)");
  } else {
    if (op.query.empty()) c.fail(pointer + "/query", "missing (this operation reads a reply)");
    if (!j.contains("reply")) c.fail(pointer + "/reply", "missing (how to read the reply)");
    op.reply = parse_reply(c, j.at("reply"), pointer + "/reply", rule.returns);
  }
  if (j.contains("delay_ms")) {
    long long ms = c.member(j, pointer, "delay_ms", json::value_t::number_integer, "an integer").get<long long>();
    if (ms < 0 || ms > 60000) c.fail(pointer + "/delay_ms", "must be 0..60000");
    op.delay = std::chrono::milliseconds(ms);
  }
  if (j.contains("drain_errors"))
    op.drain_errors = c.member(j, pointer, "drain_errors", json::value_t::boolean, "true or false").get<bool>();
  if (j.contains("sync")) op.sync = c.member(j, pointer, "sync", json::value_t::boolean, "true or false").get<bool>();
  if (j.contains("unit_names")) {
    std::string p = pointer + "/unit_names";
    const json& u = c.member(j, pointer, "unit_names", json::value_t::object, "an object");
    c.only_keys(u, p, {"vpp", "vrms", "dbm"});
    if (u.contains("vpp")) op.unit_vpp = c.string_at(u, p, "vpp");
    if (u.contains("vrms")) op.unit_vrms = c.string_at(u, p, "vrms");
    if (u.contains("dbm")) op.unit_dbm = c.string_at(u, p, "dbm");
  }
  return op;
}

Role parse_role(const Checker& c, const std::string& text) {
  if (text == "source") return Role::source;
  if (text == "meter") return Role::meter;
  if (text == "scanner") return Role::scanner;
  if (text == "siggen") return Role::siggen;
  if (text == "levelmeter") return Role::levelmeter;
  if (text == "vectormeter") return Role::vectormeter;
  if (text == "chamber") return Role::chamber;
  c.fail("/role", "unknown role \"" + text + "\" (known: source, meter, scanner, siggen, levelmeter, chamber)");
}

std::string parse_terminator(const Checker& c, const json& root, const char* key) {
  std::string t = c.string_at(root, "", key);
  if (t != "\n" && t != "\r\n" && t != "\r")
    c.fail(std::string("/") + key, "must be \"\\n\", \"\\r\\n\" or \"\\r\"");
  return t;
}

}  // namespace

const char* to_string(Role role) {
  switch (role) {
    case Role::source: return "source";
    case Role::meter: return "meter";
    case Role::scanner: return "scanner";
    case Role::siggen: return "siggen";
    case Role::levelmeter: return "levelmeter";
    case Role::vectormeter: return "vectormeter";
    case Role::chamber: return "chamber";
  }
  return "unknown";
}

const Operation* Dialect::find(std::string_view operation) const {
  auto it = operations.find(operation);
  return it == operations.end() ? nullptr : &it->second;
}

Dialect parse_dialect(std::string_view text, const std::string& origin) {
  Checker c(origin);
  json root;
  try {
    // Depth and size checked while parsing: a deep file never becomes a json value.
    root = parse_json_limited(text, "dialect file", /*ignore_comments=*/true);
  } catch (const JsonLimitError& e) {
    throw DriverError(ErrorKind::config, origin + ": " + e.what());
  } catch (const json::exception& e) {  // parse_error, and out_of_range for numbers that overflow
    // nlohmann's message already gives line and column.
    throw DriverError(ErrorKind::config, origin + ": not valid JSON: " + e.what());
  }
  c.typed(root, "", json::value_t::object, "an object");
  c.only_keys(root, "", {"dialect", "role", "description", "idn_match", "write_terminator", "read_terminator",
                         "drain_errors", "reset", "current_limit_tolerance", "amplitude_unit", "impedance_ohm", "temperature_unit",
                         "operations"});
  Dialect d;
  d.path = origin;
  d.name = c.string_at(root, "", "dialect");
  if (d.name.empty()) c.fail("/dialect", "must not be empty");
  d.role = parse_role(c, c.string_at(root, "", "role"));
  if (root.contains("description")) d.description = c.string_at(root, "", "description");
  if (root.contains("idn_match")) {
    d.idn_match_text = c.string_at(root, "", "idn_match");
    d.idn_match = c.regex_at(d.idn_match_text, "/idn_match");
  }
  if (root.contains("write_terminator")) d.write_terminator = parse_terminator(c, root, "write_terminator");
  if (root.contains("read_terminator")) d.read_terminator = parse_terminator(c, root, "read_terminator");
  bool drain = true;
  if (root.contains("drain_errors"))
    drain = c.member(root, "", "drain_errors", json::value_t::boolean, "true or false").get<bool>();
  if (root.contains("reset")) {
    const json& list = c.member(root, "", "reset", json::value_t::array, "an array of strings");
    d.reset_commands.clear();
    for (std::size_t k = 0; k < list.size(); ++k) {
      std::string p = "/reset/" + std::to_string(k);
      d.reset_commands.push_back(c.typed(list[k], p, json::value_t::string, "a string").get<std::string>());
      check_template(c, d.reset_commands.back(), p, {});
    }
  }
  if (root.contains("current_limit_tolerance")) {
    if (d.role != Role::source) c.fail("/current_limit_tolerance", "only a source dialect takes it");
    const json& t = c.member(root, "", "current_limit_tolerance", json::value_t::number_float, "a number");
    d.current_limit_tolerance = t.get<double>();
    if (!(d.current_limit_tolerance > 0.0 && d.current_limit_tolerance < 0.5))
      c.fail("/current_limit_tolerance", "must be between 0 and 0.5 (a fraction of the limit), got " + t.dump());
  }
  if (root.contains("amplitude_unit")) {
    if (d.role != Role::siggen) c.fail("/amplitude_unit", "only a siggen dialect takes it (a level meter's units are its measure_* operations)");
    const std::string u = c.string_at(root, "", "amplitude_unit");
    d.amplitude_unit = parse_level_unit(u);
    if (!d.amplitude_unit) c.fail("/amplitude_unit", "unknown unit \"" + u + "\" (known: vpp, vrms, dbm)");
  }
  if (root.contains("impedance_ohm")) {
    if (d.role != Role::siggen && d.role != Role::levelmeter) c.fail("/impedance_ohm", "only a siggen or levelmeter dialect takes it");
    const json& r = c.member(root, "", "impedance_ohm", json::value_t::number_float, "a number");
    d.impedance_ohm = r.get<double>();
    if (!(d.impedance_ohm > 0.0 && d.impedance_ohm <= 1e7)) c.fail("/impedance_ohm", "must be > 0 and at most 1e7 ohm, got " + r.dump());
  }
  if (d.amplitude_unit == LevelUnit::dbm && d.impedance_ohm <= 0.0)
    c.fail("/impedance_ohm", "missing (amplitude_unit dbm states power into a resistance: give it, e.g. 50)");
  if (root.contains("temperature_unit")) {
    if (d.role != Role::chamber) c.fail("/temperature_unit", "only a chamber dialect takes it");
    const std::string unit = c.string_at(root, "", "temperature_unit");
    if (unit != "C" && unit != "K") c.fail("/temperature_unit", "must be \"C\" or \"K\", got \"" + unit + "\"");
    d.temperature_in_kelvin = unit == "K";
  }
  const json& ops = c.member(root, "", "operations", json::value_t::object, "an object");
  const auto& rules = rules_for(d.role);
  std::set<std::string> known;
  for (const auto& rule : rules) known.insert(rule.name);
  c.only_keys(ops, "/operations", known);
  for (const auto& rule : rules) {
    std::string pointer = std::string("/operations/") + rule.name;
    if (!ops.contains(rule.name)) {
      if (rule.required) c.fail(pointer, std::string("missing (required for role ") + to_string(d.role) + ")");
      continue;
    }
    d.operations.emplace(rule.name, parse_operation(c, ops.at(rule.name), pointer, rule, drain));
  }
  if (d.role == Role::levelmeter) {
    if (!d.find("measure_vrms") && !d.find("measure_vpp") && !d.find("measure_dbm"))
      c.fail("/operations/measure_vrms", "missing (a levelmeter needs measure_vrms, measure_vpp or measure_dbm)");
    if (d.find("measure_dbm") && d.impedance_ohm <= 0.0)
      c.fail("/impedance_ohm", "missing (measure_dbm reads power into a resistance: give it, e.g. 50)");
  }
  return d;
}

Dialect load_dialect(const std::string& path) {
  std::string text;
  try {
    text = read_json_file(path);
  } catch (const JsonLimitError&) {
    throw DriverError(ErrorKind::config, path + ": " + too_big_message("dialect file", max_json_file_bytes));
  } catch (const std::exception&) {
    throw DriverError(ErrorKind::config, path + ": cannot read dialect file");
  }
  return parse_dialect(text, path);
}

std::string expand_template(std::string_view text, const Placeholders& values) {
  std::string out;
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] != '{') {
      out += text[i];
      continue;
    }
    auto close = text.find('}', i);
    if (close == std::string_view::npos)
      throw DriverError(ErrorKind::config, "unclosed placeholder in \"" + std::string(text) + "\"");
    auto it = values.find(text.substr(i + 1, close - i - 1));
    if (it == values.end())
      throw DriverError(ErrorKind::config, "no value for placeholder in \"" + std::string(text) + "\"");
    out += it->second;
    i = close;
  }
  return out;
}

std::string format_number(double value) {
  if (!std::isfinite(value)) throw DriverError(ErrorKind::config, "refusing to send a non-finite number");
  char buf[32];
  // 10 significant digits: finer than any bench instrument resolves.
  std::snprintf(buf, sizeof buf, "%.10g", value);
  // Within 5e-10 of ±DBL_MAX the rounded text lies beyond the largest double
  // and would be read back as infinity; send the exact value instead.
  if (!std::isfinite(std::strtod(buf, nullptr))) std::snprintf(buf, sizeof buf, "%.17g", value);
  return buf;
}

}  // namespace junco::drivers
