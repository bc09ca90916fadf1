// junco transfer PART: a run's AC readings against the model of the part's
// fit, and the joint AC+DC fit with its verdict (juncod's part.transfer).
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/joint_report.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cmath>
#include <cstdio>
#include <map>
#include <optional>

namespace junco::cli {
namespace {

const char* const description = R"(Compares the AC readings of a part's run (the fixture gain Vout/Vin, in dB)
with the small-signal model of its latest fit: the diode as Rs + n·Vt/I
(parallel Cj when given) between the fixture input and the load. Then fits
n and Rs to the AC readings alone (the straight line rd = Rs + n·Vt/I), and
Is, n and Rs to the DC curve and the AC readings together, and says whether
these agree with the DC-only fit within their uncertainties: the AC readings
pin Rs and n through the dynamic resistance, the DC curve pins Is. A larger
Rs from the AC readings alone is the mark of self-heating at the top of the
DC sweep. Readings at a level below 100 uV or with a signal current above
0.1 x the bias are left out (and listed with --points).
)";
const char* const footer = R"(example:
  junco transfer WR-03 --cj 2pF --points

exit status: 0 shown (agreeing or not); 1 unknown part, no AC readings or fit, or daemon error; 2 bad options.)";

struct Options {
  std::string part, socket, lot;
  long run_id = 0;  // 0: the part's latest
  std::optional<double> sigma_db, cj_f;
  bool points = false, json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  app.description(description);
  app.footer(footer);
  app.add_option("PART", g_opt.part, "the part: id or label (junco parts lists them)")->required()->type_name("");
  app.add_option("--run", g_opt.run_id, "the run (default: the part's latest)")->type_name("ID")->check(positive_id());
  add_si_option(app, "--sigma", g_opt.sigma_db, "dB", "uncertainty of one AC reading (default 0.01 dB)");
  add_si_option(app, "--cj", g_opt.cj_f, "F",
                "junction capacitance for the model and the AC-alone fit, e.g. 2pF (default: none; matters once "
                "2*pi*f*Cj*n*Vt/I nears 0.1)");
  app.add_flag("--points", g_opt.points, "list every reading, not just the summary per frequency");
  app.add_option("--lot", g_opt.lot, "the lot of a PART given by label")->type_name("NAME");
  add_socket_option(app, g_opt.socket);
  app.add_flag("--json", g_opt.json, "print juncod's part.transfer result as JSON");
}

double num(const Json& j) { return j.is_number() ? j.get<double>() : std::nan(""); }

void print_report(const Json& r, bool all_points) {
  const auto& fx = r["fixture"];
  std::printf("part %ld  run %ld  fit %ld: AC transfer Vout/Vin against the model\n", r["part_id"].get<long>(), r["run_id"].get<long>(),
              r["fit_id"].get<long>());
  std::printf("  fixture RL %s, DC return %s, T = %.2f K; sigma %.3g dB per reading%s\n", format_si(num(fx["load_ohm"]), "Ω").c_str(),
              fx["dc_return_ohm"].is_number() ? format_si(num(fx["dc_return_ohm"]), "Ω").c_str() : "choke (open at AC)",
              num(r["temp_k"]), num(r["ac_sigma_db"]), num(r["cj_f"]) > 0 ? (", Cj " + format_si(num(r["cj_f"]), "F")).c_str() : "");
  const Json& points = r["points"];
  if (points.empty()) {
    std::printf("  no AC readings in this run (plan an \"ac\" section to take them)\n");
    return;
  }
  if (all_points) {
    std::printf("\n  %-12s %-12s %12s %12s %12s\n", "I", "f", "measured dB", "model dB", "residual dB");
    for (const auto& p : points)
      std::printf("  %-12s %-12s %12.4f %12.4f %12.4f%s\n", format_si(num(p["bias_i_a"]), "A").c_str(), format_si(num(p["freq_hz"]), "Hz").c_str(),
                  num(p["measured_db"]), num(p["model_db"]), num(p["residual_db"]),
                  p.value("used", true) ? "" : ("  (left out: " + p.value("excluded", "?") + ")").c_str());
  }
  struct Sum {
    int count = 0;
    double sq = 0, worst = 0;
  };
  std::map<double, Sum> by_freq;
  for (const auto& p : points) {
    if (!p.value("used", true)) continue;
    auto& s = by_freq[num(p["freq_hz"])];
    const double res = num(p["residual_db"]);
    ++s.count;
    s.sq += res * res;
    s.worst = std::max(s.worst, std::abs(res));
  }
  std::printf("\n  %-12s %8s %16s %16s\n", "frequency", "readings", "rms residual dB", "worst |res| dB");
  for (const auto& [f, s] : by_freq)
    std::printf("  %-12s %8d %16.4f %16.4f\n", format_si(f, "Hz").c_str(), s.count, std::sqrt(s.sq / s.count), s.worst);
  const Json& ex = r["excluded"];
  std::printf("  left out: %ld large-signal (signal peak > %.3g x bias), %ld below the level floor (%s)\n", ex["large_signal"].get<long>(),
              num(r["max_signal_ratio"]), ex["below_floor"].get<long>(), format_si(num(r["ac_floor_v"]), "V").c_str());
  if (r["joint"].is_object()) print_joint_report(r["joint"]);
}

int run() {
  return guarded("transfer", [&] {
    Json params = Json::object();
    if (g_opt.run_id > 0) params["run_id"] = g_opt.run_id;
    if (g_opt.sigma_db) {
      if (!(*g_opt.sigma_db > 0)) throw std::invalid_argument("--sigma must be > 0 dB");
      params["ac_sigma_db"] = *g_opt.sigma_db;
    }
    if (g_opt.cj_f) {
      if (!(*g_opt.cj_f >= 0)) throw std::invalid_argument("--cj must be >= 0 F");
      params["cj_f"] = *g_opt.cj_f;
    }
    RpcClient client(socket_path(g_opt.socket));
    params["part_id"] = resolve_part(client, g_opt.part, g_opt.lot.empty() ? std::nullopt : std::optional<std::string>(g_opt.lot));
    const Json r = client.call("part.transfer", params);
    if (g_opt.json) std::printf("%s\n", r.dump(2).c_str());
    else print_report(r, g_opt.points);
    return r["points"].empty() ? exit_failure : exit_ok;
  });
}

Command make_command() {
  Command c;
  c.name = "transfer";
  c.summary = "AC transfer of a part's run against its model, and the joint AC+DC fit";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
