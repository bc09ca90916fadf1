// Numbers with engineering suffixes, as typed on the command line:
// "10mA", "1k", "2.2pF", "100MHz", "4u7" is not accepted (write 4.7u).
// The multiplier letter comes first (f p n u µ m k M G T), then an optional
// unit that must match the one the caller expects ("A", "Ohm", "F", "Hz",
// "V", "W", "dB", "s", "H"). "m" is milli and "M" mega, as in SPICE-free
// engineering notation; "meg" is accepted for mega too.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace junco::fitting {

// Parses text as a value in `unit` (may be empty: then no unit is accepted).
// Returns nullopt and fills *why with a one-line reason on bad input.
std::optional<double> parse_engineering(std::string_view text, std::string_view unit, std::string* why = nullptr);

// Formats a value with an engineering prefix and the unit, 4 significant
// digits: 0.0123 A -> "12.30 mA".
std::string format_engineering(double value, std::string_view unit, int digits = 4);

}  // namespace junco::fitting
