// junco-sim configuration: built-in defaults, the JSON config file
// (--config) and the command line (tools/sim/main.cpp). The full list with
// units is in help_reference() (printed by --help) and docs/sim.md.
#pragma once

#include "tools/sim/fixture.hpp"
#include "tools/sim/part.hpp"

#include <cstdint>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

namespace junco::sim {

inline const std::vector<std::string> all_roles{"source", "meter", "scanner", "siggen", "levelmeter", "chamber", "vectormeter"};

struct FaultSpec {
  std::string role;
  std::string mode;  // drop-after | late | garble | error | silent | clear
  std::string arg;   // N, MS, N, "CODE TEXT"
};

struct Outlier {
  int slot = 0;
  std::optional<double> is_a, n, rs_ohm, cj0_f;
  std::optional<bool> pin;  // "type": "pin" or "junction" for this slot
};

struct SourceLimits {
  double v_min_v = -30.0, v_max_v = 30.0;
  double i_limit_min_a = 1e-4, i_limit_max_a = 0.5;
};

// The temperature chamber around the fixture: its air follows the set point
// first order (after an optional ramp-rate limit) and drifts slowly; the
// parts' ambient is the chamber air (docs/sim.md, "Chamber").
struct ChamberConfig {
  double tau_s = 60.0;            // air time constant toward the (ramped) set point
  double drift_k = 0.0;           // amplitude of a slow sinusoidal drift of the air
  double drift_period_s = 600.0;  //   and its period
  double min_c = -70.0, max_c = 180.0;  // set points accepted (else -222)
  double readback_noise_k = 0.005;      // σ of the readback (resolution 0.01 °C)
};

struct SimConfig {
  std::uint64_t seed = 1;
  int slots = 8;
  double settle_s = 0.002;       // first-order time constant of every reading
  double ambient_k = 300.15;     // fixture ambient = TNOM of the lot
  double theta_k_per_w = 400.0;  // junction-to-ambient thermal resistance
  double thermal_tau_s = 0.05;   // junction thermal time constant
  int error_queue_depth = 16;
  ChamberConfig chamber;
  FixtureConfig fixture;
  PartParams nominal;
  LotSpread spread;
  std::vector<Outlier> outliers;
  std::set<int> empty_slots;
  std::set<int> short_slots;  // a zero-ohm link in the slot (the vector meter's short standard; implies empty)
  SourceLimits source;
  std::map<std::string, std::string> families{{"source", "scpi-source"},
                                              {"meter", "scpi-dmm"},
                                              {"scanner", "scpi-switch"},
                                              {"siggen", "scpi-gen"},
                                              {"levelmeter", "scpi-acv"},
                                              {"chamber", "scpi-chamber"},
                                              {"vectormeter", "scpi-vvm"}};
  std::set<std::string> serial_roles;
  std::vector<FaultSpec> faults;
};

// Dialects each role may speak (docs/command-sets.md); "families" is the
// code's older word for the same thing.
const std::map<std::string, std::vector<std::string>>& known_families();

// Applies a JSON config document over `cfg`; throws std::invalid_argument
// naming the key on a bad value or unknown key.
// Keys given by a former name are applied and a warning naming the new one
// is added to `warnings` (when given).
void apply_config_json(SimConfig& cfg, const std::string& json_text, std::vector<std::string>* warnings = nullptr);

// Command-line pieces (the options themselves are defined in main.cpp with
// CLI11); each throws std::invalid_argument with a one-line message.
void check_role(const std::string& role);  // one of all_roles
void apply_family(SimConfig& cfg, const std::string& role_eq_name);  // --dialect ROLE=NAME
void check_families(const SimConfig& cfg);  // after the config file and --dialect
FaultSpec parse_fault_spec(const std::string& text);  // ROLE:MODE[:ARG]

// The config keys, the physics and the control endpoint: the reference
// part of --help, printed after the generated option list.
std::string help_reference();

}  // namespace junco::sim
