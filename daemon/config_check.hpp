// `juncod --check-config`: everything a start would meet, checked at once
// and without side effects — the config's sections (config_problems), then
// the world it points at: each address parses, each dialect file loads and
// is for its role, the socket's directory and path length, the database's
// directory (never created silently: a missing data mount must not become
// an empty database on the root disk), and limits that look like a unit
// mistake. Nothing is opened, created or sent to an instrument.
#pragma once

#include "daemon/config.hpp"

#include <filesystem>
#include <string>
#include <vector>

namespace junco::daemon {

struct ConfigCheck {
  std::vector<std::string> problems;  // each "FILE: /pointer: what" or "socket: what"; any one stops juncod
  std::vector<std::string> warnings;  // worth a look, not fatal
  Config config;                      // as far as it could be read
  bool ok() const { return problems.empty(); }
};

ConfigCheck check_config_file(const std::filesystem::path& file);

}  // namespace junco::daemon
