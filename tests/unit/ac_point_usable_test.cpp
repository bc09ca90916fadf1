// AcPoint::usable, the one rule for which AC readings a fit may take at all
// (fitting/transfer.hpp): checked at its edges. The rule is our own (common
// practice, no source): a level ratio needs two positive finite levels, the
// small-signal model a positive finite bias, and a frequency that is a
// finite number ≥ 0.
#include "fitting/transfer.hpp"

#include <catch2/catch.hpp>

#include <limits>

using junco::fitting::AcPoint;

namespace {
AcPoint good() { return AcPoint{1e-3, 1e6, 0.1, 0.05}; }
}  // namespace

TEST_CASE("an AC reading is usable with positive finite levels and bias and a finite frequency >= 0") {
  constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  constexpr double inf = std::numeric_limits<double>::infinity();
  constexpr double tiny = std::numeric_limits<double>::denorm_min();
  CHECK(good().usable());
  // the smallest positive numbers still count; zero does not
  for (double AcPoint::*field : {&AcPoint::vin, &AcPoint::vout, &AcPoint::bias_i_a}) {
    AcPoint p = good();
    p.*field = tiny;
    CHECK(p.usable());
    for (double bad : {0.0, -0.0, -tiny, -1.0, nan, inf, -inf}) {
      p.*field = bad;
      INFO("value " << bad);
      CHECK_FALSE(p.usable());
    }
  }
  AcPoint f = good();
  f.freq_hz = 0.0;  // frequency-independent fits (joint, electro-thermal without Cj) take it
  CHECK(f.usable());
  for (double bad : {-tiny, -1.0, nan, inf}) {
    f.freq_hz = bad;
    INFO("freq_hz " << bad);
    CHECK_FALSE(f.usable());
  }
}
