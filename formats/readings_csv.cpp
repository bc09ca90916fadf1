#include "formats/readings_csv.hpp"

#include "formats/iv_csv.hpp"

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <sstream>

namespace junco::fitting {

namespace {

std::string g(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.9g", v);
  return buf;
}

std::vector<std::string> split(const std::string& line) {
  std::vector<std::string> out;
  std::string cell;
  std::istringstream in(line);
  while (std::getline(in, cell, ',')) {
    while (!cell.empty() && (cell.back() == ' ' || cell.back() == '\r')) cell.pop_back();
    while (!cell.empty() && cell.front() == ' ') cell.erase(cell.begin());
    out.push_back(cell);
  }
  return out;
}

}  // namespace

std::string iv_readings_csv(std::span<const IvPoint> points) {
  std::string s = "v,i_a\n";
  for (const auto& p : points) s += g(p.v) + "," + g(p.i_a) + "\n";
  return s;
}

std::string ac_readings_csv(std::span<const AcPoint> points) {
  std::string s = "bias_i_a,freq_hz,vin,vout\n";
  for (const auto& p : points) s += g(p.bias_i_a) + "," + g(p.freq_hz) + "," + g(p.vin) + "," + g(p.vout) + "\n";
  return s;
}

std::string off_state_readings_csv(std::span<const OffStatePoint> points) {
  std::string s = "reverse_v,freq_hz,vin,vout\n";
  for (const auto& p : points) s += g(p.reverse_v) + "," + g(p.freq_hz) + "," + g(p.vin) + "," + g(p.vout) + "\n";
  return s;
}

namespace {

enum class TableKind { iv, ac, off };

// The AC and off-state tables' own headers; anything else is a forward I-V
// table, read by the same parser as `junco fit` so every tool accepts the
// same files.
TableKind table_kind(const std::string& text) {
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line == "\r") continue;
    const auto header = split(line);
    if (header == std::vector<std::string>{"bias_i_a", "freq_hz", "vin", "vout"}) return TableKind::ac;
    if (header == std::vector<std::string>{"reverse_v", "freq_hz", "vin", "vout"}) return TableKind::off;
    return TableKind::iv;
  }
  return TableKind::iv;
}

// Either four-column table (after its header).
std::optional<ReadingsTable> parse_four_columns(const std::string& text, TableKind kind, std::string* why) {
  std::istringstream in(text);
  std::string line;
  int line_no = 0;
  bool header_seen = false;
  ReadingsTable t;
  while (std::getline(in, line)) {
    ++line_no;
    if (line.empty() || line[0] == '#' || line == "\r") continue;
    const auto cells = split(line);
    if (!header_seen) {
      header_seen = true;
      continue;
    }
    if (cells.size() != 4) {
      if (why) *why = "line " + std::to_string(line_no) + ": expected 4 fields";
      return std::nullopt;
    }
    double x[4];
    for (std::size_t k = 0; k < 4; ++k) {
      const std::string& c = cells[k];
      char* end = nullptr;
      x[k] = std::strtod(c.c_str(), &end);
      if (c.empty() || *end != '\0' || !std::isfinite(x[k])) {
        if (why) *why = "line " + std::to_string(line_no) + ": '" + c + "' is not a finite number";
        return std::nullopt;
      }
    }
    if (kind == TableKind::ac) t.ac.push_back({x[0], x[1], x[2], x[3]});
    else t.off.push_back({x[0], x[1], x[2], x[3]});
  }
  return t;
}

}  // namespace

std::optional<ReadingsTable> parse_readings_csv(const std::string& text, std::string* why) {
  if (const TableKind kind = table_kind(text); kind != TableKind::iv) return parse_four_columns(text, kind, why);
  IvCsv iv = parse_iv_csv(text);
  if (!iv.ok()) {
    if (why) *why = iv.error;
    return std::nullopt;
  }
  ReadingsTable t;
  t.iv = std::move(iv.points);
  return t;
}

}  // namespace junco::fitting
