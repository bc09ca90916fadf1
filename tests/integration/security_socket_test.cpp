// juncod's security promises, checked on a real daemon process with a real
// junco-sim bench: local socket only (no TCP listener), 0660 socket in a 0750
// directory owned by the configured group, clients outside that group refused
// by the kernel (EACCES), SO_PEERCRED recorded with each job submission, no
// request param that names a file or a safety limit passes, and SQL-looking
// labels stored verbatim (bound parameters only).
//
// Needs root (CI runs as root) to drop to other uids in forked children;
// without it the uid-switching cases are skipped with a warning.
#include "tests/integration/abuse_bench_support.hpp"

#include <catch2/catch.hpp>

#include <grp.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/un.h>
#include <sys/wait.h>

#include <map>
#include <set>

using namespace junco;
using junco::test::Json;
using junco::test::LiveBench;
using junco::cli::RpcClient;
namespace fs = std::filesystem;

namespace {

constexpr uid_t kNobody = 65534;      // Debian's nobody
constexpr gid_t kNogroup = 65534;     // Debian's nogroup: the socket group in these tests
constexpr uid_t kOutsider = 65533;    // a uid/gid with no group membership at all

// Socket inodes of a process's open descriptors ("socket:[12345]").
std::set<std::string> socket_inodes(pid_t pid) {
  std::set<std::string> out;
  for (const auto& e : fs::directory_iterator("/proc/" + std::to_string(pid) + "/fd")) {
    std::error_code ec;
    const auto target = fs::read_symlink(e.path(), ec).string();
    if (!ec && target.rfind("socket:[", 0) == 0) out.insert(target.substr(8, target.size() - 9));
  }
  return out;
}

// TCP sockets in LISTEN state (st 0A) from /proc/net/tcp and tcp6, inode →
// local port (proc(5): sl local_address rem_address st ... uid timeout inode).
std::map<std::string, int> tcp_listeners() {
  std::map<std::string, int> out;
  for (const char* file : {"/proc/net/tcp", "/proc/net/tcp6"}) {
    std::ifstream in(file);
    std::string line;
    std::getline(in, line);  // header
    while (std::getline(in, line)) {
      std::istringstream f(line);
      std::string sl, local, remote, st, txrx, trwhen, retr, uid, timeout, inode;
      f >> sl >> local >> remote >> st >> txrx >> trwhen >> retr >> uid >> timeout >> inode;
      if (st == "0A") out[inode] = std::stoi(local.substr(local.rfind(':') + 1), nullptr, 16);
    }
  }
  return out;
}

struct ChildResult {
  int connect_errno = -1;  // 0: connected
  std::string reply;       // first reply line, when a request was given
};

// Forks, drops to uid/gid (no supplementary groups), connects to the socket,
// optionally sends one request line and reads one reply line. Only plain
// system calls run in the child.
ChildResult as_user(uid_t uid, gid_t gid, const std::string& socket, const std::string& request_line, pid_t* child_pid = nullptr) {
  int pipe_fds[2];
  REQUIRE(::pipe(pipe_fds) == 0);
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    ::close(pipe_fds[0]);
    int result = 0;
    if (::setgroups(0, nullptr) != 0 || ::setgid(gid) != 0 || ::setuid(uid) != 0) result = 1000;
    const int fd = ::socket(AF_UNIX, SOCK_STREAM, 0);
    sockaddr_un addr{};
    addr.sun_family = AF_UNIX;
    std::strncpy(addr.sun_path, socket.c_str(), sizeof addr.sun_path - 1);
    if (result == 0 && ::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof addr) != 0) result = errno;
    (void)!::write(pipe_fds[1], &result, sizeof result);
    if (result == 0 && !request_line.empty()) {
      (void)!::write(fd, request_line.data(), request_line.size());
      char buf[4096];
      for (;;) {
        const auto n = ::read(fd, buf, sizeof buf);
        if (n <= 0) break;
        (void)!::write(pipe_fds[1], buf, static_cast<std::size_t>(n));
        if (std::memchr(buf, '\n', static_cast<std::size_t>(n))) break;
      }
    }
    ::_exit(0);
  }
  ::close(pipe_fds[1]);
  if (child_pid) *child_pid = pid;
  ChildResult r;
  std::string all;
  char buf[4096];
  for (;;) {
    const auto n = ::read(pipe_fds[0], buf, sizeof buf);
    if (n <= 0) break;
    all.append(buf, static_cast<std::size_t>(n));
  }
  ::close(pipe_fds[0]);
  int status = 0;
  ::waitpid(pid, &status, 0);
  REQUIRE(all.size() >= sizeof(int));
  std::memcpy(&r.connect_errno, all.data(), sizeof(int));
  r.reply = all.substr(sizeof(int));
  if (const auto nl = r.reply.find('\n'); nl != std::string::npos) r.reply.resize(nl);
  return r;
}

std::string request_line(const std::string& method, const Json& params, int id = 1) {
  return Json{{"jsonrpc", "2.0"}, {"id", id}, {"method", method}, {"params", params}}.dump() + "\n";
}

test::LiveBenchOptions grouped() {
  test::LiveBenchOptions o;
  o.socket_group = "nogroup";
  return o;
}

}  // namespace

TEST_CASE("the daemon listens on its Unix socket only, never on TCP", "[security]") {
  LiveBench b("sec-tcp");
  b.start_daemon();
  const auto listening = tcp_listeners();
  // Positive control: the same table does show junco-sim's TCP listeners, so
  // finding none of the daemon's sockets in it below means something.
  std::set<int> ports;
  for (const auto& [inode, port] : listening) ports.insert(port);
  for (const char* role : {"source", "meter", "scanner"}) {
    const auto ep = b.sim.endpoint(role);
    CHECK(ports.count(std::stoi(ep.substr(ep.rfind(':') + 1))) == 1);
  }
  const auto daemon_sockets = socket_inodes(b.daemon_pid());
  CHECK_FALSE(daemon_sockets.empty());
  for (const auto& inode : daemon_sockets) {
    INFO("daemon socket inode " << inode);
    CHECK(listening.count(inode) == 0);
  }
  // And the daemon's listening socket is the Unix one at the configured path
  // (/proc/net/unix: Num RefCount Protocol Flags Type St Inode Path; flags 00010000 = listening).
  std::ifstream unix_table("/proc/net/unix");
  std::string line;
  bool found = false;
  while (std::getline(unix_table, line)) {
    std::istringstream f(line);
    std::string num, ref, proto, flags, type, st, inode, path;
    f >> num >> ref >> proto >> flags >> type >> st >> inode >> path;
    if (path == b.socket() && daemon_sockets.count(inode)) found = flags == "00010000";
  }
  CHECK(found);
}

TEST_CASE("socket file 0660 and directory 0750, both in the configured group", "[security]") {
  LiveBench b("sec-perm", grouped());
  b.start_daemon();
  struct stat sock{}, dir{};
  REQUIRE(::stat(b.socket().c_str(), &sock) == 0);
  REQUIRE(::stat((b.dir / "run").c_str(), &dir) == 0);
  CHECK(S_ISSOCK(sock.st_mode));
  CHECK((sock.st_mode & 07777) == 0660);
  CHECK(S_ISDIR(dir.st_mode));
  CHECK((dir.st_mode & 07777) == 0750);
  CHECK(sock.st_gid == kNogroup);
  CHECK(dir.st_gid == kNogroup);
  CHECK(dir.st_uid == ::geteuid());
}

TEST_CASE("a client outside the socket's group is refused by the kernel; one inside is served", "[security]") {
  if (::geteuid() != 0) {
    WARN("not root: cannot switch uid to test group access; skipped");
    return;
  }
  LiveBench b("sec-group", grouped());
  b.start_daemon();
  ::chmod(b.dir.c_str(), 0755);  // the scratch dir itself must not be what stops the outsider
  const auto outsider = as_user(kOutsider, kOutsider, b.socket(), "");
  CHECK(outsider.connect_errno == EACCES);
  // nobody is in nogroup only, so the group bits are what let it in.
  const auto member = as_user(kNobody, kNogroup, b.socket(), request_line("daemon.status", Json::object()));
  CHECK(member.connect_errno == 0);
  CHECK(Json::parse(member.reply).contains("result"));
}

TEST_CASE("each job submission records the peer's SO_PEERCRED uid and pid", "[security]") {
  if (::geteuid() != 0) {
    WARN("not root: cannot submit as another uid; skipped");
    return;
  }
  LiveBench b("sec-cred", grouped());
  b.start_daemon();
  ::chmod(b.dir.c_str(), 0755);
  pid_t child = -1;
  const auto r = as_user(kNobody, kNogroup, b.socket(), request_line("job.submit", {{"plan", test::sweep_plan("CRED", 1, 5, 0.0)}}), &child);
  REQUIRE(r.connect_errno == 0);
  const auto reply = Json::parse(r.reply);
  REQUIRE(reply.contains("result"));
  const long job = reply["result"]["job_id"];
  RpcClient c(b.socket());
  const auto j = c.request("job.get", {{"job_id", job}})["result"];
  CHECK(j["submitted_by"]["uid"] == kNobody);
  CHECK(j["submitted_by"]["pid"] == child);
  const std::string expect = "job " + std::to_string(job) + ": submitted by uid 65534 pid " + std::to_string(child);
  INFO("log: " << b.log_text());
  CHECK(b.log_text().find(expect) != std::string::npos);
  // The same uid stored in the database file itself.
  const std::string db = (b.dir / "junco.db").string();
  LiveBench::wait_final(c, job, std::chrono::seconds(60));
  test::ChildProcess q({"/usr/bin/sqlite3", "-readonly", db, "SELECT submitted_uid, submitted_pid FROM jobs WHERE id = " + std::to_string(job)});
  CHECK(q.read_line(std::chrono::seconds(5)).value_or("") == "65534|" + std::to_string(child));
}

TEST_CASE("no request param names a file: path-like params are refused and nothing is written", "[security]") {
  // No method writes a file: part.export returns the document in the reply
  // ("content"); the client decides where it goes. Params that try to steer
  // a file anyway are unknown params → -32602, never silently ignored.
  LiveBench b("sec-path");
  b.start_daemon();
  RpcClient c(b.socket());
  const long job = b.submit(c, test::sweep_plan("PATHS", 1, 20, 0.0));
  REQUIRE(LiveBench::wait_final(c, job, std::chrono::seconds(60))["state"] == "done");
  const long part = c.request("part.list", {{"lot", "PATHS"}})["result"]["parts"][0]["part_id"];
  const auto files_before = [&] {
    std::set<std::string> s;
    for (const auto& e : fs::recursive_directory_iterator(b.dir)) s.insert(e.path().filename().string());
    return s;
  }();
  const std::string escape = (b.dir / "run" / ".." / ".." / "escaped.csv").string();
  for (const char* key : {"path", "file", "filename", "out", "dir", "output"}) {
    for (const std::string& value : {escape, std::string("../../escaped.csv"), std::string("/etc/junco-escaped")}) {
      const auto r = c.request("part.export", {{"part_id", part}, {"format", "csv"}, {key, value}});
      INFO(key << "=" << value << " → " << r.dump().substr(0, 200));
      CHECK(r["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
      CHECK(r["error"]["data"]["field"] == key);
    }
  }
  // The format is a closed set, not a file name or extension.
  for (const char* format : {"../../etc/passwd", "csv/../../x", "json/", ""}) {
    const auto r = c.request("part.export", {{"part_id", part}, {"format", format}});
    CHECK(r["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
  }
  CHECK_FALSE(fs::exists(b.dir / "escaped.csv"));
  CHECK_FALSE(fs::exists(fs::temp_directory_path() / "escaped.csv"));
  CHECK_FALSE(fs::exists("/etc/junco-escaped"));
  std::set<std::string> files_after;
  for (const auto& e : fs::recursive_directory_iterator(b.dir)) files_after.insert(e.path().filename().string());
  CHECK(files_after == files_before);
}

TEST_CASE("SQL-looking labels, lots and ids are stored verbatim and change nothing else", "[security]") {
  LiveBench b("sec-sql");
  b.start_daemon();
  RpcClient c(b.socket());
  const std::vector<std::string> labels{"R1'); DROP TABLE parts; --", "R2\" OR \"1\"=\"1", "R3'; DELETE FROM jobs WHERE '1'='1",
                                        "R4 %_ \\ ' \"", "R5; ATTACH DATABASE '/tmp/x.db' AS x; --"};
  const std::string lot = "LOT'); UPDATE jobs SET state='done'; --";
  Json plan = test::sweep_plan("unused", 1, 6, 0.0);
  plan["lot"] = lot;
  plan["parts"] = Json::array();
  for (std::size_t i = 0; i < labels.size(); ++i) plan["parts"].push_back({{"slot", i + 1}, {"label", labels[i]}});
  // A job that stays queued behind the first, to see that no statement touched it.
  plan["sweep"]["count"] = 40;
  const long job = b.submit(c, plan);
  const long other = b.submit(c, test::sweep_plan("PLAIN", 1, 4, 0.0));
  REQUIRE(c.request("job.pause", {{"job_id", other}}).contains("result"));
  REQUIRE(LiveBench::wait_final(c, job, std::chrono::seconds(60))["state"] == "done");

  const auto parts = c.request("part.list", {{"lot", lot}})["result"]["parts"];
  REQUIRE(parts.size() == labels.size());
  std::set<std::string> stored;
  for (const auto& p : parts) {
    stored.insert(p["label"].get<std::string>());
    CHECK(p["lot"] == lot);
  }
  CHECK(stored == std::set<std::string>(labels.begin(), labels.end()));
  // Lookups with injection text match nothing rather than everything.
  for (const char* probe : {"' OR '1'='1", "\" OR 1=1 --", "%", "LOT'"})
    CHECK(c.request("part.list", {{"lot", probe}})["result"]["parts"].empty());
  CHECK(c.request("job.list", {{"state", "done' OR '1'='1"}})["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
  CHECK(c.request("job.get", {{"job_id", "1 OR 1=1"}})["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
  // The paused job is still paused; every table is still there.
  CHECK(c.request("job.get", {{"job_id", other}})["result"]["state"] == "paused");
  // (A job's lot and parts are created when it starts, so only the first's exist.)
  CHECK(c.request("lot.list")["result"]["lots"].size() == 1);
  test::ChildProcess q({"/usr/bin/sqlite3", "-readonly", (b.dir / "junco.db").string(),
                        "SELECT count(*) FROM parts; SELECT count(*) FROM jobs; SELECT count(*) FROM sqlite_master WHERE name='parts';"});
  CHECK(q.read_line(std::chrono::seconds(5)).value_or("") == std::to_string(labels.size()));
  CHECK(q.read_line(std::chrono::seconds(5)).value_or("") == "2");
  CHECK(q.read_line(std::chrono::seconds(5)).value_or("") == "1");
  CHECK_FALSE(fs::exists("/tmp/x.db"));
}

TEST_CASE("no request changes a safety limit", "[security]") {
  LiveBench b("sec-limits");
  b.start_daemon();
  RpcClient c(b.socket());
  const auto limits_before = c.request("bench.describe")["result"]["safety"];
  REQUIRE(limits_before["current_limit_a"] == 0.05);

  // Limit-looking fields in the plan are unknown fields (the plan schema is closed).
  for (const auto& [key, value] : std::vector<std::pair<std::string, Json>>{
           {"safety", {{"current_limit_a", 1.0}, {"max_supply_v", 100.0}}},
           {"current_limit_a", 1.0},
           {"max_supply_v", 100.0},
           {"max_power_w", 10.0},
           {"max_job_s", 1e9},
           {"override", true}}) {
    Json plan = test::sweep_plan("LIMITS", 1, 5, 0.0);
    plan[key] = value;
    const auto r = c.request("job.submit", {{"plan", plan}});
    INFO("plan." << key << " → " << r.dump().substr(0, 200));
    CHECK(r["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
  }
  // Limit-looking params beside the plan are unknown params.
  for (const char* key : {"safety", "current_limit_a", "max_supply_v", "force", "config"}) {
    const auto r = c.request("job.submit", {{"plan", test::sweep_plan("LIMITS", 1, 5, 0.0)}, {key, {{"current_limit_a", 1.0}}}});
    INFO(key << " → " << r.dump().substr(0, 200));
    CHECK(r["error"]["code"] == static_cast<int>(daemon::RpcCode::invalid_params));
  }
  // A compliance above the bench's limit is refused naming the limit.
  Json hot = test::sweep_plan("LIMITS", 1, 5, 0.0);
  hot["sweep"]["compliance_a"] = 1.0;
  const auto refused = c.request("job.submit", {{"plan", hot}});
  CHECK(refused["error"]["code"] == static_cast<int>(daemon::RpcCode::plan_refused));
  CHECK(refused["error"]["data"]["limit"] == "current_limit_a");
  // There is no method that sets anything about the bench.
  for (const char* method : {"bench.configure", "safety.set", "config.set", "bench.set_limits", "daemon.reload"})
    CHECK(c.request(method, {{"current_limit_a", 1.0}})["error"]["code"] == static_cast<int>(daemon::RpcCode::method_not_found));
  CHECK(c.request("job.list")["result"]["jobs"].empty());  // nothing slipped through

  // A job still runs under the configured limit, as programmed into the supply.
  const long job = b.submit(c, test::sweep_plan("LIMITS", 1, 5, 0.0));
  REQUIRE(LiveBench::wait_final(c, job, std::chrono::seconds(60))["state"] == "done");
  CHECK(c.request("bench.describe")["result"]["safety"] == limits_before);
  CHECK(b.sim.control("state?")["source"]["current_limit_a"].get<double>() <= 0.05);
}
