#include "drivers/dialect_driver.hpp"

#include "drivers/errors.hpp"
#include "drivers/reply_parser.hpp"

#include <cctype>
#include <cmath>
#include <thread>

namespace junco::drivers {

namespace {

std::string upper(std::string s) {
  for (auto& c : s) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return s;
}

void require_finite(double value, const char* what) {
  if (!std::isfinite(value)) throw DriverError(ErrorKind::config, std::string(what) + " must be a finite number");
}

}  // namespace

DialectDriver::DialectDriver(InstrumentSpec spec, Dialect dialect)
    : spec_(std::move(spec)), dialect_(std::move(dialect)), transport_options_(spec_.transport) {
  if (dialect_.write_terminator) transport_options_.write_terminator = *dialect_.write_terminator;
  if (dialect_.read_terminator) transport_options_.read_terminator = *dialect_.read_terminator;
  if (spec_.max_retries < 0) config_error("max_retries must be >= 0");
  for (const auto& [name, op] : dialect_.operations) has_error_queue_ = has_error_queue_ || op.drain_errors;
  with_retries("open", [&] { ensure_session(); });
  // *IDN? always (IEEE 488.2 makes it mandatory): an instrument that does not
  // answer is not open, whether or not the dialect names a model.
  check_identity();
}

std::string DialectDriver::label() const {
  std::string where = session_ ? session_->describe() : spec_.address;
  return "instrument '" + spec_.name + "' (" + dialect_.name + " at " + where + ")";
}

void DialectDriver::config_error(const std::string& what) const {
  throw DriverError(ErrorKind::config, label() + ": " + what);
}

void DialectDriver::ensure_session() {
  if (!session_) {
    SessionOptions options;
    options.reply_timeout = spec_.reply_timeout;
    options.traffic_log = spec_.traffic_log;
    session_ = std::make_unique<ScpiSession>(open_transport(spec_.address, transport_options_), options);
    needs_reconnect_ = false;
  } else if (needs_reconnect_) {
    session_->reconnect();
    needs_reconnect_ = false;
    identity_.reset();  // whoever answers now is asked again
  }
}

void DialectDriver::with_retries(const char* operation, const std::function<void()>& body) {
  for (int attempt = 1;; ++attempt) {
    try {
      ensure_session();
      body();
      return;
    } catch (const DriverError& e) {
      bool again = e.transient() && attempt <= spec_.max_retries;
      // Whatever happens next, a link that failed this way may hold a late
      // reply: the next use starts with a reconnect.
      if (e.transient()) needs_reconnect_ = true;
      if (spec_.traffic_log)
        spec_.traffic_log("#", std::string(operation) + " attempt " + std::to_string(attempt) + " failed (" +
                                   to_string(e.kind()) + "): " + e.what() + (again ? "; retrying" : ""));
      if (!again) {
        std::string tries = attempt > 1 ? " (after " + std::to_string(attempt) + " attempts)" : "";
        throw DriverError(e.kind(), label() + ": " + operation + ": " + to_string(e.kind()) + ": " + e.what() + tries,
                          e.scpi_code());
      }
    }
  }
}

DialectDriver::Outcome DialectDriver::read_reply(const Operation& op, const std::string& query) {
  Outcome out;
  std::string reply = session_->query(query);
  out.text = reply;
  const ReplySpec& spec = op.reply;
  auto fail = [&](ParseStatus status, const std::string& why) -> Outcome {
    throw DriverError(status == ParseStatus::overrange ? ErrorKind::overrange : ErrorKind::garbled,
                      "query '" + query + "': " + why);
  };
  switch (spec.kind) {
    case ReplySpec::Kind::none: break;
    case ReplySpec::Kind::number: {
      std::string text = reply;
      if (spec.regex) {
        std::smatch m;
        if (reply.size() > max_parsed_reply || !std::regex_search(reply, m, *spec.regex))
          return fail(ParseStatus::malformed, "reply does not match " + spec.regex_text);
        text = m[1].str();
      }
      NumberReply n = parse_number(text, spec.suffix);
      if (n.status != ParseStatus::ok) return fail(n.status, n.why);
      out.number = n.value;
      break;
    }
    case ReplySpec::Kind::bits: {
      IntegerReply n = parse_integer(reply);
      if (n.status != ParseStatus::ok) return fail(n.status, n.why);
      out.flag = (n.value & spec.mask) != 0;
      break;
    }
    case ReplySpec::Kind::enumeration: {
      std::string key = reply.size() <= max_parsed_reply ? upper(reply) : std::string();
      while (!key.empty() && std::isspace(static_cast<unsigned char>(key.back()))) key.pop_back();
      while (!key.empty() && std::isspace(static_cast<unsigned char>(key.front()))) key.erase(0, 1);
      auto it = spec.values.find(key);
      if (it == spec.values.end()) {
        std::string known;
        for (const auto& [k, v] : spec.values) known += (known.empty() ? "" : ", ") + k;
        return fail(ParseStatus::malformed, "reply '" + reply.substr(0, 40) + "' is none of " + known);
      }
      out.flag = it->second;
      break;
    }
  }
  return out;
}

DialectDriver::Outcome DialectDriver::run_once(const Operation& op, const Placeholders& values) {
  std::vector<std::string> group;  // what was sent, for error messages
  for (const auto& tmpl : op.commands) {
    group.push_back(expand_template(tmpl, values));
    session_->command(group.back());
    if (op.delay.count() > 0) std::this_thread::sleep_for(op.delay);
  }
  if (op.sync) session_->sync();
  Outcome out;
  if (!op.query.empty()) {
    group.push_back(expand_template(op.query, values));
    try {
      out = read_reply(op, group.back());
    } catch (const DriverError& e) {
      if (e.kind() != ErrorKind::timeout || !has_error_queue_) throw;
      // An instrument that did not understand the query answers nothing and
      // queues the reason (-113 for a mistyped header): report that at once,
      // not a timeout retried until every attempt has waited out.
      const auto queued = session_->error_after_timeout();
      if (!queued) throw;
      needs_reconnect_ = true;  // in case the reply was only late after all
      throw DriverError(ErrorKind::instrument, queued->second + " after '" + group.back() + "' (which got no reply within " +
                                                   std::to_string(spec_.reply_timeout.count()) + " ms)",
                        queued->first);
    }
  }
  if (op.drain_errors) {
    try {
      session_->drain_errors();
    } catch (const DriverError& e) {
      if (e.kind() != ErrorKind::instrument) throw;
      // Name the whole group: the queue does not say which command failed.
      std::string sent;
      for (const auto& line : group) sent += (sent.empty() ? "'" : ", '") + line + "'";
      throw DriverError(e.kind(), std::string(e.what()) + " after " + sent, e.scpi_code());
    }
  }
  return out;
}

DialectDriver::Outcome DialectDriver::run(const char* operation, const Placeholders& values) {
  const Operation* op = dialect_.find(operation);
  if (!op) config_error(std::string("dialect ") + dialect_.path + " offers no operation '" + operation + "'");
  Outcome out;
  with_retries(operation, [&] { out = run_once(*op, values); });
  return out;
}

void DialectDriver::check_identity() {
  Identity id = identify();
  std::string text = id.manufacturer + "," + id.model + "," + id.serial + "," + id.firmware;
  if (!dialect_.idn_match) return;
  if (!std::regex_search(text, *dialect_.idn_match))
    config_error("*IDN? reply '" + text + "' does not match the dialect's idn_match '" + dialect_.idn_match_text +
                 "': wrong instrument or wrong dialect file");
}

// The identity asked at open serves until the link is remade, so the
// daemon's start-up identification does not ask every instrument twice.
Identity DialectDriver::identify() {
  if (identity_) return *identity_;
  Identity id;
  with_retries("identify", [&] { id = session_->identify(); });
  identity_ = id;
  return id;
}

std::vector<std::string> DialectDriver::clear_errors() {
  std::vector<std::string> found;
  if (!has_error_queue_) return found;
  with_retries("clear_errors", [&] { found = session_->clear_error_queue(); });
  return found;
}

void DialectDriver::reset() {
  with_retries("reset", [&] {
    for (const auto& c : dialect_.reset_commands) session_->command(c);
    session_->sync();
  });
}

void DialectDriver::set_voltage_v(double volts) {
  require_finite(volts, "voltage");
  run("set_voltage", {{"v", format_number(volts)}});
}

void DialectDriver::set_current_limit_a(double amps) {
  require_finite(amps, "current limit");
  if (amps <= 0) config_error("current limit must be positive, got " + format_number(amps));
  run("set_current_limit", {{"a", format_number(amps)}});
  current_limit_a_ = amps;
}

void DialectDriver::set_output(bool on) { run(on ? "output_on" : "output_off"); }
double DialectDriver::measure_voltage_v() { return run("measure_voltage").number; }
double DialectDriver::measure_current_a() { return run("measure_current").number; }
// A supply with no status query for "regulating current" is judged from its
// own current reading against the limit this driver programmed.
bool DialectDriver::in_current_limit() {
  if (dialect_.find("in_current_limit")) return run("in_current_limit").flag;
  if (!std::isfinite(current_limit_a_)) return false;  // no limit programmed by us: nothing to compare
  return std::fabs(measure_current_a()) >= (1.0 - dialect_.current_limit_tolerance) * current_limit_a_;
}
double DialectDriver::measure_dc_voltage_v() { return run("measure_dc_voltage").number; }
double DialectDriver::measure_dc_current_a() { return run("measure_dc_current").number; }

void DialectDriver::set_range(MeterFunction function, double range) {
  require_finite(range, "range");
  bool volts = function == MeterFunction::dc_voltage;
  if (range <= 0)
    run(volts ? "set_voltage_autorange" : "set_current_autorange");
  else
    run(volts ? "set_voltage_range" : "set_current_range", {{"range", format_number(range)}});
}

void DialectDriver::set_integration_nplc(double nplc) {
  require_finite(nplc, "NPLC");
  if (nplc <= 0) config_error("integration time must be positive, got " + format_number(nplc) + " NPLC");
  run("set_nplc", {{"nplc", format_number(nplc)}});
}

void DialectDriver::set_averaging(int count) {
  if (count < 1) config_error("averaging count must be >= 1, got " + std::to_string(count));
  if (count == 1 && dialect_.find("set_averaging_off"))
    run("set_averaging_off");
  else
    run("set_averaging", {{"count", std::to_string(count)}});
}

void DialectDriver::connect_slot(int slot) {
  if (slot < 1) config_error("slots are numbered from 1, got " + std::to_string(slot));
  run("connect_slot", {{"slot", std::to_string(slot)}});
}

void DialectDriver::disconnect_all() { run("disconnect_all"); }

void DialectDriver::set_frequency_hz(double hz) {
  require_finite(hz, "frequency");
  if (hz <= 0) config_error("frequency must be positive, got " + format_number(hz));
  run("set_frequency", {{"hz", format_number(hz)}});
}

LevelScale DialectDriver::amplitude_scale(LevelUnit asked) const {
  LevelScale scale{asked, spec_.impedance_ohm > 0 ? spec_.impedance_ohm : dialect_.impedance_ohm};
  if (spec_.level_unit) scale.unit = *spec_.level_unit;
  else if (dialect_.amplitude_unit) scale.unit = *dialect_.amplitude_unit;
  return scale;
}

std::string DialectDriver::amplitude_units() const {
  if (!spec_.level_unit && !dialect_.amplitude_unit) return "as asked";
  return describe(amplitude_scale(LevelUnit::vrms));
}

// The generator makes a sine, so converting the plan's unit to the one it
// takes is exact (drivers/levels.hpp); the plan's value is checked first.
void DialectDriver::set_amplitude(double value, LevelUnit unit) {
  require_finite(value, "amplitude");
  if (value < 0) config_error("amplitude must not be negative, got " + format_number(value));
  const LevelScale to = amplitude_scale(unit);
  if (to.unit == LevelUnit::dbm && !(to.impedance_ohm > 0))
    config_error("amplitude in dBm needs impedance_ohm (in the dialect or the bench config)");
  const double v = to.unit == unit ? value : sine_from_vrms(sine_to_vrms(value, {unit, 0.0}), to);
  const Operation* op = dialect_.find("set_amplitude");
  std::string unit_text = !op ? "" : to.unit == LevelUnit::vpp ? op->unit_vpp : to.unit == LevelUnit::vrms ? op->unit_vrms : op->unit_dbm;
  run("set_amplitude", {{"v", format_number(v)}, {"unit", unit_text}});
}

namespace {
const char* measure_operation(LevelUnit unit) {
  return unit == LevelUnit::vpp ? "measure_vpp" : unit == LevelUnit::vrms ? "measure_vrms" : "measure_dbm";
}
}  // namespace

LevelUnit DialectDriver::level_unit_for(LevelUnit preferred) const {
  if (spec_.level_unit) return *spec_.level_unit;
  for (LevelUnit u : {preferred, LevelUnit::vrms, LevelUnit::dbm, LevelUnit::vpp})
    if (dialect_.find(measure_operation(u))) return u;
  return preferred;  // the dialect loader requires one of them: not reached
}

std::string DialectDriver::level_units() const {
  if (spec_.level_unit) return describe(LevelScale{*spec_.level_unit, spec_.impedance_ohm > 0 ? spec_.impedance_ohm : dialect_.impedance_ohm});
  std::string out;
  for (LevelUnit u : {LevelUnit::vrms, LevelUnit::vpp, LevelUnit::dbm})
    if (dialect_.find(measure_operation(u))) out += (out.empty() ? "" : ", ") + describe(LevelScale{u, dialect_.impedance_ohm});
  return out;
}

// A reading in dBm is power: it becomes Vrms exactly. Vrms and Vpp are kept
// as measured (the caller stores the unit), never converted into each other.
Level DialectDriver::measure_level(int channel, LevelUnit preferred) {
  if (channel != 1 && channel != 2) config_error("level channel must be 1 or 2, got " + std::to_string(channel));
  const LevelUnit unit = level_unit_for(preferred);
  const char* operation = measure_operation(unit);
  if (!dialect_.find(operation))
    config_error("dialect " + dialect_.name + " (" + dialect_.path + ") offers no " + to_string(unit) + " measurement ('" + operation +
                 "'), which the bench config asks for");
  const double x = run(operation, {{"ch", std::to_string(channel)}}).number;
  if (unit != LevelUnit::dbm) return Level{x, unit};
  const double r = spec_.impedance_ohm > 0 ? spec_.impedance_ohm : dialect_.impedance_ohm;
  return Level{dbm_to_vrms(x, r), LevelUnit::vrms};
}

// Two queries, ratio then phase, of the same settled state; a negative ratio
// or a phase outside ±360° is an instrument fault, not a reading.
Transfer DialectDriver::measure_transfer() {
  Transfer t;
  t.ratio = run("measure_ratio").number;
  t.phase_deg = run("measure_phase").number;
  if (!(t.ratio >= 0.0) || !(std::abs(t.phase_deg) <= 360.0))
    throw DriverError(ErrorKind::garbled, label() + ": transfer reading out of range (ratio " + format_number(t.ratio) + ", phase " +
                                               format_number(t.phase_deg) + " deg)");
  return t;
}

std::optional<std::string> DialectDriver::query_state() {
  if (!dialect_.find("query_state")) return std::nullopt;
  return run("query_state").text;
}

namespace {
constexpr double kZeroCelsiusK = 273.15;
}  // namespace

void DialectDriver::set_temperature_k(double kelvin) {
  require_finite(kelvin, "temperature");
  if (kelvin <= 0) config_error("temperature must be above 0 K, got " + format_number(kelvin) + " K");
  const double t = dialect_.temperature_in_kelvin ? kelvin : kelvin - kZeroCelsiusK;
  // Two decimals: a chamber set point finer than 0.01 K means nothing.
  run("set_temperature", {{"t", format_number(std::round(t * 100.0) / 100.0)}});
}

double DialectDriver::measure_temperature_k() {
  const double t = run("measure_temperature").number;
  return dialect_.temperature_in_kelvin ? t : t + kZeroCelsiusK;
}

void DialectDriver::set_rate_k_per_min(double k_per_min) {
  require_finite(k_per_min, "ramp rate");
  if (k_per_min <= 0) config_error("ramp rate must be positive, got " + format_number(k_per_min) + " K/min");
  run("set_rate", {{"k_per_min", format_number(k_per_min)}});
}

}  // namespace junco::drivers
