// junco-sim: the simulated bench process. See --help and docs/sim.md.
#include "tools/sim/app.hpp"
#include "tools/sim/config.hpp"
#include "formats/json_limits.hpp"  // read_json_file
#include "junco/cli_args.hpp"
#include "junco/exit_status.hpp"

#include <signal.h>
#include <unistd.h>

#include <cstdio>
#include <iostream>
#include <limits>
#include <stdexcept>
#include <thread>

namespace {

using namespace junco::sim;

// A CLI11 check from one of config.hpp's throwing checks.
template <typename F>
CLI::Validator checked(F f) {
  return CLI::Validator(
      [f](std::string& v) {
        try {
          f(v);
          return std::string();
        } catch (const std::invalid_argument& e) {
          // CLI11 names the option already: "--fault: unknown mode" → "unknown mode".
          std::string m = e.what();
          if (m.rfind("--", 0) == 0 && m.find(": ") != std::string::npos) m.erase(0, m.find(": ") + 2);
          return m;
        }
      },
      "");
}

std::string family_lines() {
  std::string out;
  for (const auto& role : all_roles) {
    out += "  " + role + std::string(12 - role.size(), ' ');
    const auto& names = known_families().at(role);
    for (std::size_t k = 0; k < names.size(); ++k) out += (k ? " | " : "") + names[k];
    if (&role != &all_roles.back()) out += "\n";
  }
  return out;
}

// The command line, defined once: parsing and --help come from here. Values
// land in `given`; main() applies them over the config file's (command line wins).
struct Given {
  std::string config_file;
  std::uint64_t seed = 1;
  int slots = 8;
  double settle_ms = 2.0;
  std::vector<std::string> families, old_families, serial, faults;
};

void define_options(CLI::App& app, Given& g) {
  app.description(
      "junco-sim: a simulated diode-characterisation bench. Six instruments (roles\n"
      "source, meter, scanner, siggen, levelmeter, chamber), each on its own TCP\n"
      "port on 127.0.0.1 (ephemeral) or, with --serial ROLE, on a raw pseudo-terminal.\n"
      "When ready it prints ONE JSON line on stdout:\n"
      "  {\"ready\":true,\"endpoints\":{\"source\":\"tcp:127.0.0.1:PORT\",...,\n"
      "   \"control\":\"tcp:127.0.0.1:PORT\"},\"dialects\":{\"source\":\"scpi-source\",...}}\n"
      "(and the same object as \"families\", its former name).\n"
      "Logs go to stderr. Runs until SIGINT/SIGTERM or the control command quit.");
  using junco::cli_args::shown_as;
  shown_as(app.add_option("--config", g.config_file, "JSON file with the config keys below (the command line wins)"), "FILE");
  shown_as(app.add_option("--seed", g.seed, "seed of the lot and of all noise")
               ->check(junco::cli_args::whole_number(0, std::numeric_limits<long long>::max())),
           "N");
  shown_as(app.add_option("--slots", g.slots, "fixture slots, each holding one part")->check(junco::cli_args::whole_number(1, 256)), "N");
  shown_as(app.add_option("--settle-ms", g.settle_ms, "time constant of every reading after a change (first order,\nwall clock; 0 = instant)")
               ->check(junco::cli_args::non_negative_number()),
           "MS");
  shown_as(app.add_option("--dialect", g.families, "command set (dialect) of a role (repeatable; the first is the default):\n" + family_lines())
               ->check(checked([](const std::string& v) { SimConfig c; apply_family(c, v); })),
           "ROLE=NAME");
  // The former spelling: not in --help, works with a warning (docs/names.md).
  app.add_option("--family", g.old_families, "")
      ->check(checked([](const std::string& v) { SimConfig c; apply_family(c, v); }))
      ->group("");
  shown_as(app.add_option("--serial", g.serial, "put ROLE on a pseudo-terminal (serial:/dev/pts/N); repeatable")
               ->check(checked([](const std::string& v) { check_role(v); })),
           "ROLE");
  shown_as(app.add_option("--fault", g.faults,
                          "inject a fault at start (repeatable; modes as for the control endpoint\n"
                          "below; error takes CODE:TEXT, e.g. source:error:-310:System error)")
               ->check(checked([](const std::string& v) { parse_fault_spec(v); })),
           "ROLE:MODE[:ARG]");
  app.footer(help_reference() +
             "\nExamples:\n"
             "  junco-sim --seed 7 --slots 4                   a lot of 4 parts\n"
             "  junco-sim --dialect source=scpi99 --serial meter  another supply dialect, meter on a pty\n"
             "  junco-sim --fault source:silent                a supply that never answers\n"
             "\nExit status: 0 stopped by a signal or quit, 1 failure, 2 bad command line or config.\n");
}

// The config file first, then every option given on the command line.
SimConfig build_config(const CLI::App& app, const Given& g) {
  SimConfig cfg;
  if (!g.config_file.empty()) {
    std::string text;
    try {
      text = junco::read_json_file(g.config_file);
    } catch (const std::exception& e) {
      throw std::invalid_argument(std::string("--config: ") + e.what());
    }
    std::vector<std::string> warnings;
    apply_config_json(cfg, text, &warnings);
    for (const auto& w : warnings) std::cerr << "junco-sim: warning: " << g.config_file << ": " << w << "\n";
  }
  if (!g.old_families.empty())
    std::cerr << "junco-sim: warning: --family is now spelled --dialect (the old spelling still works for now)\n";
  for (const auto& f : g.old_families) apply_family(cfg, f);
  if (app.count("--seed")) cfg.seed = g.seed;
  if (app.count("--slots")) cfg.slots = g.slots;
  if (app.count("--settle-ms")) cfg.settle_s = g.settle_ms / 1000.0;
  for (const auto& f : g.families) apply_family(cfg, f);
  for (const auto& r : g.serial) cfg.serial_roles.insert(r);
  for (const auto& f : g.faults) cfg.faults.push_back(parse_fault_spec(f));
  check_families(cfg);
  return cfg;
}

}  // namespace

int main(int argc, char** argv) {
  Given given;
  CLI::App cli;
  junco::cli_args::setup(cli, "junco-sim");
  define_options(cli, given);
  if (const auto code = junco::cli_args::parse(cli, argc, argv)) return *code;
  SimConfig config;
  try {
    config = build_config(cli, given);
  } catch (const std::invalid_argument& e) {
    std::cerr << "junco-sim: " << e.what() << "\n";
    return junco::exit_usage;
  }
  // Block the stop signals in every thread; the main thread waits for them.
  sigset_t stop;
  sigemptyset(&stop);
  sigaddset(&stop, SIGINT);
  sigaddset(&stop, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &stop, nullptr);
  ::signal(SIGPIPE, SIG_IGN);

  try {
    SimApp app(config);
    // quit: reply first (the control thread returns), then stop.
    app.on_quit = [] {
      std::thread([] {
        std::this_thread::sleep_for(std::chrono::milliseconds(50));
        ::kill(::getpid(), SIGTERM);
      }).detach();
    };
    const std::string ready = app.start();
    std::cout << ready << std::endl;  // the one stdout line
    std::cerr << "junco-sim: ready, seed " << config.seed << ", " << config.slots << " slots\n";
    int sig = 0;
    sigwait(&stop, &sig);
    std::cerr << "junco-sim: stopping on signal " << sig << "\n";
  } catch (const std::exception& e) {
    std::cerr << "junco-sim: " << e.what() << "\n";
    return junco::exit_failure;
  }
  std::fflush(nullptr);
  _exit(0);  // endpoint threads are blocked in I/O; no state needs unwinding
}
