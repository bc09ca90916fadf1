#include "daemon/log.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <memory>
#include <mutex>

namespace junco::daemon {

std::optional<LogLevel> parse_log_level(std::string_view text) {
  if (text == "error" || text == "err") return LogLevel::error;
  if (text == "warn" || text == "warning") return LogLevel::warn;
  if (text == "info") return LogLevel::info;
  if (text == "debug") return LogLevel::debug;
  return std::nullopt;
}

std::string_view level_name(LogLevel level) {
  switch (level) {
    case LogLevel::error: return "error";
    case LogLevel::warn: return "warn";
    case LogLevel::info: return "info";
    case LogLevel::debug: return "debug";
  }
  return "info";
}

bool stderr_is_journal() {
  const char* stream = std::getenv("JOURNAL_STREAM");
  if (!stream) return false;
  unsigned long long dev = 0, ino = 0;
  char tail = 0;
  if (std::sscanf(stream, "%llu:%llu%c", &dev, &ino, &tail) != 2) return false;
  struct stat st {};
  if (::fstat(STDERR_FILENO, &st) != 0) return false;
  return static_cast<unsigned long long>(st.st_dev) == dev && static_cast<unsigned long long>(st.st_ino) == ino;
}

std::string format_log_line(LogFormat format, std::string_view program, LogLevel level, std::string_view message,
                            std::chrono::system_clock::time_point when) {
  std::string line;
  line.reserve(message.size() + 48);
  if (format == LogFormat::journal) {
    line += '<';
    line += static_cast<char>('0' + static_cast<int>(level));
    line += '>';
  } else {
    // ISO 8601, UTC, milliseconds: sortable, and the same in every time zone.
    const auto ms = std::chrono::duration_cast<std::chrono::milliseconds>(when.time_since_epoch()).count();
    const std::time_t secs = static_cast<std::time_t>(ms / 1000);
    std::tm tm{};
    ::gmtime_r(&secs, &tm);
    char stamp[96];
    std::snprintf(stamp, sizeof stamp, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ ", tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday,
                  tm.tm_hour, tm.tm_min, tm.tm_sec, static_cast<int>(ms % 1000));
    line += stamp;
    line += program;
    line += ": ";
    line += level_name(level);
    line += ": ";
  }
  // One message, one line: a newline inside (an instrument's reply) would
  // start a line without prefix, which journald would read as info.
  for (const char c : message) line += (c == '\n' || c == '\r') ? ' ' : c;
  line += '\n';
  return line;
}

Log stderr_log(std::string program, LogLevel max, LogFormat format) {
  struct Writer {
    std::string program;
    LogFormat format;
    std::mutex mutex;
  };
  auto w = std::make_shared<Writer>();
  w->program = std::move(program);
  w->format = format;
  return Log(
      [w](LogLevel level, std::string_view message) {
        const std::string line = format_log_line(w->format, w->program, level, message, std::chrono::system_clock::now());
        // One write(2) per line: the supervisor and its worker share stderr,
        // and a line written whole is never interleaved with the other's.
        std::lock_guard lock(w->mutex);
        std::size_t done = 0;
        while (done < line.size()) {
          const ssize_t n = ::write(STDERR_FILENO, line.data() + done, line.size() - done);
          if (n < 0 && errno == EINTR) continue;
          if (n <= 0) return;  // nowhere to log to; the daemon keeps running
          done += static_cast<std::size_t>(n);
        }
      },
      max);
}

}  // namespace junco::daemon
