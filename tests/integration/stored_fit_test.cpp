// The stored fit keeps its covariance: part.figures and `junco show` give Vf
// and rd with standard errors, equal to the law of propagation of
// uncertainty applied to the fit's covariance; a damaged stored fit reaches
// the client as a storage error (-32004), not as the caller's mistake. Real
// junco-sim, juncod and junco processes, the store a real SQLite file.
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <sqlite3.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <fstream>
#include <map>
#include <sstream>
#include <string>

using namespace junco;
using Json = nlohmann::json;

namespace {

Json forward_plan(const std::string& lot) {
  return {{"lot", lot},
          {"parts", {{{"slot", 1}, {"label", "SE-1"}}, {{"slot", 2}, {"label", "SE-2"}}}},
          {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.01}, {"count", 14}, {"settle_s", 0}}}};
}

std::vector<std::string> no_heating() {
  return {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"};
}

void sql(const std::filesystem::path& file, const std::string& statement) {
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
  char* err = nullptr;
  const int rc = sqlite3_exec(db, statement.c_str(), nullptr, nullptr, &err);
  INFO(statement << ": " << (err ? err : ""));
  sqlite3_free(err);
  sqlite3_close(db);
  REQUIRE(rc == SQLITE_OK);
}

// Standard error of f(Is, n, Rs) by the law of propagation of uncertainty
// for correlated inputs, u²(f) = Σ_a Σ_b (∂f/∂a)(∂f/∂b)·r(a,b)·u(a)·u(b)
// (JCGM 100:2008, GUM §5.2.2, eq. 16), with the gradient written out below.
double propagated_se(const std::array<double, 3>& grad, const Json& fit) {
  const std::array<double, 3> u{fit["is_a"]["std_error"].get<double>(), fit["n"]["std_error"].get<double>(),
                                fit["rs_ohm"]["std_error"].get<double>()};
  const Json& r = fit["detail"]["correlation"];
  double var = 0.0;
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b) var += grad[a] * grad[b] * r[a][b].get<double>() * u[a] * u[b];
  return std::sqrt(var);
}

}  // namespace

TEST_CASE("Vf and rd are served with the standard errors the fit's covariance gives", "[daemon][fit]") {
  test::BenchDaemon b("stored-fit", no_heating());
  b.run_plan(forward_plan("WREN-0912"));
  for (int part_id = 1; part_id <= 2; ++part_id) {
    const Json fit = b.result("part.fit", {{"part_id", part_id}});
    INFO(fit.dump());
    REQUIRE(fit["status"] == "converged");
    REQUIRE(fit["detail"]["parameter_names"] == Json({"is_a", "n", "rs_ohm"}));  // no shunt: the formulas below
    const double is_a = fit["is_a"]["value"], n = fit["n"]["value"], rs = fit["rs_ohm"]["value"], t_k = fit["temp_k"];
    // Vt = kT/q with the exact 2019 SI values of k and q (SI Brochure, 9th ed., 2019).
    const double vt = 1.380649e-23 * t_k / 1.602176634e-19;
    const Json figures = b.result("part.figures", {{"part_id", part_id}, {"currents_a", {1e-4, 1e-3, 1e-2}}})["figures"];
    for (const auto& f : figures) {
      const double i = f["i_a"];
      INFO("I = " << i << " A: " << f.dump());
      REQUIRE(f["vf_v"]["std_error"].is_number());
      REQUIRE(f["rd_ohm"]["std_error"].is_number());
      // Vf = I·Rs + n·Vt·ln(1 + I/Is) (Shockley with series resistance, solved
      // for V; Sze & Ng, Physics of Semiconductor Devices, 3rd ed., §2.3):
      // ∂Vf/∂Is = −n·Vt·I/(Is·(Is + I)), ∂Vf/∂n = Vt·ln(1 + I/Is), ∂Vf/∂Rs = I.
      CHECK(f["vf_v"]["value"].get<double>() == Approx(i * rs + n * vt * std::log1p(i / is_a)).epsilon(1e-6));
      const double se_vf = propagated_se({-n * vt * i / (is_a * (is_a + i)), vt * std::log1p(i / is_a), i}, fit);
      // rd = dV/dI = n·Vt/(I + Is) + Rs:
      // ∂rd/∂Is = −n·Vt/(I + Is)², ∂rd/∂n = Vt/(I + Is), ∂rd/∂Rs = 1.
      const double se_rd = propagated_se({-n * vt / ((i + is_a) * (i + is_a)), vt / (i + is_a), 1.0}, fit);
      // The daemon differentiates numerically (central differences, step
      // 1e-6 relative): agreement to 1e-5 relative is our bound, no source.
      CHECK(f["vf_v"]["std_error"].get<double>() == Approx(se_vf).epsilon(1e-5));
      CHECK(f["rd_ohm"]["std_error"].get<double>() == Approx(se_rd).epsilon(1e-5));
      CHECK(f["vf_v"]["std_error"].get<double>() > 0);
    }
  }

  // junco show prints them: "value ± error" for Vf and rd.
  const auto shown = b.junco({"show", "SE-1"});
  INFO(shown.out << shown.err);
  CHECK(shown.status == 0);
  // The rows under the "I  Vf  rd" header, each "value ± error" twice.
  const std::size_t table = shown.out.find("rd\n");
  REQUIRE(table != std::string::npos);
  std::size_t rows_with_both = 0;
  for (std::size_t at = table + 3; at < shown.out.size();) {
    const std::size_t end = std::min(shown.out.find('\n', at), shown.out.size());
    const std::string line = shown.out.substr(at, end - at);
    std::size_t pm = 0, count = 0;
    while ((pm = line.find("±", pm)) != std::string::npos) ++count, ++pm;
    rows_with_both += count == 2;
    at = end + 1;
  }
  CHECK(rows_with_both >= 2);  // junco show's default currents, 1 mA and 10 mA
}

TEST_CASE("a damaged stored fit is a storage error, not invalid params; older rows without a covariance still read",
          "[daemon][fit]") {
  test::BenchDaemon b("damaged-fit", no_heating());
  b.run_plan(forward_plan("WREN-0913"));
  const Json before = b.result("part.figures", {{"part_id", 2}, {"currents_a", {1e-3}}})["figures"][0];
  b.daemon().stop();
  const auto db = b.dir() / "junco.db";
  // Part 1: the detail is cut short (not JSON). Part 2: a fit written before
  // the covariance column existed (migration 0007): read from the stored
  // correlation and standard errors, the same figures.
  sql(db, "UPDATE fits SET detail = '{\"parameter_names\": [\"is_a\", \"n\"' WHERE part_id = 1");
  sql(db, "UPDATE fits SET covariance = NULL WHERE part_id = 2");
  b.restart();

  for (const char* method : {"part.fit", "part.figures", "part.export", "lot.stats"}) {
    const Json params = std::string(method) == "lot.stats" ? Json{{"lot", "WREN-0913"}}
                        : std::string(method) == "part.export" ? Json{{"part_id", 1}, {"format", "spice"}}
                                                                : Json{{"part_id", 1}};
    const Json reply = b.client().request(method, params);
    INFO(method << " → " << reply.dump());
    REQUIRE(reply.contains("error"));
    CHECK(reply["error"]["code"] == -32004);
    CHECK(reply["error"]["message"].get<std::string>().find("fit") != std::string::npos);
  }
  const Json after = b.result("part.figures", {{"part_id", 2}, {"currents_a", {1e-3}}})["figures"][0];
  CHECK(after["vf_v"]["std_error"].get<double>() == Approx(before["vf_v"]["std_error"].get<double>()).epsilon(1e-9));
  CHECK(after["rd_ohm"]["std_error"].get<double>() == Approx(before["rd_ohm"]["std_error"].get<double>()).epsilon(1e-9));

  // A detail of the wrong shape (valid JSON) is damage too.
  b.daemon().stop();
  sql(db, "UPDATE fits SET detail = '{\"parameter_names\": [\"is_a\", \"n\", \"rs_ohm\"], \"correlation\": \"none\"}' WHERE part_id = 2");
  b.restart();
  const Json reply = b.client().request("part.figures", {{"part_id", 2}});
  INFO(reply.dump());
  CHECK(reply["error"]["code"] == -32004);
  // The parts themselves still list.
  CHECK(b.result("part.list", {{"lot", "WREN-0913"}})["parts"].size() == 2);
}

// A store written before fits recorded their run (fits.run_id NULL, schema
// before migration 0010): on open the migration gives each fit the part's
// latest run started no later than the fit, so part.fit, part.figures and
// part.readings name the run again. Common practice, no source.
TEST_CASE("fits stored without their run id get it back when an older store is opened", "[daemon][fit]") {
  test::BenchDaemon b("old-run-ids", no_heating());
  b.run_plan(forward_plan("WREN-0914"));
  std::map<long, long> run_of_part;  // each part's one run, as juncod recorded it
  const Json parts = b.result("part.list", {{"lot", "WREN-0914"}})["parts"];
  for (const auto& p : parts) {
    const long part = p["part_id"];
    run_of_part[part] = b.result("part.readings", {{"part_id", part}})["run"]["run_id"];
  }
  REQUIRE(run_of_part.size() == 2);
  b.daemon().stop();
  const auto db = b.dir() / "junco.db";
  // As an older juncod left it: no run ids, and migration 0010 not applied.
  sql(db, "UPDATE fits SET run_id = NULL; DELETE FROM schema_migrations WHERE version = 10");
  b.restart();
  for (const auto& [part, run] : run_of_part) {
    INFO("part " << part);
    CHECK(b.result("part.fit", {{"part_id", part}})["run_id"] == run);
    CHECK(b.result("part.figures", {{"part_id", part}})["run_id"] == run);
    const Json readings = b.result("part.readings", {{"part_id", part}});
    CHECK(readings["fit_id"].is_number());
    CHECK(readings["points"][0]["used_by_fit"].is_boolean());
  }
}

namespace {

// The rows "x y" of data block $dK in a gnuplot script `junco plot` kept.
std::vector<std::pair<double, double>> datablock(const std::string& script, int k) {
  std::vector<std::pair<double, double>> out;
  const std::string head = "$d" + std::to_string(k) + " << EOD\n";
  const auto at = script.find(head);
  REQUIRE(at != std::string::npos);
  std::istringstream in(script.substr(at + head.size(), script.find("EOD\n", at + head.size()) - at - head.size()));
  std::string x, y;
  while (in >> x >> y)
    if (x != "NaN") out.emplace_back(std::stod(x), std::stod(y));
  return out;
}

bool same_points(std::vector<std::pair<double, double>> a, std::vector<std::pair<double, double>> b) {
  std::sort(a.begin(), a.end());
  std::sort(b.begin(), b.end());
  if (a.size() != b.size()) return false;
  for (std::size_t k = 0; k < a.size(); ++k)  // printed with 9 significant digits
    if (std::abs(a[k].first - b[k].first) > 1e-8 * std::abs(b[k].first) || std::abs(a[k].second - b[k].second) > 1e-8 * std::abs(b[k].second))
      return false;
  return true;
}

}  // namespace

// `junco plot iv --part` draws what the stored fit did: the readings its
// noise floor (the bench's accuracy, here i_abs_a = 0.35 µA → 3.5 µA) left
// out are drawn apart, not the ones the CLI's default accuracy would leave
// out (1 nA → 10 nA). The expected sets are rebuilt here from part.readings
// and the fit's detail.excluded (indices into the forward sweep's readings
// not taken in a limit, docs/api.md), not from the new per-reading flags.
TEST_CASE("a plot of a stored part marks exactly the readings its stored fit left out", "[daemon][fit][plot]") {
  test::BenchDaemonOptions options;
  options.extra = {{"accuracy", {{"v_rel", 1e-5}, {"v_abs_v", 5e-6}, {"i_rel", 1e-3}, {"i_abs_a", 3.5e-7}}}};
  test::BenchDaemon b("plot-excluded", no_heating(), options);
  Json plan = forward_plan("WREN-0915");
  plan["sweep"]["start"] = 1e-6;
  b.run_plan(plan);
  const Json fit = b.result("part.fit", {{"part_id", 1}});
  REQUIRE(fit["status"] == "converged");
  const Json readings = b.result("part.readings", {{"part_id", 1}, {"run_id", fit["run_id"]}});
  std::vector<std::pair<double, double>> input, limited;
  for (const auto& p : readings["points"]) {
    if (p["kind"] != "dc" || p["series"] != "up" || !p["v"].is_number() || !p["i_a"].is_number()) continue;
    ((p["flags"].get<int>() & 9) ? limited : input).emplace_back(p["v"].get<double>(), p["i_a"].get<double>());
  }
  std::vector<bool> left_out(input.size(), false);
  for (const auto& e : fit["detail"]["excluded"]) left_out.at(e["index"].get<std::size_t>()) = true;
  std::vector<std::pair<double, double>> used, excluded = limited;
  for (std::size_t k = 0; k < input.size(); ++k) (left_out[k] ? excluded : used).push_back(input[k]);
  // The case this is about: readings left out by the stored fit that the
  // CLI's default noise floor (10 nA) would have counted as used.
  REQUIRE(std::count_if(excluded.begin(), excluded.end(), [](const auto& p) { return p.second > 1e-8; }) >= 1);
  CHECK(used.size() == fit["points_used"].get<std::size_t>());

  const auto out = b.dir() / "iv.svg";
  const auto cli = b.junco({"plot", "iv", "--part", "SE-1", "--out", out.string()});
  INFO(cli.err);
  REQUIRE(cli.status == 0);
  std::ifstream gp(out.string() + ".gp");
  const std::string script((std::istreambuf_iterator<char>(gp)), std::istreambuf_iterator<char>());
  INFO(script.substr(0, 3000));
  CHECK(same_points(datablock(script, 0), used));      // "readings used by the fit"
  CHECK(same_points(datablock(script, 3), excluded));  // drawn apart
}
