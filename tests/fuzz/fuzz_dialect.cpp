// Fuzz entry: drivers/dialect.hpp. The bytes are a dialect file; a bad one
// must be refused with DriverError(config) and nothing else. Invariants on an
// accepted file: it names itself, every operation sends something, and its
// command templates either expand or are refused with DriverError. The same
// bytes also drive expand_template and format_number directly.
#include "tests/fuzz/entries.hpp"

#include "drivers/dialect.hpp"
#include "drivers/errors.hpp"

#include <cmath>
#include <cstdlib>
#include <cstring>

namespace junco::fuzz {
namespace {

using drivers::DriverError;
using drivers::ErrorKind;

// Values for the placeholders the shipped dialects use (drivers/dialects/*.json).
const drivers::Placeholders& sample_values() {
  static const drivers::Placeholders values{{"volts", "1.5"}, {"amps", "0.01"}, {"range", "10"}, {"nplc", "1"},
                                            {"count", "4"},   {"slot", "3"},    {"freq", "1e6"}, {"level", "0.05"},
                                            {"unit", "VRMS"}, {"channel", "1"}, {"on", "ON"}};
  return values;
}

void expand_or_refuse(std::string_view text) {
  try {
    const auto out = drivers::expand_template(text, sample_values());
    require(out.find('{') == std::string::npos || text.find('{') != std::string_view::npos,
            "expand_template invented a '{'");
  } catch (const DriverError& e) {
    require(e.kind() == ErrorKind::config, std::string("expand_template threw a non-config DriverError: ") + e.what());
  }
}

void check_loaded(const drivers::Dialect& d) {
  require(!d.name.empty(), "accepted a dialect without a name");
  for (const auto& [name, op] : d.operations) {
    require(!name.empty(), "accepted an operation with an empty name");
    for (const auto& command : op.commands) expand_or_refuse(command);
    expand_or_refuse(op.query);
    if (op.reply.kind == drivers::ReplySpec::Kind::number && !op.reply.regex_text.empty())
      require(op.reply.regex.has_value(), "operation " + name + ": number regex given but not compiled");
  }
  require(d.find("") == nullptr, "find(\"\") found an operation");
}

void check_format_number(std::string_view data) {
  if (data.size() < sizeof(double)) return;
  double value;
  std::memcpy(&value, data.data(), sizeof value);
  try {
    const auto text = drivers::format_number(value);
    require(std::isfinite(value), "format_number formatted a non-finite value");
    const double back = std::strtod(text.c_str(), nullptr);
    // 10 significant digits (dialect.cpp): relative error at most 5e-10,
    // plus the rounding of the read-back; subnormals read back exactly or not at all.
    require(back == value || std::fabs(back - value) <= 5.0001e-10 * std::fabs(value),
            "format_number(" + text + ") does not read back within 10 digits");
  } catch (const DriverError& e) {
    require(!std::isfinite(value), std::string("format_number refused a finite value: ") + e.what());
  }
}

}  // namespace

void dialect(std::string_view data) {
  try {
    check_loaded(drivers::parse_dialect(data, "fuzz.json"));
  } catch (const DriverError& e) {
    require(e.kind() == ErrorKind::config, std::string("parse_dialect threw a non-config DriverError: ") + e.what());
    require(std::string_view(e.what()).substr(0, 10) == "fuzz.json:", std::string("error does not name the file: ") + e.what());
  }
  expand_or_refuse(data.substr(0, 512));
  check_format_number(data);
}

}  // namespace junco::fuzz
