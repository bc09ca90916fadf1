// The reports a run's fits give, as juncod stores them with the fit
// (detail.junction_cap, detail.electrothermal, detail.heating, detail.pin,
// detail.package; the part's temperature law) and part.fit serves them: plain typed values, no JSON. Their one JSON writer and reader
// is formats/report_json.hpp; the fit results they are made of stay in their
// own headers (junction_cap.hpp, electrothermal_fit.hpp, heating.hpp).
#pragma once

#include "fitting/deembed.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/heating.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/pin_diode.hpp"
#include "fitting/temperature_fit.hpp"

#include <cstdint>
#include <limits>
#include <optional>
#include <span>
#include <string>
#include <vector>

namespace junco::fitting {

// One off-state reading as the capacitance fit took it (detail.junction_cap.readings).
struct OffStateReadingReport {
  double reverse_v = std::numeric_limits<double>::quiet_NaN();
  double freq_hz = std::numeric_limits<double>::quiet_NaN();
  double fixture_ratio_db = std::numeric_limits<double>::quiet_NaN();  // −20·log10(Vout/Vin) of the fixture; NaN: not computable
  double c_f = std::numeric_limits<double>::quiet_NaN();  // the junction capacitance from this reading; NaN when left out
  std::string left_out;                                   // why it was left out of the law; "" when used
};

// The junction capacitance law's fit (JunctionCapFit) as reported, with what
// each reading gave when the readings are known.
struct JunctionCapReport {
  bool ok = false;
  std::string message;
  Estimate cj0_f, vj_v, m;
  bool law_held = false;  // VJ, M held at their defaults (too few biases)
  long points_used = 0;
  double reduced_chi2 = std::numeric_limits<double>::quiet_NaN();
  double vj_m_correlation = std::numeric_limits<double>::quiet_NaN();
  std::optional<std::vector<OffStateReadingReport>> readings;  // none: the fit alone (rows stored before per-reading reports)
};

// The fit alone (no readings).
JunctionCapReport junction_cap_report(const JunctionCapFit& fit);
// With one reading report per point, in the order the fit took them.
JunctionCapReport junction_cap_report(const JunctionCapFit& fit, std::span<const OffStatePoint> points);

// The electro-thermal fit of a run (ElectroThermalRun with the law and
// ambient it assumed): DC and AC readings fitted together with the junction's
// heating, or without AC readings how far heating may bias Rs.
struct ElectrothermalReport {
  std::string status;  // fitted, no_ac, failed; not_used (juncod: fitted, but it does not describe the readings)
  std::string note;
  long ac_readings = 0;
  long ac_left_out = 0;
  Estimate rs_ohm, is_a, n, rth_k_per_w, top_tj_k, apparent_rs_ohm;
  double top_power_w = std::numeric_limits<double>::quiet_NaN();
  double reduced_chi2 = std::numeric_limits<double>::quiet_NaN();
  double rs_bias_per_100_k_per_w_ohm = std::numeric_limits<double>::quiet_NaN();
  double eg_ev = std::numeric_limits<double>::quiet_NaN(), xti = std::numeric_limits<double>::quiet_NaN(),
         ambient_k = std::numeric_limits<double>::quiet_NaN();  // the law and ambient the fit assumed
};

ElectrothermalReport electrothermal_report(const ElectroThermalRun& run, const ElectroThermalRunOptions& options);

// A run's heating readings (plan.heating): how many top readings were pulsed
// and their median dwell, Rth and τ from the two dwells, the up/down
// hysteresis, and the heating the DC-only Rs may still hold.
struct HeatingReport {
  std::size_t pulsed_readings = 0;
  double pulse_dwell_s = std::numeric_limits<double>::quiet_NaN();  // median output-on → reading of the pulsed ones
  std::optional<DwellThermal> dwell;        // with dwell readings
  std::optional<Hysteresis> hysteresis;     // with down-sweep readings
  std::optional<double> rs_heating_ohm;     // when the measured Rth sizes it
};

// A run's vector readings fitted (juncod's daemon/vector_analysis.hpp makes
// it; stored as detail.package, served by part.fit as "package"): the
// package's Ls and Cp with their standard errors, and the chip's Cj(V) law
// with the package removed. What is stored of the law is the fit alone (no
// per-reading C), and of the package fit all but readings_used.
// The on-state impedance's fit from forward_vector readings (detail.package.forward).
struct ForwardVectorFit {
  bool pin = false;             // model: the PIN law, else a junction (K = 0)
  std::size_t readings = 0;     // usable forward_vector readings
  std::size_t currents = 0;     // distinct bias currents among them
  bool package_removed = false; // the run's package fit was ok and removed
  bool deembedded = false;      // every reading had the run's open and short at its frequency
  PinFit fit;
  // A junction part: the same quantities from the run's DC fit (RS, N) and
  // AC fit (TT, detail.stored_charge), set by the caller (NaN: none), and
  // (vector − fit)/√(u_vector² + u_fit²).
  struct Compared {
    Estimate other;
    double z = std::numeric_limits<double>::quiet_NaN();
  };
  std::optional<Compared> rs_ohm, n, tt_s;
};

struct VectorRunFit {
  PackageFit package;
  bool deembedded = false;  // the run's open and short standards were removed
  double z_load_ohm = 0.0;
  std::size_t readings = 0;  // reverse_vector readings
  std::size_t standards = 0; // vector_open + vector_short readings
  // The chip's law, package removed (when the package fit is ok); its
  // standard errors include the package's (package_in_law_errors).
  std::optional<JunctionCapFit> cap;
  bool package_in_law_errors = false;
  std::optional<ForwardVectorFit> forward;  // with forward_vector readings
};

// How a PIN run's AC readings were screened before the law's second fit
// (juncod's apply_pin): the first fit's τ sets the charge criterion.
struct PinScreenReport {
  std::size_t readings = 0;  // AC readings of the run
  std::size_t used = 0;      // kept for the law's fit
  long large_signal = 0, below_floor = 0;
  long kept_by_charge_rule = 0;  // large against the bias, small against I·τ: kept
  double tau_for_screen_s = std::numeric_limits<double>::quiet_NaN();
};

// A PIN part's run (plan.part_type "pin"; stored as detail.pin, served by
// part.fit as "pin"): the law R0 + K·I^−x with the lifetime τ, how the
// readings were screened, and CT ∥ Rp from the off-state readings.
struct PinReport {
  // nullopt: the run had no AC readings, no fit was tried (not_fitted says so).
  std::optional<PinFit> law;
  std::string not_fitted;
  std::optional<PinScreenReport> screen;  // with the law
  std::optional<PinOffFit> off_state;     // with off-state readings
  bool law_ok() const { return law && law->ok; }
};

// A part's temperature law as juncod stores it (temperature_fits.detail,
// served by part.fit as "temperature_law"): EG, XTI, TRS1 with their standard
// errors from a multi-temperature job (fit_temperature_law), and the ids of
// the runs it was fitted from.
struct TemperatureLawReport {
  TemperatureFit fit;
  std::vector<std::int64_t> runs;
};

}  // namespace junco::fitting
