// Fuzz entry: every parser of drivers/reply_parser.hpp on the same bytes.
// Invariants: an accepted number is finite and survives print → parse
// unchanged (with and without a unit suffix); an accepted integer is in
// 0..2^53 and re-parses; an accepted SYST:ERR? entry and *IDN? reply
// re-serialise to text that parses back to the same fields.
#include "tests/fuzz/entries.hpp"

#include "drivers/reply_parser.hpp"

#include <cmath>
#include <cstdio>

namespace junco::fuzz {
namespace {

using drivers::ParseStatus;

std::string print_exact(double value) {
  char text[40];
  std::snprintf(text, sizeof text, "%.17E", value);
  return text;
}

template <class Reply>
void require_why(const Reply& r, std::string_view parser) {
  if (r.status != ParseStatus::ok) require(!r.why.empty(), std::string(parser) + ": refused without saying why");
}

void check_number(std::string_view data, std::string_view suffix) {
  const auto r = drivers::parse_number(data, suffix);
  require_why(r, "parse_number");
  if (r.status != ParseStatus::ok) return;
  require(data.size() <= drivers::max_parsed_reply, "parse_number accepted an overlong reply");
  require(std::isfinite(r.value), "parse_number accepted a non-finite value");
  const auto again = drivers::parse_number(print_exact(r.value) + std::string(suffix), suffix);
  require(again.status == ParseStatus::ok, "parse_number refused its own value re-printed: " + print_exact(r.value));
  require(again.value == r.value, "parse_number: value changed after print and re-parse: " + print_exact(r.value));
}

void check_integer(std::string_view data) {
  const auto r = drivers::parse_integer(data);
  require_why(r, "parse_integer");
  if (r.status != ParseStatus::ok) return;
  require(r.value >= 0 && r.value <= (1LL << 53), "parse_integer accepted " + std::to_string(r.value) + " outside 0..2^53");
  const auto again = drivers::parse_integer(std::to_string(r.value));
  require(again.status == ParseStatus::ok && again.value == r.value, "parse_integer: re-parse of " + std::to_string(r.value) + " differs");
}

void check_error_entry(std::string_view data) {
  const auto r = drivers::parse_error_entry(data);
  require_why(r, "parse_error_entry");
  if (r.status != ParseStatus::ok) return;
  std::string quoted;
  for (char c : r.text) {
    quoted.push_back(c);
    if (c == '"') quoted.push_back('"');  // IEEE 488.2 string: "" inside quotes
  }
  const std::string line = std::to_string(r.code) + ",\"" + quoted + "\"";
  if (line.size() > drivers::max_parsed_reply) return;  // doubled quotes may push it over the limit
  const auto again = drivers::parse_error_entry(line);
  require(again.status == ParseStatus::ok, "parse_error_entry refused its own entry re-serialised: " + line);
  require(again.code == r.code && again.text == r.text, "parse_error_entry: fields changed after round trip: " + line);
}

bool printable(const std::string& s) {
  for (unsigned char c : s)
    if (c < 0x20 || c > 0x7e) return false;
  return true;
}

void check_identity(std::string_view data) {
  const auto r = drivers::parse_identity(data);
  require_why(r, "parse_identity");
  if (r.status != ParseStatus::ok) return;
  const auto& id = r.identity;
  require(!id.manufacturer.empty() && !id.model.empty(), "parse_identity accepted an empty manufacturer or model");
  require(printable(id.manufacturer) && printable(id.model) && printable(id.serial) && printable(id.firmware),
          "parse_identity accepted a non-printable field");
  const std::string line = id.manufacturer + "," + id.model + "," + id.serial + "," + id.firmware;
  const auto again = drivers::parse_identity(line);
  require(again.status == ParseStatus::ok, "parse_identity refused its own fields re-joined: " + line);
  require(again.identity.manufacturer == id.manufacturer && again.identity.model == id.model &&
              again.identity.serial == id.serial && again.identity.firmware == id.firmware,
          "parse_identity: fields changed after round trip: " + line);
}

}  // namespace

void reply_parser(std::string_view data) {
  check_number(data, {});
  check_number(data, "VDC");
  check_number(data, "a");  // a one-letter suffix that is also a hex digit
  check_integer(data);
  check_error_entry(data);
  check_identity(data);
}

}  // namespace junco::fuzz
