// ctest: RUN_SERIAL (bounds on publish time and on when the server closes a silent client)
// The JSON-RPC server on a real Unix socket, in front of a fake Service:
// permissions, peer credentials, bad input, concurrency, subscriptions.
// Error codes are those of the JSON-RPC 2.0 specification, section 5.1.
#include "tests/integration/daemon_api_test_support.hpp"

#include <catch2/catch.hpp>

#include <grp.h>
#include <sys/stat.h>

#include <atomic>
#include <thread>

using namespace junco;
using junco::cli::RpcClient;
using junco::test::FakeService;
using junco::test::RunningServer;
namespace fs = std::filesystem;

namespace {

daemon::ServerOptions options_in(const fs::path& dir) {
  daemon::ServerOptions o;
  o.socket_path = (dir / "run" / "juncod.sock").string();
  return o;
}

mode_t mode_of(const fs::path& p) {
  struct stat st{};
  REQUIRE(::stat(p.c_str(), &st) == 0);
  return st.st_mode & 07777;
}

int error_code(const daemon::Json& reply) { return reply.at("error").at("code").get<int>(); }

}  // namespace

TEST_CASE("socket file is 0660 in a 0750 directory the server creates", "[rpc][socket]") {
  const auto dir = test::scratch_dir("perm");
  FakeService service;
  {
    RunningServer s(service, options_in(dir));
    CHECK(mode_of(dir / "run") == 0750);
    CHECK(mode_of(dir / "run" / "juncod.sock") == 0660);
    RpcClient c((dir / "run" / "juncod.sock").string());
    CHECK(c.request("daemon.status")["result"]["version"] == "test");
  }
  CHECK_FALSE(fs::exists(dir / "run" / "juncod.sock"));  // removed on stop
  fs::remove_all(dir);
}

TEST_CASE("socket group is applied to the socket file", "[rpc][socket]") {
  const auto dir = test::scratch_dir("grp");
  FakeService service;
  auto o = options_in(dir);
  // A group this process belongs to, so chown is permitted for any user.
  const gid_t gid = ::getegid();
  const auto* gr = ::getgrgid(gid);
  REQUIRE(gr != nullptr);
  o.group = gr->gr_name;
  RunningServer s(service, o);
  struct stat st{};
  REQUIRE(::stat(o.socket_path.c_str(), &st) == 0);
  CHECK(st.st_gid == gid);
  CHECK_THROWS_WITH(daemon::lookup_group("no-such-group-junco"), Catch::Contains("unknown group"));
  fs::remove_all(dir);
}

TEST_CASE("server refuses a world-accessible or foreign socket directory", "[rpc][socket]") {
  const auto dir = test::scratch_dir("world");
  fs::create_directories(dir / "run");
  ::chmod((dir / "run").c_str(), 0777);
  FakeService service;
  boost::asio::io_context io;
  daemon::RpcServer server(io, service, options_in(dir));
  CHECK_THROWS_WITH(server.start(), Catch::Contains("lets every user in"));
  ::chmod((dir / "run").c_str(), 0755);  // world can still enter: refused too
  CHECK_THROWS_WITH(server.start(), Catch::Contains("0755"));
  if (::geteuid() == 0) {
    ::chmod((dir / "run").c_str(), 0750);
    REQUIRE(::chown((dir / "run").c_str(), 65534, static_cast<gid_t>(-1)) == 0);  // nobody
    CHECK_THROWS_WITH(server.start(), Catch::Contains("owned by uid 65534"));
  }
  fs::remove_all(dir);
}

TEST_CASE("a second server on a live socket is refused; a stale socket is replaced", "[rpc][socket]") {
  const auto dir = test::scratch_dir("stale");
  FakeService service;
  {
    RunningServer first(service, options_in(dir));
    boost::asio::io_context io;
    daemon::RpcServer second(io, service, options_in(dir));
    CHECK_THROWS_WITH(second.start(), Catch::Contains("already listening"));
  }
  // Leave a socket file with nobody behind it, as a SIGKILLed daemon does.
  {
    boost::asio::io_context io;
    boost::asio::local::stream_protocol::acceptor a(io, boost::asio::local::stream_protocol::endpoint(options_in(dir).socket_path));
  }
  REQUIRE(fs::exists(options_in(dir).socket_path));
  RunningServer again(service, options_in(dir));
  RpcClient c(options_in(dir).socket_path);
  CHECK(c.request("daemon.status").contains("result"));
  fs::remove_all(dir);
}

TEST_CASE("peer credentials reach the Service as the Caller", "[rpc][socket]") {
  const auto dir = test::scratch_dir("cred");
  FakeService service;
  RunningServer s(service, options_in(dir));
  RpcClient c(options_in(dir).socket_path);
  const auto r = c.request("test.caller")["result"];
  CHECK(r["pid"] == ::getpid());
  CHECK(r["uid"] == static_cast<int>(::geteuid()));
  CHECK(r["gid"] == static_cast<int>(::getegid()));
  fs::remove_all(dir);
}

TEST_CASE("bad input gets the proper error and the connection goes on", "[rpc][socket]") {
  const auto dir = test::scratch_dir("bad");
  FakeService service;
  auto o = options_in(dir);
  RunningServer s(service, o);
  RpcClient c(o.socket_path);
  const auto still_alive = [&] { CHECK(c.request("daemon.status", {}, 99)["id"] == 99); };

  c.send_raw("{this is not json\n");
  auto r = c.read_json();
  CHECK(error_code(r) == -32700);
  CHECK(r["id"].is_null());
  still_alive();

  c.send_raw("[1,\"x\"]\n");  // batch of non-requests
  r = c.read_json();
  REQUIRE(r.is_array());
  CHECK(r.size() == 2);
  CHECK(error_code(r[0]) == -32600);
  still_alive();

  c.send_raw(R"({"jsonrpc":"2.0","id":5,"params":{}})" "\n");
  r = c.read_json();
  CHECK(error_code(r) == -32600);
  CHECK(r["id"] == 5);
  CHECK_THAT(r["error"]["message"].get<std::string>(), Catch::Contains("method"));

  r = c.request("no.such.method", {}, 6);
  CHECK(error_code(r) == -32601);
  CHECK_THAT(r["error"]["message"].get<std::string>(), Catch::Contains("no.such.method"));

  r = c.request("job.get", {{"job_id", 42}}, 7);
  CHECK(error_code(r) == static_cast<int>(daemon::RpcCode::not_found));
  CHECK(r["error"]["message"] == "no job with id 42");

  r = c.request("job.get", {{"job_id", "one"}}, 8);  // wrong type inside the Service
  CHECK(error_code(r) == -32602);

  r = c.request("test.internal", {}, 9);
  CHECK(error_code(r) == -32603);
  still_alive();
  fs::remove_all(dir);
}

TEST_CASE("an overlong line is refused and discarded up to its newline", "[rpc][socket]") {
  const auto dir = test::scratch_dir("long");
  FakeService service;
  auto o = options_in(dir);
  o.max_line_bytes = 1u << 20;  // the default, stated for the reader
  RunningServer s(service, o);
  RpcClient c(o.socket_path);
  // 3 MiB of a syntactically valid-looking request, in pieces, then a newline.
  std::string big = R"({"jsonrpc":"2.0","id":1,"method":"test.echo","params":{"x":")";
  c.send_raw(big);
  const std::string chunk(64 * 1024, 'a');
  for (int i = 0; i < 48; ++i) c.send_raw(chunk);
  c.send_raw("\"}}\n");
  auto r = c.read_json();
  CHECK(error_code(r) == -32600);
  CHECK_THAT(r["error"]["message"].get<std::string>(), Catch::Contains("longer than 1048576 bytes"));
  // The next message on the same connection is served normally.
  CHECK(c.request("test.echo", {{"x", "small"}}, 2)["result"]["x"] == "small");
  fs::remove_all(dir);
}

TEST_CASE("batches are answered in one array; notifications get no reply", "[rpc][socket]") {
  const auto dir = test::scratch_dir("batch");
  FakeService service;
  RunningServer s(service, options_in(dir));
  RpcClient c(options_in(dir).socket_path);
  c.send_raw(R"([{"jsonrpc":"2.0","id":1,"method":"test.echo","params":{"a":1}},)"
             R"({"jsonrpc":"2.0","method":"test.echo","params":{"note":true}},)"
             R"({"jsonrpc":"2.0","id":2,"method":"nope"}])" "\n");
  auto r = c.read_json();
  REQUIRE(r.is_array());
  REQUIRE(r.size() == 2);
  CHECK(r[0]["result"]["a"] == 1);
  CHECK(error_code(r[1]) == -32601);
  // A lone notification: executed, no reply at all.
  const int before = service.calls;
  c.send_raw(R"({"jsonrpc":"2.0","method":"test.echo"})" "\n");
  CHECK_FALSE(c.read_line(std::chrono::milliseconds(200)));
  CHECK(service.calls == before + 1);
  fs::remove_all(dir);
}

TEST_CASE("many concurrent clients, one slow, all answered correctly", "[rpc][socket]") {
  const auto dir = test::scratch_dir("many");
  FakeService service;
  RunningServer s(service, options_in(dir), 4);
  RpcClient slow(options_in(dir).socket_path);
  slow.send_raw(R"({"jsonrpc":"2.0","id":1,"method":"test.sleep","params":{"s":0.5}})" "\n");

  constexpr int clients = 32, per_client = 100;
  std::atomic<int> good{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < clients; ++t)
    threads.emplace_back([&, t] {
      RpcClient c(options_in(dir).socket_path);
      for (int i = 0; i < per_client; ++i) {
        const int id = t * 1000 + i;
        const auto r = c.request("test.echo", {{"t", t}, {"i", i}}, id);
        if (r["id"] == id && r["result"]["t"] == t && r["result"]["i"] == i) ++good;
      }
    });
  for (auto& th : threads) th.join();
  CHECK(good == clients * per_client);
  CHECK(slow.read_json()["result"]["slept"] == true);
  fs::remove_all(dir);
}

TEST_CASE("subscribers get notifications filtered by kind", "[rpc][events]") {
  const auto dir = test::scratch_dir("events");
  FakeService service;
  RunningServer s(service, options_in(dir));
  RpcClient all(options_in(dir).socket_path), progress_only(options_in(dir).socket_path);
  CHECK(all.request("events.subscribe")["result"]["kinds"].size() == 3);
  CHECK(progress_only.request("events.subscribe", {{"kinds", {"job.progress"}}})["result"]["kinds"] ==
        daemon::Json::array({"job.progress"}));
  CHECK(error_code(all.request("events.subscribe", {{"kinds", {"job.everything"}}})) == -32602);

  service.bus.publish({"job.state", {{"job_id", 1}, {"state", "running"}}});
  service.bus.publish({"job.progress", {{"job_id", 1}, {"points_done", 3}}});
  auto n = all.read_json();
  CHECK(n["method"] == "job.state");
  CHECK_FALSE(n.contains("id"));
  CHECK(all.read_json()["method"] == "job.progress");
  n = progress_only.read_json();
  CHECK(n["method"] == "job.progress");
  CHECK(n["params"]["points_done"] == 3);

  CHECK(all.request("events.unsubscribe", {}, 3)["result"]["kinds"].empty());
  service.bus.publish({"job.progress", {{"job_id", 1}, {"points_done", 4}}});
  CHECK(progress_only.read_json()["params"]["points_done"] == 4);
  CHECK_FALSE(all.read_line(std::chrono::milliseconds(200)));
  fs::remove_all(dir);
}

TEST_CASE("a subscriber that does not read is dropped; the publisher never waits", "[rpc][events]") {
  const auto dir = test::scratch_dir("slow");
  FakeService service;
  auto o = options_in(dir);
  o.max_queued_messages = 64;
  std::vector<std::string> logs;
  std::mutex log_mutex;
  o.log = [&](std::string_view level, std::string_view msg) {
    std::lock_guard lock(log_mutex);
    logs.push_back(std::string(level) + ": " + std::string(msg));
  };
  RunningServer s(service, o);
  RpcClient stuck(o.socket_path), healthy(o.socket_path);
  stuck.request("events.subscribe");
  REQUIRE(service.bus.subscriber_count() == 1);

  // ~16 KiB notifications: the socket buffers fill quickly, then the queue.
  const std::string padding(16 * 1024, 'p');
  const auto t0 = std::chrono::steady_clock::now();
  for (int i = 0; i < 2000; ++i) service.bus.publish({"point.added", {{"i", i}, {"pad", padding}}});
  const auto publish_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  CHECK(publish_s < 1.0);  // bounded work per event, no waiting on the client

  for (int i = 0; i < 100 && service.bus.subscriber_count() != 0; ++i) std::this_thread::sleep_for(std::chrono::milliseconds(10));
  CHECK(service.bus.subscriber_count() == 0);
  {
    std::lock_guard lock(log_mutex);
    bool logged = false;
    for (const auto& l : logs) logged = logged || l.find("dropping subscriber") != std::string::npos;
    CHECK(logged);
  }
  CHECK(healthy.request("daemon.status").contains("result"));  // the daemon goes on
  fs::remove_all(dir);
}

namespace {
// True when the server closed the connection within `within` (end of stream).
bool closed_by_server(RpcClient& c, std::chrono::milliseconds within) {
  pollfd p{c.fd(), POLLIN, 0};
  if (::poll(&p, 1, static_cast<int>(within.count())) <= 0) return false;
  char byte;
  return ::recv(c.fd(), &byte, 1, MSG_PEEK | MSG_DONTWAIT) == 0;
}
}  // namespace

TEST_CASE("a silent client is closed after the idle timeout; talkers and subscribers stay", "[rpc][socket]") {
  const auto dir = test::scratch_dir("idle");
  FakeService service;
  auto o = options_in(dir);
  o.idle_timeout_ms = 300;
  RunningServer s(service, o);
  RpcClient silent(o.socket_path), talker(o.socket_path), subscriber(o.socket_path);
  CHECK(subscriber.request("events.subscribe")["result"]["kinds"].size() == 3);
  // The talker sends every 100 ms for a second: never idle for 300 ms.
  for (int i = 0; i < 10; ++i) {
    CHECK(talker.request("test.echo", {{"i", i}})["result"]["i"] == i);
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  CHECK(closed_by_server(silent, std::chrono::milliseconds(2000)));
  CHECK_FALSE(closed_by_server(talker, std::chrono::milliseconds(0)));
  CHECK_FALSE(closed_by_server(subscriber, std::chrono::milliseconds(0)));
  // The silent subscriber still gets its events, and answers.
  service.bus.publish({"job.state", {{"job_id", 1}, {"state", "done"}}});
  CHECK(subscriber.read_json()["method"] == "job.state");
  CHECK(subscriber.request("test.echo", {{"x", 1}})["result"]["x"] == 1);
}
