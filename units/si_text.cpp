#include "units/si_text.hpp"

#include <array>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <stdexcept>
#include <string>

namespace junco::units {

namespace {

struct Prefix {
  std::string_view text;
  double scale;
};

// "meg" is matched apart (any case) before these; the rest are case-sensitive
// because m and M differ by 10^9.
constexpr std::array<Prefix, 12> prefixes{{{"f", 1e-15},
                                           {"p", 1e-12},
                                           {"n", 1e-9},
                                           {"u", 1e-6},
                                           {"\xC2\xB5", 1e-6},  // µ micro sign
                                           {"\xCE\xBC", 1e-6},  // μ Greek mu, what many keyboards give
                                           {"m", 1e-3},
                                           {"k", 1e3},
                                           {"K", 1e3},
                                           {"M", 1e6},
                                           {"G", 1e9},
                                           {"T", 1e12}}};

bool iequals(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (std::tolower(static_cast<unsigned char>(a[i])) != std::tolower(static_cast<unsigned char>(b[i]))) return false;
  return true;
}

bool unit_matches(std::string_view got, std::string_view unit) {
  if (iequals(got, unit)) return true;
  if (iequals(unit, "ohm"))
    return iequals(got, "ohms") || got == "\xCE\xA9" /* Ω */ || got == "\xE2\x84\xA6" /* ohm sign */ || iequals(got, "r");
  return false;
}

// Length of the leading decimal number (sign, digits, point, exponent), 0 if none.
std::size_t number_length(std::string_view s) {
  std::size_t k = 0, digits = 0;
  if (k < s.size() && (s[k] == '+' || s[k] == '-')) ++k;
  while (k < s.size() && std::isdigit(static_cast<unsigned char>(s[k]))) ++k, ++digits;
  if (k < s.size() && s[k] == '.') {
    ++k;
    while (k < s.size() && std::isdigit(static_cast<unsigned char>(s[k]))) ++k, ++digits;
  }
  if (digits == 0) return 0;
  if (k < s.size() && (s[k] == 'e' || s[k] == 'E')) {
    std::size_t e = k + 1;
    if (e < s.size() && (s[e] == '+' || s[e] == '-')) ++e;
    const std::size_t first = e;
    while (e < s.size() && std::isdigit(static_cast<unsigned char>(s[e]))) ++e;
    if (e > first) k = e;  // "2e" alone is not an exponent
  }
  return k;
}

std::string_view trim(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

std::optional<double> fail(std::string* why, std::string text) {
  if (why) *why = std::move(text);
  return std::nullopt;
}

std::string example(std::string_view unit) {
  if (unit.empty()) return "e.g. 4.7k, 10meg, 1e-3";
  if (unit == "C") return "e.g. 27, -40";  // degrees Celsius take no prefix in practice
  return "e.g. 10m" + std::string(unit) + ", 4.7u" + std::string(unit) + ", 1e-3";
}

}  // namespace

std::optional<double> unit_scale(std::string_view text, std::string_view unit) {
  text = trim(text);
  if (text.empty() || unit_matches(text, unit)) return 1.0;
  if (text.size() >= 3 && iequals(text.substr(0, 3), "meg") && unit_matches(text.substr(3), unit)) return 1e6;
  for (const auto& p : prefixes)
    if (text.substr(0, p.text.size()) == p.text && unit_matches(text.substr(p.text.size()), unit)) return p.scale;
  return std::nullopt;
}

std::optional<double> parse_si(std::string_view text, std::string_view unit, std::string* why) {
  const std::string_view s = trim(text);
  const std::string quoted = "'" + std::string(text) + "'";
  if (s.empty()) return fail(why, "empty value (" + example(unit) + ")");
  const std::size_t len = number_length(s);
  if (len == 0) return fail(why, quoted + " is not a number (" + example(unit) + ")");
  const std::string number_text(s.substr(0, len));
  const double number = std::strtod(number_text.c_str(), nullptr);
  if (!std::isfinite(number)) return fail(why, quoted + " is out of range");
  const std::string_view rest = trim(s.substr(len));
  if (rest.empty() || rest == unit) return number;
  if (rest.size() >= 3 && iequals(rest.substr(0, 3), "meg")) {
    const std::string_view after = rest.substr(3);
    if (after.empty() || unit_matches(after, unit)) return number * 1e6;
  }
  for (const auto& p : prefixes) {
    if (rest.substr(0, p.text.size()) != p.text) continue;
    const std::string_view after = rest.substr(p.text.size());
    if (after.empty() || unit_matches(after, unit)) {
      const double v = number * p.scale;
      if (!std::isfinite(v)) return fail(why, quoted + " is out of range");
      return v;
    }
  }
  if (unit_matches(rest, unit)) return number;
  const std::string expected = unit.empty() ? std::string("a prefix and no unit") : "a prefix and the unit " + std::string(unit);
  return fail(why, quoted + ": unknown suffix '" + std::string(rest) + "' (expected " + expected + ", " + example(unit) + ")");
}

double parse_si_or_throw(std::string_view text, std::string_view unit) {
  std::string why;
  const auto v = parse_si(text, unit, &why);
  if (!v) throw std::invalid_argument(why);
  return *v;
}

std::vector<double> parse_si_list(std::string_view text, std::string_view unit) {
  std::vector<double> out;
  std::size_t start = 0;
  for (;;) {
    const std::size_t comma = text.find(',', start);
    out.push_back(parse_si_or_throw(text.substr(start, comma == std::string_view::npos ? std::string_view::npos : comma - start), unit));
    if (comma == std::string_view::npos) return out;
    start = comma + 1;
  }
}

std::string format_si(double value, std::string_view unit, int digits) {
  const std::string u(unit);
  if (!std::isfinite(value)) return "\xE2\x80\x94";  // —
  if (value == 0.0) return u.empty() ? "0" : "0 " + u;
  static constexpr std::array<std::pair<double, const char*>, 10> steps{{{1e12, "T"},
                                                                         {1e9, "G"},
                                                                         {1e6, "M"},
                                                                         {1e3, "k"},
                                                                         {1.0, ""},
                                                                         {1e-3, "m"},
                                                                         {1e-6, "u"},
                                                                         {1e-9, "n"},
                                                                         {1e-12, "p"},
                                                                         {1e-15, "f"}}};
  digits = std::max(1, digits);
  const double mag = std::fabs(value);
  // The step whose mantissa stays below 1000 after rounding to `digits`:
  // 999.96 uA to 4 digits is "1 mA", not "1000 uA".
  std::size_t pick = steps.size() - 1;
  for (std::size_t k = 0; k < steps.size(); ++k) {
    char probe[64];
    std::snprintf(probe, sizeof probe, "%.*e", digits - 1, mag / steps[k].first);
    if (std::strtod(probe, nullptr) >= 1.0) {
      pick = k;
      break;
    }
  }
  const auto [scale, prefix] = steps[pick];
  char text[64];
  std::snprintf(text, sizeof text, "%.*g", digits, value / scale);
  // Fewer digits than the integer part has (950 to 2 digits) make %g write an
  // exponent; print the integer instead.
  if (std::string_view(text).find('e') != std::string_view::npos) std::snprintf(text, sizeof text, "%.0f", value / scale);
  std::string out = text;
  if (*prefix || !u.empty()) out += " " + std::string(prefix) + u;
  return out;
}

}  // namespace junco::units
