#include "daemon/vector_analysis.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <map>
#include <set>
#include <numbers>

namespace junco::daemon {

namespace {

using cplx = std::complex<double>;

cplx transfer_of(const PointRow& p) { return std::polar(p.ratio, p.phase_deg * std::numbers::pi / 180.0); }

bool usable(const PointRow& p) {
  return std::isfinite(p.ratio) && p.ratio > 0.0 && std::isfinite(p.phase_deg) && std::isfinite(p.freq_hz) && p.freq_hz > 0.0;
}

// The impedance the slot looks into at AC: RL, in parallel with the return
// resistor when the fixture has one (a choke return is open at AC).
double load_ohm(const RunFixture& f) {
  const double rl = std::isfinite(f.load_ohm) && f.load_ohm > 0 ? f.load_ohm : 50.0;
  const double ret = std::isfinite(f.dc_return_ohm) ? f.dc_return_ohm : 0.0;
  return ret > 0 ? rl * ret / (rl + ret) : rl;
}

// Standards per frequency, the mean of the slot impedances read there.
std::map<double, cplx> standard(const std::vector<PointRow>& points, const char* kind, double z_load) {
  std::map<double, cplx> sum;
  std::map<double, int> count;
  for (const auto& p : points)
    if (p.kind == kind && usable(p)) {
      sum[p.freq_hz] += fitting::slot_impedance_ohm(transfer_of(p), z_load);
      ++count[p.freq_hz];
    }
  for (auto& [f, z] : sum) z /= static_cast<double>(count[f]);
  return sum;
}

// The chip's Cj(V) law from the packaged readings with `pkg` removed.
fitting::JunctionCapFit law_without(const std::vector<fitting::PackagedOffReading>& packaged, const fitting::PackageParasitics& pkg) {
  std::vector<fitting::CapacitanceReading> caps;
  for (const auto& r : packaged) {
    const double c = fitting::reverse_capacitance_f(fitting::chip_impedance_from_packaged(r.z_ohm, pkg, r.freq_hz), r.freq_hz);
    if (std::isfinite(c) && c > 0) caps.push_back({r.reverse_v, c, 0.01});  // equal weights: the fit scales its errors by χ²
  }
  return fitting::fit_junction_cap_values(caps);
}

// The forward_vector readings as the chip's impedance at (I, f): the run's
// open and short removed where read at the frequency, the package removed
// when its fit is ok; then the law fitted (fitting::fit_pin_impedance).
ForwardVectorFit forward_fit(const std::vector<PointRow>& points, double z_load, const std::map<double, cplx>& open,
                             const std::map<double, cplx>& shorts, const VectorRunFit& v, const ForwardContext& ctx) {
  ForwardVectorFit out;
  out.pin = ctx.pin;
  out.package_removed = v.package.ok;
  // The depletion law at forward bias (a junction part): the vector one, else the level readings'.
  std::optional<fitting::JunctionCap> cap = ctx.cap;
  if (v.cap && v.cap->ok) cap = fitting::JunctionCap{v.cap->cj0_f.value, v.cap->vj_v.value, v.cap->m.value, 0.5};
  std::vector<fitting::PinImpedanceReading> z;
  std::set<double> currents;
  bool all_deembedded = true;
  for (const auto& p : points) {
    if (p.kind != "forward_vector" || !usable(p)) continue;
    const double i = std::isfinite(p.i_a) && p.i_a > 0 ? p.i_a : p.set_value;  // the current read, else the one asked for
    if (!(i > 0)) continue;
    cplx zp = fitting::slot_impedance_ohm(transfer_of(p), z_load);
    const auto o = open.find(p.freq_hz);
    const auto s = shorts.find(p.freq_hz);
    if (o != open.end() && s != shorts.end()) zp = fitting::deembed_open_short(zp, o->second, s->second);
    else all_deembedded = false;
    if (v.package.ok) zp = fitting::chip_impedance_from_packaged(zp, v.package.package, p.freq_hz);
    double cj_f = 0.0;
    if (!ctx.pin && cap && ctx.dc) cj_f = fitting::junction_capacitance_f(*cap, fitting::junction_voltage_at_current_v(*ctx.dc, i, ctx.temp_k));
    z.push_back({i, p.freq_hz, zp, std::isfinite(cj_f) ? cj_f : 0.0});
    currents.insert(i);
  }
  out.readings = z.size();
  out.currents = currents.size();
  out.deembedded = all_deembedded && !z.empty();
  fitting::PinImpedanceFitOptions o;
  o.temp_k = ctx.temp_k;
  o.junction_only = !ctx.pin;
  out.fit = fitting::fit_pin_impedance(z, o);
  return out;
}

void add_law(VectorRunFit& out, const std::vector<fitting::PackagedOffReading>& packaged);

}  // namespace

std::optional<VectorRunFit> vector_fit_of_run(const std::vector<PointRow>& points, const RunFixture& fixture, const ForwardContext& context) {
  VectorRunFit out;
  out.z_load_ohm = load_ohm(fixture);
  const auto open = standard(points, "vector_open", out.z_load_ohm);
  const auto shorts = standard(points, "vector_short", out.z_load_ohm);
  for (const auto& p : points) out.standards += p.kind == "vector_open" || p.kind == "vector_short";
  std::vector<fitting::PackagedOffReading> packaged;
  bool all_deembedded = true;
  for (const auto& p : points) {
    if (p.kind != "reverse_vector" || !usable(p)) continue;
    ++out.readings;
    cplx z = fitting::slot_impedance_ohm(transfer_of(p), out.z_load_ohm);
    const auto o = open.find(p.freq_hz);
    const auto s = shorts.find(p.freq_hz);
    if (o != open.end() && s != shorts.end()) z = fitting::deembed_open_short(z, o->second, s->second);
    else all_deembedded = false;
    packaged.push_back({std::fabs(p.set_value), p.freq_hz, z});
  }
  if (packaged.empty()) return std::nullopt;
  out.deembedded = all_deembedded;
  out.package = fitting::fit_package(packaged);
  if (out.package.ok) add_law(out, packaged);
  // The forward readings after the law (which may replace the level
  // readings' Cj(V) at forward bias).
  if (std::any_of(points.begin(), points.end(), [](const PointRow& p) { return p.kind == "forward_vector"; }))
    out.forward = forward_fit(points, out.z_load_ohm, open, shorts, out, context);
  return out;
}

namespace {

// The chip's law with the package removed, its standard errors with the package's.
void add_law(VectorRunFit& out, const std::vector<fitting::PackagedOffReading>& packaged) {
  out.cap = law_without(packaged, out.package.package);
  if (!out.cap->ok) return;
  // The package's own uncertainty moves the law too: the law fitted again
  // with the package at ± one standard deviation along each principal axis
  // of the (Cp, Ls) covariance (linear propagation, JCGM 100:2008 §5.2),
  // added in quadrature to the law's own standard errors.
  const double s_cp = out.package.cp_f_std_error, s_ls = out.package.ls_h_std_error;
  const double rho = std::isfinite(out.package.ls_cp_correlation) ? out.package.ls_cp_correlation : 0.0;
  if (!(std::isfinite(s_cp) && std::isfinite(s_ls))) return;
  // Principal axes in units of each standard error: the correlation
  // matrix [[1, ρ], [ρ, 1]] has eigenvalues 1 ± ρ along (1, ±1)/√2.
  double var_cj0 = 0, var_vj = 0, var_m = 0;
  for (const double sign : {1.0, -1.0}) {
    const double scale = std::sqrt(std::max(0.0, 1.0 + sign * rho) / 2.0);
    const double d_cp = scale * s_cp, d_ls = sign * scale * s_ls;
    const auto hi = law_without(packaged, {out.package.package.ls_h + d_ls, out.package.package.cp_f + d_cp});
    const auto lo = law_without(packaged, {out.package.package.ls_h - d_ls, out.package.package.cp_f - d_cp});
    if (!hi.ok || !lo.ok) return;
    const auto half_sq = [](double a, double b) { return 0.25 * (a - b) * (a - b); };
    var_cj0 += half_sq(hi.cj0_f.value, lo.cj0_f.value);
    var_vj += half_sq(hi.vj_v.value, lo.vj_v.value);
    var_m += half_sq(hi.m.value, lo.m.value);
  }
  auto add = [](fitting::Estimate& e, double var) {
    if (std::isfinite(e.std_error)) e.std_error = std::sqrt(e.std_error * e.std_error + var);
  };
  add(out.cap->cj0_f, var_cj0);
  add(out.cap->vj_v, var_vj);
  add(out.cap->m, var_m);
  out.package_in_law_errors = true;
}

}  // namespace

}  // namespace junco::daemon
