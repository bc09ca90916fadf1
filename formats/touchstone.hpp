// Touchstone (.s2p) export: the fitted diode as a two-port at one bias state
// over a frequency list, mounted in series (between the ports) or in shunt
// (from the through line to ground) in a Z0 system. Open format: Touchstone
// version 1.1 (EIA/IBIS Open Forum); docs/touchstone.md says which parts of it
// we write and why.
//
// The element between the two nodes is the packaged diode:
//   chip:    RS + 1/(gd + jω(Cj(Vd) + TT·gd))   (junction_charge.hpp, the same
//            linearisation ngspice's .ac makes; reverse: design_switch.hpp)
//   package: Ls in series with the chip, Cp across both leads (the
//            lead-to-lead capacitance of the case, outside Ls).
// S-parameters of a series element Z:  S11 = S22 = Z/(Z + 2·Z0), S21 = S12 = 2·Z0/(Z + 2·Z0);
// of a shunt element Z:                S11 = S22 = −Z0/(2·Z + Z0), S21 = S12 = 2·Z/(2·Z + Z0)
// (docs/references.md §6, the ABCD matrix of one element turned into S).
#pragma once

#include "fitting/deembed.hpp"
#include "design/switch.hpp"
#include "formats/spice_card.hpp"

#include <array>
#include <complex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::fitting {

// One DC operating point: a forward current or a reverse voltage (≥ 0).
struct BiasState {
  enum class Kind { forward_current, reverse_voltage };
  Kind kind = Kind::forward_current;
  double value = 0.0;  // forward_current: A (> 0); reverse_voltage: V of reverse bias (≥ 0)
};

// "10mA" → forward 10 mA; "-5V" → 5 V reverse; "0V" → zero bias. The unit
// letter decides (A or V); a positive voltage is refused (give a forward
// bias as a current). nullopt with *why naming the text.
std::optional<BiasState> parse_bias_state(std::string_view text, std::string* why = nullptr);
std::string bias_state_text(const BiasState& bias);  // "10 mA forward", "5 V reverse"

// Frequencies: "1MHz:1GHz:101log" (101 points, equal ratios), "1MHz:1GHz:10lin"
// (equal steps), or a comma list "1MHz,10MHz,1GHz"; strictly increasing,
// positive, at most max_frequency_points. nullopt with *why naming the text.
inline constexpr std::size_t max_frequency_points = 100000;
std::optional<std::vector<double>> parse_frequency_list(std::string_view text, std::string* why = nullptr);

// The chip's small-signal impedance at the bias (no package), at the model's temperature.
std::complex<double> chip_impedance(const PartModel& model, const BiasState& bias, double freq_hz);
// (packaged_impedance, the chip inside its package: fitting/deembed.hpp)

// A two-port's S-matrix at one frequency, row-major: s[0]=S11 s[1]=S12 s[2]=S21 s[3]=S22.
struct SMatrix {
  std::array<std::complex<double>, 4> s{};
  std::complex<double> s11() const { return s[0]; }
  std::complex<double> s12() const { return s[1]; }
  std::complex<double> s21() const { return s[2]; }
  std::complex<double> s22() const { return s[3]; }
};
SMatrix element_s_matrix(SwitchKind mount, std::complex<double> z_ohm, double z0_ohm);

struct TouchstoneRequest {
  BiasState bias;
  std::vector<double> freqs_hz;
  SwitchKind mount = SwitchKind::series;
  double z0_ohm = 50.0;
  PackageParasitics package;
};

// Checks a request against the model; "" when it can be exported, else one
// line naming the value and its limit.
std::string touchstone_request_problem(const PartModel& model, const TouchstoneRequest& req);

// The .s2p text: "!" comment header (part, lot, run, model, bias, mount,
// package), the option line "# Hz S RI R <z0>", then one line per
// frequency: f Re/Im of S11 S21 S12 S22 (the version 1.1 two-port order).
// Throws std::invalid_argument with touchstone_request_problem's text.
std::string touchstone_s2p(const PartModel& model, const TouchstoneRequest& req);

}  // namespace junco::fitting
