// The offline flow a user follows without a daemon, as real processes on real
// files: fit a measured CSV, keep the part as a model document, feed it to the
// calculators and the plotter. Also: text from a model document cannot break
// out of the gnuplot script that `junco plot` generates.
#include "fitting/diode.hpp"
#include "formats/model_document.hpp"

#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <string>

namespace fs = std::filesystem;
using namespace junco::fitting;

using junco::test::run_junco;
using junco::test::ScratchDir;
using junco::test::slurp;

namespace {

const std::string example = std::string(JUNCO_SOURCE_DIR) + "/tools/examples/kestrel24b_k24b017.csv";

}  // namespace

TEST_CASE("fit --model-out writes a document the calculators and plots accept") {
  ScratchDir d;
  const auto model = d.path / "k24b017.json";
  const auto r = run_junco("fit " + example + " --model-out " + model.string() + " --label K24B-017 --lot KESTREL-24B");
  REQUIRE(r.status == 0);

  std::string why;
  const auto part = parse_model_document(slurp(model), &why);
  REQUIRE(part);
  CHECK(part->part_label == "K24B-017");
  CHECK(part->lot == "KESTREL-24B");
  CHECK(part->temp_k == Approx(300.15));
  // The example's header states its true parameters (IS 2.4 nA, N 1.87, RS 0.62 Ω,
  // tests/bench/fit_make_example.py); the document must carry the fit, not defaults.
  CHECK(part->params.n == Approx(1.87).epsilon(0.01));
  CHECK(part->params.rs_ohm == Approx(0.62).epsilon(0.05));
  CHECK(part->n_se > 0.0);

  // The calculator reproduces the model's own Vf at the current it reports.
  const auto op = run_junco("design op --model " + model.string() + " --supply 5V --bias-resistor 470");
  REQUIRE(op.status == 0);
  CHECK(op.out.find("K24B-017") != std::string::npos);

  const auto svg = d.path / "iv.svg";
  const auto plot = run_junco("plot iv --readings " + example + " --model " + model.string() + " --out " + svg.string());
  REQUIRE(plot.status == 0);
  const std::string text = slurp(svg);
  CHECK(text.find("<svg") != std::string::npos);
  CHECK(text.find("excluded (below noise floor") != std::string::npos);  // the 2 nA reading is shown apart
  CHECK(text.find("K24B-017") != std::string::npos);
}

TEST_CASE("fit --model-out is not written when the fit fails") {
  ScratchDir d;
  const auto csv = d.path / "reverse.csv";
  std::ofstream(csv) << "v,i_a\n-1,-1e-9\n-2,-1e-9\n-3,-1e-9\n-4,-1e-9\n-5,-1e-9\n";
  const auto model = d.path / "m.json";
  const auto r = run_junco("fit " + csv.string() + " --model-out " + model.string());
  CHECK(r.status == 2);
  CHECK_FALSE(fs::exists(model));
}

TEST_CASE("a hostile label in a model document cannot run commands through gnuplot") {
  ScratchDir d;
  const auto marker = d.path / "pwned";
  PartModel part;
  // A quote would end gnuplot's string; system() would then run a shell.
  part.part_label = "X' ; system('touch " + marker.string() + "') ; print '";
  part.lot = "L\nsystem('touch " + marker.string() + "')";
  part.params = {2e-9, 1.8, 0.5};
  const auto model = d.path / "hostile.json";
  std::ofstream(model) << model_document_json(part);
  const auto csv = d.path / "iv.csv";
  {
    std::ofstream f(csv);
    f << "v,i_a\n";
    for (double i = 1e-6; i < 0.05; i *= 3) f << diode_voltage_v(part.params, i, 300.15) << "," << i << "\n";
  }
  const auto r = run_junco("plot iv --readings " + csv.string() + " --model " + model.string() + " --out " +
                           (d.path / "iv.svg").string());
  INFO(r.out);
  CHECK(r.status == 0);
  CHECK_FALSE(fs::exists(marker));
}
