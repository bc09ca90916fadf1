// What the daemon computes from a stored part beyond its fit: design
// calculators on the latest fit (part.design) and the AC transfer of a run
// against the model, with the joint AC+DC fit (part.transfer).
#pragma once

#include "fitting/temperature.hpp"

#include "daemon/rows.hpp"
#include "design/calculators.hpp"
#include "fitting/joint_fit.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/heating.hpp"
#include "fitting/junction_cap.hpp"
#include "fitting/lot_stats.hpp"
#include "formats/spice_card.hpp"
#include "fitting/transfer.hpp"

#include <optional>
#include <vector>

namespace junco::daemon {

// A run's readings as the fits take them. DC: forward readings not taken in
// current or power limit. AC: each AC reading with the current of the DC
// reading of its bias step (the step's readings share one transaction) and
// its level unit (peak_per_unit: √2 for vrms, ½ for vpp).
// Only the sweep up (series "up"): a pulse's dwell readings and the sweep
// down are the heating options' (heating_readings).
std::vector<fitting::IvPoint> dc_fit_points(const std::vector<PointRow>& points);
// How the stored fit treated each of its run's readings, in the order of
// `points` (the run's, as Store::points gives them): nullopt for readings the
// forward fit does not take (AC, reverse, dwell and down series, NaN), else
// used or the fit's reason for leaving it out. The fit's excluded indices
// count into dc_fit_points(points); when they cannot belong to these
// readings (counts differ), every entry is nullopt rather than a guess.
std::vector<std::optional<FitUse>> fit_use_of_points(const std::vector<PointRow>& points, const fitting::FitResult& fit);

// The DC readings taken at a held bias (no pulse): the electro-thermal fit's,
// whose model is the settled junction temperature Ta + Rth·I·V.
std::vector<fitting::IvPoint> held_dc_points(const std::vector<PointRow>& points);

// The readings of the heating plan options (plan.heating), grouped for
// fitting/heating.hpp: pulsed steps with their two dwell readings, and the
// sweep up paired with the sweep down by set value.
struct HeatingReadings {
  std::size_t pulsed = 0;                 // forward readings of the sweep up taken in a pulse
  double pulse_dwell_median_s = kNaN;     // their output-on → reading time
  std::vector<fitting::DwellStep> dwells;
  std::vector<fitting::SweepPair> pairs;
};
HeatingReadings heating_readings(const std::vector<PointRow>& points);
std::vector<fitting::AcPoint> ac_points(const std::vector<PointRow>& points);

// Off-state readings: the levels read at each reverse bias (kind reverse_ac).
std::vector<fitting::OffStatePoint> off_state_points(const std::vector<PointRow>& points);

// The junction capacitance law from a run's off-state readings, with the
// part's Rs from its forward fit (0 when that is not usable) and the
// fixture's stray capacitance as stored with the run (subtracted); nullopt
// when the run has no off-state readings.
std::optional<fitting::JunctionCapFit> junction_cap_of_run(const std::vector<PointRow>& points, const RunFixture& run_fixture,
                                                           double rs_ohm);

// What is stored of the capacitance law's fit (detail.junction_cap, with what
// each off-state reading gave, in the order of off_state_points) and of the
// electro-thermal fit (detail.electrothermal): fitting::junction_cap_report
// and fitting::electrothermal_report (fitting/fit_reports.hpp).

// The small-signal fixture of a run, from the fixture stored with it:
// Vout/Vin sees the load and the DC return (0 Ω = a choke, open at AC). The
// bias feed and the source do not enter the ratio (ch1 is the anode node).
fitting::Fixture ac_fixture(const RunFixture& run_fixture);

// The latest fit as the calculators take it ("WR-03 (lot WREN-0912, fit 7)"),
// with its measured capacitance law when the fit has one.
fitting::DesignPart design_part(const PartRow& part, const FitRecord& fit);
// A PIN part's law and off state from its fit (detail.pin), nullopt when the
// fit has none that succeeded.
std::optional<fitting::PinPart> pin_part_of_fit(const FitRecord& fit);
// The covariance design_part gives the calculators (part_analysis.cpp says which).
fitting::ParameterCovariance design_covariance(const FitRecord& fit);

// The fit as lot statistics take it (its capacitance law when it has one).
fitting::LotPart lot_part(const PartRow& part, const FitRecord& fit);

// What a part was measured as (plan.part_type): a junction diode or a PIN
// diode. It decides which model the transfer verdict judges the AC readings by.
enum class PartType { junction, pin };
// "junction" or "pin" (plan.part_type's spelling); nullopt for another text.
std::optional<PartType> part_type_from_string(const std::string& text);

struct TransferOptions {
  PartType part_type = PartType::junction;  // the plan's part_type of the run's job
  fitting::AccuracyModel accuracy;  // of the DC readings (the bench config's)
  double ac_sigma_db = 0.01;  // standard uncertainty of one AC ratio reading
  double cj_f = 0.0;          // junction capacitance for the AC model (0: ignored)
  // Readings the small-signal model cannot describe are left out of the RMS
  // and the joint fit, and listed as such (fitting::screen_ac_readings).
  double max_signal_ratio = 0.1;
  double ac_floor_v = 100e-6;
};

// part.transfer's result: per-point measured/model/residual (and whether the
// point is used, or why not), the RMS over the used points, and
// the DC-only and joint fits with the agreement verdict (null without AC readings).
// A PIN part's readings are screened by the charge criterion with its fitted τ.
Json transfer_report(const PartRow& part, const RunRecord& run, const FitRecord& fit, const std::vector<PointRow>& points,
                     const TransferOptions& options);

// The joint fit's verdict for a part of the given type. junction: "agree",
// "consistent once heating is modelled" (the stored electro-thermal fit's Rs
// agrees with the AC-only Rs) or "DISAGREE". pin: the junction's rd = N·Vt/I
// does not describe a PIN above its lifetime's knee, so the junction fit's
// agreement is no verdict on the part: the verdict says so and points at the
// PIN law (part.fit pin); the joint fit's self-heating hint does not apply.
std::string transfer_verdict(const Json& joint, const FitRecord& fit, PartType type);

// lot.stats's result: the statistics of the lot's fitted parts (mean, std
// dev, range, median, MAD, outliers per quantity; matched sets; the median
// nominal), and the parts left out for want of a usable fit.
Json lot_stats_report(const std::string& lot, const std::vector<fitting::LotPart>& parts, const Json& left_out,
                      const fitting::LotStatsOptions& options);

// The temperature law (EG, XTI, TRS1) of a part from a job's runs at
// several chamber temperatures (Store::fits_of_job_part): each usable run's
// fit at its ambient (mean of the chamber readbacks around its readings,
// known to half their difference or the readback's 0.01 K, whichever is
// larger) into fitting::fit_temperature_law, with the ids of the runs used.
TemperatureLawReport temperature_law_of_runs(const std::vector<RunFitAtTemperature>& run_fits, const fitting::TemperatureLaw& held);

}  // namespace junco::daemon
