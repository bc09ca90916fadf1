// What a fitted part (or a lot's nominal) is, as exports need it, and the
// SPICE diode model card made from it. Pure: strings in, string out.
//
// Card parameter names and units follow the SPICE level-1 diode (docs/references.md
// §2): IS [A], N, RS [Ω], CJO [F], VJ [V], M, TT [s], EG [eV], XTI, TRS1 [1/K],
// TRS2 [1/K²], TNOM [°C]. Parameters left at NaN are omitted so the
// simulator's defaults apply. EG and XTI are always written (the values junco's
// own calculators use away from TNOM, temperature.hpp), TRS1/TRS2 when not 0,
// so a simulator and junco agree at every temperature.
#pragma once

#include "fitting/diode.hpp"
#include "fitting/pin_diode.hpp"
#include "fitting/temperature.hpp"

#include <limits>
#include <optional>
#include <string>
#include <vector>

namespace junco::fitting {

struct PartModel {
  std::string part_label;  // e.g. "K7-014"
  std::string lot;         // e.g. "LOT-2291"
  std::string run_id;      // the run the fit came from ("" when not from a run)
  double temp_k = 300.15;  // junction temperature of the fit (becomes TNOM)
  DiodeParams params;
  TemperatureLaw law;  // EG, XTI (SPICE defaults unless measured or given), TRS1/TRS2
  double is_se_a = std::numeric_limits<double>::quiet_NaN();  // standard errors; NaN = not determined
  double n_se = std::numeric_limits<double>::quiet_NaN();
  double rs_se_ohm = std::numeric_limits<double>::quiet_NaN();
  double cj0_f = std::numeric_limits<double>::quiet_NaN();  // optional C–V law
  double vj_v = std::numeric_limits<double>::quiet_NaN();
  double m = std::numeric_limits<double>::quiet_NaN();
  double tt_s = std::numeric_limits<double>::quiet_NaN();     // transit time TT (stored charge), optional
  double tt_se_s = std::numeric_limits<double>::quiet_NaN();  // its standard error, when fitted
  double rms_residual = std::numeric_limits<double>::quiet_NaN();  // of the fit, as the fit reports it
  std::size_t points_used = 0;
  std::optional<PinPart> pin;  // a PIN part's law and off state (not expressible in the level-1 card)
  // The fitted parameters' covariance (model keys, e.g. is_a, n, rs_ohm, cj0_f,
  // vj_v, m, tt_s; matrix in that order, SI units squared), what the design
  // calculators propagate; empty when not known. covariance_source says
  // where it came from ("fit 12: is_a, n, rs_ohm, tt_s").
  std::vector<std::string> covariance_names;
  std::vector<std::vector<double>> covariance;
  std::string covariance_source;
  std::vector<std::string> notes;  // extra comment lines for the card (e.g. what a lot nominal is made of)
};

// A SPICE-legal model name from a label: letters, digits and '_' only,
// starting with a letter ("K7-014" -> "K7_014", "014" -> "D014").
std::string spice_model_name(const std::string& label);

// "* ..." comment header, then `.model NAME D(IS=... N=... RS=... EG=... XTI=... TNOM=...)`.
// An empty name derives one from the part label.
std::string spice_model_card(const PartModel& part, const std::string& name = "");

}  // namespace junco::fitting
