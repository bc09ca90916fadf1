// junco demo: the whole tool on the simulated bench, with no hardware.
// Starts junco-sim and juncod as children in a scratch directory, runs an
// accelerated overnight job over a lot of 8 simulated parts, prints the lot
// table and spread, stops the children and leaves the database behind.
// Everything it prints about the lot is what juncod serves (part.fit,
// part.figures, lot.stats, part.transfer, part.design): the demo computes
// nothing of its own, so it shows what `junco lots`, `junco show` and the
// API give.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <array>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <thread>

extern char** environ;

namespace junco::cli {
namespace {

namespace fs = std::filesystem;

const char* const description = R"(Runs junco end to end on the simulated bench, no hardware needed:
  1. starts junco-sim (a simulated supply, meter, signal generator, level
     meter and 8-slot fixture holding a lot of switching diodes) and
     juncod, both found next to this junco;
  2. writes a bench config and a plan into DIR and submits the plan: an
     overnight characterisation, accelerated (the simulated instruments settle
     in milliseconds), of lot WREN-0912 — eight PIN-style switching diodes
     bought for the transmit/receive switch of an invented marine VHF radio;
  3. shows the job's progress, then the lot table (Is, n, Rs ± standard
     error, Vf at 1 mA and 10 mA, rd at 5 mA) and the lot spread (juncod's
     lot.stats, as junco lots prints it); each part's AC transfer against its
     fit with the joint AC+DC verdict; each part's junction capacitance (CJO,
     VJ, M) from the off-state readings and its measured isolation; two design
     calculations on a stored part; and writes plots (I-V, AC transfer, off
     state, lot spread) into DIR;
  4. writes the first part's model document and readings (WR-01.json,
     WR-01-iv.csv, WR-01-ac.csv), stops both children (also on Ctrl-C) and
     leaves DIR with the database, the config, the plan and both logs;
  5. ends with next steps: commands to paste that explore the lot on those
     files (and, with --keep-running, on the still running daemon).
Takes about a minute.
)";

const char* const footer = R"(exit status: 0 the job ran and every part was fitted; 1 something failed; 2 bad options.)";

struct Options {
  std::string dir, lab;
  std::string seed = "912";
  bool keep_running = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  Options& o = g_opt;
  app.description(description);
  app.footer(footer);
  app.add_option("--dir", o.dir, "scratch directory (default ./junco-demo-YYYYMMDD-HHMMSS)")->type_name("DIR");
  app.add_option("--seed", o.seed, "seed of the simulated lot (default 912)")->type_name("N")->check(positive_id());
  app.add_flag("--keep-running", o.keep_running,
               "leave juncod and junco-sim running at the end and print how to talk to them and how to stop them");
  app.add_option("--lab", o.lab,
                 "also publish to a lab database on PostgreSQL (a libpq connection string; docs/lab.md) as bench "
                 "\"demo-bench\", and wait until the lab has everything; without it, no server is needed")
      ->type_name("CONNINFO");
}

volatile sig_atomic_t g_interrupted = 0;
volatile pid_t g_children[2] = {-1, -1};

void on_signal(int) {
  g_interrupted = 1;
  for (auto pid : g_children)
    if (pid > 0) ::kill(pid, SIGTERM);  // async-signal-safe
}

// A child started without a shell; stdout piped to us, stderr to a log file.
class Child {
 public:
  Child(const std::vector<std::string>& argv, const fs::path& log, int slot) : slot_(slot) {
    int fds[2];
    if (::pipe2(fds, O_CLOEXEC) != 0) throw std::runtime_error("pipe failed");
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_adddup2(&fa, fds[1], STDOUT_FILENO);
    posix_spawn_file_actions_addopen(&fa, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
    posix_spawn_file_actions_addopen(&fa, STDERR_FILENO, log.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    std::vector<char*> cargv;
    for (const auto& a : argv) cargv.push_back(const_cast<char*>(a.c_str()));
    cargv.push_back(nullptr);
    const int rc = ::posix_spawn(&pid_, cargv[0], &fa, nullptr, cargv.data(), environ);
    posix_spawn_file_actions_destroy(&fa);
    ::close(fds[1]);
    if (rc != 0) {
      ::close(fds[0]);
      throw std::runtime_error("cannot start " + argv[0] + ": " + std::strerror(rc));
    }
    out_ = fds[0];
    g_children[slot_] = pid_;
  }
  Child(const Child&) = delete;
  Child& operator=(const Child&) = delete;
  ~Child() {
    stop();
    if (out_ >= 0) ::close(out_);
  }
  std::optional<std::string> read_line(std::chrono::milliseconds timeout) {
    const auto until = std::chrono::steady_clock::now() + timeout;
    for (;;) {
      if (const auto nl = buf_.find('\n'); nl != std::string::npos) {
        auto line = buf_.substr(0, nl);
        buf_.erase(0, nl + 1);
        return line;
      }
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - std::chrono::steady_clock::now());
      if (left.count() <= 0 || g_interrupted) return std::nullopt;
      pollfd p{out_, POLLIN, 0};
      if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) continue;
      char chunk[4096];
      const auto n = ::read(out_, chunk, sizeof chunk);
      if (n <= 0) return std::nullopt;
      buf_.append(chunk, static_cast<std::size_t>(n));
    }
  }
  bool running() {
    if (done_) return false;
    int status = 0;
    if (::waitpid(pid_, &status, WNOHANG) == pid_) reap(status);
    return !done_;
  }
  // SIGTERM, up to 10 s for juncod to turn the outputs off, then SIGKILL.
  int stop() {
    if (!running()) return code_;
    ::kill(pid_, SIGTERM);
    for (int i = 0; i < 1000 && running(); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(10));
    if (running()) {
      ::kill(pid_, SIGKILL);
      int status = 0;
      ::waitpid(pid_, &status, 0);
      reap(status);
    }
    return code_;
  }
  void release() {  // --keep-running: forget the child without stopping it
    done_ = true;
    g_children[slot_] = -1;
  }
  pid_t pid() const { return pid_; }

 private:
  void reap(int status) {
    done_ = true;
    code_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
    g_children[slot_] = -1;
  }
  int slot_;
  pid_t pid_ = -1;
  int out_ = -1;
  std::string buf_;
  bool done_ = false;
  int code_ = -1;
};

fs::path self_dir() {
  std::error_code ec;
  const auto exe = fs::read_symlink("/proc/self/exe", ec);
  if (ec) throw std::runtime_error("cannot find the junco executable (/proc/self/exe)");
  return exe.parent_path();
}

// juncod sits next to junco in a build tree, in ../sbin when installed.
fs::path find_program(const std::string& name) {
  const auto dir = self_dir();
  for (const auto& candidate : {dir / name, dir.parent_path() / "sbin" / name, dir.parent_path() / "bin" / name})
    if (::access(candidate.c_str(), X_OK) == 0) return candidate;
  throw std::runtime_error("cannot find " + name + " next to " + (dir / "junco").string() + " (build it: cmake --build build/default)");
}

std::string timestamp() {
  const std::time_t t = std::time(nullptr);
  char text[32];
  std::strftime(text, sizeof text, "%Y%m%d-%H%M%S", std::localtime(&t));
  return text;
}

void write_file(const fs::path& path, const std::string& text) {
  std::ofstream out(path);
  out << text;
  if (!out) throw std::runtime_error("cannot write " + path.string());
}

std::string config_text(const Json& ready, const fs::path& dir, const std::optional<std::string>& lab) {
  Json bench = Json::object();
  for (const char* role : {"source", "meter", "scanner", "siggen", "levelmeter"})
    bench[role] = {{"address", ready["endpoints"][role]}, {"dialect", ready["families"][role]}};
  Json config{
      {"bench", bench},
      // junco-sim's default fixture: 100 Ω bias resistor, choke return.
      {"fixture", {{"bias_resistor_ohm", 100.0}, {"slots", 8}, {"current_from", "source"}}},
      {"safety", {{"max_supply_v", 10.0}, {"current_limit_a", 0.05}, {"max_power_w", 0.1}, {"max_reverse_v", 8.0}, {"max_job_s", 3600.0}}},
      // junco-sim's readings as ±(rel·|x| + abs) limits: the supply's current
      // readback has 0.2 µA rms of noise in 0.1 µA steps, the meter a few µV.
      {"accuracy", {{"v_rel", 1e-5}, {"v_abs_v", 5e-6}, {"i_rel", 1e-3}, {"i_abs_a", 3.5e-7}}},
      {"paths", {{"database", (dir / "junco.db").string()}, {"socket", (dir / "run" / "juncod.sock").string()}}}};
  if (lab) config["lab"] = {{"database", *lab}, {"bench", "demo-bench"}};
  return "// junco demo bench: junco-sim's instruments on 127.0.0.1 (written by junco demo)\n" + config.dump(2) + "\n";
}

const char* const plan_text = R"(// Lot WREN-0912: eight switching diodes for the T/R switch of an invented
// marine VHF radio. Overnight plan, accelerated: on a real bench settle_s
// would be about 1 s per point; junco-sim settles in a few milliseconds.
{
  "lot": "WREN-0912",
  "parts": [
    {"slot": 1, "label": "WR-01"}, {"slot": 2, "label": "WR-02"},
    {"slot": 3, "label": "WR-03"}, {"slot": 4, "label": "WR-04"},
    {"slot": 5, "label": "WR-05"}, {"slot": 6, "label": "WR-06"},
    {"slot": 7, "label": "WR-07"}, {"slot": 8, "label": "WR-08"}
  ],
  // forward: 1 µA to 30 mA, 4 points per decade and then some
  "sweep": {"mode": "current", "spacing": "log", "start": 1e-6, "stop": 0.03,
            "count": 40, "settle_s": 0.05, "average": 2},
  // isolation side: reverse-bias points
  "reverse_v": [0, 0.5, 1, 2, 3, 5, 8],
  // small-signal transfer at each bias step: 2 mV rms at 10 MHz keeps the
  // signal current well below the bias from 1 µA up (junco transfer checks);
  // the generator is off during DC readings, so give the levels 10 time
  // constants (junco-sim: 2 ms) to settle after it comes on. off_state: the
  // levels at each reverse bias too, at 100 MHz, with the part off; the
  // isolation leaves little signal at the output, so these use 50 mV rms
  // (its 71 mV peak stays below 0 V + 0.1 V, as juncod checks)
  "ac": {"freqs_hz": [10e6], "amplitude": 0.002, "unit": "vrms", "settle_s": 0.02,
         "off_state": {"freqs_hz": [100e6], "amplitude": 0.05}},
  "temp_k": 300.15
}
)";

std::string pm(double value, double se, const std::string& unit, int digits = 4) {
  if (!std::isfinite(value)) return "—";
  return format_si(value, unit, digits) + (std::isfinite(se) ? " ± " + format_si(se, unit, 2) : "");
}


double num(const Json& j) { return j.is_number() ? j.get<double>() : std::nan(""); }

// The junction's thermal resistance juncod fitted with Rs (DC + AC readings,
// detail.electrothermal), or why Rs may include heating.
std::string rth_text(const Json& fit) {
  const Json et = fit.contains("detail") ? fit["detail"].value("electrothermal", Json()) : Json();
  if (!et.is_object()) return "-";
  if (et.value("status", "") != "fitted") return "(DC only: Rs may include heating)";
  char t[48];
  std::snprintf(t, sizeof t, "%.0f ± %.0f K/W", num(et["rth_k_per_w"]["value"]), num(et["rth_k_per_w"]["std_error"]));
  return t;
}

// The lot's spread as juncod computes it (lot.stats), for the quantities the
// lot table shows.
void print_lot_spread(RpcClient& client, const std::string& lot) {
  const Json stats = client.call("lot.stats", Json{{"lot", lot}, {"currents_a", {1e-3, 5e-3, 10e-3}}});
  std::printf("\nlot spread (%zu parts) from juncod's lot.stats, as junco lots %s --at 1mA,5mA,10mA\n%-14s %-12s %-12s %-12s %-12s\n", stats["parts"].size(),
              lot.c_str(), "quantity", "mean", "std", "min", "max");
  // {statistic's name, unit, label shown to the reader}
  const std::vector<std::array<std::string, 3>> shown{
      {"is_a", "A", "Is"},          {"n", "", "n"},
      {"rs_ohm", "Ω", "Rs"},        {"vf_v@0.001A", "V", "Vf @ 1 mA"},
      {"vf_v@0.01A", "V", "Vf @ 10 mA"}, {"rd_ohm@0.005A", "Ω", "rd @ 5 mA"}};
  for (const auto& [name, unit, label] : shown)
    for (const auto& q : stats["quantities"]) {
      if (q.value("name", "") != name) continue;
      const auto f = [&, u = unit](const Json& x) {
        if (!x.is_number()) return std::string("—");
        if (!u.empty()) return format_si(x.get<double>(), u);
        char t[32];
        std::snprintf(t, sizeof t, "%.4f", x.get<double>());
        return std::string(t);
      };
      std::printf("%s%s\n", (pad_columns(label, 15) + pad_columns(f(q["mean"]), 13) + pad_columns(f(q["std_dev"]), 13) + pad_columns(f(q["min"]), 13) + f(q["max"])).c_str(),
                  q["outliers"].empty() ? "" : ("  outliers: " + q["outliers"].dump()).c_str());
    }
}

// The lot table and the lot spread, from the daemon's fits.
bool print_lot(RpcClient& client, const std::string& lot) {
  const std::vector<double> at{1e-3, 10e-3, 5e-3};
  std::size_t fitted = 0;
  bool all_fitted = true;
  std::printf("\nlot %s — fitted at %.2f K; Rs is isothermal where a part has AC readings (DC and AC fitted together\n"
              "with the junction's heating, Rth)\n", lot.c_str(), 300.15);
  std::printf("%-6s %-22s %-16s %-20s %-11s %-11s %-10s %s\n", "part", "Is", "n", "Rs", "Vf@1mA", "Vf@10mA", "rd@5mA", "Rth");
  const Json parts = client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array());
  for (const auto& p : parts) {
    const long id = p["part_id"].get<long>();
    const std::string label = p.value("label", "?");
    try {
      const Json fit = client.call("part.fit", Json{{"part_id", id}});
      const Json figs = client.call("part.figures", Json{{"part_id", id}, {"currents_a", at}})["figures"];
      char nbuf[48];
      std::snprintf(nbuf, sizeof nbuf, "%.4f ± %.4f", num(fit["n"]["value"]), num(fit["n"]["std_error"]));
      std::printf("%s\n", (pad_columns(label, 7) + pad_columns(pm(num(fit["is_a"]["value"]), num(fit["is_a"]["std_error"]), "A"), 23) +
                            pad_columns(nbuf, 17) + pad_columns(pm(num(fit["rs_ohm"]["value"]), num(fit["rs_ohm"]["std_error"]), "Ω"), 21) +
                            pad_columns(format_si(num(figs[0]["vf_v"]["value"]), "V"), 12) +
                            pad_columns(format_si(num(figs[1]["vf_v"]["value"]), "V"), 12) +
                            pad_columns(format_si(num(figs[2]["rd_ohm"]["value"]), "Ω"), 11) + rth_text(fit))
                               .c_str());
      ++fitted;
    } catch (const RpcError& e) {
      all_fitted = false;
      std::printf("%-6s no usable fit: %s\n", label.c_str(), e.what());
    }
  }
  if (fitted < 2) {
    std::printf("fewer than 2 fitted parts: no lot spread\n");
    return false;
  }
  print_lot_spread(client, lot);
  return all_fitted;
}

// Each part's AC readings against its fit, and the joint AC+DC fit (part.transfer).
void print_transfer(RpcClient& client, const std::string& lot) {
  std::printf("\nAC transfer at 10 MHz against each fit, and the joint AC+DC fit (junco transfer PART)\n");
  std::printf("%-6s %-13s %-20s %-20s %s\n", "part", "rms residual", "Rs from DC", "Rs from AC alone", "verdict");
  std::string hint;
  for (const auto& p : client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array())) {
    const std::string label = p.value("label", "?");
    try {
      const Json r = client.call("part.transfer", Json{{"part_id", p["part_id"]}});
      const Json& j = r["joint"];
      if (!j.is_object()) {
        std::printf("%-6s no AC readings\n", label.c_str());
        continue;
      }
      char res[32];
      std::snprintf(res, sizeof res, "%.3f dB", num(r["rms_residual_db"]));
      const auto rs = [&](const char* which) { return pm(num(j[which]["rs_ohm"]["value"]), num(j[which]["rs_ohm"]["std_error"]), "Ω"); };
      std::printf("%s\n", (pad_columns(label, 7) + pad_columns(res, 14) + pad_columns(rs("dc_only"), 21) + pad_columns(rs("ac_only"), 21) +
                            j.value("verdict", std::string("?")))
                               .c_str());
      if (j.contains("hint")) hint = j["hint"].get<std::string>();
    } catch (const RpcError& e) {
      std::printf("%-6s %s\n", label.c_str(), e.what());
    }
  }
  if (!hint.empty()) std::printf("note: %s\n", hint.c_str());
}

// Each part's off-state side: the capacitance law juncod fitted from the
// off-state readings, and the isolation measured at the highest reverse bias.
void print_off_state(RpcClient& client, const std::string& lot) {
  std::printf("\noff state: junction capacitance from the levels at 0..8 V reverse, 100 MHz (junco show PART)\n");
  std::printf("%-6s %-22s %-22s %-19s %s\n", "part", "CJO", "VJ", "M", "isolation @ 8 V");
  for (const auto& p : client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array())) {
    const std::string label = p.value("label", "?");
    try {
      const Json fit = client.call("part.fit", Json{{"part_id", p["part_id"]}});
      if (!fit["cj0_f"].is_object() || !fit["cj0_f"]["value"].is_number()) {
        const Json cap = fit["detail"].value("junction_cap", Json());
        std::printf("%-6s not fitted: %s\n", label.c_str(), cap.is_object() ? cap.value("message", std::string("?")).c_str() : "no off-state readings");
        continue;
      }
      char m[48], iso[32] = "—";
      std::snprintf(m, sizeof m, "%.4f ± %.2g", num(fit["m"]["value"]), num(fit["m"]["std_error"]));
      // The level ratio juncod computed for each off-state reading (detail.junction_cap.readings).
      double deepest = -1;
      for (const auto& r : fit["detail"]["junction_cap"].value("readings", Json::array()))
        if (r["fixture_ratio_db"].is_number() && num(r["reverse_v"]) >= deepest) {
          deepest = num(r["reverse_v"]);
          std::snprintf(iso, sizeof iso, "%.1f dB", num(r["fixture_ratio_db"]));
        }
      std::printf("%s\n", (pad_columns(label, 7) + pad_columns(pm(num(fit["cj0_f"]["value"]), num(fit["cj0_f"]["std_error"]), "F"), 23) +
                            pad_columns(pm(num(fit["vj_v"]["value"]), num(fit["vj_v"]["std_error"]), "V"), 23) + pad_columns(m, 20) + iso)
                               .c_str());
    } catch (const RpcError& e) {
      std::printf("%-6s %s\n", label.c_str(), e.what());
    }
  }
}

// One calculator on a stored part, as `junco design ... --part` does it.
void print_design_example(RpcClient& client, const std::string& lot) {
  const Json parts = client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array());
  if (parts.empty()) return;
  const std::string label = parts[0].value("label", "?");
  try {
    const Json a = client.call("part.design", Json{{"part_id", parts[0]["part_id"]},
                                                   {"calculator", "bias-for-loss"},
                                                   {"inputs", {{"target_db", 0.5}, {"supply_v", 5.0}}}});
    double i_a = std::nan(""), rb = std::nan("");
    for (const auto& l : a["result"]) {
      if (l["key"] == "bias_current_a") i_a = num(l["value"]);
      if (l["key"] == "bias_resistor_ohm") rb = num(l["value"]);
    }
    std::printf("\ndesign (junco design bias-for-loss --part %s --target 0.5 --supply 5):\n"
                "  %s as a series switch in 50 Ω at 10 MHz loses 0.5 dB at %s: from 5 V, a bias resistor of %s or less\n",
                label.c_str(), label.c_str(), format_si(i_a, "A").c_str(), format_si(rb, "Ω").c_str());
  } catch (const RpcError& e) {
    std::printf("\ndesign example on %s: %s\n", label.c_str(), e.what());
  }
  // The off side, on the capacitance law measured for the part.
  try {
    const Json a = client.call("part.design", Json{{"part_id", parts[0]["part_id"]},
                                                   {"calculator", "isolation"},
                                                   {"inputs", {{"freq_hz", 1e9}, {"reverse_v", 5.0}}}});
    double iso_db = std::nan(""), cj = std::nan("");
    for (const auto& l : a["result"]) {
      if (l["key"] == "isolation_db") iso_db = num(l["value"]);
      if (l["key"] == "cj_f") cj = num(l["value"]);
    }
    std::printf("design (junco design isolation --part %s --freq 1GHz --reverse 5):\n"
                "  off at 5 V reverse, its measured Cj is %s: %.1f dB of isolation at 1 GHz as a series switch in 50 Ω\n",
                label.c_str(), format_si(cj, "F").c_str(), iso_db);
  } catch (const RpcError& e) {
    std::printf("design example (isolation) on %s: %s\n", label.c_str(), e.what());
  }
}

// Runs this junco again with `args` (as a user would type them), waits; its exit status.
int run_self(const std::vector<std::string>& args) {
  std::vector<std::string> argv{(self_dir() / "junco").string()};
  argv.insert(argv.end(), args.begin(), args.end());
  std::vector<char*> cargv;
  for (const auto& a : argv) cargv.push_back(const_cast<char*>(a.c_str()));
  cargv.push_back(nullptr);
  pid_t pid = -1;
  if (::posix_spawn(&pid, cargv[0], nullptr, nullptr, cargv.data(), environ) != 0) return exit_failure;
  int status = 0;
  while (::waitpid(pid, &status, 0) < 0 && errno == EINTR) {
  }
  return WIFEXITED(status) ? WEXITSTATUS(status) : exit_failure;
}

// The first part's I-V, AC and off-state plots and the lot's spread, drawn by `junco plot`.
void write_plots(const std::string& socket, const std::string& lot, const fs::path& dir, RpcClient& client) {
  const Json parts = client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array());
  if (parts.empty()) return;
  const std::string label = parts[0].value("label", "?");
  const std::vector<std::pair<std::vector<std::string>, fs::path>> jobs{
      {{"plot", "iv", "--part", label}, dir / (label + "-iv.svg")},
      {{"plot", "ac", "--part", label}, dir / (label + "-ac.svg")},
      {{"plot", "off", "--part", label}, dir / (label + "-off.svg")},
      {{"plot", "lot", "--lot", lot}, dir / "lot.svg"}};
  std::printf("\nplots (junco plot; gnuplot):\n");
  for (const auto& [args, out] : jobs) {
    auto argv = args;
    argv.insert(argv.end(), {"--socket", socket, "--out", out.string()});
    if (run_self(argv) == exit_ok) std::printf("  %s\n", out.c_str());
  }
}

// The first part's fit and readings as files, so the next steps work once
// juncod has stopped: the model document (junco design/plot --model), its
// forward readings (junco fit) and AC readings (junco fit --ac).
struct Exported {
  std::string label;
  bool ok = false;
};
Exported write_exports(RpcClient& client, const std::string& lot, const fs::path& dir) {
  Exported e;
  const Json parts = client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array());
  if (parts.empty()) return e;
  e.label = parts[0].value("label", "part");
  try {
    for (const auto& [format, name] : std::vector<std::pair<std::string, std::string>>{
             {"json", e.label + ".json"}, {"iv-csv", e.label + "-iv.csv"}, {"ac-csv", e.label + "-ac.csv"}})
      write_file(dir / name, client.call("part.export", Json{{"part_id", parts[0]["part_id"]}, {"format", format}}).value("content", ""));
    e.ok = true;
  } catch (const std::exception& ex) {
    std::printf("\nexporting %s for the next steps failed: %s\n", e.label.c_str(), ex.what());
  }
  return e;
}

// A path as the shell reads it: bare when it has only safe characters.
std::string sh(const std::string& text) {
  if (text.find_first_not_of("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789/._-+=:,") == std::string::npos) return text;
  std::string q = "'";
  for (char c : text) q += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return q + "'";
}

// What a newcomer can paste next. Every "  $ " line is a command that works
// right after the demo (tests/integration/demo_test.cpp runs each one).
void print_next_steps(const fs::path& dir, const std::string& lot, const Exported& e, const std::optional<std::string>& socket,
                      pid_t daemon_pid, pid_t sim_pid) {
  const std::string d = dir.string();
  std::printf("\nnext steps: paste any line after a $; they use what the demo left in %s\n", sh(d).c_str());
  if (e.ok) {
    const std::string iv = sh(d + "/" + e.label + "-iv.csv"), ac = sh(d + "/" + e.label + "-ac.csv"), model = sh(d + "/" + e.label + ".json");
    std::printf("  # refit %s's forward readings offline (Is, n, Rs with standard errors), then with its AC readings\n", e.label.c_str());
    std::printf("  $ junco fit %s\n", iv.c_str());
    std::printf("  $ junco fit %s --ac %s\n", iv.c_str(), ac.c_str());
    std::printf("  # a design calculator on %s's stored fit, and its I-V plot from the files\n", e.label.c_str());
    std::printf("  $ junco design loss --model %s --current 5mA\n", model.c_str());
    std::printf("  $ junco plot iv --readings %s --model %s --out %s\n", iv.c_str(), model.c_str(), sh(d + "/" + e.label + "-iv-offline.svg").c_str());
  }
  std::printf("  # every fit in the database\n");
  std::printf("  $ sqlite3 %s 'SELECT p.label, f.status, f.is_a, f.n, f.rs_ohm FROM fits f JOIN parts p ON p.id = f.part_id'\n",
              sh(d + "/junco.db").c_str());
  if (!socket) {
    std::printf("  # to explore with the daemon (junco show, lots, transfer, bench): run the demo with --keep-running\n");
    return;
  }
  const std::string s = sh(*socket);
  std::printf("  # juncod and junco-sim are still running: ask the daemon\n");
  std::printf("  $ junco status --socket %s\n", s.c_str());
  std::printf("  $ junco show %s --socket %s\n", e.label.c_str(), s.c_str());
  std::printf("  $ junco lots %s --socket %s\n", lot.c_str(), s.c_str());
  std::printf("  $ junco transfer %s --socket %s\n", e.label.c_str(), s.c_str());
  std::printf("  $ junco bench --socket %s\n", s.c_str());
  std::printf("  # and stop them (juncod turns the outputs off)\n");
  std::printf("  $ kill %d %d\n", daemon_pid, sim_pid);
}

void wait_for_socket(const std::string& path, Child& daemon, const fs::path& log) {
  for (int i = 0; i < 300; ++i) {
    if (g_interrupted) throw std::runtime_error("interrupted");
    if (!daemon.running()) throw std::runtime_error("juncod exited during start-up; see " + log.string());
    try {
      RpcClient probe(path);
      return;
    } catch (const ConnectError&) {
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
  }
  throw std::runtime_error("juncod did not open its socket within 15 s; see " + log.string());
}

// With --lab: until the outbox is empty (at most 60 s), then where to look.
void wait_for_lab(RpcClient& client, const std::string& lot) {
  Json status;
  for (int i = 0; i < 600; ++i) {
    status = client.call("daemon.status")["lab"];
    if (status.value("connected", false) && status.value("backlog_rows", 1L) == 0) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  if (status.value("backlog_rows", 1L) != 0) {
    std::printf("\nlab: %ld rows not yet published (%s); the bench keeps them and publishes when the lab is back\n",
                status.value("backlog_rows", 0L), status.value("last_error", Json("?")).dump().c_str());
    return;
  }
  std::printf("\nlab: everything published as bench demo-bench to %s\n  try:  junco lab stats %s --db CONNINFO\n",
              status.value("database", "?").c_str(), lot.c_str());
}

int run() {
  return guarded("demo", [&]() -> int {
    const Options& o = g_opt;
    const std::string& seed = o.seed;
    const bool keep = o.keep_running;
    const auto lab = o.lab.empty() ? std::nullopt : std::optional<std::string>(o.lab);
    const fs::path dir = fs::absolute(o.dir.empty() ? fs::path("junco-demo-" + timestamp()) : fs::path(o.dir));
    fs::create_directories(dir);
    const auto sim_path = find_program("junco-sim"), daemon_path = find_program("juncod");

    struct sigaction sa{};
    sa.sa_handler = on_signal;
    ::sigaction(SIGINT, &sa, nullptr);
    ::sigaction(SIGTERM, &sa, nullptr);

    std::setvbuf(stdout, nullptr, _IOLBF, 0);  // progress and errors interleave in order
    std::printf("junco demo in %s\n", dir.c_str());
    // The lot's parts in small glass packages: a junction thermal time
    // constant of 8 ms, so the 50 ms settle of the plan (about 6 τ) reads
    // every point at its steady junction temperature, as a real overnight
    // plan's 1 s settle would. The heating itself stays (400 K/W).
    std::ofstream(dir / "junco-sim.json") << R"({"thermal": {"theta_k_per_w": 400, "tau_s": 0.008}})" << "\n";
    Child sim({sim_path.string(), "--seed", seed, "--slots", "8", "--settle-ms", "2", "--config", (dir / "junco-sim.json").string()},
              dir / "junco-sim.log", 0);
    const auto ready_line = sim.read_line(std::chrono::seconds(10));
    const Json ready = ready_line ? Json::parse(*ready_line, nullptr, false) : Json();
    if (!ready.is_object() || !ready.value("ready", false))
      throw std::runtime_error("junco-sim did not become ready; see " + (dir / "junco-sim.log").string());
    std::printf("  junco-sim ready (pid %d): source %s, meter %s, scanner %s\n", sim.pid(),
                ready["endpoints"]["source"].get<std::string>().c_str(), ready["endpoints"]["meter"].get<std::string>().c_str(),
                ready["endpoints"]["scanner"].get<std::string>().c_str());

    write_file(dir / "bench.jsonc", config_text(ready, dir, lab));
    write_file(dir / "plan.jsonc", plan_text);
    const std::string socket = (dir / "run" / "juncod.sock").string();
    Child daemon({daemon_path.string(), "--config", (dir / "bench.jsonc").string()}, dir / "juncod.log", 1);
    wait_for_socket(socket, daemon, dir / "juncod.log");
    std::printf("  juncod ready (pid %d) on %s\n\n", daemon.pid(), socket.c_str());

    RpcClient client(socket);
    const Json plan = Json::parse(plan_text, nullptr, true, true);
    const Json submitted = client.call("job.submit", Json{{"plan", plan}});
    const long job = submitted["job_id"].get<long>();
    std::printf("job %ld: lot %s, %zu parts, %ld points\n", job, plan["lot"].get<std::string>().c_str(), plan["parts"].size(),
                submitted.value("points_total", 0L));
    int status = exit_failure;
    try {
      status = watch_job(client, job);
    } catch (const ConnectError&) {
      if (!g_interrupted) throw;
    }
    if (g_interrupted) {
      std::printf("\ninterrupted: stopping juncod (outputs off) and junco-sim\n");
    } else {
      if (!print_lot(client, plan["lot"])) status = exit_failure;
      print_transfer(client, plan["lot"]);
      print_off_state(client, plan["lot"]);
      print_design_example(client, plan["lot"]);
      write_plots(socket, plan["lot"], dir, client);
      if (lab) wait_for_lab(client, plan["lot"]);
    }
    const Exported exported = g_interrupted ? Exported{} : write_exports(client, plan["lot"], dir);
    const bool still_running = keep && !g_interrupted;
    if (still_running) {
      daemon.release();
      sim.release();
      std::printf("\nstill running: juncod pid %d, junco-sim pid %d\n", daemon.pid(), sim.pid());
    } else {
      const int daemon_rc = daemon.stop();
      sim.stop();
      if (daemon_rc != 0) std::printf("juncod exited with status %d; see %s\n", daemon_rc, (dir / "juncod.log").c_str());
    }
    std::printf("\ndatabase kept: %s\n", (dir / "junco.db").c_str());
    if (!g_interrupted)
      print_next_steps(dir, plan["lot"], exported, still_running ? std::optional<std::string>(socket) : std::nullopt, daemon.pid(), sim.pid());
    return g_interrupted ? exit_failure : status;
  });
}

Command make_command() {
  Command c;
  c.name = "demo";
  c.summary = "run the whole tool on the simulated bench";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
