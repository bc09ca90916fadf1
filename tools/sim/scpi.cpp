#include "tools/sim/scpi.hpp"

#include <cctype>
#include <charconv>
#include <cmath>
#include <cstdio>

namespace junco::sim {

std::string upper(std::string_view s) {
  std::string out(s);
  for (auto& c : out) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return out;
}

std::string trim(std::string_view s) {
  size_t b = 0, e = s.size();
  while (b < e && std::isspace(static_cast<unsigned char>(s[b]))) ++b;
  while (e > b && std::isspace(static_cast<unsigned char>(s[e - 1]))) --e;
  return std::string(s.substr(b, e - b));
}

std::vector<ScpiCommand> split_message(std::string_view line) {
  std::vector<std::string> parts;
  std::string cur;
  char quote = 0;
  for (char c : line) {
    if (quote) {
      if (c == quote) quote = 0;
    } else if (c == '"' || c == '\'') {
      quote = c;
    } else if (c == ';') {
      parts.push_back(cur);
      cur.clear();
      continue;
    }
    cur.push_back(c);
  }
  parts.push_back(cur);
  std::vector<ScpiCommand> out;
  for (const auto& p : parts) {
    const std::string t = trim(p);
    if (t.empty()) continue;
    ScpiCommand cmd;
    const auto sp = t.find_first_of(" \t");
    cmd.header = t.substr(0, sp);
    if (sp != std::string::npos) cmd.args = trim(std::string_view(t).substr(sp));
    cmd.query = !cmd.header.empty() && cmd.header.back() == '?';
    out.push_back(std::move(cmd));
  }
  return out;
}

namespace {

std::vector<std::string_view> split_colon(std::string_view s) {
  std::vector<std::string_view> out;
  size_t start = 0;
  for (;;) {
    const auto c = s.find(':', start);
    out.push_back(s.substr(start, c - start));
    if (c == std::string_view::npos) break;
    start = c + 1;
  }
  return out;
}

bool mnemonic_matches(std::string_view pat, std::string_view got) {
  // Split a trailing numeric suffix off both.
  auto split_suffix = [](std::string_view m) {
    size_t e = m.size();
    while (e > 0 && std::isdigit(static_cast<unsigned char>(m[e - 1]))) --e;
    return std::pair{m.substr(0, e), m.substr(e)};
  };
  auto [pat_word, pat_num] = split_suffix(pat);
  auto [got_word, got_num] = split_suffix(got);
  if (!got_num.empty() && got_num != pat_num) return false;
  if (got_num.empty() && !pat_num.empty() && pat_num != "1") return false;
  std::string short_form;
  for (char c : pat_word)
    if (std::isupper(static_cast<unsigned char>(c)) || c == '*' || c == '?') short_form.push_back(c);
  const std::string g = upper(got_word);
  return g == short_form || g == upper(pat_word);
}

}  // namespace

bool header_matches(std::string_view pattern, std::string_view header) {
  if (!header.empty() && header.front() == ':') header.remove_prefix(1);
  if (!pattern.empty() && pattern.front() == ':') pattern.remove_prefix(1);
  const bool pq = !pattern.empty() && pattern.back() == '?';
  const bool hq = !header.empty() && header.back() == '?';
  if (pq != hq) return false;
  if (pq) pattern.remove_suffix(1);
  if (hq) header.remove_suffix(1);
  const auto p = split_colon(pattern);
  const auto h = split_colon(header);
  if (p.size() != h.size()) return false;
  for (size_t i = 0; i < p.size(); ++i)
    if (!mnemonic_matches(p[i], h[i])) return false;
  return true;
}

std::optional<double> parse_number(std::string_view text) {
  const std::string t = trim(text);
  if (t.empty()) return std::nullopt;
  // NRf: sign, digits with optional point, optional exponent. No hex, inf, nan.
  size_t i = 0;
  if (t[i] == '+' || t[i] == '-') ++i;
  size_t digits = 0;
  while (i < t.size() && std::isdigit(static_cast<unsigned char>(t[i]))) ++i, ++digits;
  if (i < t.size() && t[i] == '.') {
    ++i;
    while (i < t.size() && std::isdigit(static_cast<unsigned char>(t[i]))) ++i, ++digits;
  }
  if (digits == 0) return std::nullopt;
  if (i < t.size() && (t[i] == 'e' || t[i] == 'E')) {
    ++i;
    if (i < t.size() && (t[i] == '+' || t[i] == '-')) ++i;
    size_t exp_digits = 0;
    while (i < t.size() && std::isdigit(static_cast<unsigned char>(t[i]))) ++i, ++exp_digits;
    if (exp_digits == 0) return std::nullopt;
  }
  if (i != t.size()) return std::nullopt;
  const double v = std::strtod(t.c_str(), nullptr);
  if (!std::isfinite(v)) return std::nullopt;
  return v;
}

std::optional<std::pair<double, std::string>> parse_number_with_suffix(std::string_view text) {
  const std::string t = trim(text);
  size_t e = t.size();
  while (e > 0 && std::isalpha(static_cast<unsigned char>(t[e - 1]))) --e;
  // An exponent 'E' followed by nothing numeric belongs to the suffix only if
  // the rest is not a valid number; try the longest numeric prefix first.
  for (size_t cut = e; cut > 0; --cut) {
    if (auto v = parse_number(std::string_view(t).substr(0, cut))) return std::pair{*v, upper(trim(t.substr(cut)))};
    if (cut < e) break;
  }
  return std::nullopt;
}

std::optional<bool> parse_bool(std::string_view text) {
  const std::string t = upper(trim(text));
  if (t == "ON" || t == "1") return true;
  if (t == "OFF" || t == "0") return false;
  return std::nullopt;
}

std::string format_nr3(double value, int digits) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%+.*E", digits - 1, value);
  return buf;
}

std::string format_nr2(double value, int decimals) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, value);
  return buf;
}

void StatusModel::push_error(int code, std::string text) {
  if (code <= -100 && code > -200) esr_ |= esr_cme;
  else if (code <= -200 && code > -300) esr_ |= esr_exe;
  else if (code <= -300 && code > -400) esr_ |= esr_dde;
  else if (code <= -400 && code > -500) esr_ |= esr_qye;
  else if (code > 0) esr_ |= esr_dde;  // device-specific
  if (queue_.size() >= depth_) {
    // SCPI-99: the newest entry is replaced by -350, older entries are kept.
    queue_.back() = {-350, "Queue overflow"};
    esr_ |= esr_dde;
    return;
  }
  if (text.size() > 255) text.resize(255);
  queue_.emplace_back(code, std::move(text));
}

std::string StatusModel::pop_error() {
  if (queue_.empty()) return "0,\"No error\"";
  auto [code, text] = queue_.front();
  queue_.pop_front();
  return std::to_string(code) + ",\"" + text + "\"";
}

int StatusModel::read_and_clear_esr() {
  const int v = esr_;
  esr_ = 0;
  return v;
}

void StatusModel::clear() {
  queue_.clear();
  esr_ = 0;
}

}  // namespace junco::sim
