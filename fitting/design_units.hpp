// Engineering values for the design calculators: forwarders to the one units
// module, units/si_text.hpp, which holds the grammar ("10mA", "2.2pF",
// "100MHz", "10meg", "4.7u"; m = milli, M = mega). New code includes that.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace junco::fitting {

// Parses text as a value in `unit` (may be empty: then no unit is accepted).
// Returns nullopt and fills *why with a one-line reason on bad input.
std::optional<double> parse_engineering(std::string_view text, std::string_view unit, std::string* why = nullptr);

// Formats a value with an engineering prefix and the unit, `digits`
// significant digits: 0.0123 A -> "12.3 mA" (units::format_si).
std::string format_engineering(double value, std::string_view unit, int digits = 4);

}  // namespace junco::fitting
