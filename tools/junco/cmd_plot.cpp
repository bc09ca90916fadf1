// junco plot: plots of a part's readings and fit, its AC transfer, and a
// lot's spread; from files (a readings CSV and a JSON model document) or
// straight from juncod (--part, --lot), which exports the same documents.
#include "formats/readings_csv.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/lot_stats.hpp"
#include "formats/model_document.hpp"
#include "fitting/transfer.hpp"
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "tools/junco/plot_gnuplot.hpp"
#include "tools/junco/rpc_client.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

namespace junco::cli {
namespace {

using namespace junco::fitting;

// The kinds in "junco plot KIND " lines: the man page test and the bash
// completion read them from --help.
const char* const description =
    "usage: junco plot iv  (--part PART | --readings IV.csv --model MODEL.json) --out FILE.svg|.png\n"
    "       junco plot ac  (--part PART | --readings AC.csv --model MODEL.json) --out FILE [--source OHM] [--load OHM]\n"
    "                      [--bias-resistor OHM] [--dc-return OHM]\n"
    "       junco plot off (--part PART | --readings OFF.csv --model MODEL.json) --out FILE [--load OHM] [--dc-return OHM]\n"
    "       junco plot lot (--lot NAME | MODEL.json...) --out FILE\n\n"
    "--part PART (id or label, with --lot NAME when a label is in several lots) and\n"
    "--lot NAME read the readings and fits from juncod (--socket PATH, see junco status\n"
    "--help); for ac the fixture is the one stored with the run.\n"
    "iv:  forward current (log axis) against voltage, readings and the model, and the voltage\n"
    "     residual (mV) of each reading against the model. CSV header: v,i_a. From juncod, the\n"
    "     readings the stored fit left out (and why) are the ones drawn apart; from files, those\n"
    "     below the noise floor (--noise-floor, default junco fit's).\n"
    "ac:  fixture gain Vout/Vin (dB) against bias current, measured and modelled.\n"
    "     CSV header: bias_i_a,freq_hz,vin,vout. Fixture defaults 50/50 ohm, no shunts.\n"
    "off: the part switched off (plan.ac.off_state): junction capacitance from each reading against\n"
    "     reverse bias with the fitted law CJO*(1+VR/VJ)^-M, and the isolation measured. CSV header:\n"
    "     reverse_v,freq_hz,vin,vout (junco show PART --export off-csv writes one).\n"
    "lot: the spread of IS, N and RS over the parts, one panel each.\n"
    "The gnuplot script is kept as FILE.gp. PNG when FILE ends in .png.\n"
    "junco plot KIND --help lists the options of one plot.";

const char* const footer = R"(examples:
  junco plot iv --part WR-03 --out iv.svg
  junco plot ac --readings WR-01-ac.csv --model WR-01.json --load 50 --out ac.png
  junco plot lot --lot WREN-0912 --out lot.svg

exit status: 0 written; 1 daemon error; 2 bad options, unreadable file or document, unknown part.)";

struct Options {
  std::string kind;  // the subcommand given: iv, ac, off, lot
  std::string part, lot, readings, model, out, socket;
  std::vector<std::string> files;  // lot: model documents
  std::optional<double> source_ohm, load_ohm, bias_resistor_ohm, dc_return_ohm, noise_floor_a;
};
Options g_opt;  // bound by define(); one command per process

std::string slurp(const std::string& path) {
  std::ifstream f(path);
  if (!f) throw std::runtime_error("cannot read '" + path + "'");
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

PartModel parse_model(const std::string& text, const std::string& where) {
  std::string why;
  auto m = parse_model_document(text, &why);
  if (!m) throw std::runtime_error(where + ": " + why);
  return *m;
}

ReadingsTable parse_readings(const std::string& text, const std::string& where) {
  std::string why;
  auto t = parse_readings_csv(text, &why);
  if (!t) throw std::runtime_error(where + ": " + why);
  return *t;
}

// Where a plot's documents come from: the files named on the command line,
// or juncod's exports of a stored part (the same formats).
struct Source {
  const Options& o;
  std::optional<RpcClient> client;
  long part_id = 0;

  explicit Source(const Options& options) : o(options) {
    if (o.part.empty()) return;
    client.emplace(socket_path(o.socket));
    part_id = resolve_part(*client, o.part, o.lot.empty() ? std::nullopt : std::optional<std::string>(o.lot));
  }
  bool daemon() const { return client.has_value(); }
  std::string where(const char* what) const {
    return daemon() ? "part " + std::to_string(part_id) + " " + what : std::string(what) == "model" ? o.model : o.readings;
  }
  std::string exported(const char* format) {
    return client->call("part.export", Json{{"part_id", part_id}, {"format", format}}).value("content", "");
  }
  PartModel model() { return parse_model(daemon() ? exported("json") : slurp(o.model), where("model")); }
  ReadingsTable readings(const char* format) {
    return parse_readings(daemon() ? exported(format) : slurp(o.readings), where("readings"));
  }
};

std::string row(double a, double b) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.9g %.9g\n", a, b);
  return buf;
}

std::string title_of(const PartModel& m) {
  return "part " + m.part_label + (m.lot.empty() ? std::string() : ", lot " + m.lot);
}

// A forward reading as the I-V plot draws it: used by the fit, or left out and why.
struct IvRow {
  double v, i_a;
  bool used;
  std::string reason;
};

// From juncod: the readings of the run the stored fit was made from, each
// with how that fit treated it (part.readings: used_by_fit, fit_excluded),
// so the plot shows the fit's own exclusions and not this program's rules.
std::vector<IvRow> stored_iv_rows(Source& src) {
  const Json fit = src.client->call("part.fit", Json{{"part_id", src.part_id}});
  Json params{{"part_id", src.part_id}};
  if (fit.value("run_id", Json()).is_number()) params["run_id"] = fit["run_id"];
  const Json r = src.client->call("part.readings", params);
  if (!r.value("fit_id", Json()).is_number())
    throw std::runtime_error("part " + std::to_string(src.part_id) + ": juncod does not say which readings its fit used (fit " +
                             fit.value("fit_id", Json()).dump() + " names no run)");
  std::vector<IvRow> rows;
  for (const auto& p : r["points"]) {
    if (!p.value("used_by_fit", Json()).is_boolean()) continue;  // not a reading the forward fit takes
    rows.push_back({p["v"].get<double>(), p["i_a"].get<double>(), p["used_by_fit"].get<bool>(),
                    p.value("fit_excluded", Json()).is_string() ? p["fit_excluded"].get<std::string>() : std::string()});
  }
  return rows;
}

int plot_iv(Source& src) {
  const Options& o = src.o;
  const auto m = src.model();
  std::vector<IvRow> rows;
  std::string excluded_title;
  if (src.daemon()) {
    rows = stored_iv_rows(src);
    std::vector<std::string> reasons;  // as the fit gave them, each once
    for (const auto& r : rows)
      if (!r.used && std::find(reasons.begin(), reasons.end(), r.reason) == reasons.end()) reasons.push_back(r.reason);
    excluded_title = "left out by the stored fit";
    for (std::size_t k = 0; k < reasons.size() && k < 2; ++k) excluded_title += (k ? "; " : ": ") + reasons[k];
    if (reasons.size() > 2) excluded_title += "; ...";
  } else {
    // From files: the fit's noise floor rule (junco fit's default, or --noise-floor).
    FitOptions fit_rules;
    if (o.noise_floor_a) fit_rules.noise_floor_a = *o.noise_floor_a;
    const double floor_a = effective_noise_floor_a(fit_rules);
    for (const auto& p : src.readings("iv-csv").iv) rows.push_back({p.v, p.i_a, !(p.i_a < floor_a), ""});
    char title[80];
    std::snprintf(title, sizeof title, "excluded (below noise floor %.2g A)", floor_a);
    excluded_title = title;
  }
  if (rows.empty()) throw std::runtime_error("no forward readings (v,i_a) in " + src.where("readings"));
  std::string meas, excluded, resid, model;
  double i_lo = 1e300, i_hi = 0;
  // the residual line runs along the axis
  std::sort(rows.begin(), rows.end(), [](const IvRow& a, const IvRow& b) { return a.i_a < b.i_a; });
  for (const auto& p : rows) {
    if (!(p.i_a > 0) || !(p.v > 0)) continue;  // not on a log current axis
    if (!p.used) {
      excluded += row(p.v, p.i_a);
      continue;
    }
    meas += row(p.v, p.i_a);
    resid += row(p.i_a, 1e3 * (p.v - diode_voltage_v(m.params, p.i_a, m.temp_k)));
    i_lo = std::min(i_lo, p.i_a);
    i_hi = std::max(i_hi, p.i_a);
  }
  if (meas.empty()) throw std::runtime_error("no forward readings used by the fit in " + src.where("readings"));
  for (int k = 0; k <= 200; ++k) {
    const double i = i_lo * std::pow(i_hi / i_lo, k / 200.0);
    model += row(diode_voltage_v(m.params, i, m.temp_k), i);
  }
  if (excluded.empty()) excluded = "NaN NaN\n";  // keeps $d3 valid; draws nothing
  PlotJob job{o.out, {meas, model, resid, excluded}, "", 800, 800};
  char fit_label[200];
  std::snprintf(fit_label, sizeof fit_label, "model IS=%.3g A, N=%.3f, RS=%.3g {/Symbol W}", m.params.is_a, m.params.n,
                m.params.rs_ohm);
  job.body = "set multiplot layout 2,1 title " + gnuplot_literal(title_of(m)) + " noenhanced\n"
             "set logscale y\nset format y '10^{%L}'\nset xlabel 'forward voltage V (V)'\n"
             "set ylabel 'forward current I (A)'\n"
             "plot $d0 using 1:2 with points pt 7 ps 0.6 title 'readings used by the fit', "
             "$d3 using 1:2 with points pt 6 ps 0.8 lc 'gray40' title " + gnuplot_literal(excluded_title) + ", "
             "$d1 using 1:2 with lines lw 2 title '" + std::string(fit_label) + "'\n"
             "unset logscale y\nset format y '%g'\nset logscale x\nset format x '10^{%L}'\n"
             "set xlabel 'forward current I (A)'\nset ylabel 'residual V_{meas} - V_{model} (mV)'\n"
             "plot $d2 using 1:2 with linespoints pt 7 ps 0.6 title 'residual', 0 with lines lc 'black' notitle\n"
             "unset multiplot";
  const auto err = run_gnuplot(job);
  if (!err.empty()) throw std::runtime_error(err);
  return exit_ok;
}



// One AC reading as plotted: measured and modelled gain, and whether the
// small-signal comparison uses it (juncod's part.transfer says; from files,
// every reading is used).
struct AcRow {
  double i_a, freq_hz, measured_db, residual_db;
  bool used;
};

int plot_ac(Source& src) {
  const Options& o = src.o;
  const auto m = src.model();
  Fixture fx{o.source_ohm.value_or(50), o.load_ohm.value_or(50), o.bias_resistor_ohm.value_or(no_shunt_ohm), o.dc_return_ohm.value_or(no_shunt_ohm)};
  const AcPart part{m.params, std::isfinite(m.cj0_f) ? m.cj0_f : 0.0};
  std::vector<AcRow> rows;
  if (src.daemon()) {  // the run's fixture and juncod's residuals, unless the fixture is overridden here
    const Json r = src.client->call("part.transfer", Json{{"part_id", src.part_id}});
    const Json& f = r["fixture"];
    if (!o.load_ohm) fx.load_ohm = f["load_ohm"].get<double>();
    if (!o.source_ohm) fx.source_ohm = f["source_ohm"].get<double>();
    if (!o.dc_return_ohm && f["dc_return_ohm"].is_number()) fx.dc_return_ohm = f["dc_return_ohm"].get<double>();
    for (const auto& p : r["points"]) {
      const double i = p["bias_i_a"], freq = p["freq_hz"], meas = p["measured_db"];
      const double model = to_db(fixture_gain(fx, diode_on_impedance(part, i, freq, m.temp_k)));
      rows.push_back({i, freq, meas, meas - model, p.value("used", true)});
    }
  } else {
    const auto t = src.readings("ac-csv");
    for (const auto& r : ac_residuals(fx, part, t.ac, m.temp_k)) rows.push_back({r.bias_i_a, 0.0, r.measured_db, r.residual_db, true});
    for (std::size_t k = 0; k < rows.size(); ++k) rows[k].freq_hz = t.ac[k].freq_hz;
  }
  if (rows.empty()) throw std::runtime_error("no AC readings (bias_i_a,freq_hz,vin,vout) in " + src.where("readings"));
  std::sort(rows.begin(), rows.end(), [](const AcRow& a, const AcRow& b) { return a.i_a < b.i_a; });
  std::vector<double> freqs;
  double i_lo = 1e300, i_hi = 0;
  std::string excluded;
  for (const auto& r : rows) {
    if (std::find(freqs.begin(), freqs.end(), r.freq_hz) == freqs.end()) freqs.push_back(r.freq_hz);
    i_lo = std::min(i_lo, r.i_a);
    i_hi = std::max(i_hi, r.i_a);
    if (!r.used) excluded += row(r.i_a, r.measured_db);
  }
  std::sort(freqs.begin(), freqs.end());
  if (excluded.empty()) excluded = "NaN NaN\n";  // keeps $d0 valid; draws nothing
  PlotJob job{o.out, {excluded}, "", 800, 800};
  std::string top = "plot $d0 using 1:2 with points pt 6 ps 0.8 lc 'gray40' title 'left out (large signal or near the level floor)'";
  std::string bottom = "plot 0 with lines lc 'black' notitle";
  for (std::size_t k = 0; k < freqs.size(); ++k) {
    std::string meas, model, resid;
    for (const auto& r : rows)
      if (r.freq_hz == freqs[k] && r.used) {
        meas += row(r.i_a, r.measured_db);
        resid += row(r.i_a, r.residual_db);
      }
    for (int s = 0; s <= 200; ++s) {
      const double i = i_lo * std::pow(i_hi / i_lo, s / 200.0);
      model += row(i, to_db(fixture_gain(fx, diode_on_impedance(part, i, freqs[k], m.temp_k))));
    }
    if (meas.empty()) meas = resid = "NaN NaN\n";
    const std::size_t base = job.datablocks.size();
    job.datablocks.insert(job.datablocks.end(), {meas, model, resid});
    const std::string f = format_si(freqs[k], "Hz", 3);
    const std::string colour = " lc " + std::to_string(k + 1);
    top += ", $d" + std::to_string(base) + " using 1:2 with points pt 7 ps 0.8" + colour + " title 'measured, " + f + "'";
    top += ", $d" + std::to_string(base + 1) + " using 1:2 with lines lw 2" + colour + " title 'model, " + f + "'";
    bottom += ", $d" + std::to_string(base + 2) + " using 1:2 with linespoints pt 7 ps 0.6" + colour + " title '" + f + "'";
  }
  char model_label[200];
  std::snprintf(model_label, sizeof model_label, "model: IS=%.3g A, N=%.3f, RS=%.3g {/Symbol W}, RL=%.4g {/Symbol W}%s", m.params.is_a,
                m.params.n, m.params.rs_ohm, fx.load_ohm, part.cj_f > 0 ? ", with Cj" : "");
  char xrange[80];  // both panels on the same current axis
  std::snprintf(xrange, sizeof xrange, "set xrange [%.6g:%.6g]\n", i_lo / 1.25, i_hi * 1.25);
  job.body = "set multiplot layout 2,1 title " + gnuplot_literal(title_of(m) + ": AC transfer of the series switch") + " noenhanced\n"
             "set logscale x\nset format x '10^{%L}'\n" + std::string(xrange) + "set xlabel 'bias current I (A)'\n"
             "set ylabel 'transfer V_{out}/V_{in} (dB)'\nset key bottom right\n"
             "set label 1 '" + std::string(model_label) + "' at graph 0.02, graph 0.95\n" + top + "\n"
             "unset label 1\nset ylabel 'residual measured - model (dB)'\nset key top right\n" + bottom + "\n"
             "unset multiplot";
  const auto err = run_gnuplot(job);
  if (!err.empty()) throw std::runtime_error(err);
  return exit_ok;
}

// One off-state reading as plotted.
struct OffRow {
  double reverse_v, freq_hz, c_f, isolation_db;
  bool used;
};

// C against reverse bias with the fitted law, and the isolation measured
// with the part off. From juncod, the per-reading C of its fit; from files,
// computed here from the readings, the model's RS and the fixture options.
int plot_off(Source& src) {
  const Options& o = src.o;
  const auto m = src.model();
  std::vector<OffRow> rows;
  if (src.daemon()) {
    const Json fit = src.client->call("part.fit", Json{{"part_id", src.part_id}});
    const Json cap = fit.value("detail", Json::object()).value("junction_cap", Json());
    if (!cap.is_object()) throw std::runtime_error("part " + std::to_string(src.part_id) + " has no off-state readings (plan.ac.off_state)");
    for (const auto& r : cap.value("readings", Json::array()))
      rows.push_back({r["reverse_v"], r["freq_hz"], r["c_f"].is_number() ? r["c_f"].get<double>() : std::nan(""),
                      r.contains("fixture_ratio_db") && r["fixture_ratio_db"].is_number() ? r["fixture_ratio_db"].get<double>()
                      : r.value("isolation_db", Json()).is_number() ? r["isolation_db"].get<double>() : std::nan(""), r.value("left_out", "").empty()});
  } else {
    const auto t = src.readings("off-csv");
    if (t.off.empty() && (!t.iv.empty() || !t.ac.empty()))
      throw std::runtime_error(src.where("readings") + ": not an off-state table (header reverse_v,freq_hz,vin,vout; "
                               "junco show PART --export off-csv writes one)");
    const Fixture fx{50.0, o.load_ohm.value_or(50), no_shunt_ohm, o.dc_return_ohm.value_or(no_shunt_ohm)};
    const auto fit = fit_junction_cap(t.off, fx, m.params.rs_ohm);
    for (std::size_t k = 0; k < t.off.size(); ++k)
      rows.push_back({t.off[k].reverse_v, t.off[k].freq_hz, fit.c_f[k], off_state_isolation_db(t.off[k]), fit.left_out[k].empty()});
  }
  if (rows.empty()) throw std::runtime_error("no off-state readings (reverse_v,freq_hz,vin,vout) in " + src.where("readings"));
  std::vector<double> freqs;
  double v_hi = 0;
  std::string left_out = "NaN NaN\n";
  for (const auto& r : rows) {
    if (std::find(freqs.begin(), freqs.end(), r.freq_hz) == freqs.end()) freqs.push_back(r.freq_hz);
    v_hi = std::max(v_hi, r.reverse_v);
    if (!r.used && std::isfinite(r.isolation_db)) left_out += row(r.reverse_v, r.isolation_db);
  }
  std::sort(freqs.begin(), freqs.end());
  std::string law = "NaN NaN\n";
  const bool has_law = std::isfinite(m.cj0_f) && m.cj0_f > 0;
  if (has_law) {
    law.clear();
    for (int k = 0; k <= 200; ++k) {
      const double v = v_hi * 1.05 * k / 200.0;
      law += row(v, 1e12 * m.cj0_f * std::pow(1.0 + v / m.vj_v, -m.m));
    }
  }
  PlotJob job{o.out, {law, left_out}, "", 800, 800};
  std::string top = "plot $d0 using 1:2 with lines lw 2 lc 'black' title '" +
                    std::string(has_law ? "fitted law" : "no law fitted") + "'";
  const bool any_left_out = left_out != "NaN NaN\n";
  std::string bottom = "plot $d1 using 1:2 with points pt 6 ps 0.8 lc 'gray40' " +
                       std::string(any_left_out ? "title 'left out of the fit (below the level floor, too little isolation)'" : "notitle");
  for (std::size_t k = 0; k < freqs.size(); ++k) {
    std::string c, iso;
    for (const auto& r : rows) {
      if (r.freq_hz != freqs[k]) continue;
      if (r.used && std::isfinite(r.c_f)) c += row(r.reverse_v, 1e12 * r.c_f);
      if (r.used && std::isfinite(r.isolation_db)) iso += row(r.reverse_v, r.isolation_db);
    }
    if (c.empty()) c = "NaN NaN\n";
    if (iso.empty()) iso = "NaN NaN\n";
    const std::size_t base = job.datablocks.size();
    job.datablocks.insert(job.datablocks.end(), {c, iso});
    const std::string f = format_si(freqs[k], "Hz", 3), colour = " lc " + std::to_string(k + 1);
    top += ", $d" + std::to_string(base) + " using 1:2 with points pt 7 ps 0.8" + colour + " title 'from each reading, " + f + "'";
    bottom += ", $d" + std::to_string(base + 1) + " using 1:2 with linespoints pt 7 ps 0.6" + colour + " title '" + f + "'";
  }
  char law_label[200] = "";
  if (has_law)
    std::snprintf(law_label, sizeof law_label, "CJO=%.4g pF, VJ=%.3g V, M=%.3g (RS=%.3g {/Symbol W})", 1e12 * m.cj0_f, m.vj_v, m.m,
                  m.params.rs_ohm);
  char xrange[80];  // both panels on the same bias axis, the end points clear of the border
  std::snprintf(xrange, sizeof xrange, "set xrange [%.6g:%.6g]\n", -0.03 * v_hi, 1.06 * v_hi);
  job.body = "set multiplot layout 2,1 title " + gnuplot_literal(title_of(m) + ": off state") + " noenhanced\n" + std::string(xrange) +
             "set xlabel 'reverse bias V_R (V)'\nset ylabel 'junction capacitance C_j (pF)'\nset key top right\n"
             "set label 1 '" + std::string(law_label) + "' at graph 0.02, graph 0.08\n" + top + "\n"
             "unset label 1\nset ylabel 'isolation -20 log_{10}(V_{out}/V_{in}) (dB)'\nset key bottom right\n" + bottom + "\n"
             "unset multiplot";
  const auto err = run_gnuplot(job);
  if (!err.empty()) throw std::runtime_error(err);
  return exit_ok;
}

// A part label as one whitespace-free, quote-free token of a data block row
// (it becomes the x tick label).
std::string tick_label(const std::string& label) {
  std::string t;
  for (char c : label) t += (c == '"' || c == '\'' || static_cast<unsigned char>(c) <= ' ') ? '_' : c;
  return t.empty() ? "?" : t;
}

// "index value standard-error label"; an undetermined error draws no bar.
std::string lot_row(int k, double value, double se, const std::string& label) {
  char buf[160];
  std::snprintf(buf, sizeof buf, "%d %.9g %.9g \"%s\"\n", k, value, std::isfinite(se) ? se : 0.0, tick_label(label).c_str());
  return buf;
}

// The model documents of a lot's parts that have a usable fit, from juncod.
std::vector<PartModel> lot_from_daemon(const std::string& socket, const std::string& lot) {
  RpcClient client(socket);
  std::vector<PartModel> models;
  for (const auto& p : client.call("part.list", Json{{"lot", lot}}).value("parts", Json::array())) {
    const long id = p.value("part_id", 0L);
    try {
      const std::string text = client.call("part.export", Json{{"part_id", id}, {"format", "json"}}).value("content", "");
      models.push_back(parse_model(text, "part " + std::to_string(id)));
    } catch (const RpcError& e) {
      std::fprintf(stderr, "junco plot lot: leaving out part %s: %s\n", p.value("label", "?").c_str(), e.what());
    }
  }
  if (models.empty()) throw std::runtime_error("no fitted parts in lot '" + lot + "'");
  return models;
}

int plot_lot(const std::vector<PartModel>& models, const Options& o) {
  std::string is, n, rs, lot;
  int k = 0;
  for (const auto& m : models) {
    lot = m.lot;
    is += lot_row(k, m.params.is_a, m.is_se_a, m.part_label);
    n += lot_row(k, m.params.n, m.n_se, m.part_label);
    rs += lot_row(k, m.params.rs_ohm, m.rs_se_ohm, m.part_label);
    ++k;
  }
  PlotJob job{o.out, {is, n, rs}, "", 800, 900};
  const std::string range = "set xrange [-0.5:" + std::to_string(k) + "-0.5]\n";
  const std::string points = " using 1:2:3:xtic(4) with yerrorbars pt 7 lw 1.5\n";
  job.body = "set multiplot layout 3,1 title " +
             gnuplot_literal("lot " + lot + ": spread of the fitted parameters (" + std::to_string(k) +
                             " parts, bars: ± 1 standard error)") +
             " noenhanced\n" + range + "set xtics rotate by -30 noenhanced\nset key off\n"
             "set logscale y\nset format y '10^{%L}'\nset ylabel 'IS (A)'\nplot $d0" + points +
             "unset logscale y\nset format y '%g'\nset ylabel 'N (1)'\nplot $d1" + points +
             "set ylabel 'RS ({/Symbol W})'\nset xlabel 'part'\nplot $d2" + points + "unset multiplot";
  const auto err = run_gnuplot(job);
  if (!err.empty()) throw std::runtime_error(err);
  return exit_ok;
}

// Options every plot of a part takes: where the documents come from, the output.
CLI::App* part_plot(CLI::App& app, const char* kind, const char* summary, Options& o) {
  CLI::App* sub = app.add_subcommand(kind, summary);
  sub->add_option("--part", o.part, "a part stored by juncod (id or label)")->type_name("PART");
  sub->add_option("--lot", o.lot, "with --part: the lot, when the label is in several")->type_name("NAME");
  sub->add_option("--readings", o.readings, "readings CSV (without --part)")->type_name("CSV");
  sub->add_option("--model", o.model, "model document, as junco fit --model-out writes (without --part)")->type_name("MODEL.json");
  sub->add_option("--out", o.out, "the plot: FILE.svg or FILE.png (script kept as FILE.gp)")->type_name("FILE")->required();
  add_socket_option(*sub, o.socket);
  return sub;
}

void define(CLI::App& app) {
  Options& o = g_opt;
  app.description(description);
  app.footer(footer);
  app.require_subcommand(1, 1);
  CLI::App* iv = part_plot(app, "iv", "forward current against voltage, with the residuals", o);
  add_si_option(*iv, "--noise-floor", o.noise_floor_a, "A", "from files: readings below it drawn as excluded (default junco fit's)");
  CLI::App* ac = part_plot(app, "ac", "fixture gain against bias current, measured and modelled", o);
  add_si_option(*ac, "--source", o.source_ohm, "ohm", "generator resistance (default 50; from juncod the run's)");
  add_si_option(*ac, "--load", o.load_ohm, "ohm", "load resistance (default 50; from juncod the run's)");
  add_si_option(*ac, "--bias-resistor", o.bias_resistor_ohm, "ohm", "bias feed shunt (default none)");
  add_si_option(*ac, "--dc-return", o.dc_return_ohm, "ohm", "DC return shunt (default none; from juncod the run's)");
  CLI::App* off = part_plot(app, "off", "junction capacitance and isolation against reverse bias", o);
  add_si_option(*off, "--load", o.load_ohm, "ohm", "from files: load resistance (default 50)");
  add_si_option(*off, "--dc-return", o.dc_return_ohm, "ohm", "from files: DC return shunt (default none)");
  CLI::App* lot = app.add_subcommand("lot", "spread of IS, N and RS over a lot's parts");
  lot->add_option("MODEL", o.files, "model documents of the parts (without --lot)")->type_name("MODEL.json...");
  lot->add_option("--lot", o.lot, "a lot stored by juncod")->type_name("NAME");
  lot->add_option("--out", o.out, "the plot: FILE.svg or FILE.png (script kept as FILE.gp)")->type_name("FILE")->required();
  add_socket_option(*lot, o.socket);
  for (CLI::App* sub : {iv, ac, off, lot}) sub->callback([&o, sub] { o.kind = sub->get_name(); });
}

int run() {
  const Options& o = g_opt;
  const std::string& kind = o.kind;
  try {
    if (kind == "iv" || kind == "ac" || kind == "off") {
      if (!o.part.empty() && (!o.readings.empty() || !o.model.empty())) {
        std::fprintf(stderr, "junco plot %s: give --part, or --readings and --model, not both\n", kind.c_str());
        return exit_usage;
      }
      if (o.part.empty() && (o.readings.empty() || o.model.empty())) {
        std::fprintf(stderr, "junco plot %s: --%s is required (or --part PART, from juncod)\n", kind.c_str(),
                     o.readings.empty() ? "readings" : "model");
        return exit_usage;
      }
      Source src(o);
      return kind == "iv" ? plot_iv(src) : kind == "ac" ? plot_ac(src) : plot_off(src);
    }
    if (o.files.empty() == o.lot.empty()) {
      std::fprintf(stderr, "junco plot lot: give the parts' model documents, or --lot NAME (from juncod)\n");
      return exit_usage;
    }
    std::vector<PartModel> models;
    if (!o.lot.empty()) models = lot_from_daemon(socket_path(o.socket), o.lot);
    else
      for (const auto& f : o.files) models.push_back(parse_model(slurp(f), f));
    return plot_lot(models, o);
  } catch (const ConnectError& e) {
    std::fprintf(stderr, "junco plot %s: %s\n", kind.c_str(), e.what());
    return exit_failure;
  } catch (const RpcError& e) {
    std::fprintf(stderr, "junco plot %s: juncod: %s\n", kind.c_str(), e.what());
    return exit_failure;
  } catch (const std::exception& e) {  // unreadable file or document, unknown part
    std::fprintf(stderr, "junco plot %s: %s\n", kind.c_str(), e.what());
    return exit_usage;
  }
}

Command make_command() {
  Command c;
  c.name = "plot";
  c.summary = "plot readings, fits, AC transfer, the off state and lot spread (SVG/PNG, gnuplot)";
  c.define = define;
  c.first_word_noun = "plot";
  c.run_parsed = run;
  // Old spellings keep working with a warning (docs/names.md): the fixture's
  // resistors have one name in every command.
  c.renamed = {{"--rg", "--source"}, {"--rl", "--load"}, {"--rbias", "--bias-resistor"}, {"--rreturn", "--dc-return"}};
  return c;
}

const bool registered = register_command(make_command());

}  // namespace
}  // namespace junco::cli
