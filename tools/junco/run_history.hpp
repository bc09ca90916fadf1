// Which runs measured a part or a lot, so `junco show` and `junco lots` can
// say which run they show and that others exist (a re-measured lot must never
// mix runs silently). Built from job.list and job.get, one call per job.
#pragma once

#include "tools/junco/rpc_client.hpp"

#include <string>
#include <vector>

namespace junco::cli {

struct RunInfo {
  long run_id = 0, job_id = 0, part_id = 0;
  std::string state, started_at, finished_at;
};

// Every run juncod has stored, oldest first.
std::vector<RunInfo> all_runs(RpcClient& client);

// The runs of one part, oldest first.
std::vector<RunInfo> runs_of_part(const std::vector<RunInfo>& runs, long part_id);

// "run 7 (job 3, 2026-12-03 10:12:01)"
std::string describe_run(const RunInfo& run);

}  // namespace junco::cli
