// A lot's nominal part: the median of each parameter over the lot's fitted
// parts (fitting/lot_stats.hpp), with the junction capacitance law when any
// part has one, as the exporters take it. One function for juncod's
// lot.export and the offline `junco export spice|json a.json b.json`.
#pragma once

#include "fitting/lot_stats.hpp"
#include "formats/spice_card.hpp"

#include <string>
#include <vector>

namespace junco::fitting {

// The part a model document (or a stored fit) describes, as lot statistics
// take it: parameters, temperature and capacitance law (NaN when absent).
LotPart lot_part_from_model(const PartModel& model);

// parts: at least one. The card's comments say how many parts it stands for
// and their spread. part_label "<lot>_NOM".
PartModel lot_nominal_model(const std::string& lot, const std::vector<LotPart>& parts);

}  // namespace junco::fitting
