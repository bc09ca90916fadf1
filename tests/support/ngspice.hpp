// ngspice as the reference simulator of the reference tests: the one runner.
// Debian's `ngspice` (tools/setup) in batch mode, `ngspice -b FILE.cir`, in a
// scratch directory that goes with the object. A netlist that writes files
// (`wrdata`) names them with path(); run() gives the exit status and the
// printed output (`print`, `.op`, `fourier` tables).
//
//   junco::test::Ngspice ng("acfit");
//   const auto run = ng.run(netlist_with("wrdata " + ng.path("ac.txt") + " vm(k)"));
//   std::ifstream data(ng.path("ac.txt"));
//
// Batch mode exits 1 after a .control block that prints nothing ("no
// simulations run"): end the block with `quit 0` to get 0, or check what
// was written instead of the status. If ngspice is not installed, run()
// throws, naming it: a reference test never passes without its reference.
#pragma once

#include "tests/support/process.hpp"

#include <stdlib.h>  // mkdtemp

#include <filesystem>
#include <fstream>
#include <stdexcept>
#include <string>

namespace junco::test {

struct NgspiceRun {
  int exit_code = -1;
  std::string out;  // stdout and stderr together
};

class Ngspice {
 public:
  explicit Ngspice(const std::string& tag = "run") {
    std::string t = (std::filesystem::temp_directory_path() / ("junco-ngspice-" + tag + "-XXXXXX")).string();
    if (!::mkdtemp(t.data())) throw std::runtime_error("Ngspice: cannot create a directory from " + t);
    dir_ = t;
  }
  ~Ngspice() {
    std::error_code ignored;
    std::filesystem::remove_all(dir_, ignored);
  }
  Ngspice(const Ngspice&) = delete;
  Ngspice& operator=(const Ngspice&) = delete;

  // A file in the scratch directory, e.g. the target of a `wrdata` line.
  std::string path(const std::string& name) const { return (dir_ / name).string(); }

  // Writes the netlist to NAME.cir, runs `ngspice -b` on it and keeps its
  // output also in NAME.log.
  NgspiceRun run(const std::string& netlist, const std::string& name = "circuit") const {
    const std::string cir = path(name + ".cir");
    {
      std::ofstream f(cir);
      f << netlist;
      if (!f) throw std::runtime_error("Ngspice: cannot write " + cir);
    }
    const ProgramRun r = run_program({"ngspice", "-b", cir});  // throws when ngspice is not in PATH
    std::ofstream(path(name + ".log")) << r.out;
    return {r.exit_code, r.out};
  }

 private:
  std::filesystem::path dir_;
};

// One netlist, its own scratch directory: for netlists that only print.
inline NgspiceRun run_ngspice(const std::string& netlist) { return Ngspice().run(netlist); }

}  // namespace junco::test
