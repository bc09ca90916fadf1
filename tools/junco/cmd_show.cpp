// junco show PART: a part's fitted model and its figures at chosen currents.
#include "tools/junco/command.hpp"
#include "tools/junco/rpc_client.hpp"

#include <cstdio>
#include <fstream>

namespace junco::cli {
namespace {

const char* const usage = R"(usage: junco show PART [--at CURRENTS] [--lot NAME] [--socket PATH] [--json]

Prints a part's latest fit: saturation current Is, ideality n, series
resistance Rs (and shunt Rsh when fitted), each ± its standard error; the fit
status and warnings; and, at each chosen forward current, the forward voltage
Vf and the small-signal resistance rd = dV/dI, ± standard error.

PART is a part id (see junco parts) or a part label; a label used in several
lots needs --lot.

options:
  --at CURRENTS  comma-separated forward currents (default 1mA,10mA); units
                 optional: 1mA, 10e-3, 5 mA, 100uA
  --lot NAME     the lot of a PART given by label
  --socket PATH  juncod's socket (see junco status --help)
  --json         print {"fit":..., "figures":...} as JSON
  --export FORMAT  print the part as the daemon exports it instead:
                 json (model document for junco design/export/plot --model),
                 spice (.model card), csv (all readings), iv-csv, ac-csv, off-csv
  --out FILE     with --export: write to FILE instead of standard output

examples:
  junco show WR-03 --at 100uA,1mA,10mA
  junco show WR-03 --export json --out wr03.json && junco design bias-r --model wr03.json --supply 5 --current 10mA

exit status: 0 shown; 1 unknown part, no usable fit, or daemon error; 2 bad options.)";

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

int run(std::vector<std::string> args) {
  return guarded("show", [&] {
    const auto socket = take_socket_option(args);
    const bool json = take_flag(args, "--json");
    const auto lot = take_option(args, "--lot");
    const auto at = take_option(args, "--at");
    const auto export_format = take_option(args, "--export");
    const auto out_path = take_option(args, "--out");
    if (out_path && !export_format) throw std::invalid_argument("--out goes with --export FORMAT");
    const auto currents = parse_quantity_list(at.value_or("1mA,10mA"), "A");
    for (double i : currents)
      if (!(i > 0)) throw std::invalid_argument("--at currents must be > 0 (forward), got " + format_si(i, "A"));
    if (args.size() != 1) throw std::invalid_argument("expected one PART (id or label)");
    RpcClient client(socket);
    const long part = resolve_part(client, args[0], lot);
    if (export_format) return export_part(client, part, *export_format, out_path);
    const Json fit = client.call("part.fit", Json{{"part_id", part}});
    const Json figures = client.call("part.figures", Json{{"part_id", part}, {"currents_a", currents}});
    if (json) {
      std::printf("%s\n", Json{{"fit", fit}, {"figures", figures}}.dump(2).c_str());
      return exit_ok;
    }
    std::printf("part %ld  fit %ld (%s, %ld points, T = %.2f K)\n", part, fit.value("fit_id", 0L), fit.value("status", "?").c_str(),
                fit.value("points_used", 0L), fit.value("temp_k", Json()).is_number() ? fit["temp_k"].get<double>() : 0.0);
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
      const auto pm = [&](const char* v, const char* se, const char* unit) {
        if (!f[v].is_number()) return std::string("not determined");
        std::string t = format_si(f[v].get<double>(), unit, 5);
        if (f[se].is_number()) t += " ± " + format_si(f[se].get<double>(), unit, 3);
        return t;
      };
      std::printf("  %12s  %24s  %24s\n", format_si(f.value("i_a", 0.0), "A").c_str(), pm("vf_v", "vf_v_se", "V").c_str(),
                  pm("rd_ohm", "rd_ohm_se", "Ω").c_str());
    }
    return exit_ok;
  });
}

const bool registered = register_command({"show", "show a part's fitted model, Vf and rd", usage, run});

}  // namespace
}  // namespace junco::cli
