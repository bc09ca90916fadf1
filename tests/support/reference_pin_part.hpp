// The practical PIN part the PIN reference tests put into the calculators and,
// written as ngspice sources, into ngspice (pin_switch_ngspice_test.cpp,
// pin_design_ngspice_test.cpp): R0 0.4 Ω, 20 Ω at 1 mA with x = 0.9,
// τ = 200 ns (knee 0.8 MHz); off CT 0.25 pF ∥ 20 kΩ. One definition, so the
// two tests check the same part.
#pragma once

#include "design/calculators.hpp"

#include <cmath>

namespace junco::test {

inline fitting::DesignPart reference_pin_part() {
  fitting::DesignPart p;
  p.label = "WREN-PIN";
  p.dc = {1e-12, 2.0, 0.4};
  p.temp_k = 300.15;
  fitting::PinPart pin;
  pin.law = {2.0, 200e-9, 0.4, 20.0 * std::pow(1e-3, 0.9), 0.9};
  pin.ct_f = 0.25e-12;
  pin.rp_ohm = 20e3;
  p.pin = pin;
  return p;
}

}  // namespace junco::test
