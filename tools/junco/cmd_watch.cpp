// junco watch JOB: follow a job's progress until it ends.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <chrono>
#include <cmath>
#include <cstdio>
#include <set>

namespace junco::cli {
namespace {

const char* const description = R"(Follows job JOB until it ends. On a terminal: one live line with a bar,
points done / total, the part being measured and the estimated time left.
Otherwise (a pipe, a log file): plain lines, at most one per second, plus one
per state change. While the job waits for the bench, says why ("waiting
for bench: REASON"). A paused job waits for a person: watch says why it
paused and how to resume it, and returns.
)";
const char* const footer = R"(exit status: 0 the job is done; 1 it failed, was cancelled, interrupted or
paused (or the daemon went away).)";

struct Options {
  long job = 0;
  std::string socket;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("JOB", g_opt.job, "the job id (junco submit prints it, junco jobs lists them)")->required()->check(positive_id())->type_name("");
  add_socket_option(app, g_opt.socket);
}

const std::set<std::string> final_states{"done", "failed", "cancelled", "interrupted"};

std::string format_eta(const Json& eta) {
  if (!eta.is_number()) return "--";
  const long s = std::lround(eta.get<double>());
  char text[32];
  if (s >= 3600) std::snprintf(text, sizeof text, "%ldh%02ldm", s / 3600, (s % 3600) / 60);
  else if (s >= 60) std::snprintf(text, sizeof text, "%ldm%02lds", s / 60, s % 60);
  else std::snprintf(text, sizeof text, "%lds", s);
  return text;
}

// What we know of the job; updated from job.get and from events.
struct View {
  long job_id = 0;
  std::string state = "?";
  long done = 0, total = 0;
  std::string part;
  Json eta_s;
  std::string error;
};

class Printer {
 public:
  explicit Printer(bool tty) : tty_(tty) {}
  void progress(const View& v, bool force) {
    const auto now = std::chrono::steady_clock::now();
    if (!tty_ && !force && now - last_ < std::chrono::seconds(1)) return;
    last_ = now;
    const double frac = v.total > 0 ? static_cast<double>(v.done) / static_cast<double>(v.total) : 0.0;
    if (tty_) {
      constexpr int width = 30;
      const int filled = static_cast<int>(std::lround(frac * width));
      std::printf("\r[%.*s%.*s] %ld/%ld points  part %-14s  ETA %-8s  %-10s", filled, "##############################",
                  width - filled, "..............................", v.done, v.total, v.part.c_str(), format_eta(v.eta_s).c_str(),
                  v.state.c_str());
      open_line_ = true;
    } else {
      std::printf("job %ld %s: %ld/%ld points (%.0f%%), part %s, ETA %s\n", v.job_id, v.state.c_str(), v.done, v.total,
                  100.0 * frac, v.part.empty() ? "-" : v.part.c_str(), format_eta(v.eta_s).c_str());
    }
    std::fflush(stdout);
  }
  void line(const std::string& text) {
    if (open_line_) std::printf("\n");
    open_line_ = false;
    std::printf("%s\n", text.c_str());
    std::fflush(stdout);
  }

 private:
  bool tty_;
  bool open_line_ = false;
  std::chrono::steady_clock::time_point last_{};
};

void apply_job(View& v, const Json& j) {
  v.state = j.value("state", v.state);
  v.done = j.value("points_done", v.done);
  v.total = j.value("points_total", v.total);
  v.error = j.value("error", Json()).is_string() ? j["error"].get<std::string>() : "";
}

int run() {
  return guarded("watch", [&] {
    RpcClient client(socket_path(g_opt.socket));
    return watch_job(client, g_opt.job);
  });
}

Command make_command() {
  Command c;
  c.name = "watch";
  c.summary = "follow a job's progress";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace

int watch_job(RpcClient& client, long job_id) {
  // Subscribe first, then read the state, so no change falls in between.
  client.call("events.subscribe", Json{{"kinds", {"job.progress", "job.state"}}});
  View v;
  v.job_id = job_id;
  apply_job(v, client.call("job.get", Json{{"job_id", job_id}}));
  Printer out(stdout_is_tty());
  out.progress(v, true);
  auto last_poll = std::chrono::steady_clock::now();
  std::string waiting;  // the bench problem last shown while queued
  while (!final_states.count(v.state)) {
    if (v.state == "paused") {
      // A paused job waits for a person: say why and how to go on, and return.
      out.line("job " + std::to_string(job_id) + " paused" + (v.error.empty() ? "" : ": " + v.error) +
               "\n  resume it with: junco resume " + std::to_string(job_id));
      return exit_failure;
    }
    if (v.state == "queued") {
      const Json s = client.call("daemon.status", Json::object());
      const std::string why = s.value("bench_problem", Json()).is_string() ? s["bench_problem"].get<std::string>() : "";
      if (!why.empty() && why != waiting) out.line("waiting for bench: " + why + "\n" + std::string(kBenchHint).substr(0, std::string(kBenchHint).size() - 1));
      waiting = why;
    }
    const auto n = client.next_notification(std::chrono::seconds(2));
    // Events tell us almost everything; a periodic job.get covers the rest
    // (e.g. a job ended by another client while we were connecting).
    if (!n || std::chrono::steady_clock::now() - last_poll > std::chrono::seconds(10)) {
      last_poll = std::chrono::steady_clock::now();
      const std::string before = v.state;
      apply_job(v, client.call("job.get", Json{{"job_id", job_id}}));
      if (v.state != before) out.progress(v, true);
      if (!n) continue;
    }
    const Json& params = (*n)["params"];
    if (params.value("job_id", 0L) != job_id) continue;
    const std::string method = n->value("method", "");
    if (method == "job.progress") {
      v.done = params.value("points_done", v.done);
      v.total = params.value("points_total", v.total);
      v.part = params.value("part", v.part);
      v.eta_s = params.value("eta_s", Json());
      out.progress(v, false);
    } else if (method == "job.state") {
      v.state = params.value("state", v.state);
      if (params.value("error", Json()).is_string()) v.error = params["error"].get<std::string>();
      if (final_states.count(v.state)) apply_job(v, client.call("job.get", Json{{"job_id", job_id}}));
      out.progress(v, true);
    }
  }
  out.line("job " + std::to_string(job_id) + " " + v.state + ": " + std::to_string(v.done) + "/" + std::to_string(v.total) +
           " points" + (v.error.empty() ? "" : " — " + v.error));
  return v.state == "done" ? exit_ok : exit_failure;
}

}  // namespace junco::cli
