#include "daemon/run_fits.hpp"

#include "daemon/part_analysis.hpp"
#include "daemon/vector_analysis.hpp"
#include "formats/report_json.hpp"

#include "fitting/ac_charge_fit.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/joint_fit.hpp"
#include "fitting/pin_diode.hpp"

#include <cmath>
#include <cstdio>
#include <exception>
#include <limits>
#include <set>
#include <string>

namespace junco::daemon {

namespace {


// The run's junction capacitance law (off-state or vector readings) as the
// AC models take it; cj0_f = 0 when the run gave none.
fitting::JunctionCap cap_law_of(const RunFit& out) {
  if (!out.cap || !out.cap->ok) return {};
  return {out.cap->cj0_f.value, out.cap->vj_v.value, out.cap->m.value, 0.5};
}

// With AC readings, Rs and self-heating can be told apart
// (fitting/electrothermal_fit.hpp, docs/fitting.md): the stored Is, n and Rs
// become the isothermal ones at the run's ambient, with their covariance;
// the DC-only Rs stays in detail.electrothermal.apparent_rs_ohm. Without AC
// readings the fit keeps the DC-only values and warns how much heating they
// may hide. The AC model takes the junction's charge the run measured: the
// Cj(V) law and the stored-charge fit's TT (and its constant Cj when it
// fitted one), so it runs after those fits.
void apply_electrothermal(const Config& cfg, double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points, RunFit& out) {
  fitting::ElectroThermalRunOptions eo;
  eo.fit.ambient_k = temp_k;
  eo.fit.accuracy = cfg.accuracy;
  eo.fit.ac_sigma_db = cfg.level_sigma_db();
  eo.fit.charge.cap = cap_law_of(out);
  if (out.more.stored_charge && out.more.stored_charge->ok) {
    const fitting::AcChargeFit& sc = *out.more.stored_charge;
    if (std::isfinite(sc.tt_s.value)) eo.fit.charge.tt_s = sc.tt_s.value;
    if (std::isfinite(sc.cj_f.value) && sc.cj_f.value > 0.0) eo.fit.cj_f = sc.cj_f.value;
  }
  const auto ac = ac_points(points);
  // The model is the settled junction (Ta + Rth·I·V): with AC readings it
  // takes the readings at a held bias only (pulsed ones are near ambient);
  // without, its DC-only fit and note are about the stored fit's readings.
  const auto dc = ac.empty() ? dc_fit_points(points) : held_dc_points(points);
  const fitting::ElectroThermalRun et = fitting::fit_run_electrothermal(dc, ac, ac_fixture(fixture), eo);
  out.electrothermal = electrothermal_report(et, eo);
  if (et.status == "no_ac" || et.status == "failed") {
    if (!et.note.empty()) out.fit.warnings.push_back(et.note);
    return;
  }
  const fitting::ElectroThermalFit& f = et.fit;
  // A fit whose model does not describe the readings must not replace the
  // DC-only values: its answer is a compromise far from the DC readings. Seen
  // before the AC model had TT·gd (reduced χ² 28 000, N 1.51 for a true 1.83
  // that the DC-only fit gets); still possible when the part has stored
  // charge but no TT was fitted (AC readings at one frequency only). Bound
  // ours, no source: 10× the DC-only fit's reduced χ² (at least 10), far
  // above a model that describes the readings.
  const double dc_chi2 = std::isfinite(out.fit.reduced_chi2) ? std::max(1.0, out.fit.reduced_chi2) : 1.0;
  if (f.reduced_chi2 > 10.0 * dc_chi2) {
    char line[360];
    std::snprintf(line, sizeof line,
                  "electro-thermal fit not used: it does not describe the readings (reduced chi2 %.3g, the DC-only fit's %.3g); "
                  "Is, N and Rs are the DC-only fit's%s",
                  f.reduced_chi2, out.fit.reduced_chi2,
                  eo.fit.charge.tt_s > 0.0 ? ""
                                           : " (no TT was fitted for its AC model: AC readings above the stored charge's "
                                             "corner 1/(2 pi TT) do not fit it; readings at 2 or more frequencies fit TT)");
    out.fit.warnings.emplace_back(line);
    // The stored report says so too: its readers (part.transfer's verdict, the
    // demo's Rth column) take "fitted" as the values the stored fit carries.
    out.electrothermal->status = "not_used";
    out.electrothermal->note = line;
    return;
  }
  out.fit.is_a = f.is_a;
  out.fit.n = f.n;
  out.fit.rs_ohm = f.rs_ohm;
  // (ln Is, n, Rs, Rth) correlation → covariance of (Is, n, Rs): a change of
  // ln Is by d is a change of Is by Is·d, so the correlation carries over.
  const double se[3] = {f.is_a.std_error, f.n.std_error, f.rs_ohm.std_error};
  out.fit.parameter_names = {"is_a", "n", "rs_ohm"};
  out.fit.correlation.assign(3, std::vector<double>(3, 0.0));
  out.fit.covariance.assign(3, std::vector<double>(3, 0.0));
  for (int a = 0; a < 3; ++a)
    for (int b = 0; b < 3; ++b) {
      const double r = f.correlation.size() >= 3 ? f.correlation[a][b] : (a == b ? 1.0 : 0.0);
      out.fit.correlation[a][b] = r;
      out.fit.covariance[a][b] = r * se[a] * se[b];
    }
  out.fit.reduced_chi2 = f.reduced_chi2;
}

// With small-signal AC readings at two or more frequencies, the transit time
// TT (fitting/ac_charge_fit.hpp) with the run's Cj(V) law when the off-state
// readings gave one: detail.stored_charge, served by part.fit as tt_s.
void apply_stored_charge(const Config& cfg, double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points, RunFit& out) {
  const auto all = ac_points(points);
  const fitting::Fixture fx = ac_fixture(fixture);
  const auto screened = fitting::screen_ac_readings(all, fx, fitting::AcScreen{});
  std::vector<fitting::AcPoint> ac;
  for (std::size_t k = 0; k < all.size(); ++k)
    if (screened[k].empty()) ac.push_back(all[k]);
  std::set<double> freqs;
  for (const auto& p : ac) freqs.insert(p.freq_hz);
  if (freqs.size() < 2) return;  // one frequency cannot tell TT·gd from rd: nothing to say
  fitting::AcChargeFitOptions o;
  o.temp_k = temp_k;
  o.is_a = out.fit.is_a.value;
  o.ac_sigma_db = cfg.level_sigma_db();
  o.cap = cap_law_of(out);
  o.fit_cj = !(o.cap.cj0_f > 0.0);
  const auto f = fitting::fit_ac_stored_charge(ac, fx, o);
  out.more.stored_charge = f;
  if (!f.ok) out.fit.warnings.push_back("stored charge not fitted: " + f.message);
}

// A PIN part's AC readings (plan.part_type "pin"): the law R0 + K·I^−x and
// the lifetime τ (fitting/pin_diode.hpp), and CT ∥ Rp from the off-state
// readings. The large-signal screen is the charge criterion, which needs τ:
// a first fit on every reading above the level floor gives it, the screen
// keeps the readings whose RF charge per half cycle is small next to I·τ (or
// whose signal is small next to the bias), and the fit is made again on
// those. Stored as detail.pin, served by part.fit as "pin".
void apply_pin(const Config& cfg, double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points, RunFit& out) {
  const auto all = ac_points(points);
  const fitting::Fixture fx = ac_fixture(fixture);
  fitting::PinFitOptions o;
  o.temp_k = temp_k;
  o.ac_sigma_db = cfg.level_sigma_db();
  PinReport report;
  if (!all.empty()) {
    const fitting::AcScreen junction_rule;
    const auto floor_only = fitting::screen_ac_readings(all, fx, {std::numeric_limits<double>::infinity(), junction_rule.floor_v});
    std::vector<fitting::AcPoint> above_floor;
    for (std::size_t k = 0; k < all.size(); ++k)
      if (floor_only[k].empty()) above_floor.push_back(all[k]);
    const fitting::PinFit first = fitting::fit_pin_law(above_floor, fx, o);
    const double tau_s = first.ok ? first.tau_s.value : 0.0;
    const auto why = fitting::screen_pin_ac_readings(all, fx, tau_s, junction_rule.max_signal_ratio, junction_rule.floor_v);
    const auto small = fitting::screen_ac_readings(all, fx, junction_rule);
    std::vector<fitting::AcPoint> used;
    long large = 0, low = 0, kept_by_charge = 0;
    for (std::size_t k = 0; k < all.size(); ++k) {
      if (why[k].empty()) used.push_back(all[k]);
      else ++(why[k] == "large signal" ? large : low);
      if (why[k].empty() && small[k] == "large signal") ++kept_by_charge;
    }
    const fitting::PinFit& f = report.law.emplace(fitting::fit_pin_law(used, fx, o));
    report.screen = fitting::PinScreenReport{all.size(), used.size(), large, low, kept_by_charge, tau_s};
    if (!f.ok) out.fit.warnings.push_back("PIN law not fitted: " + f.message);
  } else {
    report.not_fitted = "the run has no AC readings: the PIN law needs them at 2 or more frequencies";
    out.fit.warnings.push_back("PIN law not fitted: the run has no AC readings");
  }
  const auto off = off_state_points(points);
  if (!off.empty()) report.off_state = fitting::fit_pin_off_state(off, fx, cfg.level_sigma_db());
  out.more.pin = std::move(report);
}

// The heating plan options' readings (plan.heating; fitting/heating.hpp):
// Rth and τ from the two dwells, the up/down hysteresis, and how much
// heating the stored Rs may still hold. Stored as detail.heating.
void apply_heating(const Config& cfg, double temp_k, const std::vector<PointRow>& points, RunFit& out) {
  const HeatingReadings h = heating_readings(points);
  if (h.pulsed == 0 && h.pairs.empty()) return;
  fitting::HeatingOptions o;
  o.ambient_k = temp_k;
  o.accuracy = cfg.accuracy;
  const fitting::DiodeParams params = out.fit.params();
  fitting::HeatingReport report;
  report.pulsed_readings = h.pulsed;
  report.pulse_dwell_s = h.pulse_dwell_median_s;
  std::optional<fitting::DwellThermal>& dwell = report.dwell;
  if (!h.dwells.empty()) {
    dwell = fitting::dwell_thermal(h.dwells, params, o);
    if (dwell->status != "measured") out.fit.warnings.push_back("two dwells: " + dwell->note);
  }
  if (!h.pairs.empty()) {
    report.hysteresis = fitting::sweep_hysteresis(h.pairs, params, o);
    if (report.hysteresis->flagged) out.fit.warnings.push_back(report.hysteresis->note);
  }
  // Without AC readings the stored Rs is the DC-only one: size what heating
  // it still holds with the measured Rth (the per-100 K/W figure of the
  // electro-thermal note × Rth/100), times the part of the settled rise a
  // pulsed top reading sees, 1 − e^(−t0/τ), when the top was pulsed.
  const bool no_ac = out.electrothermal && out.electrothermal->status == "no_ac";
  const double per_100 = out.electrothermal ? out.electrothermal->rs_bias_per_100_k_per_w_ohm : NAN;
  if (dwell && dwell->status == "measured" && no_ac && std::isfinite(per_100)) {
    const double fraction = h.pulsed > 0 && std::isfinite(h.pulse_dwell_median_s) ? 1.0 - std::exp(-h.pulse_dwell_median_s / dwell->tau_s.value) : 1.0;
    const double bias = per_100 * dwell->rth_k_per_w.value / 100.0 * fraction;
    report.rs_heating_ohm = bias;
    char line[240];
    std::snprintf(line, sizeof line,
                  "with the measured Rth %.4g K/W (two dwells) the heating lowers the DC-only Rs by about %.2g ohm%s",
                  dwell->rth_k_per_w.value, bias, h.pulsed > 0 ? " (pulsed top readings: that part of the settled rise they see)" : "");
    out.fit.warnings.emplace_back(line);
  }
  else if (h.pulsed > 0 && no_ac && std::isfinite(h.pulse_dwell_median_s)) {
    // The electro-thermal note sizes a settled rise at the top reading's
    // power; a pulsed top reading sees only what the junction reached in its
    // dwell, and τ is not known without heating.dwell.
    char line[300];
    std::snprintf(line, sizeof line,
                  "the top %zu readings were pulsed (%.2g ms after output on): they carry only the part of that heating reached "
                  "in %.2g ms, 1 - exp(-t/tau) of it for a thermal time constant tau (heating.dwell measures tau and Rth)",
                  h.pulsed, h.pulse_dwell_median_s * 1e3, h.pulse_dwell_median_s * 1e3);
    out.fit.warnings.emplace_back(line);
  }
  out.more.heating = std::move(report);
}

// The run's vector readings (plan.vector; daemon/vector_analysis.hpp): the
// package's Ls and Cp with their standard errors (detail.package), and the
// chip's Cj(V) law with the package removed, which then stands as the run's
// junction capacitance law in place of the one from the level readings (their
// magnitudes carry the package and the fixture unseparated): the TT fit
// after it takes this law.
//
// The forward_vector readings are fitted there too (package.forward): a PIN
// part's law and lifetime, or a junction part's RS, N and TT, compared with
// the DC and AC fits once those are made (compare_forward_vector). A PIN
// part keeps the Cj(V) law of its level readings (its reverse readings give
// the package only).
void apply_vector(double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points, bool pin, RunFit& out) {
  ForwardContext ctx;
  ctx.pin = pin;
  ctx.temp_k = temp_k;
  if (out.fit.usable()) ctx.dc = out.fit.params();
  if (out.cap && out.cap->ok) ctx.cap = cap_law_of(out);
  out.vector = vector_fit_of_run(points, fixture, ctx);
  const auto& v = out.vector;
  if (!v) return;
  if (v->forward && !v->forward->fit.ok)
    out.fit.warnings.push_back(std::string(pin ? "PIN law" : "RS, N and TT") + " not fitted from the forward vector readings: " + v->forward->fit.message);
  if (!v->package.ok) {
    out.fit.warnings.push_back("package not fitted from the vector readings: " + v->package.message);
    return;
  }
  if (pin) return;
  if (!v->cap || !v->cap->ok) {
    out.fit.warnings.push_back("junction capacitance not fitted from the vector readings: " + (v->cap ? v->cap->message : std::string("no usable reading")));
    return;
  }
  out.cap = *v->cap;
  out.cap_report = junction_cap_report(*v->cap, {});
  out.cap_report->message = "from " + std::to_string(v->cap->points_used) + " vector readings" +
                            (v->deembedded ? ", open/short de-embedded" : "") + ", package Ls and Cp fitted and removed" +
                            (v->cap->message.empty() ? "" : "; " + v->cap->message);
}

// A junction part's RS, N and TT from the forward vector readings against
// the run's DC fit (RS, N) and AC fit (TT, detail.stored_charge): the
// difference over its combined standard error (the two fits share no
// reading, so their errors add in quadrature).
void compare_forward_vector(RunFit& out) {
  if (!out.vector || !out.vector->forward || out.vector->forward->pin || !out.vector->forward->fit.ok) return;
  ForwardVectorFit& fw = *out.vector->forward;
  const auto compared = [](const fitting::Estimate& vector, const fitting::Estimate& other) {
    ForwardVectorFit::Compared c{other};
    const double u2 = vector.std_error * vector.std_error + other.std_error * other.std_error;
    if (std::isfinite(other.value) && std::isfinite(u2) && u2 > 0) c.z = (vector.value - other.value) / std::sqrt(u2);
    return c;
  };
  if (out.fit.usable()) {
    fw.rs_ohm = compared(fw.fit.r0_ohm, out.fit.rs_ohm);
    fw.n = compared(fw.fit.n, out.fit.n);
  }
  if (out.more.stored_charge && out.more.stored_charge->ok) fw.tt_s = compared(fw.fit.tau_s, out.more.stored_charge->tt_s);
  for (const auto& [name, c] : {std::pair{"RS", fw.rs_ohm}, std::pair{"N", fw.n}, std::pair{"TT", fw.tt_s}})
    if (c && std::isfinite(c->z) && std::fabs(c->z) > 4.0) {
      char line[200];
      std::snprintf(line, sizeof line, "the forward vector readings' %s differs from the run's fit by %.1f standard errors", name, c->z);
      out.fit.warnings.emplace_back(line);
    }
}

}  // namespace

RunFit fit_run(const Config& cfg, double temp_k, const RunFixture& fixture, const std::vector<PointRow>& points,
              const std::string& part_type) {
  const bool pin = part_type == "pin";
  RunFit out;
  try {
    fitting::FitOptions opt;
    opt.temp_k = temp_k;
    opt.accuracy = cfg.accuracy;
    out.fit = fitting::fit_forward(dc_fit_points(points), opt);
  } catch (const std::exception& e) {
    out.fit = fitting::FitResult{};
    out.fit.status = fitting::FitStatus::failed;
    out.fit.temp_k = temp_k;
    out.fit.message = std::string("fit failed: ") + e.what();
    return out;
  }
  // Order: the junction's charge first (Cj(V) from the off-state or vector
  // readings, then TT from the multi-frequency AC readings, with the DC-only
  // Is), because the electro-thermal AC model takes it; the heating readings
  // last, as they read the electro-thermal outcome and the stored Is/n/Rs.
  try {
    out.cap = junction_cap_of_run(points, fixture, out.fit.usable() ? out.fit.rs_ohm.value : 0.0);
    if (out.cap) out.cap_report = junction_cap_report(*out.cap, off_state_points(points));
  } catch (const std::exception& e) {
    out.cap.reset();
    out.cap_report.reset();
    out.fit.warnings.push_back(std::string("junction capacitance not fitted: ") + e.what());
  }
  try {
    apply_vector(temp_k, fixture, points, pin, out);
  } catch (const std::exception& e) {
    out.fit.warnings.push_back(std::string("vector readings not analysed: ") + e.what());
  }
  if (pin) {
    try {
      apply_pin(cfg, temp_k, fixture, points, out);
    } catch (const std::exception& e) {
      out.fit.warnings.push_back(std::string("PIN law not fitted: ") + e.what());
    }
  } else if (out.fit.usable()) {
    try {
      apply_stored_charge(cfg, temp_k, fixture, points, out);
    } catch (const std::exception& e) {
      out.fit.warnings.push_back(std::string("stored charge not fitted: ") + e.what());
    }
  }
  if (out.fit.usable()) {
    // The electro-thermal fit reads the AC readings as a junction's
    // rd = N·Vt/I: a PIN part's above its knee are the I-region's resistance.
    if (!pin) try {
      apply_electrothermal(cfg, temp_k, fixture, points, out);
    } catch (const std::exception& e) {
      out.fit.warnings.push_back(std::string("electro-thermal fit not made: ") + e.what());
    }
    try {
      apply_heating(cfg, temp_k, points, out);
    } catch (const std::exception& e) {
      out.fit.warnings.push_back(std::string("heating readings not analysed: ") + e.what());
    }
  }
  // After the electro-thermal fit: a heated part's RS and N are compared in
  // their isothermal values.
  if (out.vector) {
    compare_forward_vector(out);
    out.more.package = *out.vector;
  }
  return out;
}

std::string describe_fit(const RunFit& f) {
  std::string line = std::string("fit ") + fitting::to_string(f.fit.status) + " on " + std::to_string(f.fit.points_used) + " points";
  if (!f.fit.usable() && !f.fit.message.empty()) line += " (" + f.fit.message + ")";
  if (f.cap) {
    char buf[160];
    if (f.cap->ok)
      std::snprintf(buf, sizeof buf, "; CJO %.4g pF VJ %.3g V M %.3g from %zu off-state readings%s", f.cap->cj0_f.value * 1e12,
                    f.cap->vj_v.value, f.cap->m.value, f.cap->points_used, f.cap->law_held ? " (VJ, M held)" : "");
    else
      std::snprintf(buf, sizeof buf, "; junction capacitance not fitted: %s", f.cap->message.c_str());
    line += buf;
  }
  if (const auto& pk = f.more.package; pk && pk->package.ok) {
    char buf[160];
    std::snprintf(buf, sizeof buf, "; package Ls %.4g nH Cp %.4g pF from %zu vector readings", pk->package.package.ls_h * 1e9,
                  pk->package.package.cp_f * 1e12, pk->readings);
    line += buf;
  }
  if (const auto& pk = f.more.package; pk && pk->forward && pk->forward->fit.ok) {
    const auto& fw = *pk->forward;
    char buf[200];
    if (fw.pin)
      std::snprintf(buf, sizeof buf, "; PIN law from %zu forward vector readings: R(1 mA) %.4g ohm, tau %.4g ns", fw.readings,
                    fw.fit.r_1ma_ohm.value, fw.fit.tau_s.value * 1e9);
    else
      std::snprintf(buf, sizeof buf, "; RS %.4g ohm, TT %.4g ns from %zu forward vector readings", fw.fit.r0_ohm.value,
                    fw.fit.tau_s.value * 1e9, fw.readings);
    line += buf;
  }
  return line;
}

}  // namespace junco::daemon
