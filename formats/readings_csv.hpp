// CSV of raw readings: a pure function from points to text, and its reader
// (used by `junco plot`). Header row names the columns with SI units:
//   forward readings:  v,i_a
//   AC readings:       bias_i_a,freq_hz,vin,vout
//   off-state readings: reverse_v,freq_hz,vin,vout  (reverse_v a magnitude)
// Lines starting with '#' are comments. A forward table is read by
// parse_iv_csv (formats/iv_csv.hpp), so it accepts whatever `junco fit` does.
#pragma once

#include "fitting/extract.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/transfer.hpp"

#include <optional>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

std::string iv_readings_csv(std::span<const IvPoint> points);
std::string ac_readings_csv(std::span<const AcPoint> points);
std::string off_state_readings_csv(std::span<const OffStatePoint> points);

struct ReadingsTable {
  std::vector<IvPoint> iv;
  std::vector<AcPoint> ac;
  std::vector<OffStatePoint> off;
};

// Parses one CSV (either kind); nullopt with *why naming the line on bad input.
std::optional<ReadingsTable> parse_readings_csv(const std::string& text, std::string* why = nullptr);

}  // namespace junco::fitting
