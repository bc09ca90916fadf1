// The SCPI side of a simulated instrument, with no I/O: splitting a program
// message into commands, matching headers against long/short-form patterns,
// parsing numbers, and the IEEE 488.2 status model (error queue and ESR).
#pragma once

#include <deque>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace junco::sim {

struct ScpiCommand {
  std::string header;  // as received, without leading/trailing blanks, e.g. ":SENS:FUNC"
  std::string args;    // everything after the first blank, trimmed
  bool query = false;  // header ends in '?'
};

// Splits one line at ';' outside quotes; a following command without a leading
// ':' or '*' is NOT re-rooted (the simulator treats every command as rooted).
std::vector<ScpiCommand> split_message(std::string_view line);

// Matches a header against a pattern such as "MEASure:VOLTage:DC?" or
// "SOURce1:FREQuency". Each mnemonic may be given in short form (the upper-case
// part) or long form, in any case; a leading ':' is optional; a trailing digit
// in the pattern is an optional numeric suffix that must match when present.
bool header_matches(std::string_view pattern, std::string_view header);

// NRf number (NR1/NR2/NR3), whole-string; nullopt if it is not one.
std::optional<double> parse_number(std::string_view text);
// A number followed by a unit suffix (e.g. "0.1VPP"); suffix returned upper-cased.
std::optional<std::pair<double, std::string>> parse_number_with_suffix(std::string_view text);
// ON/OFF/1/0; nullopt otherwise.
std::optional<bool> parse_bool(std::string_view text);

std::string upper(std::string_view s);
std::string trim(std::string_view s);
// NR3 with `digits` significant digits, e.g. "+6.52301E-01".
std::string format_nr3(double value, int digits);
// NR2 with `decimals` decimals, e.g. "0.652".
std::string format_nr2(double value, int decimals);

inline constexpr double scpi_overload = 9.9e37;

// IEEE 488.2 / SCPI-99 status: error queue (FIFO, fixed depth, overflow puts
// -350 in the newest slot) and the Standard Event Status Register.
class StatusModel {
 public:
  explicit StatusModel(size_t depth = 16) : depth_(depth) {}
  void push_error(int code, std::string text);
  std::string pop_error();  // `<code>,"<text>"`; `0,"No error"` when empty
  int read_and_clear_esr();
  void set_opc() { esr_ |= 1; }
  void clear();  // *CLS: queue and event register
  size_t queued() const { return queue_.size(); }

  static constexpr int esr_opc = 1 << 0;
  static constexpr int esr_qye = 1 << 2;
  static constexpr int esr_dde = 1 << 3;
  static constexpr int esr_exe = 1 << 4;
  static constexpr int esr_cme = 1 << 5;

 private:
  size_t depth_;
  std::deque<std::pair<int, std::string>> queue_;
  int esr_ = 0;
};

}  // namespace junco::sim
