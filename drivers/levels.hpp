// AC amplitude units and their conversions: the one place juncod turns a
// plan's amplitude into what a generator takes and a level meter's answer
// into what is stored.
//
// Definitions (IEEE Std 100, "root-mean-square" and "dBm"; any circuits
// text): a sine of peak Vpk has Vpp = 2·Vpk and Vrms = Vpk/√2, so
// Vrms = Vpp/(2√2) — for a sine only. dBm is power relative to 1 mW:
// dBm = 10·log10(P / 1 mW) with P = Vrms²/R into the stated resistance R,
// exact for any waveform (it is a power, like Vrms²).
#pragma once

#include "drivers/roles.hpp"

#include <optional>
#include <string>
#include <string_view>

namespace junco::drivers {

// A unit as an instrument uses it; impedance_ohm only matters for dBm.
struct LevelScale {
  LevelUnit unit = LevelUnit::vrms;
  double impedance_ohm = 0.0;
};

const char* to_string(LevelUnit unit);  // "vpp", "vrms", "dbm"
std::optional<LevelUnit> parse_level_unit(std::string_view text);  // the same names
// "vpp", "vrms", "dbm into 50 ohm".
std::string describe(const LevelScale& scale);

// dBm into R ↔ Vrms: exact for any waveform. R must be > 0.
double dbm_to_vrms(double dbm, double impedance_ohm);
double vrms_to_dbm(double vrms, double impedance_ohm);

// Any unit to Vrms and back, assuming a sine for Vpp (right for what a
// generator makes; never used on a level meter's reading).
double sine_to_vrms(double value, const LevelScale& from);
double sine_from_vrms(double vrms, const LevelScale& to);

}  // namespace junco::drivers
