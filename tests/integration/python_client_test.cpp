// tools/python (junco_client and examples/lot_to_csv.py) against a real
// juncod + junco-sim: the CSV must carry exactly the daemon's fitted values;
// the package installs offline into a venv and its wrappers, timeouts,
// threads, id-null errors and notifications work (tests/python/exercise_client.py);
// its wrappers cover schema/api and its version is CMake's (tests/python/check_wrappers.py).
// Runs /usr/bin/python3 (Debian's: python3-pip, python3-venv from tools/setup).
#include "protocol/framing.hpp"  // default_socket_path: junco's rule
#include "tests/support/bench_daemon.hpp"

#include <grp.h>
#include <sched.h>
#include <sys/mount.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <sys/wait.h>

#include <catch2/catch.hpp>

#include <algorithm>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <sstream>

using namespace junco;
namespace fs = std::filesystem;

namespace {

std::vector<std::string> split(const std::string& line) {
  std::vector<std::string> out;
  std::stringstream s(line);
  for (std::string cell; std::getline(s, cell, ',');) out.push_back(cell);
  return out;
}

struct Run {
  int status = -1;
  std::string out;  // stdout and stderr
};

// A shell command, output captured (stderr too).
Run run(const std::string& cmd) {
  Run r;
  FILE* p = ::popen((cmd + " 2>&1").c_str(), "r");
  if (!p) return r;
  char buf[4096];
  std::size_t n;
  while ((n = std::fread(buf, 1, sizeof buf, p)) > 0) r.out.append(buf, n);
  const int st = ::pclose(p);
  r.status = WIFEXITED(st) ? WEXITSTATUS(st) : -1;
  return r;
}

std::string quote(const std::string& s) { return "'" + s + "'"; }

const std::string kSource = JUNCO_SOURCE_DIR;
// pip as on a machine without network or pip settings (--no-index on the command line too).
const std::string kOfflinePip = "env -u PIP_FIND_LINKS -u PIP_INDEX_URL -u PIP_EXTRA_INDEX_URL PIP_CONFIG_FILE=/dev/null ";

}  // namespace

TEST_CASE("lot_to_csv.py writes the lot's fits as the daemon reports them", "[python]") {
  if (::access("/usr/bin/python3", X_OK) != 0) FAIL("/usr/bin/python3 is required (tools/setup installs it)");
  test::BenchDaemonOptions bench;
  bench.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("py", {"--settle-ms", "0"}, bench);
  const auto& dir = b.dir();
  const auto sock = b.socket();
  auto& c = b.client();
  b.run_plan({{"lot", "PY-LOT"},
              {"parts", {{{"slot", 1}, {"label", "PY-1"}}, {{"slot", 2}, {"label", "PY-2"}}, {{"slot", 3}, {"label", "PY-3"}}}},
              {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", 12}, {"settle_s", 0.0}}}});

  const auto csv = dir / "lot.csv";
  test::ChildProcess py({"/usr/bin/python3", std::string(JUNCO_SOURCE_DIR) + "/tools/python/examples/lot_to_csv.py", "PY-LOT",
                         csv.string(), "--socket", sock, "--at", "0.001,0.01"});
  const auto said = py.read_line(std::chrono::seconds(30));
  REQUIRE(py.wait(std::chrono::seconds(30)).value_or(-1) == 0);
  CHECK_THAT(said.value_or(""), Catch::Contains("3 part(s) of PY-LOT"));

  std::ifstream in(csv);
  std::string line;
  REQUIRE(std::getline(in, line));
  const auto header = split(line);
  const auto col = [&](const std::string& name) {
    const auto it = std::find(header.begin(), header.end(), name);
    REQUIRE(it != header.end());
    return static_cast<std::size_t>(it - header.begin());
  };
  int rows = 0;
  while (std::getline(in, line)) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    const auto cells = split(line);
    const long part_id = std::stol(cells[col("part_id")]);
    const auto fit = c.request("part.fit", {{"part_id", part_id}})["result"];
    const auto figs = c.request("part.figures", {{"part_id", part_id}, {"currents_a", {0.001, 0.01}}})["result"]["figures"];
    CHECK(cells[col("status")] == fit["status"].get<std::string>());
    CHECK(std::stod(cells[col("is_a")]) == Approx(fit["is_a"]["value"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("n_se")]) == Approx(fit["n"]["std_error"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("rs_ohm")]) == Approx(fit["rs_ohm"]["value"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("vf_v@0.01A")]) == Approx(figs[1]["vf_v"]["value"].get<double>()).epsilon(1e-12));
    CHECK(std::stod(cells[col("rd_ohm@0.001A")]) == Approx(figs[0]["rd_ohm"]["value"].get<double>()).epsilon(1e-12));
    ++rows;
  }
  CHECK(rows == 3);

  // The client's error path: an unknown lot is reported, exit 1.
  test::ChildProcess missing({"/usr/bin/python3", std::string(JUNCO_SOURCE_DIR) + "/tools/python/examples/lot_to_csv.py", "NO-SUCH-LOT",
                              (dir / "none.csv").string(), "--socket", sock});
  CHECK(missing.wait(std::chrono::seconds(30)).value_or(-1) == 1);
  CHECK(b.daemon().stop() == 0);
}

TEST_CASE("junco_client has one typed wrapper per schema/api method and the CMake project version", "[python]") {
  const auto r = run("/usr/bin/python3 -I -B " + quote(kSource + "/tests/python/check_wrappers.py") + " " + quote(kSource));
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK_THAT(r.out, Catch::Contains("wrappers, version"));
}

TEST_CASE("the junco_client package installs offline into a venv and works against juncod", "[python]") {
  test::BenchDaemonOptions bench;
  bench.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("pypkg", {"--settle-ms", "0"}, bench);
  const auto& dir = b.dir();
  b.run_plan({{"lot", "PY-PKG"},
              {"parts", {{{"slot", 1}, {"label", "PYP-1"}}, {{"slot", 2}, {"label", "PYP-2"}}, {{"slot", 3}, {"label", "PYP-3"}}}},
              {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-6}, {"stop", 0.02}, {"count", 12}, {"settle_s", 0.0}}}});

  // Install from a copy, so the build leaves nothing in the source tree;
  // no index and no pip config: what a machine without network has.
  fs::create_directories(dir / "src");
  for (const char* f : {"pyproject.toml", "junco_client.py", "README.md"})
    fs::copy_file(kSource + "/tools/python/" + f, dir / "src" / f);
  const auto venv = dir / "venv";
  const auto mk = run("/usr/bin/python3 -m venv --without-pip --system-site-packages " + quote(venv.string()));
  INFO(mk.out);
  REQUIRE(mk.status == 0);
  const auto py = (venv / "bin" / "python").string();
  const auto pip = run("cd " + quote(dir.string()) + " && " + kOfflinePip + quote(py) +
                       " -m pip install --no-build-isolation --no-index --no-deps --disable-pip-version-check " +
                       quote((dir / "src").string()));
  INFO(pip.out);
  REQUIRE(pip.status == 0);
  REQUIRE(fs::exists(venv / "lib"));
  // The other documented way: Debian's pip into a directory (no venv).
  const auto target = dir / "target";
  const auto tpip = run("cd " + quote(dir.string()) + " && " + kOfflinePip + "/usr/bin/python3 -m pip install "
                        "--no-build-isolation --no-index --no-deps --disable-pip-version-check --target " +
                        quote(target.string()) + " " + quote((dir / "src").string()));
  INFO(tpip.out);
  REQUIRE(tpip.status == 0);
  const auto tver = run("PYTHONPATH=" + quote(target.string()) +
                        " /usr/bin/python3 -B -c 'import junco_client as j, importlib.metadata as m; "
                        "print(j.__file__, m.version(\"junco-client\") == j.__version__)'");
  CHECK_THAT(tver.out, Catch::Contains((target / "junco_client.py").string() + " True"));

  // -I: the source tree is not on sys.path; the script checks where it imported from.
  const auto ex = run("cd " + quote(dir.string()) + " && " + quote(py) + " -I -B " +
                      quote(kSource + "/tests/python/exercise_client.py") + " main " + quote(b.socket()) + " PY-PKG");
  INFO(ex.out);
  REQUIRE(ex.status == 0);
  for (const char* step : {"ok install:", "ok wrappers:", "ok timeouts:", "ok partial line:", "ok threads:", "ok id-null errors:",
                           "ok notifications:"})
    CHECK_THAT(ex.out, Catch::Contains(step));
  // The values the wrappers returned are the daemon's (checked with the C++ client).
  const auto last = ex.out.substr(ex.out.rfind('{'));
  const auto got = nlohmann::json::parse(last);
  const auto fit = b.result("part.fit", {{"part_id", got["part_id"]}});
  const auto figs = b.result("part.figures", {{"part_id", got["part_id"]}, {"currents_a", {0.01}}})["figures"];
  CHECK(got["fit_id"] == fit["fit_id"]);
  CHECK(got["n"].get<double>() == fit["n"]["value"].get<double>());
  CHECK(got["is_a"].get<double>() == fit["is_a"]["value"].get<double>());
  CHECK(got["vf_v@0.01A"].get<double>() == figs[0]["vf_v"]["value"].get<double>());
  REQUIRE(b.daemon().stop() == 0);

  // "server busy": the same juncod with 128 descriptors (max clients =
  // RLIMIT_NOFILE / 2 = 64, daemon/rpc_server.hpp) refuses the 65th client
  // with an id-null error. (With far fewer, accept() itself runs out of
  // descriptors first and a new client waits in the backlog instead.)
  test::ChildOptions o;
  o.stderr_path = (dir / "juncod-busy.log").string();
  test::ChildProcess busy({"/usr/bin/prlimit", "--nofile=128:128", std::string(JUNCO_BIN_DIR) + "/juncod", "--config",
                           (dir / "bench.jsonc").string()},
                          o);
  bool up = false;
  for (int i = 0; i < 400 && !up; ++i) {
    REQUIRE(busy.running());
    try {
      cli::RpcClient probe(b.socket());
      up = true;
    } catch (const std::exception&) {
      std::this_thread::sleep_for(std::chrono::milliseconds(25));
    }
  }
  REQUIRE(up);
  const auto refused = run(quote(py) + " -I -B " + quote(kSource + "/tests/python/exercise_client.py") + " busy " + quote(b.socket()));
  INFO(refused.out);
  CHECK(refused.status == 0);
  CHECK_THAT(refused.out, Catch::Contains("ok busy:"));
  CHECK(busy.stop() == 0);
}

namespace {

// Leaves a Unix socket file at `path` (bound, then closed: stat sees a socket).
bool make_socket_file(const std::string& path) {
  const int fd = ::socket(AF_UNIX, SOCK_STREAM, 0);
  sockaddr_un a{};
  a.sun_family = AF_UNIX;
  std::strncpy(a.sun_path, path.c_str(), sizeof a.sun_path - 1);
  const bool ok = fd >= 0 && ::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0;
  if (fd >= 0) ::close(fd);
  return ok;
}

}  // namespace

TEST_CASE("junco_client finds the default socket by junco's rule, in the same order", "[python]") {
  // The reference is the function junco itself calls (protocol/framing.hpp
  // default_socket_path), run beside the Python one under the same user and
  // environment. The service's /run/junco/juncod.sock must exist for one
  // case, so a child process gets a private mount namespace with its own
  // /run (nothing outside sees it) and then drops to user nobody: as root
  // the rule is always the service socket.
  if (::access("/usr/bin/python3", X_OK) != 0) FAIL("/usr/bin/python3 is required (tools/setup installs it)");
  if (::geteuid() != 0) {
    WARN("not run: needs root for a private mount namespace and to act as user nobody");
    return;
  }
  const fs::path dir = test::scratch_dir("pysock");
  fs::permissions(dir, fs::perms::owner_all | fs::perms::group_read | fs::perms::group_exec | fs::perms::others_read | fs::perms::others_exec);
  for (const char* d : {"run-own/junco", "run-empty", "state-own/junco", "home"}) fs::create_directories(dir / d);
  REQUIRE(make_socket_file((dir / "run-own/junco/juncod.sock").string()));
  REQUIRE(make_socket_file((dir / "state-own/junco/juncod.sock").string()));

  // name, JUNCO_SOCKET, XDG_RUNTIME_DIR, XDG_STATE_HOME (empty: unset); HOME is dir/home.
  struct Case {
    const char* name;
    std::string junco_socket, runtime, state;
    bool as_root;
    bool service_socket = true;  // false: /run/junco/juncod.sock removed before this case
  };
  const std::string d = dir.string();
  const std::vector<Case> cases{
      {"root", "", d + "/run-own", "", true},
      {"JUNCO_SOCKET wins", "/elsewhere/j.sock", d + "/run-own", "", false},
      {"own socket under XDG_RUNTIME_DIR", "", d + "/run-own", d + "/state-own", false},
      {"no own socket: the service's", "", d + "/run-empty", d + "/state-own", false},
      {"XDG_STATE_HOME when XDG_RUNTIME_DIR is unset", "", "", d + "/state-own", false},
      {"nothing there: the user's own path", "", "", "", false, false},
  };
  int out[2];
  REQUIRE(::pipe(out) == 0);
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    // Child: one line per case, "name\tc++\tpython". Exit 3 when the namespace cannot be made.
    ::close(out[0]);
    if (::unshare(CLONE_NEWNS) != 0 || ::mount(nullptr, "/", nullptr, MS_REC | MS_PRIVATE, nullptr) != 0 ||
        ::mount("tmpfs", "/run", "tmpfs", 0, "mode=0755") != 0 || ::mkdir("/run/junco", 0755) != 0 ||
        ::chown("/run/junco", 65534, 65534) != 0 || !make_socket_file("/run/junco/juncod.sock"))
      ::_exit(3);
    std::string lines;
    for (const auto& c : cases) {
      if (!c.as_root && ::geteuid() == 0) {
        if (::setgroups(0, nullptr) != 0 || ::setresgid(65534, 65534, 65534) != 0 || ::setresuid(65534, 65534, 65534) != 0) ::_exit(4);
      }
      if (!c.service_socket) ::unlink("/run/junco/juncod.sock");  // nobody owns /run/junco here
      auto put = [](const char* k, const std::string& v) {
        if (v.empty()) ::unsetenv(k);
        else ::setenv(k, v.c_str(), 1);
      };
      put("JUNCO_SOCKET", c.junco_socket);
      put("XDG_RUNTIME_DIR", c.runtime);
      put("XDG_STATE_HOME", c.state);
      put("HOME", d + "/home");
      const std::string cpp = daemon::rpc::default_socket_path();
      const Run py = run("PYTHONPATH=" + quote(kSource + "/tools/python") +
                         " /usr/bin/python3 -c 'import junco_client; print(junco_client.default_socket_path())'");
      std::string p = py.out;
      while (!p.empty() && p.back() == '\n') p.pop_back();
      lines += std::string(c.name) + "\t" + cpp + "\t" + p + "\n";
    }
    (void)!::write(out[1], lines.data(), lines.size());
    ::_exit(0);
  }
  ::close(out[1]);
  std::string text;
  char buf[4096];
  for (ssize_t n; (n = ::read(out[0], buf, sizeof buf)) > 0;) text.append(buf, static_cast<std::size_t>(n));
  ::close(out[0]);
  int status = 0;
  ::waitpid(pid, &status, 0);
  fs::remove_all(dir);
  REQUIRE(WIFEXITED(status));
  REQUIRE(WEXITSTATUS(status) == 0);
  std::map<std::string, std::pair<std::string, std::string>> got;
  std::stringstream in(text);
  for (std::string line; std::getline(in, line);) {
    const auto t1 = line.find('\t'), t2 = line.find('\t', t1 + 1);
    got[line.substr(0, t1)] = {line.substr(t1 + 1, t2 - t1 - 1), line.substr(t2 + 1)};
  }
  REQUIRE(got.size() == cases.size());
  for (const auto& [name, pair] : got) {
    INFO(name);
    CHECK(pair.second == pair.first);
  }
  // What each case means, so the comparison above cannot pass on a shared mistake.
  CHECK(got["root"].first == "/run/junco/juncod.sock");
  CHECK(got["JUNCO_SOCKET wins"].first == "/elsewhere/j.sock");
  CHECK(got["own socket under XDG_RUNTIME_DIR"].first == d + "/run-own/junco/juncod.sock");
  CHECK(got["no own socket: the service's"].first == "/run/junco/juncod.sock");
  CHECK(got["XDG_STATE_HOME when XDG_RUNTIME_DIR is unset"].first == d + "/state-own/junco/juncod.sock");
  CHECK(got["nothing there: the user's own path"].first == d + "/home/.local/state/junco/juncod.sock");
}
