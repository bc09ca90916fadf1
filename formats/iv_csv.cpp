#include "formats/iv_csv.hpp"

#include "units/si_text.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <cmath>
#include <optional>

namespace junco::fitting {

namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t' || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  if (s.size() >= 2 && s.front() == '"' && s.back() == '"') s = s.substr(1, s.size() - 2);
  return s;
}

std::string lower(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return out;
}

std::vector<std::string_view> split(std::string_view line, char sep) {
  std::vector<std::string_view> cells;
  std::size_t start = 0;
  for (;;) {
    const std::size_t at = line.find(sep, start);
    cells.push_back(trim(line.substr(start, at == std::string_view::npos ? std::string_view::npos : at - start)));
    if (at == std::string_view::npos) return cells;
    start = at + 1;
  }
}

struct Header {
  std::string name;  // lower case, without the bracketed unit: "v", "v_mv", "current"
  std::string unit;  // as written inside the brackets, may be empty
  std::string base;  // name without a unit suffix: "v_mv" -> "v" (name when there is none)
  std::string suffix;  // that suffix: "mv"; empty when none
};

Header parse_header_cell(std::string_view cell) {
  Header h;
  const std::size_t open = cell.find_first_of("[(");
  if (open != std::string_view::npos) {
    const char close = cell[open] == '[' ? ']' : ')';
    const std::size_t end = cell.find(close, open);
    h.unit = std::string(trim(cell.substr(open + 1, end == std::string_view::npos ? std::string_view::npos : end - open - 1)));
    cell = trim(cell.substr(0, open));
  }
  h.name = lower(cell);
  h.base = h.name;
  // "v_mv", "i_ua", "voltage_v": a unit after the last '_' when it is one of
  // volts or amps (units::unit_scale decides); otherwise the name stands.
  if (const std::size_t us = h.name.rfind('_'); us != std::string::npos && us > 0) {
    const std::string suffix = h.name.substr(us + 1);
    if (units::unit_scale(suffix, "V") || units::unit_scale(suffix, "A")) {
      h.base = h.name.substr(0, us);
      h.suffix = suffix;
    }
  }
  return h;
}

// Scale to SI of a column of `unit` ("V" or "A"): from the bracketed unit
// ("v [mV]") or the name's suffix ("v_mv"; a name is read in lower case, so
// its m is milli). nullopt when the unit written is not one of that quantity.
std::optional<double> column_scale(const Header& h, const char* unit) {
  if (!h.unit.empty()) return units::unit_scale(h.unit, unit);
  if (!h.suffix.empty()) return units::unit_scale(h.suffix, unit);
  return 1.0;
}

bool all_digits(const std::string& s) {
  return !s.empty() && std::all_of(s.begin(), s.end(), [](char c) { return c >= '0' && c <= '9'; });
}

std::string quoted_list(const std::vector<Header>& h) {
  std::string out;
  for (const auto& c : h) out += (out.empty() ? "'" : ", '") + c.name + "'";
  return out;
}

// Index of the column for one quantity, or an error message.
std::string pick_column(const std::vector<Header>& header, const std::string& choice,
                        const std::vector<std::string>& aliases, const char* what, const char* flag,
                        std::size_t& index) {
  if (all_digits(choice)) {
    const unsigned long pos = std::stoul(choice.size() > 9 ? std::string("0") : choice);
    if (pos < 1 || pos > header.size())
      return std::string(flag) + " " + choice + ": the header has " + std::to_string(header.size()) + " columns";
    index = pos - 1;
    return {};
  }
  const std::vector<std::string> wanted = choice.empty() ? aliases : std::vector<std::string>{lower(choice)};
  std::optional<std::size_t> found;
  for (std::size_t k = 0; k < header.size(); ++k) {
    const bool named = std::find(wanted.begin(), wanted.end(), header[k].name) != wanted.end();
    const bool by_base = choice.empty() && std::find(wanted.begin(), wanted.end(), header[k].base) != wanted.end();
    if (!named && !by_base) continue;
    if (found)
      return std::string("two ") + what + " columns ('" + header[*found].name + "' and '" + header[k].name +
             "'); pick one with " + flag;
    found = k;
  }
  if (!found) {
    if (!choice.empty()) return std::string(flag) + " " + choice + ": no such column (header: " + quoted_list(header) + ")";
    std::string names;
    for (const auto& a : aliases) names += (names.empty() ? "" : ", ") + a;
    const std::string unit_example = aliases.front() + (std::string(what) == "voltage" ? "_mv" : "_ma");
    return std::string("no ") + what + " column (header: " + quoted_list(header) + "); name it " + names +
           " (a unit may follow: " + unit_example + ") or choose one with " + flag;
  }
  index = *found;
  return {};
}

bool is_skippable(std::string_view line) {
  const std::string_view t = trim(line);
  return t.empty() || t.front() == '#';
}

}  // namespace

IvCsv parse_iv_csv(std::string_view text, const IvCsvOptions& options) {
  IvCsv out;
  if (text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);  // UTF-8 byte-order mark
  std::size_t line_no = 0, pos = 0;
  std::vector<Header> header;
  char sep = ',';
  std::size_t v_index = 0, i_index = 0;
  double v_scale = 1.0, i_scale = 1.0;
  while (pos <= text.size()) {
    const std::size_t end = std::min(text.find('\n', pos), text.size());
    const std::string_view line = text.substr(pos, end - pos);
    pos = end + 1;
    ++line_no;
    if (is_skippable(line)) {
      if (end == text.size()) break;
      continue;
    }
    if (header.empty()) {
      sep = line.find(';') != std::string_view::npos ? ';' : line.find('\t') != std::string_view::npos ? '\t' : ',';
      if (!options.decimal_comma && line.find(',') != std::string_view::npos) sep = ',';
      if (options.decimal_comma && sep == ',' && line.find(',') != std::string_view::npos)
        return out.error = "line " + std::to_string(line_no) +
                           ": with decimal commas the columns must be separated by ';' or tab, and the header has ','",
               out;
      for (auto cell : split(line, sep)) header.push_back(parse_header_cell(cell));
      out.error = pick_column(header, options.v_col, {"v", "u", "voltage"}, "voltage", "--v-col", v_index);
      if (out.error.empty())
        out.error = pick_column(header, options.i_col, {"i", "current"}, "current", "--i-col", i_index);
      if (out.error.empty() && v_index == i_index) out.error = "the voltage and current columns are the same column";
      if (!out.error.empty()) return out;
      const auto vs = column_scale(header[v_index], "V");
      const auto is = column_scale(header[i_index], "A");
      const auto unit_of = [](const Header& h) { return h.unit.empty() ? h.suffix : h.unit; };
      if (!vs) return out.error = "column " + std::to_string(v_index + 1) + ": unit '" + unit_of(header[v_index]) +
                                  "' is not a voltage unit (V, mV, uV)", out;
      if (!is) return out.error = "column " + std::to_string(i_index + 1) + ": unit '" + unit_of(header[i_index]) +
                                  "' is not a current unit (A, mA, uA, nA, pA)", out;
      v_scale = *vs;
      i_scale = *is;
      out.v_header = header[v_index].name;
      out.i_header = header[i_index].name;
      if (end == text.size()) break;
      continue;
    }
    const auto cells = split(line, sep);
    if (cells.size() <= std::max(v_index, i_index))
      return out.error = "line " + std::to_string(line_no) + ": " + std::to_string(cells.size()) +
                         " field(s), the header has " + std::to_string(header.size()), out;
    double value[2] = {0.0, 0.0};
    const std::size_t col[2] = {v_index, i_index};
    for (int q = 0; q < 2; ++q) {
      const std::string_view cell = cells[col[q]];
      std::string with_point;  // "0,4286" read as 0.4286 when decimal commas were asked for
      if (options.decimal_comma && cell.find(',') != std::string_view::npos) {
        with_point = std::string(cell);
        std::replace(with_point.begin(), with_point.end(), ',', '.');
      }
      const std::string_view digits = with_point.empty() ? cell : std::string_view(with_point);
      const char* first = digits.data();
      const char* last = digits.data() + digits.size();
      // from_chars does not take a leading '+'; skip one, but only before a digit or '.',
      // so "+-5" stays an error rather than reading as -5.
      if (last - first >= 2 && *first == '+' && first[1] != '-' && first[1] != '+') ++first;
      const auto [ptr, ec] = std::from_chars(first, last, value[q]);
      const std::string where = "line " + std::to_string(line_no) + ", column " + std::to_string(col[q] + 1) + " (" +
                                header[col[q]].name + "): ";
      if (cell.empty()) return out.error = where + "empty value", out;
      if (ec != std::errc() || ptr != last) {
        const bool comma = !options.decimal_comma && sep != ',' && cell.find(',') != std::string_view::npos;
        return out.error = where + "'" + std::string(cell) + "' is not a number" +
                           (comma ? " (decimal comma? junco fit --decimal-comma reads them)" : ""), out;
      }
      if (!std::isfinite(value[q])) return out.error = where + "'" + std::string(cell) + "' is not a finite number", out;
    }
    out.points.push_back({value[0] * v_scale, value[1] * i_scale});
    out.line_of_point.push_back(line_no);
    if (end == text.size()) break;
  }
  if (header.empty()) out.error = "no header line (expected column names such as v_v,i_a)";
  return out;
}

}  // namespace junco::fitting
