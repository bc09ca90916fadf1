// junco submit PLAN.jsonc: queue a job on the daemon.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"
#include "formats/json_limits.hpp"

#include <cstdio>
#include <fstream>
#include <sstream>

namespace junco::cli {
namespace {

const char* const description = R"(Sends a plan to juncod, which checks it against the bench's safety limits
and queues it as a job. Prints the job id (alone on its line, so scripts can
use job=$(junco submit plan.jsonc)). A refused plan is reported with the
limit or field at fault, and nothing is queued.

PLAN.jsonc is JSON with // and /* */ comments allowed, for example:

  {
    "lot": "WREN-0912",                          // lot name
    "parts": [ {"slot": 1, "label": "WR-01"},    // fixture slot → part label
               {"slot": 2, "label": "WR-02"} ],
    "sweep": { "mode": "current", "spacing": "log",   // forward sweep
               "start": 1e-6, "stop": 0.02, "count": 25, "settle_s": 0.05 },
    "reverse_v": [1, 5]                          // optional reverse-bias points, V
  }

The full format (ac sweeps, averaging, compliance) is in docs/daemon-core.md.
)";
const char* const footer = R"(exit status: 0 queued (with --watch: and done; with --dry-run: the plan
would be accepted); 1 daemon error; 2 bad file or refused plan.)";

struct Options {
  std::string plan_file, socket;
  bool watch = false, dry_run = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("PLAN", g_opt.plan_file, "the plan file (JSON with comments, see above)")->required()->type_name("");
  app.add_flag("--dry-run", g_opt.dry_run,
                           "check the plan as a submit would and show what it would do on this bench (readings, duration, "
                           "peak supply voltage, current and power, which safety limits bind); queue nothing");
  app.add_flag("--watch", g_opt.watch, "follow the job until it ends (as junco watch)");
  add_socket_option(app, g_opt.socket);
}

Json read_plan(const std::string& path) {
  try {
    // Depth and size checked while parsing (formats/json_limits.hpp): a deep
    // file never becomes a json value this program would copy or dump.
    return parse_json_limited(read_json_file(path), "plan", /*ignore_comments=*/true);
  } catch (const JsonLimitError& e) {
    throw std::invalid_argument(path + ": " + e.what());
  } catch (const Json::exception& e) {  // parse_error, and out_of_range for numbers that overflow
    throw std::invalid_argument(path + ": not valid JSON: " + e.what());
  } catch (const std::runtime_error&) {
    throw std::invalid_argument("cannot read plan file " + path);
  }
}

// What plan.check said, for people.
void print_dry_run(const std::string& file, const Json& r) {
  std::printf("%s: %ld part(s) x %ld readings = %ld readings\n", file.c_str(), r.value("parts", 0L), r.value("points_per_part", 0L),
              r.value("points_total", 0L));
  std::printf("duration   about %.2f h (settle times alone %.2f h)\n", r.value("duration_s", 0.0) / 3600.0,
              r.value("min_duration_s", 0.0) / 3600.0);
  const Json& peak = r["peak"];
  std::printf("peak       supply %s, current %s, power in the part <= %s", format_si(peak.value("supply_v", 0.0), "V").c_str(),
              format_si(peak.value("current_a", 0.0), "A").c_str(), format_si(peak.value("power_w", 0.0), "W").c_str());
  if (peak.value("reverse_v", 0.0) > 0) std::printf(", reverse %s", format_si(peak.value("reverse_v", 0.0), "V").c_str());
  std::printf("\nlimits\n");
  for (const auto& l : r["limits"]) {
    const double limit = l.value("limit_value", 0.0), used = l.value("plan_value", 0.0);
    const std::string unit = l.value("unit", "");
    std::printf("  %-16s %-10s plan %-10s %3.0f %%  %s%s\n", l.value("limit", "").c_str(), format_si(limit, unit).c_str(),
                format_si(used, unit).c_str(), limit > 0 ? 100.0 * used / limit : 0.0, l.value("binds", false) ? "BINDS: " : "",
                l.value("note", "").c_str());
  }
  std::printf("nothing queued (dry run)\n");
}

int run() {
  return guarded("submit", [&] {
    const bool watch = g_opt.watch, dry_run = g_opt.dry_run;
    if (watch && dry_run) throw std::invalid_argument("--dry-run queues nothing to --watch; give one of them");
    const Json plan = read_plan(g_opt.plan_file);
    RpcClient client(socket_path(g_opt.socket));
    if (dry_run) {
      print_dry_run(g_opt.plan_file, client.call("plan.check", Json{{"plan", plan}}));
      return exit_ok;
    }
    const Json r = client.call("job.submit", Json{{"plan", plan}});
    const long job = r.value("job_id", 0L);
    std::printf("%ld\n", job);
    std::fflush(stdout);
    if (stdout_is_tty() || watch)
      std::fprintf(stderr, "job %ld queued: %ld points%s\n", job, r.value("points_total", 0L),
                   watch ? "" : (" — follow it with: junco watch " + std::to_string(job)).c_str());
    print_bench_wait(client);
    return watch ? watch_job(client, job) : exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "submit";
  c.summary = "queue a job from a plan file";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
