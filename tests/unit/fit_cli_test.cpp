// `junco fit` as a real process: exit statuses, exact one-line errors, JSON.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include <sys/wait.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <unistd.h>

namespace fs = std::filesystem;

namespace {

struct Run {
  int status = -1;
  std::string out, err;
};

std::string slurp(const fs::path& p) {
  std::ifstream in(p);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

fs::path scratch() {
  static const fs::path dir = [] {
    fs::path d = fs::temp_directory_path() / ("junco_fit_cli_" + std::to_string(::getpid()));
    fs::create_directories(d);
    return d;
  }();
  return dir;
}

Run junco_fit(const std::string& args) {
  const fs::path out = scratch() / "out.txt", err = scratch() / "err.txt";
  const std::string cmd = std::string(JUNCO_BIN_DIR) + "/junco fit " + args + " >" + out.string() + " 2>" + err.string();
  const int raw = std::system(cmd.c_str());
  Run r;
  r.status = WIFEXITED(raw) ? WEXITSTATUS(raw) : -1;
  r.out = slurp(out);
  r.err = slurp(err);
  return r;
}

std::string write_csv(const std::string& name, const std::string& text) {
  const fs::path p = scratch() / name;
  std::ofstream(p) << text;
  return p.string();
}

const std::string example = std::string(JUNCO_SOURCE_DIR) + "/tools/examples/kestrel24b_k24b017.csv";

}  // namespace

TEST_CASE("bad input: exit 2 and one exact line on stderr", "[cli]") {
  struct Case {
    std::string args, err;
  };
  const std::string no_v = write_csv("no_v.csv", "a,i\n1,2\n");
  const std::string not_num = write_csv("not_num.csv", "# x\nv,i\n0.5,1e-4\n0.6,1e-3;\n");
  const std::string few = write_csv("few.csv", "v,i\n0.5,1e-4\n0.6,1e-3\n0.7,1e-2\n-0.2,-1e-9\n");
  const std::string reverse = write_csv("reverse.csv", "v,i\n-0.5,-1e-9\n-1,-2e-9\n0,0\n");
  const std::string empty = write_csv("empty.csv", "v_v,i_a\n");
  const Case cases[] = {
      {"/nonexistent/curve.csv", "junco fit: cannot open '/nonexistent/curve.csv'\n"},
      {"", "junco fit: missing input file (usage: junco fit FILE.csv [options])\n"},
      {no_v, "junco fit: " + no_v +
                 ": no voltage column (header: 'a', 'i'); name it v, u, voltage (a unit may follow: v_mv) or choose one with --v-col\n"},
      {not_num, "junco fit: " + not_num + ": line 4, column 2 (i): '1e-3;' is not a number\n"},
      {few, "junco fit: " + few +
                ": need at least 4 forward readings at distinct currents above the noise floor, have 3 (excluded: 1 "
                "reverse bias or zero (forward fit needs v > 0 and i > 0))\n"},
      {reverse, "junco fit: " + reverse + ": no forward readings: all 3 points are reverse bias or zero\n"},
      {empty, "junco fit: " + empty + ": no data rows after the header\n"},
      {example + " --robust tukey", "junco fit: --robust: tukey not in {huber,cauchy} (see junco fit --help)\n"},
      {example + " --temp-c warm", "junco fit: --temp-c: 'warm' is not a number (e.g. 27, -40) (see junco fit --help)\n"},
      {example + " --accuracy-v 0.1", "junco fit: --accuracy-v: expected REL,ABS (e.g. 0.05%,100e-6), got '0.1'\n"},
      {example + " --frobnicate", "junco fit: unknown option or extra argument '--frobnicate' (see junco fit --help)\n"},
      {example + " " + example, "junco fit: unknown option or extra argument '" + example + "' (see junco fit --help)\n"},
      {example + " --v-col", "junco fit: --v-col: 1 required NAME|N missing (see junco fit --help)\n"},
      {example + " --load 50x", "junco fit: --load: '50x': unknown suffix 'x' (expected a prefix and the unit ohm, e.g. 10mohm, 4.7uohm, 1e-3) (see junco fit --help)\n"},
      {example + " --v-col 9", "junco fit: " + example + ": --v-col 9: the header has 2 columns\n"},
  };
  for (const auto& c : cases) {
    INFO(c.args);
    const Run r = junco_fit(c.args);
    CHECK(r.status == 2);
    CHECK(r.err == c.err);
    CHECK(r.out.empty());
  }
}

TEST_CASE("--help teaches the CSV format", "[cli]") {
  const Run r = junco_fit("--help");
  CHECK(r.status == 0);
  CHECK(r.out.find("v_v,i_a") != std::string::npos);
  CHECK(r.out.find("--v-col") != std::string::npos);
  CHECK(r.out.find("exit status") != std::string::npos);
}

TEST_CASE("example curve: JSON fields recover the generator's parameters", "[cli]") {
  // The example's header states its generator: Is = 2.4e-9 A, n = 1.87, Rs = 0.62 Ω (tests/bench/fit_make_example.py).
  const Run r = junco_fit(example + " --json");
  REQUIRE(r.status == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j.at("status") == "converged");
  CHECK(j.at("points_total") == 33);
  CHECK(j.at("points_used") == 30);
  CHECK(j.at("excluded").size() == 3);
  CHECK(j.at("excluded")[0].at("line") == 5);  // first data row follows 4 header lines
  const double is_a = j.at("is_a").at("value"), n = j.at("n").at("value"), rs = j.at("rs_ohm").at("value");
  CHECK(std::abs(std::log(is_a / 2.4e-9)) < 5.0 * j.at("is_a").at("std_error").get<double>() / is_a);
  CHECK(std::abs(n - 1.87) < 5.0 * j.at("n").at("std_error").get<double>());
  CHECK(std::abs(rs - 0.62) < 5.0 * j.at("rs_ohm").at("std_error").get<double>());
  CHECK(j.at("parameter_names") == nlohmann::json({"is_a", "n", "rs_ohm"}));
  CHECK(j.at("correlation").size() == 3);
  // rd(5 mA) = n·Vt/I + Rs at 300.15 K (docs/references.md §1: Vt = 25.86493 mV).
  CHECK(j.at("derived").at("rd_at_5ma_ohm").at("value").get<double>() == Approx(n * 25.86493e-3 / 5e-3 + rs).epsilon(1e-5));
  // Nested as the API's part.fit nests them (formats/fit_json.hpp): no shunt fitted, so Rsh is null.
  CHECK(j.at("rsh_ohm").at("value").is_null());
  CHECK(j.at("rsh_ohm").at("std_error").is_null());
  CHECK_FALSE(j.contains("n_se"));
}

TEST_CASE("human output has ± figures and the derived line", "[cli]") {
  const Run r = junco_fit(example);
  REQUIRE(r.status == 0);
  CHECK(r.out.find("n   = 1.8") != std::string::npos);
  CHECK(r.out.find(" ± ") != std::string::npos);
  CHECK(r.out.find("Vf(1 mA) = ") != std::string::npos);
  CHECK(r.out.find("rd(5 mA) = ") != std::string::npos);
  CHECK(r.out.find("excluded line 7") != std::string::npos);
  CHECK(r.out.find("below noise floor") != std::string::npos);
}

TEST_CASE("glitched example: robust loss brings n back to the generator's value", "[cli]") {
  // Generator: n = 1.91, Rs = 0.55 Ω with a +30 mV glitch on one reading (file header).
  const std::string glitch = std::string(JUNCO_SOURCE_DIR) + "/tools/examples/kestrel24b_k24b031_glitch.csv";
  const auto plain = nlohmann::json::parse(junco_fit(glitch + " --json").out);
  const auto robust = nlohmann::json::parse(junco_fit(glitch + " --json --robust cauchy").out);
  const double n_plain = plain.at("n").at("value"), n_robust = robust.at("n").at("value");
  CHECK(std::abs(n_robust - 1.91) < 0.3 * std::abs(n_plain - 1.91));
  CHECK(std::abs(n_robust - 1.91) < 4.0 * robust.at("n").at("std_error").get<double>());
}

// The units of the columns (issue: mV/mA read as V/A fitted "converged" with
// n = 4 at its bound, exit 0). The readings are the example curve scaled by
// 1000, so read as mV/mA they must give the example's generator parameters
// (file header: Is = 2.4e-9 A, n = 1.87, Rs = 0.62 ohm; tests/bench/fit_make_example.py).
TEST_CASE("millivolt and milliamp columns: named, they fit; unnamed, junco refuses", "[cli]") {
  std::ifstream in(example);
  std::string line, body;
  int row = 0;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || row++ == 0) continue;  // comments, then the header
    const auto comma = line.find(',');
    char text[96];
    std::snprintf(text, sizeof text, "%.6f,%.6e\n", std::stod(line.substr(0, comma)) * 1e3, std::stod(line.substr(comma + 1)) * 1e3);
    body += text;
  }
  const std::string named = write_csv("mv_ma.csv", "v_mv,i_ma\n" + body);
  const Run good = junco_fit(named + " --json");
  REQUIRE(good.status == 0);
  const auto j = nlohmann::json::parse(good.out);
  CHECK(j.at("status") == "converged");
  CHECK(std::abs(j.at("n").at("value").get<double>() - 1.87) < 5.0 * j.at("n").at("std_error").get<double>());
  CHECK(std::abs(j.at("rs_ohm").at("value").get<double>() - 0.62) < 5.0 * j.at("rs_ohm").at("std_error").get<double>());

  const std::string unnamed = write_csv("unnamed.csv", "v_v,i_a\n" + body);
  const Run bad = junco_fit(unnamed);
  CHECK(bad.status == 1);
  CHECK(bad.out.find("NOT FITTED") != std::string::npos);
  CHECK(bad.err.find("no valid fit: n = 4 is at its bound") != std::string::npos);
  CHECK(bad.err.find("name them v_mv,i_ma") != std::string::npos);
  const Run bad_json = junco_fit(unnamed + " --json");
  CHECK(bad_json.status == 1);
  CHECK(nlohmann::json::parse(bad_json.out).at("status") == "at_bound");
  // No model document from a fit at a bound.
  const std::string model = (scratch() / "at_bound.json").string();
  CHECK(junco_fit(unnamed + " --model-out " + model).status == 1);
  CHECK_FALSE(fs::exists(model));
}

TEST_CASE("decimal commas when asked, with a hint when not", "[cli]") {
  std::ifstream in(example);
  std::string line, body;
  int row = 0;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || row++ == 0) continue;
    for (char& c : line) c = c == ',' ? ';' : c == '.' ? ',' : c;
    body += line + "\n";
  }
  const std::string file = write_csv("komma.csv", "U;I\n" + body);
  const Run asked = junco_fit(file + " --decimal-comma --json");
  REQUIRE(asked.status == 0);
  const Run plain = junco_fit(example + " --json");
  CHECK(nlohmann::json::parse(asked.out).at("n").at("value").get<double>() == Approx(nlohmann::json::parse(plain.out).at("n").at("value").get<double>()).epsilon(1e-9));
  const Run not_asked = junco_fit(file);
  CHECK(not_asked.status == 2);
  CHECK(not_asked.err.find("(decimal comma? junco fit --decimal-comma reads them)") != std::string::npos);
}
