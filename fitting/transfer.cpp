#include "fitting/transfer.hpp"

#include <cmath>
#include <numbers>

namespace junco::fitting {

namespace {

using cplx = std::complex<double>;

// a ∥ b where an infinite resistance means "absent".
cplx parallel(cplx a, double b_ohm) {
  if (!std::isfinite(b_ohm)) return a;
  return a * b_ohm / (a + b_ohm);
}

}  // namespace

double junction_resistance_ohm(const DiodeParams& p, double bias_i_a, double temp_k) {
  return p.n * thermal_voltage_v(temp_k) / (bias_i_a + p.is_a);
}

cplx diode_on_impedance(const AcPart& part, double bias_i_a, double freq_hz, double temp_k) {
  const double gd = 1.0 / junction_resistance_ohm(part.dc, bias_i_a, temp_k);
  double c = part.cj_f + part.tt_s * gd;
  if (part.cap.cj0_f > 0.0) c += junction_capacitance_f(part.cap, junction_voltage_at_current_v(part.dc, bias_i_a, temp_k));
  if (!(c > 0.0) || !(freq_hz > 0.0)) return part.dc.rs_ohm + 1.0 / gd;
  return part.dc.rs_ohm + 1.0 / cplx(gd, 2.0 * std::numbers::pi * freq_hz * c);
}

double cathode_load_ohm(const Fixture& fx) {
  return std::isfinite(fx.dc_return_ohm) ? fx.load_ohm * fx.dc_return_ohm / (fx.load_ohm + fx.dc_return_ohm) : fx.load_ohm;
}

cplx fixture_gain(const Fixture& fx, cplx z_diode) {
  // The anode node is ch1; the diode and the cathode-node load form a divider.
  const cplx z_cathode = parallel(cplx(fx.load_ohm), fx.dc_return_ohm);
  return z_cathode / (z_diode + z_cathode);
}

cplx transfer_ratio(const Fixture& fx, cplx z_diode) {
  const cplx z_cathode = parallel(cplx(fx.load_ohm), fx.dc_return_ohm);
  const cplx z_in = parallel(z_diode + z_cathode, fx.bias_feed_ohm);
  const cplx vin_per_emf = z_in / (fx.source_ohm + z_in);
  const double thru_per_emf = fx.load_ohm / (fx.source_ohm + fx.load_ohm);
  return vin_per_emf * fixture_gain(fx, z_diode) / thru_per_emf;
}

double insertion_loss_db(const Fixture& fx, const AcPart& part, double bias_i_a, double freq_hz, double temp_k) {
  return -to_db(transfer_ratio(fx, diode_on_impedance(part, bias_i_a, freq_hz, temp_k)));
}

std::vector<AcResidual> ac_residuals(const Fixture& fx, const AcPart& part, std::span<const AcPoint> points,
                                     double temp_k) {
  std::vector<AcResidual> out;
  out.reserve(points.size());
  for (const auto& pt : points) {
    AcResidual r;
    r.bias_i_a = pt.bias_i_a;
    r.measured_db = 20.0 * std::log10(pt.vout / pt.vin);
    r.model_db = to_db(fixture_gain(fx, diode_on_impedance(part, pt.bias_i_a, pt.freq_hz, temp_k)));
    r.residual_db = r.measured_db - r.model_db;
    out.push_back(r);
  }
  return out;
}

}  // namespace junco::fitting
