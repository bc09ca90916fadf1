// junco fit FILE.csv: offline fit of one measured forward curve.
#include "fitting/derived.hpp"
#include "fitting/design_joint_fit.hpp"
#include "fitting/design_readings_csv.hpp"
#include "fitting/design_units.hpp"
#include "fitting/extract.hpp"
#include "fitting/iv_csv.hpp"
#include "fitting/model_document.hpp"
#include "tools/junco/command.hpp"
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

const char* const fit_usage = R"(usage: junco fit FILE.csv [options]

Fits the diode model  I = Is·(exp((V − I·Rs)/(n·Vt)) − 1)  (+ shunt) to a measured
forward curve and prints Is, n, Rs with standard errors, and derived figures.

The CSV file: '#' lines are comments; the first other line is a header naming the
columns; then one reading per line. Voltage is found by the names v, v_v, voltage;
current by i, i_a, current (any case; a unit in brackets is honoured: V, mV, uV;
A, mA, uA, nA, pA). Other columns are ignored. Example:

  # part K24B-017, lot KESTREL-24B, 27 °C
  v_v,i_a
  0.4286,1.0e-05
  0.5358,1.0e-04
  0.6434,1.0e-03
  0.7550,1.0e-02
  0.8499,5.0e-02

Points with v ≤ 0 or i ≤ 0 (reverse bias) and points below the noise floor are
excluded and listed, never dropped silently. At least 4 usable points are needed.

options:
  --v-col NAME|N       voltage column by header name or 1-based position
  --i-col NAME|N       current column by header name or 1-based position
  --temp-c T           junction temperature in °C (default 27)
  --shunt              also fit a shunt resistance Rsh across the junction
  --robust huber|cauchy  robust loss, limits the pull of outlier readings
  --robust-scale K     where the robust loss starts, in standard uncertainties (default 3)
  --accuracy-v REL,ABS voltmeter accuracy ±(REL·|V| + ABS volts); REL may end in %
                       (default 0.05%,100e-6)
  --accuracy-i REL,ABS ammeter accuracy ±(REL·|I| + ABS amps) (default 0.2%,1e-9)
  --noise-floor A      exclude currents below A amps (default 10 × the current offset)
  --json               machine-readable output (see docs/fitting.md)
  --model-out FILE     also write the fitted part as a JSON model document, which
                       `junco design --model`, `junco export` and `junco plot` read
  --label L, --lot L   the part's label and lot in that document (default: file name)

joint AC+DC fit (the AC readings pin Rs and n through rd = Rs + n·Vt/I, the DC
curve pins Is; says whether the two agree within their uncertainties):
  --ac AC.csv          fixture-gain readings, header bias_i_a,freq_hz,vin,vout
                       (junco show PART --export ac-csv writes one)
  --ac-unit vrms|vpp   the unit of vin and vout (default vrms)
  --rl OHM             fixture load (default 50)
  --rreturn OHM        DC-return resistor at the cathode (default: a choke, open at AC)
  --ac-sigma DB        uncertainty of one AC reading (default 0.01)
  --cj F               junction capacitance in the AC model and the AC-alone fit
                       (default: none)
  AC readings below 100 uV or with a signal current above 0.1 x the bias are left out.

exit status: 0 fitted; 1 the fit failed; 2 bad command line or bad input file.
Examples: junco fit tools/examples/kestrel24b_k24b017.csv --robust huber
          junco fit curve.csv --model-out part.json && junco plot iv --readings curve.csv --model part.json --out iv.svg
          junco fit iv.csv --ac ac.csv --rl 50)";

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
};

struct UsageError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

double parse_number(const std::string& flag, const std::string& text) {
  std::size_t used = 0;
  double v = 0.0;
  try {
    v = std::stod(text, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (used == 0 || used != text.size() || !std::isfinite(v)) throw UsageError(flag + ": '" + text + "' is not a number");
  return v;
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

Args parse_args(const std::vector<std::string>& argv) {
  Args a;
  double temp_c = 27.0;
  for (std::size_t k = 0; k < argv.size(); ++k) {
    const std::string& s = argv[k];
    auto value = [&]() -> const std::string& {
      if (k + 1 >= argv.size()) throw UsageError(s + " needs a value");
      return argv[++k];
    };
    if (s == "--json") {
      a.json = true;
    } else if (s == "--model-out") {
      a.model_out = value();
    } else if (s == "--label") {
      a.label = value();
    } else if (s == "--lot") {
      a.lot = value();
    } else if (s == "--shunt") {
      a.fit.fit_shunt = true;
    } else if (s == "--v-col") {
      a.columns.v_col = value();
    } else if (s == "--i-col") {
      a.columns.i_col = value();
    } else if (s == "--temp-c") {
      temp_c = parse_number(s, value());
      if (temp_c <= -273.15 || temp_c > 500.0) throw UsageError("--temp-c: " + argv[k] + " °C is outside -273.15..500");
    } else if (s == "--robust") {
      const std::string& v = value();
      if (v == "huber") a.fit.loss = jf::RobustLoss::huber;
      else if (v == "cauchy") a.fit.loss = jf::RobustLoss::cauchy;
      else throw UsageError("--robust: '" + v + "' is not huber or cauchy");
    } else if (s == "--robust-scale") {
      a.fit.loss_scale = parse_number(s, value());
      if (!(a.fit.loss_scale > 0.0)) throw UsageError("--robust-scale must be > 0");
    } else if (s == "--accuracy-v") {
      std::tie(a.fit.accuracy.v_rel, a.fit.accuracy.v_abs_v) = parse_accuracy(s, value());
    } else if (s == "--accuracy-i") {
      std::tie(a.fit.accuracy.i_rel, a.fit.accuracy.i_abs_a) = parse_accuracy(s, value());
    } else if (s == "--ac") {
      a.ac_file = value();
    } else if (s == "--ac-unit") {
      const std::string& v = value();
      if (v == "vrms") a.peak_per_unit = std::sqrt(2.0);
      else if (v == "vpp") a.peak_per_unit = 0.5;
      else throw UsageError("--ac-unit: '" + v + "' is not vrms or vpp");
    } else if (s == "--rl" || s == "--rreturn" || s == "--ac-sigma" || s == "--cj") {
      const char* unit = s == "--ac-sigma" ? "dB" : s == "--cj" ? "F" : "Ohm";
      std::string why;
      const auto v = jf::parse_engineering(value(), unit, &why);
      if (!v) throw UsageError(s + ": " + why);
      if (s == "--rl" && !(*v > 0)) throw UsageError("--rl must be > 0");
      if (s == "--rreturn" && !(*v > 0)) throw UsageError("--rreturn must be > 0 (leave it out for a choke)");
      if (s == "--ac-sigma" && !(*v > 0)) throw UsageError("--ac-sigma must be > 0");
      if (s == "--cj" && !(*v >= 0)) throw UsageError("--cj must be >= 0");
      if (s == "--rl") a.fixture.rl_ohm = *v;
      else if (s == "--rreturn") a.fixture.dc_return_ohm = *v;
      else if (s == "--ac-sigma") a.ac_sigma_db = *v;
      else a.cj_f = *v;
    } else if (s == "--noise-floor") {
      a.fit.noise_floor_a = parse_number(s, value());
      if (a.fit.noise_floor_a < 0.0) throw UsageError("--noise-floor must be ≥ 0");
    } else if (!s.empty() && s[0] == '-' && s != "-") {
      throw UsageError("unknown option '" + s + "' (see junco fit --help)");
    } else if (a.file.empty()) {
      a.file = s;
    } else {
      throw UsageError("one input file only (got '" + a.file + "' and '" + s + "')");
    }
  }
  if (a.file.empty()) throw UsageError("missing input file (usage: junco fit FILE.csv [options])");
  a.fit.temp_k = jf::kelvin_from_celsius(temp_c);
  return a;
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

nlohmann::json number(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

struct Derived {
  jf::Estimate vf_1ma, vf_10ma, rd_5ma;
};

Derived derive(const jf::FitResult& r) {
  return {jf::forward_voltage_v(r, 1e-3), jf::forward_voltage_v(r, 10e-3), jf::small_signal_resistance_ohm(r, 5e-3)};
}

void print_json(const Args& a, const jf::IvCsv& csv, const jf::FitResult& r, const nlohmann::json& joint) {
  nlohmann::json j;
  j["file"] = a.file;
  j["status"] = jf::to_string(r.status);
  j["message"] = r.message;
  j["temp_k"] = r.temp_k;
  j["points_total"] = csv.points.size();
  j["points_used"] = r.points_used;
  const std::pair<const char*, const jf::Estimate*> params[] = {
      {"is_a", &r.is_a}, {"n", &r.n}, {"rs_ohm", &r.rs_ohm}, {"rsh_ohm", &r.rsh_ohm}};
  for (std::size_t k = 0; k < r.parameter_names.size(); ++k) {
    j[params[k].first] = number(params[k].second->value);
    j[std::string(params[k].first) + "_se"] = number(params[k].second->std_error);
  }
  j["parameter_names"] = r.parameter_names;
  nlohmann::json corr = nlohmann::json::array();
  for (const auto& row : r.correlation) {
    nlohmann::json jr = nlohmann::json::array();
    for (double c : row) jr.push_back(number(c));
    corr.push_back(jr);
  }
  j["correlation"] = corr;
  j["cost"] = number(r.cost);
  j["reduced_chi2"] = number(r.reduced_chi2);
  j["rms_residual_v"] = number(r.rms_residual);
  j["iterations"] = r.iterations;
  nlohmann::json ex = nlohmann::json::array();
  for (const auto& e : r.excluded) ex.push_back({{"line", csv.line_of_point[e.index]}, {"index", e.index}, {"reason", e.reason}});
  j["excluded"] = ex;
  j["warnings"] = r.warnings;
  const Derived d = derive(r);
  j["derived"] = {{"vf_at_1ma_v", number(d.vf_1ma.value)},   {"vf_at_1ma_v_se", number(d.vf_1ma.std_error)},
                  {"vf_at_10ma_v", number(d.vf_10ma.value)}, {"vf_at_10ma_v_se", number(d.vf_10ma.std_error)},
                  {"rd_at_5ma_ohm", number(d.rd_5ma.value)}, {"rd_at_5ma_ohm_se", number(d.rd_5ma.std_error)}};
  if (!joint.is_null()) j["joint"] = joint;
  std::printf("%s\n", j.dump(2).c_str());
}

void print_human(const Args& a, const jf::IvCsv& csv, const jf::FitResult& r) {
  std::printf("%s: %s, %zu of %zu points used, %.2f °C, %d iterations\n", a.file.c_str(), jf::to_string(r.status),
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

int run_fit(const std::vector<std::string>& argv) {
  Args a;
  jf::IvCsv csv;
  try {
    a = parse_args(argv);
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
  if (a.json) {
    print_json(a, csv, r, a.ac_file.empty() ? nlohmann::json(nullptr) : joint_json(joint));
  } else {
    print_human(a, csv, r);
    if (!a.ac_file.empty()) print_joint(a, joint);
  }
  if (!r.usable()) {
    std::fprintf(stderr, "junco fit: %s: fit did not converge: %s\n", a.file.c_str(), r.message.c_str());
    return exit_failure;
  }
  if (!a.model_out.empty()) return write_model(a, r);
  return exit_ok;
}

const bool registered = register_command({"fit", "fit Is, n, Rs to a measured forward curve (CSV)", fit_usage, run_fit});

}  // namespace
}  // namespace junco::cli
