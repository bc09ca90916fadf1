// part.export formats of a stored part.
// json:   the model document of the latest usable fit (formats/model_document.hpp,
//         format junco.part-model v2), read by junco design --model, export, plot.
// spice:  a `.model` card from the same fit (formats/spice_card.hpp).
// csv:    raw readings of the latest run, one row per point, SI units in the header.
// iv-csv: the run's DC readings as `v,i_a` (formats/readings_csv.hpp).
// ac-csv: the run's AC readings as `bias_i_a,freq_hz,vin,vout`, the bias being
//         the current of the DC reading at the same step.
#pragma once

#include "daemon/rows.hpp"
#include "fitting/extract.hpp"
#include "formats/spice_card.hpp"

#include <optional>
#include <string>
#include <vector>

namespace junco::daemon {

// The stored fit as the shared exporters take it. The SPICE model name is
// lot-qualified (D_<lot>_<label>) so cards of two lots never clash.
fitting::PartModel part_model(const PartRow& part, const FitRecord& fit);
std::string spice_name(const PartRow& part);

std::string export_model_json(const PartRow& part, const FitRecord& fit);
std::string export_spice(const PartRow& part, const FitRecord& fit);
std::string export_csv(const std::vector<PointRow>& points);
std::string export_iv_csv(const std::vector<PointRow>& points);
std::string export_ac_csv(const std::vector<PointRow>& points);
std::string export_off_csv(const std::vector<PointRow>& points);  // reverse_v,freq_hz,vin,vout

}  // namespace junco::daemon
