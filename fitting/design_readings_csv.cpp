#include "fitting/design_readings_csv.hpp"

#include "fitting/iv_csv.hpp"

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

namespace {

// The AC table's own header; anything else is a forward I-V table, read by
// the same parser as `junco fit` so every tool accepts the same files.
bool is_ac_header(const std::string& text) {
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line == "\r") continue;
    return split(line) == std::vector<std::string>{"bias_i_a", "freq_hz", "vin", "vout"};
  }
  return false;
}

std::optional<ReadingsTable> parse_ac_csv(const std::string& text, std::string* why) {
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
    t.ac.push_back({x[0], x[1], x[2], x[3]});
  }
  return t;
}

}  // namespace

std::optional<ReadingsTable> parse_readings_csv(const std::string& text, std::string* why) {
  if (is_ac_header(text)) return parse_ac_csv(text, why);
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
