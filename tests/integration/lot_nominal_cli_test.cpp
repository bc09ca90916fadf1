// The lot nominal is computed once (formats/lot_nominal.hpp): juncod's
// lot.export and the offline `junco export spice|json a.json b.json` give the
// same card, CJO, VJ and M included. The offline command runs as a real
// process on model documents written here; the library call is the reference.
#include "formats/lot_nominal.hpp"
#include "formats/model_document.hpp"
#include "tests/support/cli_run.hpp"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <vector>

using namespace junco;
namespace fs = std::filesystem;

namespace {

// Three parts of lot WREN-0912 (invented values), each with a capacitance law.
std::vector<fitting::PartModel> lot_parts() {
  std::vector<fitting::PartModel> out;
  const double is[] = {2.0e-9, 2.6e-9, 3.1e-9}, n[] = {1.80, 1.84, 1.79}, rs[] = {0.80, 0.95, 0.85};
  const double cj0[] = {2.03e-12, 1.95e-12, 2.20e-12}, vj[] = {0.62, 0.70, 0.66}, m[] = {0.41, 0.38, 0.45};
  for (int k = 0; k < 3; ++k) {
    fitting::PartModel p;
    p.part_label = "WR-0" + std::to_string(k + 1);
    p.lot = "WREN-0912";
    p.params = {is[k], n[k], rs[k]};
    p.cj0_f = cj0[k];
    p.vj_v = vj[k];
    p.m = m[k];
    out.push_back(p);
  }
  return out;
}

}  // namespace

TEST_CASE("junco export of several model documents gives the library's lot nominal, capacitance law included", "[cli][lot]") {
  const fs::path dir = fs::temp_directory_path() / ("junco-lot-nominal-" + std::to_string(::getpid()));
  fs::create_directories(dir);
  std::string args;
  std::vector<fitting::LotPart> lot;
  for (const auto& p : lot_parts()) {
    const fs::path file = dir / (p.part_label + ".json");
    std::ofstream(file) << fitting::model_document_json(p);
    args += " '" + file.string() + "'";
    // What the documents read back as, so the reference sees the same rounding.
    const auto back = fitting::parse_model_document(test::slurp(file));
    REQUIRE(back);
    lot.push_back(fitting::lot_part_from_model(*back));
  }
  const fitting::PartModel nominal = fitting::lot_nominal_model("WREN-0912", lot);
  // The median of three is the middle value (definition of the median).
  CHECK(nominal.cj0_f == Approx(2.03e-12).epsilon(1e-6));
  CHECK(nominal.vj_v == Approx(0.66).epsilon(1e-6));
  CHECK(nominal.m == Approx(0.41).epsilon(1e-6));
  CHECK(nominal.params.rs_ohm == Approx(0.85).epsilon(1e-6));

  const auto card = test::run_junco("export spice" + args + " --name D_WREN_0912_NOM");
  INFO(card.out);
  CHECK(card.status == 0);
  CHECK(card.out == fitting::spice_model_card(nominal, "D_WREN_0912_NOM"));
  CHECK(card.out.find(" CJO=") != std::string::npos);
  CHECK(card.out.find(" VJ=") != std::string::npos);
  CHECK(card.out.find(" M=") != std::string::npos);

  const auto doc = test::run_junco("export json" + args);
  CHECK(doc.status == 0);
  CHECK(doc.out == fitting::model_document_json(nominal));
  fs::remove_all(dir);
}
