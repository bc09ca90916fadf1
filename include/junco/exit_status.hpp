// Exit statuses of every junco program (junco, juncod, junco-sim), so a
// script can tell a refused command line from work that failed.
#pragma once

namespace junco {

inline constexpr int exit_ok = 0;
inline constexpr int exit_failure = 1;  // the work failed (bench not safe, daemon error, fit not possible)
inline constexpr int exit_usage = 2;    // bad command line, config or input file

}  // namespace junco
