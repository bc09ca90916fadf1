// Forwarders to the one units module (units/si_text.hpp), kept so the design
// calculators' callers need not change while they are edited elsewhere.
#include "fitting/design_units.hpp"

#include "units/si_text.hpp"

namespace junco::fitting {

std::optional<double> parse_engineering(std::string_view text, std::string_view unit, std::string* why) {
  return units::parse_si(text, unit, why);
}

std::string format_engineering(double value, std::string_view unit, int digits) { return units::format_si(value, unit, digits); }

}  // namespace junco::fitting
