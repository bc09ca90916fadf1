#include "formats/lot_nominal.hpp"

#include <cmath>
#include <cstdio>
#include <stdexcept>

namespace junco::fitting {

LotPart lot_part_from_model(const PartModel& m) {
  LotPart p{m.part_label, m.lot, m.params, m.temp_k};
  if (m.cj0_f > 0) {
    p.cj0_f = m.cj0_f;
    p.vj_v = m.vj_v;
    p.m = m.m;
  }
  return p;
}

PartModel lot_nominal_model(const std::string& lot, const std::vector<LotPart>& parts) {
  if (parts.empty()) throw std::invalid_argument("lot nominal of " + lot + ": no parts");
  LotStatsOptions options;
  options.currents_a.clear();
  std::vector<LotPart> one_lot = parts;  // every part counts, whichever lot it came from
  for (auto& p : one_lot) p.lot = lot;
  const LotStats st = lot_statistics(one_lot, options).front();
  PartModel m;
  m.part_label = lot + "_NOM";
  m.lot = lot;
  m.temp_k = parts.front().temp_k;
  m.params = st.nominal;
  m.notes.push_back("lot nominal: median of " + std::to_string(parts.size()) + " fitted parts (IS in log)");
  if (std::isfinite(st.nominal_cj0_f)) {
    m.cj0_f = st.nominal_cj0_f;
    m.vj_v = st.nominal_vj_v;
    m.m = st.nominal_m;
    std::size_t with_cap = 0;
    for (const auto& p : parts) with_cap += std::isfinite(p.cj0_f) && p.cj0_f > 0;
    m.notes.push_back("CJO, VJ, M: median of the " + std::to_string(with_cap) + " parts with off-state readings");
  }
  for (const auto& q : st.quantities) {
    char line[160];
    std::snprintf(line, sizeof line, "lot spread %s: std dev %.4g, range %.4g .. %.4g", q.name.c_str(), q.std_dev, q.min, q.max);
    m.notes.push_back(line);
  }
  return m;
}

}  // namespace junco::fitting
