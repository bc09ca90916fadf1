// The config's server.idle_timeout_s reaches a real juncod's socket: a silent
// client is closed after it (and the log says so), a subscriber is not.
// The server-side policy itself is tested in daemon_api_socket_test.cpp.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <poll.h>
#include <sys/socket.h>

#include <chrono>
#include <fstream>
#include <sstream>

using namespace junco;
using Json = nlohmann::json;

namespace {
bool closed_by_server(cli::RpcClient& c, std::chrono::milliseconds within) {
  pollfd p{c.fd(), POLLIN, 0};
  if (::poll(&p, 1, static_cast<int>(within.count())) <= 0) return false;
  char byte;
  return ::recv(c.fd(), &byte, 1, MSG_PEEK | MSG_DONTWAIT) == 0;
}
}  // namespace

TEST_CASE("juncod closes silent clients after the config's idle timeout", "[daemon][config]") {
  test::BenchDaemonOptions options;
  options.roles = {"source", "meter", "scanner"};
  options.extra = {{"server", {{"idle_timeout_s", 0.3}}}};
  test::BenchDaemon b("idle-config", {"--settle-ms", "0"}, options);
  cli::RpcClient silent(b.socket()), subscriber(b.socket());
  CHECK(subscriber.request("events.subscribe")["result"].contains("kinds"));
  CHECK(closed_by_server(silent, std::chrono::milliseconds(3000)));
  CHECK_FALSE(closed_by_server(subscriber, std::chrono::milliseconds(500)));
  CHECK(subscriber.request("daemon.status")["result"].contains("version"));
  std::ifstream log(b.dir() / "juncod.log");
  std::stringstream text;
  text << log.rdbuf();
  CHECK(text.str().find("sent nothing for 0.300 s") != std::string::npos);
}
