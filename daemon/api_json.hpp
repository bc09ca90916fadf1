// The stored rows as the API gives them: the one place rows become JSON
// (job.get, job.list, part.list, lot.list, part.readings, part.fit,
// bench.describe's "seen"). The wire format is schema/api/*.json.
#pragma once

#include "daemon/rows.hpp"

#include <vector>

namespace junco::daemon {

Json to_json(const JobRecord& j);
Json to_json(const RunRecord& r);
Json to_json(const RunFixture& f);
Json to_json(const PointRow& p);
Json to_json(const PartRow& p);
Json to_json(const PartListRow& p);
Json to_json(const LotRow& l);
Json to_json(const InstrumentRow& i);
Json to_json(const FitRecord& f);
Json to_json(const fitting::Estimate& e);  // {value, std_error}, null when not finite

template <typename Row>
Json to_json(const std::vector<Row>& rows) {
  Json out = Json::array();
  for (const auto& r : rows) out.push_back(to_json(r));
  return out;
}

}  // namespace junco::daemon
