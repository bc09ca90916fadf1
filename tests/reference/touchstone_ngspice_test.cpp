// The Touchstone export (formats/touchstone.hpp) read back by a small
// reader written here from the format's description (Touchstone 1.1: "!"
// comments, one option line "# <unit> <param> <format> R <z0>", two-port data
// lines f N11 N21 N12 N22), and checked against ngspice .ac of the same
// netlist driven from each port in turn: S21 within 0.01 dB and 0.1 degrees
// from 1 MHz to 1 GHz (issue 15's target), S11/S22/S12 as complex numbers,
// reciprocity and passivity of what the file says.
#include "formats/touchstone.hpp"
#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>
#include <complex>
#include <fstream>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

using namespace junco::fitting;
using cplx = std::complex<double>;

namespace {

// junco-sim's nominal part (docs/sim.md "JX-41") with a 5 ns transit time,
// in a package of 1.2 nH and 0.15 pF (issue 15's unseparated capacitance).
PartModel touchstone_part() {
  PartModel m;
  m.part_label = "JX-41";
  m.lot = "WREN-0912";
  m.temp_k = 300.15;
  m.params = {2.5e-9, 1.85, 0.7};
  m.cj0_f = 2e-12;
  m.vj_v = 0.65;
  m.m = 0.4;
  m.tt_s = 5e-9;
  return m;
}
constexpr PackageParasitics test_package{1.2e-9, 0.15e-12};

// ---- an independent Touchstone 1.1 reader (two-port, any format) ----
struct ReadTwoPort {
  double z0 = 0;
  std::vector<double> f_hz;
  std::vector<std::array<cplx, 4>> s;  // S11 S21 S12 S22 in the file's order
};

std::string lower(std::string s) {
  for (auto& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

ReadTwoPort read_s2p(const std::string& text) {
  ReadTwoPort r;
  double f_scale = 1e9;              // the format's default unit: GHz
  std::string format = "ma", param = "s";
  r.z0 = 50;
  bool option_seen = false;
  std::istringstream in(text);
  std::string line;
  while (std::getline(in, line)) {
    if (const auto bang = line.find('!'); bang != std::string::npos) line.erase(bang);  // comment to the end of the line
    std::istringstream words(line);
    std::string first;
    if (!(words >> first)) continue;
    if (first[0] == '#') {
      REQUIRE_FALSE(option_seen);  // we write exactly one option line
      option_seen = true;
      std::vector<std::string> toks;
      if (first.size() > 1) toks.push_back(lower(first.substr(1)));
      for (std::string t; words >> t;) toks.push_back(lower(t));
      for (std::size_t k = 0; k < toks.size(); ++k) {
        const std::string& t = toks[k];
        if (t == "hz") f_scale = 1;
        else if (t == "khz") f_scale = 1e3;
        else if (t == "mhz") f_scale = 1e6;
        else if (t == "ghz") f_scale = 1e9;
        else if (t == "s" || t == "y" || t == "z" || t == "h" || t == "g") param = t;
        else if (t == "ma" || t == "db" || t == "ri") format = t;
        else if (t == "r" && k + 1 < toks.size()) r.z0 = std::stod(toks[++k]);
        else FAIL("unknown option-line word " << t);
      }
      continue;
    }
    REQUIRE(option_seen);  // data only after the option line
    std::vector<double> v{std::stod(first)};
    for (double x; words >> x;) v.push_back(x);
    REQUIRE(v.size() == 9);
    r.f_hz.push_back(v[0] * f_scale);
    std::array<cplx, 4> row;
    for (int k = 0; k < 4; ++k) {
      const double a = v[1 + 2 * k], b = v[2 + 2 * k];
      if (format == "ri") row[k] = {a, b};
      else if (format == "ma") row[k] = std::polar(a, b * std::numbers::pi / 180);
      else row[k] = std::polar(std::pow(10.0, a / 20), b * std::numbers::pi / 180);
    }
    r.s.push_back(row);
  }
  REQUIRE(param == "s");
  return r;
}

// ---- ngspice: the same circuit, driven from port 1 and from port 2 ----
struct Case {
  SwitchKind mount;
  BiasState bias;
};

// One copy of the fixture per case and drive direction. Ports are 50 ohm
// resistors; the driven port's source is `AC 2`, so with the other port
// matched the driven node reads 1 + Sii and the other port's node Sji
// (common practice, no source: incident wave = half the open-circuit EMF).
// Bias as rf_switch_ngspice_test.cpp sets it: series through the source
// loop, shunt by a DC current source (on) or a source in the diode's return (off).
std::vector<std::pair<double, std::vector<std::array<cplx, 4>>>> ngspice_s(const PartModel& m, const PackageParasitics& pkg,
                                                                            const std::vector<Case>& cases) {
  const junco::test::Ngspice ng("s2p");
  const std::string out = ng.path("ac.txt");
  const double nvt = m.params.n * thermal_voltage_v(m.temp_k);
  std::ostringstream f;
  f.precision(15);
  f << "packaged diode two-port, small signal\n";
  std::string vectors;
  for (std::size_t k = 0; k < cases.size(); ++k) {
    const Case& c = cases[k];
    const bool fwd = c.bias.kind == BiasState::Kind::forward_current;
    const double i = fwd ? c.bias.value : 0.0;
    for (int drive = 1; drive <= 2; ++drive) {
      const std::string s = std::to_string(k) + "_" + std::to_string(drive);
      const std::string p1 = "p1_" + s, p2 = "p2_" + s, src = "s" + s;
      const std::string driven = drive == 1 ? p1 : p2, other = drive == 1 ? p2 : p1;
      if (c.mount == SwitchKind::series) {
        // Diode anode on port 1. DC in the driven source so the loop carries the bias.
        const double v_dc = fwd ? i * (100.0 + m.params.rs_ohm) + nvt * std::log1p(i / m.params.is_a) : -c.bias.value;
        f << "V" << s << " " << src << " 0 DC " << (drive == 1 ? v_dc : -v_dc) << " AC 2\n";
        f << "Rg" << s << " " << src << " " << driven << " 50\nRl" << s << " " << other << " 0 50\n";
        f << "L" << s << " " << p1 << " k" << s << " " << pkg.ls_h << "\nD" << s << " k" << s << " " << p2 << " dut\n";
        f << "C" << s << " " << p1 << " " << p2 << " " << pkg.cp_f << "\n";
      } else {
        // Through line p1 = p2 (a 0 V source joins them, so both nodes exist).
        f << "V" << s << " " << src << " 0 DC 0 AC 2\nRg" << s << " " << src << " " << driven << " 50\nRl" << s << " " << other
          << " 0 50\nVj" << s << " " << p1 << " " << p2 << " DC 0\n";
        f << "L" << s << " " << p1 << " k" << s << " " << pkg.ls_h << "\nD" << s << " k" << s << " r" << s << " dut\n";
        f << "C" << s << " " << p1 << " r" << s << " " << pkg.cp_f << "\n";
        if (fwd) {
          const double vd = i * m.params.rs_ohm + nvt * std::log1p(i / m.params.is_a);
          f << "Vr" << s << " r" << s << " 0 DC 0\nI" << s << " 0 " << p1 << " DC " << i + vd / 25.0 << "\n";
        } else {
          f << "Vr" << s << " r" << s << " 0 DC " << c.bias.value << "\n";
        }
      }
      vectors += " vr(" + p1 + ") vi(" + p1 + ") vr(" + p2 + ") vi(" + p2 + ")";
    }
  }
  f << ".model dut D(IS=" << m.params.is_a << " N=" << m.params.n << " RS=" << m.params.rs_ohm << " CJO=" << m.cj0_f
    << " VJ=" << m.vj_v << " M=" << m.m << " FC=0.5 TT=" << m.tt_s << ")\n"
    << ".options reltol=1e-9 abstol=1e-18 vntol=1e-12 temp=27 tnom=27\n"
    << ".control\nac dec 20 1e6 1e9\nset wr_singlescale\nwrdata " << out << vectors << "\n.endc\n.end\n";
  const junco::test::NgspiceRun run = ng.run(f.str(), "ac");
  INFO("ngspice status " << run.exit_code << "\n" << run.out);
  std::ifstream data(out);
  std::string line;
  std::vector<std::pair<double, std::vector<std::array<cplx, 4>>>> rows;
  while (std::getline(data, line)) {
    std::istringstream row(line);
    double freq;
    if (!(row >> freq)) continue;
    std::vector<std::array<cplx, 4>> per_case;
    for (std::size_t k = 0; k < cases.size(); ++k) {
      double v[8];
      for (double& x : v) row >> x;
      // drive 1: v(p1) = 1 + S11, v(p2) = S21; drive 2: v(p1) = S12, v(p2) = 1 + S22.
      per_case.push_back({cplx(v[0], v[1]) - 1.0, cplx(v[2], v[3]), cplx(v[4], v[5]), cplx(v[6], v[7]) - 1.0});
    }
    REQUIRE(row);
    rows.emplace_back(freq, per_case);
  }
  REQUIRE(rows.size() == 61);  // 20 per decade over three decades, both ends
  return rows;
}

double db(cplx x) { return 20.0 * std::log10(std::abs(x)); }
double deg(cplx x) { return std::arg(x) * 180.0 / std::numbers::pi; }
double wrap_deg(double d) { return d - 360.0 * std::round(d / 360.0); }

}  // namespace

TEST_CASE("Touchstone export of the packaged diode matches ngspice .ac, series and shunt, on and off", "[reference][ngspice]") {
  // Source: ngspice (Debian package) .ac of the same netlists; the format as
  // Touchstone 1.1 describes it (docs/references.md §8).
  const PartModel m = touchstone_part();
  const std::vector<Case> cases{
      {SwitchKind::series, {BiasState::Kind::forward_current, 10e-3}}, {SwitchKind::series, {BiasState::Kind::forward_current, 0.5e-3}},
      {SwitchKind::series, {BiasState::Kind::reverse_voltage, 0.0}},   {SwitchKind::series, {BiasState::Kind::reverse_voltage, 5.0}},
      {SwitchKind::shunt, {BiasState::Kind::forward_current, 10e-3}},  {SwitchKind::shunt, {BiasState::Kind::forward_current, 0.5e-3}},
      {SwitchKind::shunt, {BiasState::Kind::reverse_voltage, 0.0}},    {SwitchKind::shunt, {BiasState::Kind::reverse_voltage, 5.0}}};
  const auto spice = ngspice_s(m, test_package, cases);
  double worst_db = 0, worst_deg = 0, worst_c = 0;
  for (std::size_t k = 0; k < cases.size(); ++k) {
    TouchstoneRequest req;
    req.bias = cases[k].bias;
    req.mount = cases[k].mount;
    req.package = test_package;
    req.freqs_hz = *parse_frequency_list("1MHz:1GHz:61log");
    const ReadTwoPort file = read_s2p(touchstone_s2p(m, req));
    REQUIRE(file.z0 == 50.0);
    REQUIRE(file.f_hz.size() == spice.size());
    for (std::size_t j = 0; j < spice.size(); ++j) {
      const auto& ours = file.s[j];  // S11 S21 S12 S22
      const auto& ref = spice[j].second[k];
      INFO(to_string(cases[k].mount) << " " << bias_state_text(cases[k].bias) << " at " << file.f_hz[j] << " Hz: S21 ours "
                                     << ours[1] << ", ngspice " << ref[1]);
      REQUIRE(file.f_hz[j] == Approx(spice[j].first).epsilon(1e-9));
      const double ddb = std::abs(db(ours[1]) - db(ref[1])), ddeg = std::abs(wrap_deg(deg(ours[1]) - deg(ref[1])));
      CHECK(ddb < 0.01);
      CHECK(ddeg < 0.1);
      for (int q = 0; q < 4; ++q) {
        CHECK(std::abs(ours[q] - ref[q]) < 1e-4);
        worst_c = std::max(worst_c, std::abs(ours[q] - ref[q]));
      }
      worst_db = std::max(worst_db, ddb);
      worst_deg = std::max(worst_deg, ddeg);
      // Reciprocity: the file's S12 is its S21, and ngspice agrees S12 = S21
      // when driven from the other port.
      CHECK(std::abs(ours[2] - ours[1]) < 1e-12);
      CHECK(std::abs(ref[2] - ref[1]) < 1e-6);
      // Passivity: I − SᴴS positive semidefinite (both eigenvalues of the 2×2
      // Hermitian matrix ≥ 0 ⇔ trace ≥ 0 and determinant ≥ 0).
      const cplx s11 = ours[0], s21 = ours[1], s12 = ours[2], s22 = ours[3];
      const double p11 = 1 - std::norm(s11) - std::norm(s21), p22 = 1 - std::norm(s12) - std::norm(s22);
      const cplx p12 = -(std::conj(s11) * s12 + std::conj(s21) * s22);
      CHECK(p11 + p22 >= -1e-12);
      CHECK(p11 * p22 - std::norm(p12) >= -1e-12);
    }
  }
  WARN("largest difference from ngspice: S21 " << worst_db << " dB, " << worst_deg << " deg; any S " << worst_c);
}

TEST_CASE("Touchstone export: a series and a shunt 50 ohm resistor give the textbook S-parameters", "[reference]") {
  // Common practice (the ABCD of one element, docs/references.md §6): series
  // R = Z0 gives S11 = 1/3, S21 = 2/3; shunt R = Z0 gives S11 = −1/3, S21 = 2/3.
  const SMatrix se = element_s_matrix(SwitchKind::series, 50.0, 50.0);
  CHECK(se.s11().real() == Approx(1.0 / 3));
  CHECK(se.s21().real() == Approx(2.0 / 3));
  const SMatrix sh = element_s_matrix(SwitchKind::shunt, 50.0, 50.0);
  CHECK(sh.s11().real() == Approx(-1.0 / 3));
  CHECK(sh.s21().real() == Approx(2.0 / 3));
  CHECK(std::abs(sh.s11().imag()) < 1e-15);
}
