// Lot statistics over fitted parts: per lot and per quantity (Is, n, Rs, and
// Vf and rd at chosen currents) the mean, sample standard deviation, range,
// median and MAD; robust outliers; matched sets by Vf.
//
// Outlier rule (Iglewicz & Hoaglin's modified z-score, threshold from memory):
//   z = 0.6745·(x − median)/MAD, flagged when |z| > 3.5.
// Is spans decades, so its z-score is taken on log10(Is). When MAD is 0 (half
// the lot identical) only values that differ from the median are flagged.
#pragma once

#include "fitting/diode.hpp"
#include "fitting/pin_diode.hpp"

#include <limits>
#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

struct LotPart {
  std::string label;
  std::string lot;
  DiodeParams params;
  double temp_k = 300.15;
  // The junction capacitance law, when off-state readings gave one (NaN: not measured).
  double cj0_f = std::numeric_limits<double>::quiet_NaN();
  double vj_v = std::numeric_limits<double>::quiet_NaN();
  double m = std::numeric_limits<double>::quiet_NaN();
  // A PIN part's law and off state, when its fit made one (pin_diode.hpp).
  std::optional<PinPart> pin = std::nullopt;
};

inline constexpr double outlier_z_threshold = 3.5;

struct QuantityStats {
  std::string name;    // "is_a", "n", "rs_ohm", "vf_v@0.01A", "rd_ohm@0.01A"; "cj0_f", "vj_v", "m" when measured;
                       // over the PIN parts: "r0_ohm", "k_ohm_a_x", "x", "tau_s", "r_1ma_ohm" (the law at 1 mA),
                       // and "ct_f", "rp_ohm" over those with an off state
  std::size_t count = 0;
  double mean = 0.0, std_dev = 0.0, min = 0.0, max = 0.0, median = 0.0, mad = 0.0;
  std::vector<std::string> outliers;  // labels
};

struct MatchedSet {
  std::vector<std::string> labels;
  double spread_v = 0.0;  // max − min of Vf within the set
};

struct LotStats {
  std::string lot;
  std::vector<std::string> labels;
  std::vector<QuantityStats> quantities;
  std::vector<MatchedSet> matched;
  DiodeParams nominal;  // median of each parameter (a robust lot nominal)
  // Median of the capacitance law over the parts that have one; NaN when none has.
  double nominal_cj0_f = std::numeric_limits<double>::quiet_NaN();
  double nominal_vj_v = std::numeric_limits<double>::quiet_NaN();
  double nominal_m = std::numeric_limits<double>::quiet_NaN();
};

struct LotStatsOptions {
  std::vector<double> currents_a{1e-3, 10e-3};  // where Vf and rd are reported
  double match_current_a = 10e-3;               // Vf used for matching
  double match_tolerance_v = 2e-3;
  std::size_t set_size = 2;                     // 2 = pairs
};

// One entry per lot, in order of first appearance.
std::vector<LotStats> lot_statistics(const std::vector<LotPart>& parts, const LotStatsOptions& options = {});

// Disjoint sets of set_size parts whose values agree within tolerance
// (greedy over the sorted values, which is optimal for pairs).
std::vector<MatchedSet> matched_sets(const std::vector<std::string>& labels, const std::vector<double>& values,
                                     double tolerance, std::size_t set_size);

}  // namespace junco::fitting
