#include "fitting/design_units.hpp"

#include <array>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>

namespace junco::fitting {

namespace {

struct Prefix {
  std::string_view text;
  double scale;
};

// Longest first so "meg" wins over "m".
constexpr std::array<Prefix, 11> prefixes{{{"meg", 1e6},
                                           {"f", 1e-15},
                                           {"p", 1e-12},
                                           {"n", 1e-9},
                                           {"u", 1e-6},
                                           {"\xC2\xB5", 1e-6},  // µ in UTF-8
                                           {"m", 1e-3},
                                           {"k", 1e3},
                                           {"M", 1e6},
                                           {"G", 1e9},
                                           {"T", 1e12}}};

bool iequals(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i)
    if (std::tolower(static_cast<unsigned char>(a[i])) != std::tolower(static_cast<unsigned char>(b[i]))) return false;
  return true;
}

// Accepts the unit in any letter case, plus a few spellings of ohm.
bool unit_matches(std::string_view got, std::string_view unit) {
  if (iequals(got, unit)) return true;
  if (iequals(unit, "ohm")) return iequals(got, "ohms") || got == "\xCE\xA9" || iequals(got, "r");
  return false;
}

bool fail(std::string* why, std::string text) {
  if (why) *why = std::move(text);
  return false;
}

}  // namespace

std::optional<double> parse_engineering(std::string_view text, std::string_view unit, std::string* why) {
  const std::string s(text);
  if (s.empty()) {
    fail(why, "empty value");
    return std::nullopt;
  }
  char* end = nullptr;
  const double number = std::strtod(s.c_str(), &end);
  if (end == s.c_str()) {
    fail(why, "'" + s + "' is not a number");
    return std::nullopt;
  }
  std::string_view rest(end);
  while (!rest.empty() && rest.front() == ' ') rest.remove_prefix(1);
  if (!std::isfinite(number)) {
    fail(why, "'" + s + "' is not finite");
    return std::nullopt;
  }
  // Try "no prefix" first when the remainder is exactly the unit: "2F" is
  // two farads, not two femto-somethings; "1m" is milli.
  // A bare letter that is also a prefix ("2f") is the prefix; the unit in
  // another case ("10ohm", "5a") is accepted only after that.
  if (rest.empty() || rest == unit) return number;
  for (const auto& p : prefixes) {
    if (rest.substr(0, p.text.size()) != p.text) continue;
    const std::string_view after = rest.substr(p.text.size());
    if (after.empty() || unit_matches(after, unit)) return number * p.scale;
  }
  if (unit_matches(rest, unit)) return number;
  const std::string expected = unit.empty() ? std::string("no unit") : "unit " + std::string(unit);
  fail(why, "'" + s + "': unknown suffix '" + std::string(rest) + "' (expected an engineering prefix and " + expected +
                ", e.g. 10m" + std::string(unit) + ")");
  return std::nullopt;
}

std::string format_engineering(double value, std::string_view unit, int digits) {
  char buf[64];
  if (!std::isfinite(value)) {
    std::snprintf(buf, sizeof buf, "%g %.*s", value, static_cast<int>(unit.size()), unit.data());
    return buf;
  }
  static constexpr std::array<std::pair<double, const char*>, 9> steps{
      {{1e12, "T"}, {1e9, "G"}, {1e6, "M"}, {1e3, "k"}, {1.0, ""}, {1e-3, "m"}, {1e-6, "u"}, {1e-9, "n"}, {1e-12, "p"}}};
  double scale = 1e-15;
  const char* prefix = "f";
  const double mag = std::abs(value);
  if (mag == 0.0) {
    scale = 1.0;
    prefix = "";
  }
  for (const auto& [s, p] : steps) {
    if (mag >= s * 0.9999995) {
      scale = s;
      prefix = p;
      break;
    }
  }
  const double scaled = value / scale;
  const int int_digits = std::abs(scaled) >= 100 ? 3 : std::abs(scaled) >= 10 ? 2 : 1;
  const int decimals = std::max(0, digits - int_digits);
  std::snprintf(buf, sizeof buf, "%.*f %s%.*s", decimals, scaled, prefix, static_cast<int>(unit.size()), unit.data());
  return buf;
}

}  // namespace junco::fitting
