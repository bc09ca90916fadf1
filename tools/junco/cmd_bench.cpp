// junco bench: check the bench before trusting it — each instrument's
// address, dialect, *IDN? and one reading that changes nothing, and why an
// instrument or the bench is not open (daemon method bench.check).
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <chrono>
#include <cstdio>

namespace junco::cli {
namespace {

const char* const description = R"(Asks juncod to check every instrument of its configured bench, one at a time:
open it with short timeouts, read its *IDN?, and take one reading that
changes nothing (the supply's output state and voltage/current readback, the
meter's DC voltage, the switch's channel state, the generator's output state,
one level). Prints per instrument its address, dialect, identity, readings,
how long it took, and, when it does not open, why in words (does not answer,
cannot be reached, wrong instrument for the dialect ...) with the driver's
details. No output is turned on and nothing is programmed.

While a job runs, the instruments are not disturbed: juncod shows what it
knows (addresses, identities found at open) and says which job holds the
bench. A mute instrument costs about 1 s (connect 0.5 s + reply 0.7 s at
most); the whole check is bounded by the number of instruments.
)";
const char* const footer = R"(exit status: 0 every instrument opened and answered (or a job holds the
bench); 1 some instrument did not, or juncod could not be reached.)";

struct Options {
  std::string socket;
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  add_socket_option(app, g_opt.socket);
  app.add_flag("--json", g_opt.json, "print the bench.check result as JSON");
}

void print_reading(const Json& r) {
  const std::string name = r.value("name", "?");
  if (r.contains("error")) {
    std::printf("    %-17s FAILED: %s\n", (name + ":").c_str(), r["error"].get<std::string>().c_str());
  } else if (r.contains("value") && r["value"].is_number()) {
    const std::string unit = r.value("unit", "");
    const double v = r["value"].get<double>();
    // SI prefixes for volts and amps; level units (vrms, vpp) as numbers.
    char level[48];
    std::snprintf(level, sizeof level, "%.4g %s", v, unit.c_str());
    const std::string shown = unit == "V" || unit == "A" ? format_si(v, unit) : std::string(level);
    std::printf("    %-17s %s\n", (name + ":").c_str(), shown.c_str());
  } else if (r.contains("text")) {
    const std::string text = r["text"].is_string() ? r["text"].get<std::string>() : "(not offered: " + r.value("note", "") + ")";
    std::printf("    %-17s %s\n", (name + ":").c_str(), text.c_str());
  }
}

int run() {
  return guarded("bench", [&] {
    const bool json = g_opt.json;
    RpcClient client(socket_path(g_opt.socket));
    const Json b = client.call("bench.check", Json::object(), std::chrono::seconds(60));
    bool all_ok = true;
    for (const auto& inst : b.value("instruments", Json::array()))
      if (inst.value("problem", Json()).is_string()) all_ok = false;
    if (json) {
      std::printf("%s\n", b.dump(2).c_str());
      return all_ok ? exit_ok : exit_failure;
    }
    if (!b.value("held_by_job", Json()).is_null())
      std::printf("job %lld holds the bench: nothing asked of the instruments; what is known:\n",
                  b["held_by_job"].get<long long>());
    for (const auto& inst : b.value("instruments", Json::array())) {
      const Json problem = inst.value("problem", Json());
      std::printf("%-10s %s  dialect %s  (%.2f s)\n", inst.value("role", "?").c_str(), inst.value("address", "?").c_str(),
                  inst.value("dialect", "?").c_str(), inst.value("elapsed_s", 0.0));
      const Json id = inst.value("identity", Json());
      if (id.is_object()) std::printf("    %-17s %s\n", "*IDN?:", id.value("idn", "?").c_str());
      for (const auto& r : inst.value("readings", Json::array())) print_reading(r);
      if (problem.is_string()) std::printf("    NOT OPEN:         %s\n", problem.get<std::string>().c_str());
    }
    std::printf("bench:     %s", b.value("bench_open", false) ? "open" : "not open");
    if (b.value("checked", false)) std::printf(" (checked in %.2f s)", b.value("elapsed_s", 0.0));
    std::printf("\n");
    if (b.value("bench_problem", Json()).is_string())
      std::printf("           %s\n%s", b["bench_problem"].get<std::string>().c_str(), kBenchHint);
    return all_ok ? exit_ok : exit_failure;
  });
}

Command make_command() {
  Command c;
  c.name = "bench";
  c.summary = "check each instrument: address, *IDN?, one safe reading, why not open";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
