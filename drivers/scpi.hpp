// A SCPI / IEEE 488.2 conversation over one Transport: commands, queries,
// *IDN?, *RST, *CLS, *OPC? and SYST:ERR? draining. Errors are DriverError
// whose message names the command and the cause; the role layer adds the
// instrument and operation.
#pragma once

#include "drivers/roles.hpp"
#include "drivers/transport.hpp"

#include <chrono>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace junco::drivers {

struct SessionOptions {
  std::chrono::milliseconds reply_timeout{2000};
  // Called with ">" for a line sent, "<" for a line received, "#" for notes.
  std::function<void(std::string_view direction, std::string_view line)> traffic_log;
  // SYST:ERR? reads before giving up on an error queue that never empties
  // (the queue holds 16 entries in docs/command-sets.md; some slack).
  int max_error_reads = 32;
};

class ScpiSession {
 public:
  ScpiSession(std::unique_ptr<Transport> transport, SessionOptions options);

  void command(std::string_view line);
  // Sends `line` and returns the reply line (terminator removed).
  std::string query(std::string_view line);
  // Query whose reply must be a number (optionally ending in `suffix`);
  // overload markers throw DriverError(overrange), anything else
  // unparsable DriverError(garbled).
  double query_number(std::string_view line, std::string_view suffix = {});
  Identity identify();
  void reset();  // *RST then *CLS
  void clear();  // *CLS
  // *OPC? must answer 1 within the reply timeout.
  void sync();
  // Reads SYST:ERR? until "0,..." and throws DriverError(instrument) with
  // the first code and text found (and how many more there were).
  void drain_errors();
  // Reads SYST:ERR? until "0,..." (at most max_error_reads) and returns the
  // entries as "CODE,\"TEXT\"" without throwing for them; then *CLS and one
  // more SYST:ERR? that must say 0 (the entries are read before *CLS so that
  // they can be reported; *CLS then also clears an overflowed queue and the
  // status bytes). Throws DriverError only when the link fails.
  std::vector<std::string> clear_error_queue();
  // After a query got no reply: one SYST:ERR?. An instrument that refused
  // the query (a mistyped header queues -113 and answers nothing) says so
  // here; returns its first entry's code and "instrument error CODE,\"TEXT\"",
  // or nullopt when the queue is empty or the answer is not an error entry
  // (the instrument may be mute, or the late reply may come in its place).
  std::optional<std::pair<int, std::string>> error_after_timeout();
  // Reopens the link. Where stale replies may still be in flight (not TCP,
  // whose new connection starts clean) it resynchronises with *OPC?.
  void reconnect();
  std::string describe() const { return transport_->describe(); }

 private:
  void log(std::string_view direction, std::string_view line) const;
  std::string read_reply(std::string_view sent);
  void resynchronise();

  std::unique_ptr<Transport> transport_;
  SessionOptions options_;
};

}  // namespace junco::drivers
