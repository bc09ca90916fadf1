// Endpoints of the simulated bench: a TCP listener on 127.0.0.1 (ephemeral
// port, any number of sequential or concurrent clients, a thread each) or a
// raw pseudo-terminal. Each received line goes to a LineHandler; the reply
// (if any) is written back with LF, after an optional delay.
#pragma once

#include <functional>
#include <optional>
#include <string>

namespace junco::sim {

struct LineOutcome {
  std::optional<std::string> reply;
  int delay_ms = 0;     // wait before replying (without holding any lock)
  bool close = false;   // drop the connection instead of replying
};

// Called from endpoint threads; must do its own locking.
using LineHandler = std::function<LineOutcome(const std::string& line)>;

// Starts serving in background threads; returns the address for the ready
// line ("tcp:127.0.0.1:PORT" or "serial:/dev/pts/N"). Throws std::runtime_error.
std::string start_tcp_endpoint(LineHandler handler);
std::string start_pty_endpoint(LineHandler handler);

}  // namespace junco::sim
