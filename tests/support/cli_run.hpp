// Running the real `junco` binary from a test, and a scratch directory that
// cleans up after itself. Shared by the CLI integration tests.
#pragma once

#include <catch2/catch.hpp>

#include <cstdio>
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

// Runs a command line through the shell: exit status and stdout + stderr.
inline CliRun run_shell(const std::string& cmd) {
  FILE* p = popen((cmd + " 2>&1").c_str(), "r");
  REQUIRE(p);
  std::string out;
  char buf[1024];
  while (std::fgets(buf, sizeof buf, p)) out += buf;
  const int st = pclose(p);
  return {WIFEXITED(st) ? WEXITSTATUS(st) : -1, out};
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
