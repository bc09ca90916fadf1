// The model document's format version 2 (formats/model_document.hpp): the
// temperature is temp_k as in every other junco file, the fitted parameters'
// covariance travels with it, and a version 1 document (temperature_k, no
// covariance) still reads. Expected values are the document's own inputs:
// what is written must read back bit for bit (nlohmann::json prints doubles
// in their shortest round-trip form; common practice, no source).
#include "formats/model_document.hpp"

#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include <cmath>
#include <functional>
#include <string>
#include <vector>

using namespace junco::fitting;
using Json = nlohmann::json;

namespace {

// A part with every block the daemon's design covariance has: forward fit
// (is_a, n, rs_ohm), capacitance law (cj0_f, vj_v, m, VJ–M correlated) and TT.
PartModel full_part() {
  PartModel m;
  m.part_label = "WREN-0912-05";
  m.lot = "WREN-0912";
  m.temp_k = 301.37;
  m.params = {2.47e-9, 1.83, 0.71};
  m.cj0_f = 2.1e-12;
  m.vj_v = 0.68;
  m.m = 0.47;
  m.tt_s = 4.9e-9;
  m.tt_se_s = 0.07e-9;
  m.covariance_names = {"is_a", "n", "rs_ohm", "cj0_f", "vj_v", "m", "tt_s"};
  const double se[7] = {4.1e-11, 3.3e-3, 2.2e-3, 1.5e-14, 0.021, 0.012, 0.07e-9};
  m.covariance.assign(7, std::vector<double>(7, 0.0));
  for (int a = 0; a < 7; ++a) m.covariance[a][a] = se[a] * se[a];
  const auto correlate = [&](int a, int b, double rho) { m.covariance[a][b] = m.covariance[b][a] = rho * se[a] * se[b]; };
  correlate(0, 1, 0.994);  // Is and N: the usual near-1 correlation of a forward fit
  correlate(0, 2, 0.61);
  correlate(1, 2, 0.65);
  correlate(4, 5, 0.93);  // VJ and M
  m.covariance_source = "fit 7: is_a, n, rs_ohm, cj0_f, vj_v, m, tt_s";
  return m;
}

}  // namespace

TEST_CASE("a version 2 model document writes temp_k and the covariance, and reads them back exactly", "[model-document]") {
  const PartModel m = full_part();
  const std::string text = model_document_json(m);
  const Json doc = Json::parse(text);
  CHECK(doc["version"] == 2);
  CHECK(doc["temp_k"] == 301.37);
  CHECK_FALSE(doc.contains("temperature_k"));
  CHECK(doc["covariance"]["parameters"] == Json(m.covariance_names));
  std::string why;
  const auto back = parse_model_document(text, &why);
  INFO(why);
  REQUIRE(back);
  CHECK(back->temp_k == m.temp_k);
  CHECK(back->covariance_names == m.covariance_names);
  CHECK(back->covariance == m.covariance);  // every element, bit for bit
  CHECK(back->covariance_source == m.covariance_source);
  CHECK(back->tt_s == m.tt_s);
  // Written again from what was read: the same text.
  CHECK(model_document_json(*back) == text);

  // Without a covariance there is no covariance object (and none is read).
  PartModel bare = m;
  bare.covariance_names.clear();
  bare.covariance.clear();
  const std::string bare_text = model_document_json(bare);
  CHECK_FALSE(Json::parse(bare_text).contains("covariance"));
  REQUIRE(parse_model_document(bare_text));
  CHECK(parse_model_document(bare_text)->covariance_names.empty());
}

TEST_CASE("a version 1 model document (temperature_k, no covariance) still reads", "[model-document]") {
  // A document as junco wrote it before version 2 (kept here as text: the
  // fields and order of that writer).
  const std::string v1 = R"({
  "format": "junco.part-model",
  "version": 1,
  "part": {"label": "WREN-0912-02", "lot": "WREN-0912", "run_id": "run-3"},
  "temperature_k": 300.15,
  "model": {"is_a": {"value": 2.5e-09, "std_error": 4e-11}, "n": {"value": 1.8, "std_error": 0.003},
            "rs_ohm": {"value": 0.7, "std_error": 0.002}, "cj0_f": {"value": 2e-12}, "vj_v": {"value": 0.7}, "m": {"value": 0.5}},
  "temperature_law": {"eg_ev": 1.11, "xti": 3, "trs1_per_k": 0, "trs2_per_k2": 0},
  "covariance": {"parameters": ["is_a"], "matrix": [[1e-21]]},
  "fit": {"rms_residual": 0.8, "points_used": 24}
})";
  std::string why;
  const auto p = parse_model_document(v1, &why);
  INFO(why);
  REQUIRE(p);
  CHECK(p->temp_k == 300.15);
  CHECK(p->params.is_a == 2.5e-9);
  CHECK(p->n_se == 0.003);
  CHECK(p->cj0_f == 2e-12);
  // Version 1 had no covariance: an object of that name there is not read.
  CHECK(p->covariance_names.empty());
  // Written again, it is a version 2 document with temp_k.
  const Json again = Json::parse(model_document_json(*p));
  CHECK(again["version"] == 2);
  CHECK(again["temp_k"] == 300.15);

  // A version 1 document needs its temperature_k; version 2 says temp_k.
  Json no_temp = Json::parse(v1);
  no_temp.erase("temperature_k");
  CHECK_FALSE(parse_model_document(no_temp.dump(), &why));
  CHECK(why == "document.temperature_k is missing");
  Json mixed = Json::parse(v1);
  mixed["version"] = 2;
  CHECK_FALSE(parse_model_document(mixed.dump(), &why));
  CHECK(why == "temperature_k is version 1's name: a version 2 document says temp_k");
  Json future = Json::parse(v1);
  future["version"] = 3;
  CHECK_FALSE(parse_model_document(future.dump(), &why));
  CHECK(why == "version must be 2 (or 1, the previous one)");
}

TEST_CASE("a damaged covariance is refused, naming what is wrong", "[model-document]") {
  const Json good = Json::parse(model_document_json(full_part()));
  struct Case {
    const char* what;
    std::function<void(Json&)> damage;
    std::string says;
  };
  const std::vector<Case> cases{
      {"a parameter the model lacks", [](Json& d) { d["covariance"]["parameters"][6] = "bv_v"; },
       "covariance.parameters: 'bv_v' is not a key of model"},
      {"a parameter twice", [](Json& d) { d["covariance"]["parameters"][1] = "is_a"; }, "covariance.parameters: 'is_a' twice"},
      {"a short row", [](Json& d) { d["covariance"]["matrix"][3].erase(0); },
       "covariance.matrix must be 7 x 7 numbers (one row per parameter)"},
      {"a row missing", [](Json& d) { d["covariance"]["matrix"].erase(6); },
       "covariance.matrix must be 7 x 7 numbers (one row per parameter)"},
      {"a string", [](Json& d) { d["covariance"]["matrix"][2][2] = "0.1"; },
       "covariance.matrix must be 7 x 7 numbers (one row per parameter)"},
      {"a negative variance", [](Json& d) { d["covariance"]["matrix"][2][2] = -1e-6; },
       "covariance.matrix: the variance of rs_ohm is negative"},
      {"not symmetric", [](Json& d) { d["covariance"]["matrix"][1][0] = 0.0; },
       "covariance.matrix is not symmetric (n, is_a)"},
      {"not an object", [](Json& d) { d["covariance"] = Json::array(); },
       "covariance must be an object {\"parameters\":[...], \"matrix\":[[...]]}"}};
  for (const auto& c : cases) {
    Json d = good;
    c.damage(d);
    std::string why;
    INFO(c.what);
    CHECK_FALSE(parse_model_document(d.dump(), &why));
    CHECK(why == c.says);
  }
}
