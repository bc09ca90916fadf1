// libFuzzer glue: compiled once per target with -DJUNCO_FUZZ_ENTRY=<function>.
#include "tests/fuzz/entries.hpp"

#include <cstddef>
#include <cstdint>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  junco::fuzz::JUNCO_FUZZ_ENTRY(std::string_view(reinterpret_cast<const char*>(data), size));
  return 0;
}
