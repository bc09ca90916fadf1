// SI text: numbers with an engineering prefix and an optional unit, as people
// type them on a command line, in a config file or a CSV header.
//
// Grammar (one definition for every junco program; docs/names.md):
//   text   := number [spaces] [prefix] [unit]
//   number := a decimal number, optional sign and exponent ("4.7", "-1e-3", ".5")
//   prefix := f p n u µ m k M G T, or meg (any case) for mega
//             m is milli and M is mega; "meg" exists because SPICE writers use it
//   unit   := the unit the caller expects ("A", "V", "F", "Hz", "ohm", "dB", "s",
//             "C"), in any letter case; for ohm also "ohms", "Ω", "r"
// A remainder equal to the unit is the unit ("2F" is two farads, not two
// femto-somethings); otherwise the prefix comes first ("2fF", "2f").
// Not accepted: "4u7" (write 4.7u), hex, inf, nan, two prefixes, a unit that
// is not the expected one.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::units {

// Parses text as a value in `unit` (empty: a plain number, prefix allowed).
// nullopt and a one-line reason naming the text in *why on bad input.
std::optional<double> parse_si(std::string_view text, std::string_view unit, std::string* why = nullptr);

// As parse_si, but throws std::invalid_argument with the reason.
double parse_si_or_throw(std::string_view text, std::string_view unit);

// Comma-separated values ("1mA,10mA"); throws std::invalid_argument naming the item.
std::vector<double> parse_si_list(std::string_view text, std::string_view unit);

// Scale from a unit written with its prefix ("mV", "uA", "µA", "kohm") to the
// SI base `unit` ("V", "A", "ohm"): "mV" → 1e-3, "V" → 1, "" → 1. The prefix
// letters are case-sensitive except "meg"; the unit is not, so "mv" is mV.
// nullopt when `text` is not a unit of that quantity.
std::optional<double> unit_scale(std::string_view text, std::string_view unit);

// Formats with an engineering prefix (T .. f, micro as "u") and the unit,
// `digits` significant digits, no trailing zeros: 0.0123 A → "12.3 mA",
// 0 → "0 A". Not finite: "—". Parsing the text back gives the value to
// `digits` digits (tested).
std::string format_si(double value, std::string_view unit, int digits = 4);

}  // namespace junco::units
