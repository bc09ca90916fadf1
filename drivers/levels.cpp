#include "drivers/levels.hpp"

#include "drivers/errors.hpp"

#include <cmath>
#include <cstdio>

namespace junco::drivers {

namespace {

constexpr double kOneMilliwatt_w = 1e-3;
const double kSqrt2 = std::sqrt(2.0);

void need_impedance(double impedance_ohm) {
  if (!(impedance_ohm > 0.0) || !std::isfinite(impedance_ohm))
    throw DriverError(ErrorKind::config, "dBm needs a positive impedance_ohm (the resistance the power is stated into)");
}

}  // namespace

const char* to_string(LevelUnit unit) {
  switch (unit) {
    case LevelUnit::vpp: return "vpp";
    case LevelUnit::vrms: return "vrms";
    case LevelUnit::dbm: return "dbm";
  }
  return "vrms";
}

std::optional<LevelUnit> parse_level_unit(std::string_view text) {
  if (text == "vpp") return LevelUnit::vpp;
  if (text == "vrms") return LevelUnit::vrms;
  if (text == "dbm") return LevelUnit::dbm;
  return std::nullopt;
}

std::string describe(const LevelScale& scale) {
  if (scale.unit != LevelUnit::dbm) return to_string(scale.unit);
  char buf[64];
  std::snprintf(buf, sizeof buf, "dbm into %g ohm", scale.impedance_ohm);
  return buf;
}

double dbm_to_vrms(double dbm, double impedance_ohm) {
  need_impedance(impedance_ohm);
  // P = 1 mW · 10^(dBm/10), Vrms = √(P·R).
  return std::sqrt(kOneMilliwatt_w * std::pow(10.0, dbm / 10.0) * impedance_ohm);
}

double vrms_to_dbm(double vrms, double impedance_ohm) {
  need_impedance(impedance_ohm);
  if (!(vrms > 0.0)) throw DriverError(ErrorKind::config, "a level of 0 V or less has no dBm value");
  return 10.0 * std::log10(vrms * vrms / impedance_ohm / kOneMilliwatt_w);
}

double sine_to_vrms(double value, const LevelScale& from) {
  switch (from.unit) {
    case LevelUnit::vpp: return value / (2.0 * kSqrt2);
    case LevelUnit::vrms: return value;
    case LevelUnit::dbm: return dbm_to_vrms(value, from.impedance_ohm);
  }
  return value;
}

double sine_from_vrms(double vrms, const LevelScale& to) {
  switch (to.unit) {
    case LevelUnit::vpp: return vrms * 2.0 * kSqrt2;
    case LevelUnit::vrms: return vrms;
    case LevelUnit::dbm: return vrms_to_dbm(vrms, to.impedance_ohm);
  }
  return vrms;
}

}  // namespace junco::drivers
