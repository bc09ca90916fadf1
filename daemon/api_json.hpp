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
// A reading with how the stored fit treated it: used_by_fit (true, false;
// null when the fit does not take such readings) and fit_excluded (the reason, else null).
Json to_json(const PointRow& p, const std::optional<FitUse>& use);
Json to_json(const PartRow& p);
Json to_json(const PartListRow& p);
Json to_json(const LotRow& l);
Json to_json(const InstrumentRow& i);
Json to_json(const FitRecord& f);
Json to_json(const fitting::Estimate& e);  // {value, std_error}, null when not finite
Json to_json(const JunctionCapReport& r);
Json to_json(const ElectrothermalReport& r);

// The stored reports (detail.junction_cap, detail.electrothermal) back into
// their rows; throws std::exception on a wrong shape (the store names the row).
JunctionCapReport junction_cap_report_of(const Json& j);
ElectrothermalReport electrothermal_report_of(const Json& j);

template <typename Row>
Json to_json(const std::vector<Row>& rows) {
  Json out = Json::array();
  for (const auto& r : rows) out.push_back(to_json(r));
  return out;
}

}  // namespace junco::daemon
