// Fuzz entry: formats/iv_csv.hpp, the CSV importer of `junco fit`. When the
// bytes start with "@", the first line is "V_COL,I_COL" (the --v-col/--i-col
// choices) and the rest is the file. Invariants: an error is one non-empty
// line; success yields finite points, one line number
// per point, strictly increasing and within the file, and names the headers.
#include "tests/fuzz/entries.hpp"

#include "formats/iv_csv.hpp"

#include <algorithm>
#include <cmath>

namespace junco::fuzz {

void iv_csv(std::string_view data) {
  fitting::IvCsvOptions options;
  if (!data.empty() && data[0] == '@') {
    const auto nl = data.find('\n');
    const auto spec = data.substr(1, nl == std::string_view::npos ? std::string_view::npos : nl - 1);
    const auto comma = spec.find(',');
    options.v_col = std::string(spec.substr(0, comma));
    if (comma != std::string_view::npos) options.i_col = std::string(spec.substr(comma + 1));
    data = nl == std::string_view::npos ? std::string_view{} : data.substr(nl + 1);
  }
  const auto csv = fitting::parse_iv_csv(data, options);
  if (!csv.ok()) {
    require(csv.error.find('\n') == std::string::npos, "error message spans lines: " + csv.error);
    return;
  }
  require(csv.points.size() == csv.line_of_point.size(), "one line number per point");
  const auto lines = static_cast<std::size_t>(std::count(data.begin(), data.end(), '\n')) + 1;
  for (std::size_t k = 0; k < csv.points.size(); ++k) {
    require(std::isfinite(csv.points[k].v) && std::isfinite(csv.points[k].i_a), "a non-finite point was accepted");
    require(csv.line_of_point[k] >= 2 && csv.line_of_point[k] <= lines, "a point's line number is outside the file");
    if (k > 0) require(csv.line_of_point[k] > csv.line_of_point[k - 1], "line numbers not increasing");
  }
  // Found by name (no --v-col/--i-col): the chosen header cells are those names.
  if (options.v_col.empty() && options.i_col.empty())
    require(!csv.v_header.empty() && !csv.i_header.empty(), "success without naming the columns chosen");
}

}  // namespace junco::fuzz
