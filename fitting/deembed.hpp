// Vector (complex) readings of the fixture turned into the part's own
// impedance: the slot impedance from a transfer reading, open–short fixture
// de-embedding, and the package (Ls, Cp) removed or fitted, so that the
// junction's Cj(V) comes out without the capacitances around it.
//
// The fixture (docs/design.md "De-embedding"): the slot sits between the
// input node (channel 1) and a load Z_load (channel 2 across it), so a
// transfer reading H = V2/V1 gives the slot's impedance
//   Z_slot = Z_load·(1/H − 1).
// The slot's own parasitics are a stray admittance across it (nearest the
// measurement nodes) and a series impedance in the path (trace, contacts):
//   Y_meas = Y_stray + 1/(Z_series + Z_dut).
// An open slot (no part) reads Y_open = Y_stray; a short link reads
// Y_short = Y_stray + 1/Z_series. Hence, per frequency,
//   Z_dut = 1/(Y_meas − Y_open) − 1/(Y_short − Y_open)
// (open–short de-embedding, docs/references.md §10). In this series fixture a
// "thru" standard is the short link itself.
//
// The package is part of the part: Ls in series with the chip, Cp across the
// leads, Y_packaged = jωCp + 1/(jωLs + Z_chip). Reverse biased, the chip is
// RS + 1/(G + jωCj) with G ≪ ωCj, so Im Z_chip = −1/(ωCj) whatever RS is.
#pragma once

#include <complex>
#include <cstddef>
#include <limits>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

// The package and mount around the chip; zeros mean "not known, left out".
struct PackageParasitics {
  double ls_h = 0.0;  // series lead/bond inductance
  double cp_f = 0.0;  // lead-to-lead capacitance across the packaged diode
};

// The chip inside its package: 1/(jωCp + 1/(Zchip + jωLs)).
std::complex<double> packaged_impedance(std::complex<double> z_chip, const PackageParasitics& pkg, double freq_hz);
// The inverse: the chip's impedance from the packaged part's.
std::complex<double> chip_impedance_from_packaged(std::complex<double> z_packaged, const PackageParasitics& pkg, double freq_hz);

// Z_load·(1/H − 1); H = V2/V1 of the slot between the input node and Z_load.
std::complex<double> slot_impedance_ohm(std::complex<double> transfer, double z_load_ohm);

// 1/(Y_meas − Y_open) − 1/(Y_short − Y_open), from the three slot impedances
// at one frequency. A short standard with zero series impedance (Y_short
// infinite) contributes nothing: pass z_short = 0.
std::complex<double> deembed_open_short(std::complex<double> z_meas, std::complex<double> z_open, std::complex<double> z_short);

// Cj of a reverse-biased chip from its impedance: −1/(ω·Im Z). NaN when Im Z ≥ 0.
double reverse_capacitance_f(std::complex<double> z_chip, double freq_hz);

// One de-embedded off-state reading of the packaged part.
struct PackagedOffReading {
  double reverse_v = 0.0;
  double freq_hz = 0.0;
  std::complex<double> z_ohm;  // the packaged part's impedance (fixture removed)
};

// Ls and Cp from off-state readings at several biases and frequencies: the
// chip behind them must be one capacitance per bias at every frequency. For
// a trial Cp, Im(1/(Y − jωCp)) = ω·Ls − (1/Cj)/ω is linear in Ls and 1/Cj(V)
// (least squares over all readings); Cp is the one-dimensional minimum of
// that fit's relative residual (a scan, then golden-section refinement).
// Needs ≥ 2 biases and ≥ 2 frequencies per bias, and frequencies high enough
// that ω²·Ls·Cj is well above the readings' noise (docs/design.md).
// Standard errors: the linearised least squares over (Cp, Ls, 1/Cj per bias)
// at the minimum, σ² from the residuals (RMS² · N/(N − P)); NaN when the
// readings do not determine them (too few, or a singular normal matrix).
struct PackageFit {
  bool ok = false;
  std::string message;
  PackageParasitics package;
  double rms_relative = 0.0;  // RMS of the residuals of Im Z relative to |Im Z|
  double ls_h_std_error = std::numeric_limits<double>::quiet_NaN();
  double cp_f_std_error = std::numeric_limits<double>::quiet_NaN();
  double ls_cp_correlation = std::numeric_limits<double>::quiet_NaN();
  std::size_t readings_used = 0;
};
PackageFit fit_package(std::span<const PackagedOffReading> readings, double cp_max_f = 2e-12);

}  // namespace junco::fitting
