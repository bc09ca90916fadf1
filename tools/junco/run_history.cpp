#include "tools/junco/run_history.hpp"

#include <algorithm>

namespace junco::cli {

std::vector<RunInfo> all_runs(RpcClient& client) {
  std::vector<RunInfo> out;
  for (const auto& job : client.call("job.list").value("jobs", Json::array())) {
    const Json detail = client.call("job.get", Json{{"job_id", job.value("job_id", 0L)}});
    for (const auto& r : detail.value("runs", Json::array())) {
      RunInfo info;
      info.run_id = r.value("run_id", 0L);
      info.job_id = r.value("job_id", 0L);
      info.part_id = r.value("part_id", 0L);
      info.state = r.value("state", "");
      info.started_at = r.value("started_at", Json("")).is_string() ? r["started_at"].get<std::string>() : "";
      info.finished_at = r.value("finished_at", Json("")).is_string() ? r["finished_at"].get<std::string>() : "";
      out.push_back(info);
    }
  }
  std::sort(out.begin(), out.end(), [](const RunInfo& a, const RunInfo& b) { return a.run_id < b.run_id; });
  return out;
}

std::vector<RunInfo> runs_of_part(const std::vector<RunInfo>& runs, long part_id) {
  std::vector<RunInfo> out;
  for (const auto& r : runs)
    if (r.part_id == part_id) out.push_back(r);
  return out;
}

std::string describe_run(const RunInfo& run) {
  return "run " + std::to_string(run.run_id) + " (job " + std::to_string(run.job_id) + ", " +
         (run.started_at.empty() ? std::string("not started") : run.started_at) + ")";
}

}  // namespace junco::cli
