// juncod's socket: JSON-RPC 2.0, one message per line, on a Unix domain
// socket (never TCP). Many concurrent clients; each connection has its own
// strand, so a slow request holds up only its own client. Requests go to
// Service::call; events.subscribe / events.unsubscribe are handled here.
//
// Ownership and threads: RpcServer lives on the caller's io_context, which
// may be run by several threads. The Service must outlive the server; stop()
// unsubscribes every connection from the EventBus before it returns.
//
// Limits (why they exist):
//   max_line_bytes      bounds a connection's input buffer; an overlong line
//                       gets an invalid_request error and is skipped.
//   max_queued_messages bounds a connection's output queue. A subscriber that
//                       does not read its notifications is dropped (logged),
//                       so the executor publishing events never waits.
//   pause_reading_at    a client that pipelines requests without reading the
//                       replies is simply not read until its queue drains.
//   max_connections     bounds open client sockets, so clients can never use
//                       up the descriptors the executor needs to reconnect to
//                       an instrument or the store needs for its files. A
//                       client beyond it gets one `unavailable` error line and
//                       is closed. 0 = automatic: min(1024, RLIMIT_NOFILE / 2).
//   idle_timeout_ms     a client that sends nothing for this long while it
//                       has no subscription and nothing left to receive is
//                       closed (logged), so forgotten or stuck clients do not
//                       hold connection slots for ever; subscribers may wait
//                       silently for events as long as they like. 0 = never.
//   When accept() itself fails for lack of descriptors, the server waits
//   accept_retry_ms before trying again (logged once per episode), instead of
//   spinning on the failing call.
#pragma once

#include <sys/stat.h>

#include "daemon/log.hpp"
#include "daemon/rpc_answer.hpp"
#include "daemon/service.hpp"

#include <boost/asio/io_context.hpp>

#include <cstddef>
#include <functional>
#include <memory>
#include <string>
#include <string_view>

namespace junco::daemon {

struct ServerOptions {
  std::string socket_path;  // e.g. /run/junco/juncod.sock
  std::string group;        // socket file's group (chown); empty keeps the daemon's group
  std::size_t max_line_bytes = rpc::default_max_line_bytes;
  std::size_t max_queued_messages = 4096;
  std::size_t pause_reading_at = 64;
  std::size_t max_connections = 0;
  unsigned accept_retry_ms = 100;
  unsigned idle_timeout_ms = 600000;  // 10 min
  Log log;  // daemon/log.hpp; default: discards
};

// Makes sure `dir` exists (created with mode 0750, group `gid` when gid >= 0),
// is a directory owned by this process's effective user and is not
// accessible to other users. Throws std::runtime_error naming the problem.
void prepare_socket_dir(const std::string& dir, int gid);
// The rules above for an existing `dir` with its stat: "" or the problem
// (also used, read-only, by --check-config).
std::string socket_dir_problem(const std::string& dir, const struct stat& st);

// Resolves a group name to a gid; throws std::runtime_error when unknown.
int lookup_group(const std::string& name);

class RpcServer {
 public:
  RpcServer(boost::asio::io_context& io, Service& service, ServerOptions options);
  ~RpcServer();
  RpcServer(const RpcServer&) = delete;
  RpcServer& operator=(const RpcServer&) = delete;

  // Prepares the directory, binds (mode 0660), listens and starts accepting.
  // Refuses (throws std::runtime_error) when another daemon answers on the
  // path; removes a stale socket file left by a dead one.
  void start();
  // Closes the listener and every connection and removes the socket file.
  // Safe to call twice and from any thread.
  void stop();

  std::size_t connection_count() const;

  class Impl;

 private:
  std::shared_ptr<Impl> impl_;
};

}  // namespace junco::daemon
