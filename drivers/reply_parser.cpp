#include "drivers/reply_parser.hpp"

#include <charconv>
#include <cmath>
#include <vector>

namespace junco::drivers {

namespace {

bool is_blank(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\n'; }
bool is_digit(char c) { return c >= '0' && c <= '9'; }
char upper(char c) { return (c >= 'a' && c <= 'z') ? static_cast<char>(c - 'a' + 'A') : c; }

std::string_view trim(std::string_view s) {
  while (!s.empty() && is_blank(s.front())) s.remove_prefix(1);
  while (!s.empty() && is_blank(s.back())) s.remove_suffix(1);
  return s;
}

// Shows a refused reply safely in a message: printable ASCII kept, others as \xNN.
std::string quoted(std::string_view s) {
  static const char* hex = "0123456789ABCDEF";
  std::string out = "\"";
  for (char c : s.substr(0, 40)) {
    auto u = static_cast<unsigned char>(c);
    if (u >= 0x20 && u < 0x7f && c != '"' && c != '\\') {
      out += c;
    } else {
      out += "\\x";
      out += hex[u >> 4];
      out += hex[u & 15];
    }
  }
  if (s.size() > 40) out += "...";
  return out + "\"";
}

// Checks the SCPI decimal grammar; from_chars alone would accept "inf",
// "nan" and stop silently before trailing junk.
bool matches_decimal(std::string_view s) {
  std::size_t i = 0;
  if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
  std::size_t int_digits = 0, frac_digits = 0;
  while (i < s.size() && is_digit(s[i])) ++i, ++int_digits;
  if (i < s.size() && s[i] == '.') {
    ++i;
    while (i < s.size() && is_digit(s[i])) ++i, ++frac_digits;
  }
  if (int_digits + frac_digits == 0) return false;
  if (i < s.size() && (s[i] == 'e' || s[i] == 'E')) {
    ++i;
    if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
    std::size_t exp_digits = 0;
    while (i < s.size() && is_digit(s[i])) ++i, ++exp_digits;
    if (exp_digits == 0) return false;
  }
  return i == s.size();
}

template <class Reply>
bool precheck(std::string_view raw, std::string_view& body, Reply& out) {
  if (raw.size() > max_parsed_reply) {
    out.status = ParseStatus::overlong;
    out.why = "reply of " + std::to_string(raw.size()) + " bytes is longer than " +
              std::to_string(max_parsed_reply);
    return false;
  }
  body = trim(raw);
  if (body.empty()) {
    out.status = ParseStatus::empty;
    out.why = "empty reply";
    return false;
  }
  return true;
}

}  // namespace

const char* to_string(ParseStatus status) {
  switch (status) {
    case ParseStatus::ok: return "ok";
    case ParseStatus::empty: return "empty";
    case ParseStatus::overlong: return "overlong";
    case ParseStatus::malformed: return "malformed";
    case ParseStatus::overrange: return "overrange";
  }
  return "unknown";
}

NumberReply parse_number(std::string_view reply, std::string_view suffix) {
  NumberReply out;
  std::string_view body;
  if (!precheck(reply, body, out)) return out;
  if (!suffix.empty()) {
    bool has = body.size() > suffix.size();
    for (std::size_t k = 0; has && k < suffix.size(); ++k)
      has = upper(body[body.size() - suffix.size() + k]) == upper(suffix[k]);
    if (!has) {
      out.why = "expected a number ending in " + std::string(suffix) + ", got " + quoted(body);
      return out;
    }
    body.remove_suffix(suffix.size());
  }
  if (!matches_decimal(body)) {
    out.why = "not a number: " + quoted(body);
    return out;
  }
  // from_chars does not take a leading '+'.
  std::string_view digits = body.front() == '+' ? body.substr(1) : body;
  double value = 0.0;
  auto [end, ec] = std::from_chars(digits.data(), digits.data() + digits.size(), value);
  if (ec != std::errc() || end != digits.data() + digits.size() || !std::isfinite(value)) {
    out.why = "number out of double range: " + quoted(body);
    return out;
  }
  // SCPI-99 vol. 1, 7.2.1: 9.9E37 means overload, 9.91E37 "not a number"
  // (from memory); anything that large is no reading.
  if (std::fabs(value) >= 9.9e37) {
    out.status = ParseStatus::overrange;
    out.why = "instrument reports overload/NaN (" + std::string(body) + ")";
    return out;
  }
  out.status = ParseStatus::ok;
  out.value = value;
  return out;
}

IntegerReply parse_integer(std::string_view reply) {
  IntegerReply out;
  NumberReply n = parse_number(reply);
  if (n.status != ParseStatus::ok) {
    out.status = n.status;
    out.why = n.why;
    return out;
  }
  constexpr double limit = 9007199254740992.0;  // 2^53, exact in a double
  if (n.value != std::floor(n.value) || n.value < 0 || n.value > limit) {
    out.why = "not a register value (non-negative integer): " + quoted(trim(reply));
    return out;
  }
  out.status = ParseStatus::ok;
  out.value = static_cast<long long>(n.value);
  return out;
}

ErrorEntryReply parse_error_entry(std::string_view reply) {
  ErrorEntryReply out;
  std::string_view body;
  if (!precheck(reply, body, out)) return out;
  auto comma = body.find(',');
  if (comma == std::string_view::npos) {
    out.why = "error entry without a comma: " + quoted(body);
    return out;
  }
  std::string_view code_part = trim(body.substr(0, comma));
  std::string_view text_part = trim(body.substr(comma + 1));
  std::string_view code_digits = code_part;
  if (!code_digits.empty() && (code_digits.front() == '+' || code_digits.front() == '-'))
    code_digits.remove_prefix(1);
  bool all_digits = !code_digits.empty() && code_digits.size() <= 9;
  for (char c : code_digits) all_digits = all_digits && is_digit(c);
  if (!all_digits) {
    out.why = "error code is not an integer: " + quoted(code_part);
    return out;
  }
  int code = 0;
  std::string_view parse_from = code_part.front() == '+' ? code_part.substr(1) : code_part;
  std::from_chars(parse_from.data(), parse_from.data() + parse_from.size(), code);
  if (text_part.size() < 2 || text_part.front() != '"' || text_part.back() != '"') {
    out.why = "error text is not a quoted string: " + quoted(text_part);
    return out;
  }
  std::string text;
  std::string_view inner = text_part.substr(1, text_part.size() - 2);
  for (std::size_t k = 0; k < inner.size(); ++k) {
    if (inner[k] == '"') {
      // IEEE 488.2 string data: an embedded quote is doubled.
      if (k + 1 < inner.size() && inner[k + 1] == '"') {
        text += '"';
        ++k;
        continue;
      }
      out.why = "unescaped quote in error text: " + quoted(text_part);
      return out;
    }
    text += inner[k];
  }
  out.status = ParseStatus::ok;
  out.code = code;
  out.text = std::move(text);
  return out;
}

IdentityReply parse_identity(std::string_view reply) {
  IdentityReply out;
  std::string_view body;
  if (!precheck(reply, body, out)) return out;
  for (char c : body) {
    auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u >= 0x7f) {
      out.why = "non-printable byte in *IDN? reply: " + quoted(body);
      return out;
    }
  }
  std::vector<std::string> fields;
  std::size_t start = 0;
  while (true) {
    auto comma = body.find(',', start);
    fields.emplace_back(trim(body.substr(start, comma == std::string_view::npos ? body.npos : comma - start)));
    if (comma == std::string_view::npos) break;
    start = comma + 1;
  }
  if (fields.size() != 4) {
    out.why = "*IDN? reply has " + std::to_string(fields.size()) + " fields, expected 4: " + quoted(body);
    return out;
  }
  if (fields[0].empty() || fields[1].empty()) {
    out.why = "*IDN? reply lacks manufacturer or model: " + quoted(body);
    return out;
  }
  out.status = ParseStatus::ok;
  out.identity = Identity{fields[0], fields[1], fields[2], fields[3]};
  return out;
}

}  // namespace junco::drivers
