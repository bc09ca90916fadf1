// The stored rows as the API gives them: the one place rows become JSON
// (job.get, job.list, part.list, lot.list, part.readings, part.fit,
// bench.describe's "seen"). The wire format is schema/api/*.json.
#pragma once

#include "daemon/rows.hpp"
#include "formats/report_json.hpp"

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

// A part's temperature law as part.fit serves it: temperature_law_json
// (formats/report_json.hpp) with temperature_fit_id, job_id, created_at.
Json to_json(const TemperatureLawRecord& law);

// A fit's detail document: the fit's parameter_names, correlation, excluded
// and iterations, with each typed report written in (formats/report_json.hpp):
// the one writer of what the store keeps (from a new fit and its reports)
// and what part.fit serves (from a stored FitRecord).
Json fit_detail_json(const fitting::FitResult& fit, const JunctionCapReport* cap, const ElectrothermalReport* electrothermal,
                     const MoreReports& more);
Json fit_detail_json(const FitRecord& f);

template <typename Row>
Json to_json(const std::vector<Row>& rows) {
  Json out = Json::array();
  for (const auto& r : rows) out.push_back(to_json(r));
  return out;
}

}  // namespace junco::daemon
