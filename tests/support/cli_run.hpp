// Running the real `junco` binary from a test, and a scratch directory that
// cleans up after itself. Shared by the CLI integration tests.
#pragma once

#include "tests/support/process.hpp"

#include <catch2/catch.hpp>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <sys/wait.h>
#include <unistd.h>

namespace junco::test {

struct CliRun {
  int status;       // exit status, -1 when killed by a signal
  std::string out;  // stdout and stderr together
};

// Runs a command line through the shell: exit status and stdout + stderr
// (tests/support/process.hpp run_shell_command).
inline CliRun run_shell(const std::string& cmd) {
  const ProgramRun r = run_shell_command(cmd);
  return {r.signalled ? -1 : r.exit_code, r.out};
}

// `args` is appended to the junco path and run by the shell.
inline CliRun run_junco(const std::string& args) { return run_shell(std::string(JUNCO_BIN_DIR) + "/junco " + args); }

inline std::string slurp(const std::filesystem::path& path) {
  std::ifstream f(path);
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

struct ScratchDir {
  std::filesystem::path path;
  explicit ScratchDir(const char* name = "junco-test") {
    std::string t = std::string("/tmp/") + name + "-XXXXXX";
    path = mkdtemp(t.data());
  }
  ~ScratchDir() { std::filesystem::remove_all(path); }
  std::string file(const std::string& name) const { return (path / name).string(); }
};

}  // namespace junco::test
