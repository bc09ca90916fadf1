// The fitting library's reports as JSON: the one writer of each shape, used by
// juncod (what it stores in a fit's detail and what part.fit, part.transfer
// and the temperature law serve: daemon/api_json.cpp) and by `junco fit`
// where it prints the same report. The readers turn a stored report back into
// its typed value (juncod's store); they throw std::invalid_argument or a
// nlohmann::json exception on a wrong shape, and the caller names the row.
// Every number that is not finite is written as null, and null (or a
// missing key) reads back as NaN, so a report read back and written again
// gives the same text.
#pragma once

#include "fitting/ac_charge_fit.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/fit_reports.hpp"
#include "fitting/heating.hpp"
#include "fitting/joint_fit.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/pin_diode.hpp"
#include "fitting/temperature_fit.hpp"

#include <nlohmann/json.hpp>

namespace junco::fitting {

// detail.junction_cap: {ok, message, cj0_f:{value,std_error}, vj_v, m, law_held,
// points_used, reduced_chi2, vj_m_correlation[, readings: [{reverse_v, freq_hz,
// fixture_ratio_db, isolation_db (the same ratio under its former name), c_f, left_out}]]}
nlohmann::json junction_cap_json(const JunctionCapReport& report);
nlohmann::json junction_cap_json(const JunctionCapFit& fit);  // the fit alone, no readings
JunctionCapReport junction_cap_report_of(const nlohmann::json& j);

// detail.electrothermal: {status, note, ac_readings, ac_left_out, rs_ohm:{value,std_error},
// is_a, n, rth_k_per_w, top_tj_k, top_power_w, apparent_rs_ohm, reduced_chi2,
// rs_bias_per_100_k_per_w_ohm, eg_ev, xti, ambient_k}
nlohmann::json electrothermal_json(const ElectrothermalReport& report);
nlohmann::json electrothermal_run_json(const ElectroThermalRun& run, const ElectroThermalRunOptions& options);
ElectrothermalReport electrothermal_report_of(const nlohmann::json& j);

// detail.heating: {pulsed_readings, pulse_dwell_s[, dwell][, hysteresis][, rs_heating_ohm]}
nlohmann::json heating_json(const HeatingReport& report);
HeatingReport heating_report_of(const nlohmann::json& j);
// {status, note, rth_k_per_w, tau_s: {value, std_error}, steps_used, steps: [{used, why, i_a,
//  power_w, delta_vf_inf_v, delta_t_inf_k, tau_s, rth_k_per_w}]}
nlohmann::json dwell_thermal_json(const DwellThermal& d);
// {pairs, max_abs_v, at_i_a, sigma_v, max_z, mean_v, flagged, note}
nlohmann::json hysteresis_json(const Hysteresis& h);

// detail.stored_charge: {ok, message, n, rs_ohm, tt_s[, cj_f]: {value, std_error},
// reduced_chi2, points, frequencies}
nlohmann::json ac_charge_fit_json(const AcChargeFit& fit);
AcChargeFit ac_charge_fit_of(const nlohmann::json& j);

// part.transfer's joint fit: {ok, message, is_a:{value,std_error}, n, rs_ohm,
// reduced_chi2, dc_points, ac_points}; the report {dc_only, ac_only, joint, agree, agreement[, hint]}
nlohmann::json simple_fit_json(const SimpleFit& fit);
nlohmann::json joint_report_json(const JointFitReport& report);

// The temperature law: {"status": "ok"|"failed", "message", "eg_ev": {"value","std_error"},
// "xti": {…, "held"}, "trs1_per_k": {…, "resolved"}, "tnom_k", "n", "is_a", "rs_ohm",
// "corr_eg_xti", "reduced_chi2", "dof", "temperatures": [{"temp_k", "ln_is_residual"}], "notes"}
nlohmann::json temperature_fit_json(const TemperatureFit& fit);
TemperatureFit temperature_fit_of(const nlohmann::json& j);
// A stored temperature law (TemperatureLawReport): temperature_fit_json with "runs": [run ids].
nlohmann::json temperature_law_json(const TemperatureLawReport& report);
TemperatureLawReport temperature_law_report_of(const nlohmann::json& j);

// detail.pin: {ok, message, n, tau_s, r0_ohm, k_ohm_a_x, x, r_1ma_ohm: {value, std_error},
// knee_freq_hz, parameter_names, covariance, reduced_chi2, points, frequencies, above_knee};
// its off_state: {ok, message, ct_f, rp_ohm: {value, std_error}, reduced_chi2, points}
nlohmann::json pin_fit_json(const PinFit& fit);
nlohmann::json pin_off_fit_json(const PinOffFit& fit);
// The whole of detail.pin (PinReport): pin_fit_json with screen: {readings, used,
// large_signal, below_floor, kept_by_charge_rule, tau_for_screen_s}, or
// {ok: false, message} when no law was fitted; off_state when measured.
nlohmann::json pin_report_json(const PinReport& report);
PinReport pin_report_of(const nlohmann::json& j);

// detail.package (fitting/fit_reports.hpp VectorRunFit): {ok, message, ls_h:{value,std_error},
// cp_f, ls_cp_correlation, rms_relative, readings, standards, deembedded, z_load_ohm,
// package_in_law_errors, junction_cap: the chip's law as junction_cap_json(fit), or null}
nlohmann::json vector_run_fit_json(const VectorRunFit& fit);
VectorRunFit vector_run_fit_of(const nlohmann::json& j);

}  // namespace junco::fitting
