#include "daemon/rows.hpp"

#include <array>
#include <utility>

namespace junco::daemon {

namespace {
constexpr std::array<std::pair<JobState, const char*>, 7> kJobStates{{{JobState::queued, "queued"},
                                                                      {JobState::running, "running"},
                                                                      {JobState::paused, "paused"},
                                                                      {JobState::done, "done"},
                                                                      {JobState::failed, "failed"},
                                                                      {JobState::cancelled, "cancelled"},
                                                                      {JobState::interrupted, "interrupted"}}};
constexpr std::array<std::pair<RunState, const char*>, 3> kRunStates{
    {{RunState::running, "running"}, {RunState::done, "done"}, {RunState::stopped, "stopped"}}};
}  // namespace

const char* to_string(RunState state) {
  for (const auto& [s, name] : kRunStates)
    if (s == state) return name;
  return "?";
}

std::optional<RunState> run_state_from_string(std::string_view name) {
  for (const auto& [s, n] : kRunStates)
    if (name == n) return s;
  return std::nullopt;
}

const char* to_string(JobState state) {
  for (const auto& [s, name] : kJobStates)
    if (s == state) return name;
  return "?";
}

std::optional<JobState> job_state_from_string(std::string_view name) {
  for (const auto& [s, n] : kJobStates)
    if (name == n) return s;
  return std::nullopt;
}

const std::string& job_state_names() {
  static const std::string names = [] {
    std::string out;
    for (const auto& [s, name] : kJobStates) out += (out.empty() ? "" : ", ") + std::string(name);
    return out;
  }();
  return names;
}

bool is_terminal(JobState s) {
  return s == JobState::done || s == JobState::failed || s == JobState::cancelled || s == JobState::interrupted;
}

RunFixture run_fixture(const FixtureConfig& f) {
  return RunFixture{f.bias_resistor_ohm, f.dc_return_ohm, f.source_ohm, f.load_ohm, to_string(f.current_from), f.stray_c_f, std::nullopt};
}

}  // namespace junco::daemon
