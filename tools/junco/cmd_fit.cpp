// junco fit FILE.csv: offline fit of one measured forward curve.
#include "fitting/derived.hpp"
#include "fitting/joint_fit.hpp"
#include "formats/readings_csv.hpp"
#include "fitting/extract.hpp"
#include "fitting/fit_solve.hpp"  // the solver bounds a fit must not end at
#include "formats/fit_json.hpp"  // the fit as the daemon's API writes it
#include "formats/report_json.hpp"  // the joint report as part.transfer writes it
#include "formats/iv_csv.hpp"
#include "formats/model_document.hpp"
#include "tools/junco/cli_options.hpp"
#include "tools/junco/command.hpp"
#include "units/si_text.hpp"
#include "tools/junco/joint_report.hpp"

#include <nlohmann/json.hpp>

#include <cerrno>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <cstdio>
#include <fstream>
#include <map>
#include <sstream>
#include <stdexcept>
#include <string>

namespace junco::cli {
namespace {

namespace jf = junco::fitting;

const char* const fit_description = R"(Fits the diode model  I = Is·(exp((V − I·Rs)/(n·Vt)) − 1)  (+ shunt) to a measured
forward curve and prints Is, n, Rs with standard errors, and derived figures.

The CSV file: '#' lines are comments; the first other line is a header naming the
columns; then one reading per line. Voltage is found by the names v, u, voltage;
current by i, current (any case). The unit follows the name after '_' (v_v, v_mv,
i_a, i_ma, i_ua) or in brackets ('v [mV]', 'i (uA)'); none means V and A. Other
columns are ignored. Separator ',' or ';' or tab; with --decimal-comma, 0,4286 reads
as 0.4286 (then ';' or tab only). Example:

  # part K24B-017, lot KESTREL-24B, 27 °C
  v_v,i_a
  0.4286,1.0e-05
  0.5358,1.0e-04
  0.6434,1.0e-03
  0.7550,1.0e-02
  0.8499,5.0e-02

Points with v ≤ 0 or i ≤ 0 (reverse bias) and points below the noise floor are
excluded and listed, never dropped silently. At least 4 usable points are needed.
A fit that ends with a parameter at its bound (n at 0.5 or 4, Is at 1.8e-35 A or
0.14 A) is not a fit: junco says what is wrong (often the units of the columns)
and exits 1.

Joint AC+DC fit (--ac): the AC readings pin Rs and n through rd = Rs + n·Vt/I, the
DC curve pins Is; says whether the two agree within their uncertainties. AC
readings below 100 uV or with a signal current above 0.1 x the bias are left out.
Values take SI prefixes and units: 50, 4.7k, 0.3pF, 10meg.
)";

const char* const fit_footer = R"(exit status: 0 fitted; 1 the fit failed or ended at a parameter bound; 2 bad command
line or bad input file.
examples:
  junco fit tools/examples/kestrel24b_k24b017.csv --robust huber
  junco fit curve_mv_ma.csv          (header v_mv,i_ma: millivolts and milliamps)
  junco fit messung.csv --decimal-comma --temp-c 25
  junco fit curve.csv --model-out part.json && junco plot iv --readings curve.csv --model part.json --out iv.svg
  junco fit iv.csv --ac ac.csv --load 50)";

struct Args {
  std::string file;
  jf::IvCsvOptions columns;
  jf::FitOptions fit;
  bool json = false;
  std::string model_out;  // empty: no model document
  std::string label, lot;
  std::string ac_file;  // empty: no joint fit
  jf::Fixture fixture;  // for the AC model (rl, dc return)
  double ac_sigma_db = 0.01, cj_f = 0.0, peak_per_unit = 1.4142135623730951;
  // As typed, checked after parsing.
  double temp_c = 27.0;
  std::string robust, accuracy_v, accuracy_i, ac_unit = "vrms";
  std::optional<double> dc_return_ohm, noise_floor_a;
};

Args g_args;  // one command per process: the options are bound here by define_fit

struct UsageError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

double parse_number(const std::string& flag, const std::string& text) {
  std::string why;
  const auto v = junco::units::parse_si(text, "", &why);
  if (!v) throw UsageError(flag + ": " + why);
  return *v;
}

// "REL,ABS" with REL a fraction or a percentage.
std::pair<double, double> parse_accuracy(const std::string& flag, const std::string& text) {
  const auto comma = text.find(',');
  if (comma == std::string::npos) throw UsageError(flag + ": expected REL,ABS (e.g. 0.05%,100e-6), got '" + text + "'");
  std::string rel = text.substr(0, comma);
  double scale = 1.0;
  if (!rel.empty() && rel.back() == '%') {
    rel.pop_back();
    scale = 0.01;
  }
  const double r = parse_number(flag, rel) * scale;
  const double a = parse_number(flag, text.substr(comma + 1));
  if (r < 0.0 || a < 0.0 || (r == 0.0 && a == 0.0))
    throw UsageError(flag + ": accuracy figures must be ≥ 0 and not both zero");
  return {r, a};
}

void define_fit(CLI::App& app) {
  Args& a = g_args;
  app.description(fit_description);
  app.footer(fit_footer);
  app.add_option("FILE", a.file, "the forward curve (CSV, see above)")->type_name("");
  app.add_option("--v-col", a.columns.v_col, "voltage column by header name or 1-based position")->type_name("NAME|N");
  app.add_option("--i-col", a.columns.i_col, "current column by header name or 1-based position")->type_name("NAME|N");
  app.add_flag("--decimal-comma", a.columns.decimal_comma, "numbers use a decimal comma (0,4286); columns separated by ';' or tab");
  add_si_option(app, "--temp-c", a.temp_c, "C", "junction temperature in °C", "27");
  app.add_flag("--shunt", a.fit.fit_shunt, "also fit a shunt resistance Rsh across the junction");
  app.add_option("--robust", a.robust, "robust loss, limits the pull of outlier readings")
      ->check(CLI::IsMember({"huber", "cauchy"}).description(""))
      ->type_name("huber|cauchy");
  add_si_option(app, "--robust-scale", a.fit.loss_scale, "", "where the robust loss starts, in standard uncertainties", "3");
  app.add_option("--accuracy-v", a.accuracy_v, "voltmeter accuracy ±(REL·|V| + ABS volts); REL may end in % (default 0.05%,100e-6)")
      ->type_name("REL,ABS");
  app.add_option("--accuracy-i", a.accuracy_i, "ammeter accuracy ±(REL·|I| + ABS amps) (default 0.2%,1e-9)")->type_name("REL,ABS");
  add_si_option(app, "--noise-floor", a.noise_floor_a, "A", "exclude currents below this (default 10 × the current offset)");
  app.add_flag("--json", a.json, "machine-readable output (see docs/fitting.md)");
  app.add_option("--model-out", a.model_out,
                 "also write the fitted part as a JSON model document, which junco design --model, junco export and junco plot read")
      ->type_name("FILE");
  app.add_option("--label", a.label, "the part's label in that document (default: the file name)")->type_name("L");
  app.add_option("--lot", a.lot, "the part's lot in that document")->type_name("L");
  app.add_option("--ac", a.ac_file, "joint AC+DC fit with these fixture-gain readings, header bias_i_a,freq_hz,vin,vout "
                                    "(junco show PART --export ac-csv writes one)")
      ->type_name("AC.csv");
  app.add_option("--ac-unit", a.ac_unit, "the unit of vin and vout (default vrms)")
      ->check(CLI::IsMember({"vrms", "vpp"}).description(""))
      ->type_name("vrms|vpp");
  add_si_option(app, "--load", a.fixture.load_ohm, "ohm", "fixture load", "50");
  add_si_option(app, "--dc-return", a.dc_return_ohm, "ohm", "DC-return resistor at the cathode (default: a choke, open at AC)");
  add_si_option(app, "--ac-sigma", a.ac_sigma_db, "dB", "uncertainty of one AC reading", "0.01");
  add_si_option(app, "--cj", a.cj_f, "F", "junction capacitance in the AC model and the AC-alone fit (default: none)");
}

// The checks CLI11 cannot express (ranges of unit-bearing values), and the
// conversions to the fit's own units.
void finish_args(Args& a) {
  if (a.file.empty()) throw UsageError("missing input file (usage: junco fit FILE.csv [options])");
  if (a.temp_c <= -273.15 || a.temp_c > 500.0) throw UsageError("--temp-c: " + junco::units::format_si(a.temp_c, "", 6) + " °C is outside -273.15..500");
  if (a.robust == "huber") a.fit.loss = jf::RobustLoss::huber;
  else if (a.robust == "cauchy") a.fit.loss = jf::RobustLoss::cauchy;
  if (!(a.fit.loss_scale > 0.0)) throw UsageError("--robust-scale must be > 0");
  if (!a.accuracy_v.empty()) std::tie(a.fit.accuracy.v_rel, a.fit.accuracy.v_abs_v) = parse_accuracy("--accuracy-v", a.accuracy_v);
  if (!a.accuracy_i.empty()) std::tie(a.fit.accuracy.i_rel, a.fit.accuracy.i_abs_a) = parse_accuracy("--accuracy-i", a.accuracy_i);
  if (a.noise_floor_a) {
    if (*a.noise_floor_a < 0.0) throw UsageError("--noise-floor must be ≥ 0");
    a.fit.noise_floor_a = *a.noise_floor_a;
  }
  a.peak_per_unit = a.ac_unit == "vpp" ? 0.5 : std::sqrt(2.0);
  if (!(a.fixture.load_ohm > 0)) throw UsageError("--load must be > 0");
  if (a.dc_return_ohm) {
    if (!(*a.dc_return_ohm > 0)) throw UsageError("--dc-return must be > 0 (leave it out for a choke)");
    a.fixture.dc_return_ohm = *a.dc_return_ohm;
  }
  if (!(a.ac_sigma_db > 0)) throw UsageError("--ac-sigma must be > 0");
  if (!(a.cj_f >= 0)) throw UsageError("--cj must be >= 0");
  a.fit.temp_k = jf::kelvin_from_celsius(a.temp_c);
}

// Parameters the solve left at a bound of fit_solve.hpp: such a "fit" says
// the model did not describe the readings (often columns in mV/mA read as
// V/A), so it is reported as a failure, never as converged. Rs = 0 is not
// listed: a curve without high-current points rightly gives Rs ≈ 0 (warned).
std::vector<std::string> parameters_at_bounds(const jf::FitResult& r) {
  std::vector<std::string> out;
  const auto at = [](double x, double bound) { return std::abs(x - bound) <= 1e-6 * std::max(1.0, std::abs(bound)); };
  char text[160];
  if (at(r.n.value, jf::fit_n_min) || at(r.n.value, jf::fit_n_max)) {
    std::snprintf(text, sizeof text, "n = %.4g is at its bound (%.2g..%.2g)", r.n.value, jf::fit_n_min, jf::fit_n_max);
    out.emplace_back(text);
  }
  if (r.is_a.value > 0) {
    const double ln_is = std::log(r.is_a.value);
    if (at(ln_is, jf::fit_ln_is_min) || at(ln_is, jf::fit_ln_is_max)) {
      std::snprintf(text, sizeof text, "Is = %.3g A is at its bound (%.2g..%.2g A)", r.is_a.value, std::exp(jf::fit_ln_is_min),
                    std::exp(jf::fit_ln_is_max));
      out.emplace_back(text);
    }
  }
  if (at(r.rs_ohm.value, jf::fit_rs_max_ohm)) out.emplace_back("Rs is at its upper bound (1 Mohm)");
  if (std::isfinite(r.rsh_ohm.value) && at(std::log(r.rsh_ohm.value), jf::fit_ln_rsh_min)) out.emplace_back("Rsh is at its lower bound (1 ohm)");
  return out;
}

// What the readings look like when a fit ends at a bound: a hint at the
// usual cause, columns whose unit is not what the header says.
std::string bound_hint(const jf::IvCsv& csv) {
  double v_max = 0, i_max = 0;
  for (const auto& p : csv.points) {
    v_max = std::max(v_max, p.v);
    i_max = std::max(i_max, p.i_a);
  }
  std::string hint = "the readings reach " + junco::units::format_si(v_max, "V", 3) + " and " + junco::units::format_si(i_max, "A", 3);
  if (v_max > 5.0 || i_max > 1.0)
    hint += ", far above a diode's forward range: if the columns are in mV and mA, name them v_mv,i_ma "
            "(or 'v [mV]','i [mA]'); header read as " + csv.v_header + "," + csv.i_header;
  return hint;
}

std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw UsageError("cannot open '" + path + "'");
  std::ostringstream ss;
  ss << in.rdbuf();
  if (in.bad()) throw UsageError("cannot read '" + path + "'");
  return ss.str();
}

// One line saying why nothing was fitted, with the exclusions counted by reason.
std::string insufficient_message(const jf::FitResult& r, std::size_t total) {
  std::map<std::string, int> by_reason;
  std::size_t reverse = 0;
  for (const auto& e : r.excluded) {
    ++by_reason[e.reason];
    if (e.reason.rfind("reverse", 0) == 0) ++reverse;
  }
  if (total > 0 && reverse == total) return "no forward readings: all " + std::to_string(total) + " points are reverse bias or zero";
  std::string msg = r.message;
  if (!by_reason.empty()) {
    msg += " (excluded:";
    for (const auto& [reason, count] : by_reason) msg += " " + std::to_string(count) + " " + reason + ";";
    msg.back() = ')';
  }
  return msg;
}

struct Derived {
  jf::Estimate vf_1ma, vf_10ma, rd_5ma;
};

Derived derive(const jf::FitResult& r) {
  return {jf::forward_voltage_v(r, 1e-3), jf::forward_voltage_v(r, 10e-3), jf::small_signal_resistance_ohm(r, 5e-3)};
}

// The fit as the API's part.fit gives it (formats/fit_json.hpp:
// values nested as {value, std_error}), plus what only an offline fit has.
void print_json(const Args& a, const jf::IvCsv& csv, const jf::FitResult& r, const nlohmann::json& joint,
                const std::vector<std::string>& at_bounds) {
  nlohmann::json j = jf::fit_result_json(r);
  j["file"] = a.file;
  if (!at_bounds.empty()) j["status"] = "at_bound";
  j["at_bounds"] = at_bounds;
  j["points_total"] = csv.points.size();
  j["parameter_names"] = r.parameter_names;
  j["correlation"] = jf::matrix_json(r.correlation);
  j["reduced_chi2"] = jf::number_or_null(r.reduced_chi2);
  j["iterations"] = r.iterations;
  nlohmann::json ex = nlohmann::json::array();
  for (const auto& e : r.excluded) ex.push_back({{"line", csv.line_of_point[e.index]}, {"index", e.index}, {"reason", e.reason}});
  j["excluded"] = ex;
  const Derived d = derive(r);
  j["derived"] = {{"vf_at_1ma_v", jf::estimate_json(d.vf_1ma)},
                  {"vf_at_10ma_v", jf::estimate_json(d.vf_10ma)},
                  {"rd_at_5ma_ohm", jf::estimate_json(d.rd_5ma)}};
  if (!joint.is_null()) j["joint"] = joint;
  std::printf("%s\n", j.dump(2).c_str());
}

void print_human(const Args& a, const jf::IvCsv& csv, const jf::FitResult& r, bool at_bound) {
  std::printf("%s: %s, %zu of %zu points used, %.2f °C, %d iterations\n", a.file.c_str(),
              at_bound ? "NOT FITTED (a parameter is at its bound)" : jf::to_string(r.status),
              r.points_used, csv.points.size(), r.temp_k - jf::zero_celsius_k, r.iterations);
  std::printf("  Is  = %.5g ± %.2g A\n", r.is_a.value, r.is_a.std_error);
  std::printf("  n   = %.5f ± %.2g\n", r.n.value, r.n.std_error);
  std::printf("  Rs  = %.5g ± %.2g Ω\n", r.rs_ohm.value, r.rs_ohm.std_error);
  if (a.fit.fit_shunt) std::printf("  Rsh = %.5g ± %.2g Ω\n", r.rsh_ohm.value, r.rsh_ohm.std_error);
  if (r.correlation.size() >= 3)
    std::printf("  correlation: Is–n %+.3f, Is–Rs %+.3f, n–Rs %+.3f\n", r.correlation[0][1], r.correlation[0][2],
                r.correlation[1][2]);
  std::printf("  rms residual %.3g mV, reduced chi² %.3g (errors scaled by it)\n", r.rms_residual * 1e3, r.reduced_chi2);
  const Derived d = derive(r);
  std::printf("  Vf(1 mA) = %.4f ± %.1g V, Vf(10 mA) = %.4f ± %.1g V, rd(5 mA) = %.4g ± %.1g Ω\n", d.vf_1ma.value,
              d.vf_1ma.std_error, d.vf_10ma.value, d.vf_10ma.std_error, d.rd_5ma.value, d.rd_5ma.std_error);
  for (const auto& e : r.excluded)
    std::printf("  excluded line %zu (v = %g V, i = %g A): %s\n", csv.line_of_point[e.index], csv.points[e.index].v,
                csv.points[e.index].i_a, e.reason.c_str());
  for (const auto& w : r.warnings) std::printf("  warning: %s\n", w.c_str());
}

// Only a converged fit becomes a model document: a calculator must never be
// fed parameters the fit itself did not stand behind.
int write_model(const Args& a, const jf::FitResult& r) {
  const std::string stem = std::filesystem::path(a.file).stem().string();
  const auto part = jf::part_model_from_fit(r, a.label.empty() ? stem : a.label, a.lot);
  std::ofstream out(a.model_out, std::ios::trunc);
  out << jf::model_document_json(part) << "\n";
  out.close();
  if (!out) {
    std::fprintf(stderr, "junco fit: cannot write %s: %s\n", a.model_out.c_str(), std::strerror(errno));
    return exit_failure;
  }
  return exit_ok;
}

// The joint AC+DC fit of --ac: the readings, which of them are used, and the report.
struct JointRun {
  std::size_t ac_total = 0, ac_used = 0;
  std::map<std::string, int> left_out;  // reason → count
  jf::JointFitReport report;
};

JointRun joint_fit(const Args& a, const jf::IvCsv& csv) {
  std::string why;
  const auto table = jf::parse_readings_csv(read_file(a.ac_file), &why);
  if (!table) throw UsageError(a.ac_file + ": " + why);
  if (table->ac.empty()) throw UsageError(a.ac_file + ": no AC readings (header bias_i_a,freq_hz,vin,vout)");
  JointRun run;
  std::vector<jf::AcPoint> all(table->ac.begin(), table->ac.end()), used;
  for (auto& p : all) p.peak_per_unit = a.peak_per_unit;
  const auto reasons = jf::screen_ac_readings(all, a.fixture, {});
  for (std::size_t k = 0; k < all.size(); ++k) {
    if (reasons[k].empty()) used.push_back(all[k]);
    else ++run.left_out[reasons[k]];
  }
  run.ac_total = all.size();
  run.ac_used = used.size();
  jf::JointFitOptions o;
  o.temp_k = a.fit.temp_k;
  o.accuracy = a.fit.accuracy;
  o.ac_sigma_db = a.ac_sigma_db;
  o.cj_f = a.cj_f;
  run.report = jf::compare_dc_and_joint(csv.points, used, a.fixture, o);
  return run;
}

nlohmann::json joint_json(const JointRun& j) {
  nlohmann::json out = jf::joint_report_json(j.report);
  out["ac_readings"] = j.ac_total;
  out["ac_used"] = j.ac_used;
  out["ac_left_out"] = j.left_out;
  return out;
}

void print_joint(const Args& a, const JointRun& j) {
  std::printf("\n%s: %zu AC readings, %zu used", a.ac_file.c_str(), j.ac_total, j.ac_used);
  for (const auto& [reason, count] : j.left_out) std::printf(", %d left out (%s)", count, reason.c_str());
  std::printf("\n");
  print_joint_report(jf::joint_report_json(j.report));
}

int run_fit() {
  Args& a = g_args;
  jf::IvCsv csv;
  try {
    finish_args(a);
    csv = jf::parse_iv_csv(read_file(a.file), a.columns);
  } catch (const UsageError& e) {
    std::fprintf(stderr, "junco fit: %s\n", e.what());
    return exit_usage;
  }
  if (!csv.ok()) {
    std::fprintf(stderr, "junco fit: %s: %s\n", a.file.c_str(), csv.error.c_str());
    return exit_usage;
  }
  if (csv.points.empty()) {
    std::fprintf(stderr, "junco fit: %s: no data rows after the header\n", a.file.c_str());
    return exit_usage;
  }
  const jf::FitResult r = jf::fit_forward(csv.points, a.fit);
  if (r.status == jf::FitStatus::insufficient) {
    std::fprintf(stderr, "junco fit: %s: %s\n", a.file.c_str(), insufficient_message(r, csv.points.size()).c_str());
    return exit_usage;
  }
  if (r.status == jf::FitStatus::failed) {
    std::fprintf(stderr, "junco fit: %s: fit failed: %s\n", a.file.c_str(), r.message.c_str());
    return exit_failure;
  }
  JointRun joint;
  if (!a.ac_file.empty()) {
    try {
      joint = joint_fit(a, csv);
    } catch (const UsageError& e) {
      std::fprintf(stderr, "junco fit: %s\n", e.what());
      return exit_usage;
    }
  }
  const auto at_bounds = parameters_at_bounds(r);
  if (a.json) {
    print_json(a, csv, r, a.ac_file.empty() ? nlohmann::json(nullptr) : joint_json(joint), at_bounds);
  } else {
    print_human(a, csv, r, !at_bounds.empty());
    if (!a.ac_file.empty()) print_joint(a, joint);
  }
  if (!at_bounds.empty()) {
    std::string what;
    for (const auto& b : at_bounds) what += (what.empty() ? "" : "; ") + b;
    std::fprintf(stderr, "junco fit: %s: no valid fit: %s; %s\n", a.file.c_str(), what.c_str(), bound_hint(csv).c_str());
    return exit_failure;
  }
  if (!r.usable()) {
    std::fprintf(stderr, "junco fit: %s: fit did not converge: %s\n", a.file.c_str(), r.message.c_str());
    return exit_failure;
  }
  if (!a.model_out.empty()) return write_model(a, r);
  return exit_ok;
}

Command fit_command() {
  Command c;
  c.name = "fit";
  c.summary = "fit Is, n, Rs to a measured forward curve (CSV)";
  c.define = define_fit;
  c.run_parsed = run_fit;
  c.renamed = {{"--rreturn", "--dc-return"}, {"--rl", "--load"}};  // the old spelling warns (docs/names.md)
  return c;
}

const bool registered = register_command(fit_command());

}  // namespace
}  // namespace junco::cli
