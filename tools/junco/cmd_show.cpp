// junco show PART: a part's fitted model and its figures at chosen currents.
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/run_history.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>
#include <fstream>

namespace junco::cli {
namespace {

const char* const description = R"(Prints a part's latest fit: saturation current Is, ideality n, series
resistance Rs (and shunt Rsh when fitted), each ± its standard error; the fit
status and warnings; and, at each chosen forward current, the forward voltage
Vf and the small-signal resistance rd = dV/dI, ± standard error.

The first lines name the part, its lot, the run the fit was made from (its job
and date) and when the fit was made. A part measured more than once (a lot
re-measured) is never shown mixed: the other runs are listed with their dates.

PART is a part id (see junco parts) or a part label; a label used in several
lots needs --lot.
)";

const char* const footer = R"(examples:
  junco show WR-03 --at 100uA,1mA,10mA
  junco show WR-03 --run 4
  junco show WR-03 --export json --out wr03.json && junco design bias-r --model wr03.json --supply 5 --current 10mA

exit status: 0 shown; 1 unknown part or run, no usable fit of that run, or daemon error; 2 bad options.)";

struct Options {
  std::string part, socket, lot, export_format, out_path;
  std::vector<double> currents_a{1e-3, 10e-3};
  long run_id = 0;  // 0: the run of the latest fit
  bool json = false;
};
Options g_opt;  // bound by define(); one command per process

void define(CLI::App& app) {
  Options& o = g_opt;
  app.description(description);
  app.footer(footer);
  app.add_option("PART", o.part, "part id or label")->required()->type_name("");
  add_si_list_option(app, "--at", o.currents_a, "A", "comma-separated forward currents; units optional: 1mA, 10e-3, 5 mA, 100uA",
                     "1mA,10mA");
  app.add_option("--run", o.run_id, "the run to show (default: the run of the latest fit)")->type_name("RUN")->check(positive_id());
  app.add_option("--lot", o.lot, "the lot of a PART given by label")->type_name("NAME");
  add_socket_option(app, o.socket);
  app.add_flag("--json", o.json, "print {\"part\", \"run\", \"other_runs\", \"fit\", \"figures\"} as JSON");
  app.add_option("--export", o.export_format,
                 "print the part as the daemon exports it instead: json (model document for junco design/export/plot "
                 "--model), spice (.model card), csv (all readings), iv-csv, ac-csv, off-csv")
      ->type_name("FORMAT");
  app.add_option("--out", o.out_path, "with --export: write to FILE instead of standard output")->type_name("FILE");
}

std::string estimate(const Json& e, const std::string& unit) {
  if (!e.is_object() || !e["value"].is_number()) return "not determined";
  const auto fmt = [&](double x, int digits) {
    if (!unit.empty()) return format_si(x, unit, digits);
    char t[32];
    std::snprintf(t, sizeof t, "%.*g", digits, x);  // dimensionless (n): no SI prefix
    return std::string(t);
  };
  std::string text = fmt(e["value"].get<double>(), 5);
  if (e["std_error"].is_number()) text += " ± " + fmt(e["std_error"].get<double>(), 3);
  else text += " ± (not determined)";
  return text;
}

// The export is written as the daemon made it; a file is only replaced once
// the whole document has arrived.
int export_part(RpcClient& client, long part, const std::string& format, const std::optional<std::string>& out_path) {
  write_document(client.call("part.export", Json{{"part_id", part}, {"format", format}}).value("content", ""), out_path);
  return exit_ok;
}

Json run_json(const RunInfo& r) {
  return Json{{"run_id", r.run_id}, {"job_id", r.job_id}, {"state", r.state}, {"started_at", r.started_at},
              {"finished_at", r.finished_at.empty() ? Json(nullptr) : Json(r.finished_at)}};
}

int run() {
  const Options& o = g_opt;
  return guarded("show", [&] {
    if (!o.out_path.empty() && o.export_format.empty()) throw std::invalid_argument("--out goes with --export FORMAT");
    for (double i : o.currents_a)
      if (!(i > 0)) throw std::invalid_argument("--at currents must be > 0 (forward), got " + format_si(i, "A"));
    RpcClient client(socket_path(o.socket));
    const long part = resolve_part(client, o.part, o.lot.empty() ? std::nullopt : std::optional<std::string>(o.lot));
    if (!o.export_format.empty()) {
      if (o.run_id) throw std::invalid_argument("--export gives the latest fit and run; --run goes without it");
      return export_part(client, part, o.export_format, o.out_path.empty() ? std::nullopt : std::optional<std::string>(o.out_path));
    }
    const Json fit = client.call("part.fit", Json{{"part_id", part}});
    const long fit_run = fit.value("run_id", Json(0)).is_number() ? fit["run_id"].get<long>() : 0;
    const Json about = client.call("part.readings", Json{{"part_id", part}, {"run_id", fit_run}})["part"];
    const auto runs = runs_of_part(all_runs(client), part);
    const auto find_run = [&](long id) -> const RunInfo* {
      for (const auto& r : runs)
        if (r.run_id == id) return &r;
      return nullptr;
    };
    const std::string who = "part " + about.value("label", std::string("?")) + " (id " + std::to_string(part) + "), lot " +
                            about.value("lot", std::string("?"));
    if (o.run_id && !find_run(o.run_id)) {
      std::string list;
      for (const auto& r : runs) list += (list.empty() ? "" : ", ") + std::to_string(r.run_id);
      throw std::runtime_error(who + " has no run " + std::to_string(o.run_id) + " (its runs: " + (list.empty() ? "none" : list) + ")");
    }
    if (o.run_id && o.run_id != fit_run) {
      // juncod serves the latest fit of a part; an older run's fit is not
      // served, so nothing from another run is printed as if it were this one.
      const RunInfo* shown = find_run(fit_run);
      throw std::runtime_error(who + ": " + describe_run(*find_run(o.run_id)) + " has no fit that juncod serves; its latest fit is from " +
                               (shown ? describe_run(*shown) : "run " + std::to_string(fit_run)) + " (junco show " + o.part + ")");
    }
    const Json figures = client.call("part.figures", Json{{"part_id", part}, {"currents_a", o.currents_a}});
    const RunInfo* shown = find_run(fit_run);
    std::vector<const RunInfo*> others;
    for (const auto& r : runs)
      if (r.run_id != fit_run) others.push_back(&r);
    if (o.json) {
      Json other = Json::array();
      for (const auto* r : others) other.push_back(run_json(*r));
      std::printf("%s\n", Json{{"part", about}, {"run", shown ? run_json(*shown) : Json(nullptr)}, {"other_runs", other},
                                {"fit", fit}, {"figures", figures}}
                               .dump(2)
                               .c_str());
      return exit_ok;
    }
    std::printf("%s\n", who.c_str());
    std::printf("  %s, fit %ld made %s\n", shown ? describe_run(*shown).c_str() : "run unknown", fit.value("fit_id", 0L),
                fit.value("created_at", "?").c_str());
    if (!others.empty()) {
      std::string list;
      for (const auto* r : others) list += (list.empty() ? "" : ", ") + describe_run(*r);
      std::printf("  also measured in %s; shown: the latest fit, from run %ld only\n", list.c_str(), fit_run);
    }
    std::printf("  fit %s, %ld points, T = %.2f K\n", fit.value("status", "?").c_str(), fit.value("points_used", 0L),
                fit.value("temp_k", Json()).is_number() ? fit["temp_k"].get<double>() : 0.0);
    std::printf("  Is  = %s\n  n   = %s\n  Rs  = %s\n", estimate(fit["is_a"], "A").c_str(), estimate(fit["n"], "").c_str(),
                estimate(fit["rs_ohm"], "Ω").c_str());
    if (fit.contains("rsh_ohm") && fit["rsh_ohm"].is_object() && fit["rsh_ohm"]["value"].is_number())
      std::printf("  Rsh = %s\n", estimate(fit["rsh_ohm"], "Ω").c_str());
    if (fit.value("rms_residual", Json()).is_number()) std::printf("  rms residual %.3g\n", fit["rms_residual"].get<double>());
    // The capacitance law, when the run read the part off (plan.ac.off_state).
    const Json cap = fit.value("detail", Json::object()).value("junction_cap", Json());
    if (fit.value("cj0_f", Json()).is_object() && fit["cj0_f"]["value"].is_number()) {
      const bool held = cap.value("law_held", false);
      const auto law = [&](const char* key, const char* unit) {
        if (!held) return estimate(fit[key], unit);
        Json value_only = fit[key];
        value_only["std_error"] = nullptr;
        const std::string text = estimate(value_only, unit);
        return text.substr(0, text.find(" ±")) + " (held at the default: fewer than 4 reverse biases)";
      };
      std::printf("  CJO = %s\n  VJ  = %s\n  M   = %s\n  (from %ld off-state readings)\n", estimate(fit["cj0_f"], "F").c_str(),
                  law("vj_v", "V").c_str(), law("m", "").c_str(), cap.value("points_used", 0L));
    } else if (cap.is_object()) {
      std::printf("  junction capacitance not fitted: %s\n", cap.value("message", std::string("?")).c_str());
    }
    for (const auto& w : fit.value("warnings", Json::array())) std::printf("  warning: %s\n", w.dump().c_str());
    std::printf("\n  %12s  %24s  %24s\n", "I", "Vf", "rd");
    for (const auto& f : figures.value("figures", Json::array())) {
      const auto pm = [&](const char* key, const char* unit) {  // {value, std_error}
        const Json e = f.value(key, Json::object());
        if (!e.value("value", Json()).is_number()) return std::string("not determined");
        std::string t = format_si(e["value"].get<double>(), unit, 5);
        if (e.value("std_error", Json()).is_number()) t += " ± " + format_si(e["std_error"].get<double>(), unit, 3);
        return t;
      };
      std::printf("  %12s  %24s  %24s\n", format_si(f.value("i_a", 0.0), "A").c_str(), pm("vf_v", "V").c_str(), pm("rd_ohm", "Ω").c_str());
    }
    return exit_ok;
  });
}

Command show_command() {
  Command c;
  c.name = "show";
  c.summary = "show a part's fitted model, Vf and rd, and which run it came from";
  c.define = define;
  c.run_parsed = run;
  return c;
}

const bool registered = register_command(show_command());

}  // namespace
}  // namespace junco::cli
