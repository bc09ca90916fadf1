// The fuzz targets' entry points, shared by the libFuzzer programs (clang,
// build/fuzz) and by tests/unit/fuzz_regressions_test.cpp (gcc, the normal
// build), so a saved crashing input replays through exactly the same code.
//
// Each entry takes arbitrary bytes, drives one pure parser, swallows only the
// errors that parser documents (DriverError, RequestError, ...) and checks
// cheap invariants beyond "no crash". A broken invariant throws
// InvariantBroken: libFuzzer sees an uncaught exception (a crash, input
// saved), Catch sees a failed test with the message.
#pragma once

#include <stdexcept>
#include <string>
#include <string_view>

namespace junco::fuzz {

class InvariantBroken : public std::logic_error {
 public:
  using std::logic_error::logic_error;
};

// Throws InvariantBroken("<what>") when !ok.
inline void require(bool ok, const std::string& what) {
  if (!ok) throw InvariantBroken(what);
}

void reply_parser(std::string_view data);  // drivers/reply_parser.hpp
void dialect(std::string_view data);       // drivers/dialect.hpp parse_dialect, expand_template, format_number
void rpc_request(std::string_view data);   // protocol/framing.hpp LineFramer + parse_line + replies
void plan(std::string_view data);          // daemon/plan.hpp parse_plan + check_plan on a fixed bench
void iv_csv(std::string_view data);        // formats/iv_csv.hpp parse_iv_csv
void design(std::string_view data);        // design/calculators.hpp run_design (part.design's inputs)

struct Target {
  const char* name;  // also the directory under corpus/ and regressions/
  void (*run)(std::string_view);
};

inline constexpr Target targets[] = {
    {"reply_parser", reply_parser}, {"dialect", dialect}, {"rpc_request", rpc_request},
    {"plan", plan},                 {"iv_csv", iv_csv},           {"design", design},
};

}  // namespace junco::fuzz
