// Parsing of measured I–V curves from CSV text. A pure function over a string
// (no I/O), so the CLI, the tests and a fuzz target share it.
//
// Format:
//   # comment lines and blank lines are skipped anywhere
//   v_v,i_a,temp_c          <- header: first non-comment line, names the columns
//   0.4286,1.0e-5,27        <- one reading per line
// Separator: ',' (or ';' or tab, detected from the header). Names are matched
// case-insensitively; a unit in brackets after a name, "v [mV]" or
// "current (uA)", is honoured (V, mV, uV/µV; A, mA, uA/µA, nA, pA). Voltage
// columns are found by the names v, v_v, voltage; current by i, i_a, current —
// or chosen by name or 1-based position.
#pragma once

#include "fitting/extract.hpp"

#include <string>
#include <string_view>
#include <vector>

namespace junco::fitting {

struct IvCsvOptions {
  std::string v_col;  // empty: find by name; digits: 1-based position; else a header name
  std::string i_col;
};

struct IvCsv {
  std::string error;                // empty on success; else one line, with line and column when relevant
  std::vector<IvPoint> points;      // in SI units (V, A), file order
  std::vector<std::size_t> line_of_point;  // 1-based line number of each point
  std::string v_header, i_header;   // the header cells chosen, as written

  bool ok() const { return error.empty(); }
};

IvCsv parse_iv_csv(std::string_view text, const IvCsvOptions& options = {});

}  // namespace junco::fitting
