// The one Catch2 main every test program links. Each program holds the tests
// of several files and each CTest entry selects one file's by its tag
// (--filenames-as-tags "[#stem]", tests/CMakeLists.txt). A selection that
// matches nothing must fail, not pass quietly: NoTests is always on here (the
// command line can give only one --warn, and ctest passes NoAssertions).
#define CATCH_CONFIG_RUNNER
#include <catch2/catch.hpp>

int main(int argc, char* argv[]) {
  Catch::Session session;
  session.configData().warnings = Catch::WarnAbout::NoTests;
  if (const int rc = session.applyCommandLine(argc, argv); rc != 0) return rc;
  return session.run();
}
