// juncod's log: the one home of levels, their names and the line format
// (docs/daemon-core.md, "Logs"). Every daemon file logs through a Log
// handle; main.cpp makes the one that writes to stderr.
//
// Levels, and what belongs at each:
//   error  safety failures: make-safe failed, outputs not known to be off;
//          the daemon cannot start or serve
//   warn   instrument faults, retries, paused jobs, stale errors, refused
//          clients: something a person may have to look at
//   info   lifecycle: start, bench open, jobs queued/running/done, stop
//   debug  SCPI traffic (every line to and from each instrument) and
//          client connections
// The numbers are the sd-daemon(3) / syslog(3) priorities, so under systemd
// a line's prefix is `<N>` with N the level itself.
#pragma once

#include <chrono>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <type_traits>
#include <utility>

namespace junco::daemon {

enum class LogLevel : int { error = 3, warn = 4, info = 6, debug = 7 };

// "error" | "warn" | "info" | "debug"; the syslog spellings "err" and
// "warning" are accepted too. nullopt for anything else.
std::optional<LogLevel> parse_log_level(std::string_view text);
// The word written in timestamped lines and accepted by --log-level.
std::string_view level_name(LogLevel level);
inline constexpr const char* kLogLevelWords = "error, warn, info or debug";

// How a line looks. journal: `<N>message` (journald adds time, host and
// program; N is the priority). timestamped: `2026-12-03T11:06:42.123Z
// juncod: warn: message` (a terminal or a file).
enum class LogFormat { journal, timestamped };

// True when stderr is the journal stream systemd connected: JOURNAL_STREAM
// holds "DEV:INODE" of that stream, and fstat(2) of fd 2 gives the same pair
// (systemd.exec(5); a shell started from the unit inherits the variable but
// not necessarily the stream, hence the comparison).
bool stderr_is_journal();

std::string format_log_line(LogFormat format, std::string_view program, LogLevel level, std::string_view message,
                            std::chrono::system_clock::time_point when);

// A handle to a log: cheap to copy, safe from any thread if its sink is.
// Components take one and call error()/warn()/info()/debug(); a default
// Log discards everything. enabled() lets a caller skip building a line
// nobody will read (SCPI traffic).
class Log {
 public:
  using Sink = std::function<void(LogLevel, std::string_view)>;

  Log() = default;
  Log(Sink sink, LogLevel max) : sink_(std::move(sink)), max_(max) {}
  // Adapters for code and tests that collect plain lines: a callable taking
  // (message) gets every line's text, one taking (level word, message) the
  // word too.
  template <typename F>
    requires(!std::is_same_v<std::decay_t<F>, Log> && !std::is_same_v<std::decay_t<F>, Sink> &&
             (std::is_invocable_v<F&, std::string_view> || std::is_invocable_v<F&, std::string_view, std::string_view>))
  Log(F f) : max_(LogLevel::debug) {  // NOLINT(google-explicit-constructor): drop-in for the old std::function members
    if constexpr (std::is_invocable_v<F&, std::string_view, std::string_view>)
      sink_ = [f = std::move(f)](LogLevel l, std::string_view m) mutable { f(level_name(l), m); };
    else
      sink_ = [f = std::move(f)](LogLevel, std::string_view m) mutable { f(m); };
  }

  bool enabled(LogLevel level) const { return sink_ && static_cast<int>(level) <= static_cast<int>(max_); }
  explicit operator bool() const { return static_cast<bool>(sink_); }

  void write(LogLevel level, std::string_view message) const {
    if (enabled(level)) sink_(level, message);
  }
  void error(std::string_view message) const { write(LogLevel::error, message); }
  void warn(std::string_view message) const { write(LogLevel::warn, message); }
  void info(std::string_view message) const { write(LogLevel::info, message); }
  void debug(std::string_view message) const { write(LogLevel::debug, message); }
  // A line without a stated level is lifecycle: info.
  void operator()(std::string_view message) const { info(message); }

 private:
  Sink sink_;
  LogLevel max_ = LogLevel::info;
};

// The process's log on stderr: one line per message, whole lines even from
// several threads, flushed at once (a crash loses nothing written before it).
Log stderr_log(std::string program, LogLevel max, LogFormat format);

}  // namespace junco::daemon
