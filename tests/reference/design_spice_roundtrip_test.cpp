// Round trip: readings from known parameters with noise → fit_forward →
// exported .model card → ngspice DC sweep → compared with the readings.
// Outside source: ngspice (Debian package) evaluating its own level-1 diode;
// card names and TNOM-in-°C per ngspice dio.c / diosetup.c (docs/references.md §2).
#include "fitting/extract.hpp"
#include "formats/spice_card.hpp"

#include "tests/support/ngspice.hpp"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <unistd.h>

using namespace junco::fitting;

TEST_CASE("exported card reproduces the readings it was fitted from, in ngspice") {
  // Known part (docs/references.md E7's parameters), 27 °C; readings at applied
  // voltages 0.40..0.95 V, 0.05 % relative noise on V and I (seed 20240611).
  const DiodeParams truth{1e-9, 1.8, 0.5};
  const double temp_k = 300.15, noise = 5e-4;
  std::mt19937 rng(20240611);
  std::normal_distribution<double> gauss(0.0, noise);
  std::vector<double> v_grid;
  std::vector<IvPoint> readings;
  for (int k = 0; k <= 55; ++k) {
    const double v = 0.40 + 0.01 * k;
    v_grid.push_back(v);
    const double i = diode_current_a(truth, v, temp_k);
    readings.push_back({v * (1 + gauss(rng)), i * (1 + gauss(rng))});
  }
  FitOptions opt;
  opt.temp_k = temp_k;
  const FitResult fit = fit_forward(readings, opt);
  REQUIRE(fit.usable());

  PartModel part;
  part.part_label = "RT-001";
  part.lot = "LOT-RT";
  part.run_id = "run-rt";
  part.temp_k = temp_k;
  part.params = fit.params();
  part.is_se_a = fit.is_a.std_error;
  part.n_se = fit.n.std_error;
  part.rs_se_ohm = fit.rs_ohm.std_error;
  const std::string card = spice_model_card(part);
  CHECK(card.find(".model RT_001 D(IS=") != std::string::npos);
  CHECK(card.find("TNOM=27)") != std::string::npos);

  const junco::test::Ngspice ng("card");
  const std::string data = ng.path("rt.dat");
  {
    std::ostringstream f;
    f << "card round trip\n" << card << "V1 a 0 DC 0\nD1 a 0 RT_001\n.options temp=27\n"
      << ".control\nset wr_singlescale\ndc V1 0.40 0.9500001 0.01\nwrdata " << data << " -i(V1)\n.endc\n.end\n";
    const auto run = ng.run(f.str(), "rt");
    INFO("ngspice exit " << run.exit_code << ", output:\n" << run.out);  // the data file is the check
  }
  std::ifstream in(data);
  std::vector<std::pair<double, double>> sim;
  double v, i;
  while (in >> v >> i) sim.push_back({v, i});
  REQUIRE(sim.size() == v_grid.size());

  // 1. ngspice evaluating the card equals the fitted model (the card carries
  //    the fit: 7 significant digits, so ~1e-5 relative in current).
  // 2. The readings scatter about the ngspice curve as they do about the fit:
  //    each residual over its noise budget (current noise plus voltage noise
  //    times the log slope, dlnI/dV = 1/(I·rd)) has an RMS of about 1.
  double ss_sim = 0.0, ss_fit = 0.0;
  const DiodeParams fitted = fit.params();
  for (std::size_t k = 0; k < sim.size(); ++k) {
    REQUIRE(sim[k].first == Approx(v_grid[k]).margin(1e-9));
    const double i_fit = diode_current_a(fitted, v_grid[k], temp_k);
    CHECK(sim[k].second == Approx(i_fit).epsilon(5e-5));
    const double slope = 1.0 / (i_fit * dynamic_resistance_ohm(fitted, i_fit, temp_k));
    const double budget = std::hypot(noise, noise * v_grid[k] * slope);
    const double r_sim = (readings[k].i_a - sim[k].second) / sim[k].second / budget;
    const double r_fit = (readings[k].i_a - i_fit) / i_fit / budget;
    ss_sim += r_sim * r_sim;
    ss_fit += r_fit * r_fit;
  }
  const double rms_sim = std::sqrt(ss_sim / sim.size()), rms_fit = std::sqrt(ss_fit / sim.size());
  INFO("normalised rms vs ngspice " << rms_sim << ", vs fitted model " << rms_fit);
  CHECK(rms_sim == Approx(rms_fit).epsilon(1e-3));
  CHECK(rms_sim < 1.5);
  // And the card parameters land near the truth within a few standard errors.
  CHECK(std::abs(fit.n.value - truth.n) < 4 * fit.n.std_error + 1e-3);
  CHECK(std::abs(fit.rs_ohm.value - truth.rs_ohm) < 4 * fit.rs_ohm.std_error + 5e-3);
}
