// Parsing of measured I–V curves from CSV text. A pure function over a string
// (no I/O), so the CLI, the tests and a fuzz target share it.
//
// Format:
//   # comment lines and blank lines are skipped anywhere
//   v_v,i_a,temp_c          <- header: first non-comment line, names the columns
//   0.4286,1.0e-5,27        <- one reading per line
// Separator: ',' (or ';' or tab, detected from the header). Names are matched
// case-insensitively. The unit of a column is read with the one units module
// (units/si_text.hpp) from brackets after the name, "v [mV]", "current (uA)",
// or from a suffix after '_', "v_mv", "i_ua", "v_v", "i_a" (in a name the
// prefix is read in lower case: "mv" is millivolts). No unit: V and A.
// Voltage columns are found by the names v, u, voltage; current by i, current
// (each with or without a unit suffix) — or chosen by name or 1-based position.
// Decimal commas ("0,4286") are read when asked (decimal_comma); the
// separator must then be ';' or tab.
#pragma once

#include "fitting/extract.hpp"

#include <string>
#include <string_view>
#include <vector>

namespace junco::fitting {

struct IvCsvOptions {
  std::string v_col;  // empty: find by name; digits: 1-based position; else a header name
  std::string i_col;
  bool decimal_comma = false;  // "0,4286" is 0.4286; columns separated by ';' or tab
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
