// part.fit's wire bytes for stored parts: a database holding fits whose
// stored detail carries every report juncod writes (capacitance law with its
// readings, electro-thermal, heating with both dwells and the hysteresis,
// stored charge, PIN law, package from vector readings, and a temperature
// law) is served through the real Service, and the JSON text must equal
// tests/unit/data/part_fit_wire.json byte for byte. The file was written by
// the juncod of e5341b6 (before the reports became typed structs), and again
// by 3e5e99b (before detail.pin, detail.package and the temperature law
// became typed) when the package and the third part were added, so any
// change in what the API says for the same stored rows fails here, naming
// the first differing byte.
// Second part: an older row (no per-reading capacitance report, a failed
// stored-charge fit without cj_f, heating with a hysteresis only). Third: a
// PIN part without AC readings and a package fit that failed.
// JUNCO_WRITE_GOLDEN=1 rewrites the file (only ever on purpose, with the
// change reviewed).
#include "daemon/bench.hpp"
#include "daemon/core_service.hpp"
#include "daemon/store.hpp"

#include <catch2/catch.hpp>
#include <sqlite3.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <string>
#include <unistd.h>

using namespace junco::daemon;
namespace fs = std::filesystem;

namespace {

struct WireTempDir {
  fs::path path;
  WireTempDir() {
    path = fs::temp_directory_path() / ("junco-wire-" + std::to_string(::getpid()));
    fs::remove_all(path);
    fs::create_directories(path);
  }
  ~WireTempDir() { fs::remove_all(path); }
};

// As the executor of e5341b6 stored it (key order as nlohmann wrote it: sorted).
const char* const kFullDetail = R"({
 "parameter_names": ["is_a", "n", "rs_ohm"],
 "correlation": [[1.0, 0.9712345678901234, -0.4], [0.9712345678901234, 1.0, -0.31], [-0.4, -0.31, 1.0]],
 "excluded": [{"index": 0, "reason": "below noise floor 3.5e-06 A"}, {"index": 17, "reason": "taken in a current or power limit"}],
 "iterations": 14,
 "junction_cap": {"ok": true, "message": "VJ, M held", "cj0_f": {"value": 1.25e-12, "std_error": 3e-15},
   "vj_v": {"value": 0.65, "std_error": null}, "m": {"value": 0.4, "std_error": null}, "law_held": true, "points_used": 1,
   "reduced_chi2": 1.3, "vj_m_correlation": null,
   "readings": [{"reverse_v": 2.0, "freq_hz": 100000000.0, "fixture_ratio_db": 33.979400086720375, "isolation_db": 33.979400086720375,
                 "c_f": 1.1e-12, "left_out": ""},
                {"reverse_v": 5.0, "freq_hz": 100000000.0, "fixture_ratio_db": null, "isolation_db": null, "c_f": null,
                 "left_out": "below the level floor"}]},
 "electrothermal": {"status": "fitted", "note": "Rth from DC and AC", "ac_readings": 12, "ac_left_out": 2,
   "rs_ohm": {"value": 0.71, "std_error": 0.02}, "is_a": {"value": 2.1e-09, "std_error": 1e-11}, "n": {"value": 1.85, "std_error": 0.001},
   "rth_k_per_w": {"value": 390.0, "std_error": 20.0}, "top_tj_k": {"value": 310.2, "std_error": 0.5}, "top_power_w": 0.024,
   "apparent_rs_ohm": {"value": 0.3, "std_error": 0.002}, "reduced_chi2": 0.9, "rs_bias_per_100_k_per_w_ohm": null,
   "eg_ev": 1.11, "xti": 3.0, "ambient_k": 299.5},
 "heating": {"pulsed_readings": 3, "pulse_dwell_s": 0.002,
   "dwell": {"status": "measured", "note": "2 of 3 steps", "rth_k_per_w": {"value": 412.5, "std_error": 11.25},
     "tau_s": {"value": 0.0123, "std_error": null}, "steps_used": 2,
     "steps": [{"used": true, "why": "", "i_a": 0.05, "power_w": 0.045, "delta_vf_inf_v": -0.0321, "delta_t_inf_k": 18.6,
                "tau_s": 0.012, "rth_k_per_w": 413.3333333333333},
               {"used": false, "why": "rise below 10 sigma", "i_a": 0.001, "power_w": 0.0007, "delta_vf_inf_v": null,
                "delta_t_inf_k": null, "tau_s": null, "rth_k_per_w": null}]},
   "hysteresis": {"pairs": 9, "max_abs_v": 0.0042, "at_i_a": 0.08, "sigma_v": 0.0003, "max_z": 14.0, "mean_v": -0.0011,
                  "flagged": true, "note": "up/down differ by 4.2 mV"},
   "rs_heating_ohm": 0.0487},
 "stored_charge": {"ok": true, "message": "converged", "n": {"value": 1.9, "std_error": 0.01}, "rs_ohm": {"value": 0.8, "std_error": 0.03},
   "tt_s": {"value": 5.5e-09, "std_error": 2e-10}, "cj_f": {"value": 3e-13, "std_error": 1e-14}, "reduced_chi2": 1.07,
   "points": 24, "frequencies": 3},
 "pin": {"ok": true, "message": "converged", "n": {"value": 1.7, "std_error": 0.02}, "tau_s": {"value": 1.2e-06, "std_error": 5e-08},
   "r0_ohm": {"value": 0.6, "std_error": 0.05}, "k_ohm_a_x": {"value": 0.021, "std_error": 0.001}, "x": {"value": 0.87, "std_error": 0.01},
   "r_1ma_ohm": {"value": 8.4, "std_error": 0.2}, "knee_freq_hz": 132629.1, "parameter_names": ["n", "tau_s", "r0_ohm", "k_ohm_a_x", "x"],
   "covariance": [[0.0004, 0.0, 0.0, 0.0, 0.0], [0.0, 2.5e-15, 0.0, 0.0, 0.0], [0.0, 0.0, 0.0025, 0.0, 0.0], [0.0, 0.0, 0.0, 1e-06, 0.0],
                  [0.0, 0.0, 0.0, 0.0, 0.0001]],
   "reduced_chi2": 1.2, "points": 30, "frequencies": 3, "above_knee": 20,
   "screen": {"readings": 32, "used": 30, "large_signal": 1, "below_floor": 1, "kept_by_charge_rule": 4, "tau_for_screen_s": 1.1e-06},
   "off_state": {"ok": true, "message": "converged", "ct_f": {"value": 2.2e-13, "std_error": 4e-15},
                 "rp_ohm": {"value": 12000.0, "std_error": 300.0}, "reduced_chi2": null, "points": 5}},
 "package": {"ok": true, "message": "", "ls_h": {"value": 1.1e-09, "std_error": 4e-11}, "cp_f": {"value": 1.5e-13, "std_error": 6e-15},
   "ls_cp_correlation": -0.42, "rms_relative": 0.0031, "readings": 40, "standards": 8, "deembedded": true, "z_load_ohm": 45.45454545454545,
   "package_in_law_errors": true,
   "junction_cap": {"ok": true, "message": "", "cj0_f": {"value": 9.8e-13, "std_error": 2e-14}, "vj_v": {"value": 0.71, "std_error": 0.03},
     "m": {"value": 0.45, "std_error": 0.01}, "law_held": false, "points_used": 40, "reduced_chi2": 0.97, "vj_m_correlation": 0.93},
   "forward": {"ok": true, "message": "converged", "n": {"value": 1.849, "std_error": 0.003}, "tau_s": {"value": 4.998e-09, "std_error": 1.4e-11},
     "r0_ohm": {"value": 0.6946, "std_error": 0.0023}, "k_ohm_a_x": {"value": 0.0, "std_error": null}, "x": {"value": 1.0, "std_error": null},
     "r_1ma_ohm": {"value": 0.6946, "std_error": 0.0023}, "knee_freq_hz": 31830988.6, "parameter_names": ["n", "tau_s", "r0_ohm"],
     "covariance": [[9e-06, 0.0, 0.0], [0.0, 1.96e-22, 0.0], [0.0, 0.0, 5.29e-06]], "reduced_chi2": 1.1, "points": 36, "frequencies": 6,
     "above_knee": 12, "model": "junction", "readings": 36, "currents": 6, "package_removed": true, "deembedded": true,
     "against_fit": {"rs_ohm": {"fit": {"value": 0.7067, "std_error": 0.0087}, "z": -1.34}, "n": {"fit": {"value": 1.8484, "std_error": 0.0005}, "z": 0.19},
       "tt_s": null}}}
})";

const char* const kOlderDetail = R"({
 "parameter_names": ["is_a", "n", "rs_ohm", "rsh_ohm"],
 "correlation": [],
 "excluded": [],
 "iterations": 3,
 "junction_cap": {"ok": false, "message": "no usable capacitance among 2", "cj0_f": {"value": null, "std_error": null},
   "vj_v": {"value": null, "std_error": null}, "m": {"value": null, "std_error": null}, "law_held": false, "points_used": 0,
   "reduced_chi2": null, "vj_m_correlation": null},
 "electrothermal": {"status": "no_ac", "note": "no AC readings", "ac_readings": 0, "ac_left_out": 0,
   "rs_ohm": {"value": null, "std_error": null}, "is_a": {"value": null, "std_error": null}, "n": {"value": null, "std_error": null},
   "rth_k_per_w": {"value": null, "std_error": null}, "top_tj_k": {"value": null, "std_error": null}, "top_power_w": null,
   "apparent_rs_ohm": {"value": 0.52, "std_error": 0.004}, "reduced_chi2": null, "rs_bias_per_100_k_per_w_ohm": 0.0123,
   "eg_ev": 1.11, "xti": 3.0, "ambient_k": 300.15},
 "heating": {"pulsed_readings": 0, "pulse_dwell_s": null,
   "hysteresis": {"pairs": 4, "max_abs_v": 0.0001, "at_i_a": 0.01, "sigma_v": 0.0002, "max_z": 0.5, "mean_v": 2e-05,
                  "flagged": false, "note": "within the noise"}},
 "stored_charge": {"ok": false, "message": "need 2 or more frequencies", "n": {"value": null, "std_error": null},
   "rs_ohm": {"value": null, "std_error": null}, "tt_s": {"value": null, "std_error": null}, "reduced_chi2": 0.0,
   "points": 4, "frequencies": 1}
})";

// A PIN part's run without AC readings and a package fit that failed, as the
// executor stores them: the PIN report is {ok, message} with the off state
// only, the package report's estimates and junction_cap are null.
const char* const kNoLawDetail = R"({
 "parameter_names": ["is_a", "n", "rs_ohm"],
 "correlation": [[1.0, null, 0.1], [null, 1.0, -0.2], [0.1, -0.2, 1.0]],
 "excluded": [],
 "iterations": 7,
 "pin": {"ok": false, "message": "the run has no AC readings: the PIN law needs them at 2 or more frequencies",
   "off_state": {"ok": false, "message": "need 3 or more off-state readings", "ct_f": {"value": null, "std_error": null},
                 "rp_ohm": {"value": null, "std_error": null}, "reduced_chi2": 0.0, "points": 2}},
 "package": {"ok": false, "message": "need readings at 2 or more frequencies", "ls_h": {"value": 0.0, "std_error": null},
   "cp_f": {"value": 0.0, "std_error": null}, "ls_cp_correlation": null, "rms_relative": 0.0, "readings": 3, "standards": 0,
   "deembedded": false, "z_load_ohm": 50.0, "package_in_law_errors": false, "junction_cap": null}
})";

const char* const kTemperatureLaw = R"({"status": "ok", "message": "", "tnom_k": 300.15, "n": 1.83,
 "is_a": {"value": 2e-09, "std_error": 1e-10}, "eg_ev": {"value": 1.13, "std_error": 0.02},
 "xti": {"value": 3.0, "std_error": null, "held": true}, "trs1_per_k": {"value": 0.0031, "std_error": 0.0002, "resolved": true},
 "rs_ohm": {"value": 0.7, "std_error": 0.01}, "corr_eg_xti": null, "reduced_chi2": 0.8, "dof": 2,
 "temperatures": [{"temp_k": 273.15, "ln_is_residual": 0.01}, {"temp_k": 300.15, "ln_is_residual": -0.02}, {"temp_k": 358.15, "ln_is_residual": 0.01}],
 "notes": ["XTI held at 3"], "runs": [1, 2, 3]})";

void exec(sqlite3* db, const std::string& sql) {
  char* err = nullptr;
  if (sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
    const std::string what = err ? err : "?";
    sqlite3_free(err);
    FAIL(what << " in " << sql);
  }
}

std::string quoted(const std::string& text) {
  std::string out = "'";
  for (char c : text) out += c == '\'' ? std::string("''") : std::string(1, c);
  return out + "'";
}

std::string read_text(const fs::path& file) {
  std::ifstream in(file, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace

TEST_CASE("part.fit gives the same bytes for the same stored parts as before the reports were typed") {
  WireTempDir dir;
  const fs::path db = dir.path / "junco.db";
  Id part1 = 0, part2 = 0, part3 = 0;
  {
    Store s(db);
    const Id lot = s.ensure_lot("WREN-0912");
    part1 = s.ensure_part(lot, "kestrel24b-01", 1);
    part2 = s.ensure_part(lot, "kestrel24b-02", 2);
    part3 = s.ensure_part(lot, "kestrel24b-03", 3);
    Plan plan;
    plan.lot = "WREN-0912";
    plan.parts = {{1, "kestrel24b-01"}, {2, "kestrel24b-02"}, {3, "kestrel24b-03"}};
    const Id job = s.insert_job(plan, 10, 1000, 42);
    const RunRecord r1 = s.ensure_run(job, part1, 1, RunFixture{}, 300.15);
    const RunRecord r2 = s.ensure_run(job, part2, 2, RunFixture{}, 300.15);
    const RunRecord r3 = s.ensure_run(job, part3, 3, RunFixture{}, 300.15);
    sqlite3* h = nullptr;
    REQUIRE(sqlite3_open(db.c_str(), &h) == SQLITE_OK);
    const std::string cols =
        "INSERT INTO fits(part_id, run_id, model, status, message, is_a, is_a_se, n, n_se, rs_ohm, rs_ohm_se, rsh_ohm, rsh_ohm_se, temp_k, cost,"
        " rms_residual, points_used, warnings, detail, cj0_f, cj0_f_se, vj_v, vj_v_se, m, m_se, covariance, created_at) VALUES ";
    exec(h, cols + "(" + std::to_string(part1) + ", " + std::to_string(r1.id) +
                ", 'forward', 'converged', 'converged after 14 iterations', 2.0123456789012345e-09, 1.1e-11, 1.8512345, 0.0012, 0.7134, 0.021,"
                " NULL, NULL, 300.15, 0.0123, 0.00045, 28, '[\"two dwells: 2 of 3 steps\"]', " + quoted(kFullDetail) +
                ", 1.25e-12, 3e-15, 0.65, NULL, 0.4, NULL, '[[1.2e-22, 1.0e-14, -1.0e-13], [1.0e-14, 1.44e-06, -1.0e-05],"
                " [-1.0e-13, -1.0e-05, 0.000441]]', '2026-12-01T10:00:00.000Z')");
    exec(h, cols + "(" + std::to_string(part2) + ", " + std::to_string(r2.id) +
                ", 'forward', 'converged', '', 3e-09, 2e-10, 1.9, 0.01, 0.52, 0.004, 1e9, 1e8, 300.15, 1.5, 0.002, 9, '[]', " +
                quoted(kOlderDetail) + ", NULL, NULL, NULL, NULL, NULL, NULL, NULL, '2026-12-01T10:05:00.000Z')");
    exec(h, cols + "(" + std::to_string(part3) + ", " + std::to_string(r3.id) +
                ", 'forward', 'converged', '', 4e-09, 3e-10, 1.95, 0.02, 0.61, 0.005, NULL, NULL, 300.15, 0.9, 0.001, 12, '[]', " +
                quoted(kNoLawDetail) + ", NULL, NULL, NULL, NULL, NULL, NULL, '[[9e-20, 0.0, 1.5e-13], [0.0, 0.0004, -2e-05], [1.5e-13, -2e-05, 2.5e-05]]',"
                " '2026-12-01T10:10:00.000Z')");
    exec(h, "INSERT INTO temperature_fits(part_id, job_id, status, message, eg_ev, eg_ev_se, xti, xti_se, trs1_per_k, trs1_per_k_se, tnom_k,"
            " detail, created_at) VALUES (" + std::to_string(part1) + ", " + std::to_string(job) +
            ", 'ok', NULL, 1.13, 0.02, 3.0, NULL, 0.0031, 0.0002, 300.15, " + quoted(kTemperatureLaw) + ", '2026-12-01T11:00:00.000Z')");
    sqlite3_close(h);
  }

  Config config;
  config.paths.database = db;
  ServiceOptions o;
  o.open_bench = [](const Config&) -> std::unique_ptr<Bench> { throw std::runtime_error("no bench in this test"); };
  o.log = [](std::string_view) {};
  auto svc = make_service(config, std::move(o));
  const Caller caller{4242, 1000, 1000};
  const std::string served = svc->call("part.fit", {{"part_id", part1}}, caller).dump(1) + "\n" +
                             svc->call("part.fit", {{"part_id", part2}}, caller).dump(1) + "\n" +
                             svc->call("part.fit", {{"part_id", part3}}, caller).dump(1) + "\n";
  svc->shutdown();
  // detail.package.forward (forward vector readings) goes through its typed
  // reader and writer without losing a key or a digit.
  CHECK(nlohmann::json::parse(served.substr(0, served.find("\n{")))["package"]["forward"] ==
        nlohmann::json::parse(kFullDetail)["package"]["forward"]);

  const fs::path golden = fs::path(JUNCO_SOURCE_DIR) / "tests/unit/data/part_fit_wire.json";
  if (const char* w = std::getenv("JUNCO_WRITE_GOLDEN"); w && std::string(w) == "1") std::ofstream(golden, std::ios::binary) << served;
  const std::string expected = read_text(golden);
  REQUIRE_FALSE(expected.empty());
  std::size_t at = 0;
  while (at < served.size() && at < expected.size() && served[at] == expected[at]) ++at;
  INFO("first difference at byte " << at << ": served …" << served.substr(at > 80 ? at - 80 : 0, 160) << "…");
  CHECK(served.size() == expected.size());
  CHECK(served == expected);
}
