#include "fitting/design_readings_csv.hpp"

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

std::optional<ReadingsTable> parse_readings_csv(const std::string& text, std::string* why) {
  std::istringstream in(text);
  std::string line;
  int line_no = 0;
  std::vector<std::string> header;
  ReadingsTable t;
  while (std::getline(in, line)) {
    ++line_no;
    if (line.empty() || line[0] == '#' || line == "\r") continue;
    const auto cells = split(line);
    if (header.empty()) {
      header = cells;
      const bool iv = header == std::vector<std::string>{"v", "i_a"};
      const bool ac = header == std::vector<std::string>{"bias_i_a", "freq_hz", "vin", "vout"};
      if (!iv && !ac) {
        if (why) *why = "line " + std::to_string(line_no) + ": header must be 'v,i_a' or 'bias_i_a,freq_hz,vin,vout'";
        return std::nullopt;
      }
      continue;
    }
    if (cells.size() != header.size()) {
      if (why) *why = "line " + std::to_string(line_no) + ": expected " + std::to_string(header.size()) + " fields";
      return std::nullopt;
    }
    std::vector<double> x;
    for (const auto& c : cells) {
      char* end = nullptr;
      const double v = std::strtod(c.c_str(), &end);
      if (c.empty() || *end != '\0' || !std::isfinite(v)) {
        if (why) *why = "line " + std::to_string(line_no) + ": '" + c + "' is not a finite number";
        return std::nullopt;
      }
      x.push_back(v);
    }
    if (x.size() == 2)
      t.iv.push_back({x[0], x[1]});
    else
      t.ac.push_back({x[0], x[1], x[2], x[3]});
  }
  if (header.empty()) {
    if (why) *why = "no header line";
    return std::nullopt;
  }
  return t;
}

}  // namespace junco::fitting
