// part.transfer's verdict takes the part type (plan.part_type) explicitly:
// a junction part is judged by the joint fit's agreement (and, failing that,
// by the electro-thermal fit's Rs against the AC-only Rs within 3 combined
// standard errors: our bound, no source); a PIN part is never judged by the
// junction model's rd = N·Vt/I, which does not describe it above the
// lifetime's knee (docs/references.md §8), whatever that fit says.
#include "daemon/part_analysis.hpp"

#include <catch2/catch.hpp>

#include <string>

using namespace junco::daemon;
using Json = nlohmann::json;

namespace {

Json joint(bool agree, double ac_rs_ohm, double ac_rs_se_ohm) {
  return {{"agree", agree}, {"ac_only", {{"rs_ohm", {{"value", ac_rs_ohm}, {"std_error", ac_rs_se_ohm}}}}}};
}

FitRecord fit_with_heating(double rs_ohm, double se_ohm) {
  FitRecord f;
  ElectrothermalReport e;
  e.status = "fitted";
  e.rs_ohm = {rs_ohm, se_ohm};
  f.electrothermal = e;
  return f;
}

}  // namespace

TEST_CASE("transfer verdict of a junction part: agree, consistent once heating is modelled, DISAGREE") {
  const FitRecord plain;
  CHECK(transfer_verdict(joint(true, 0.5, 0.01), plain, PartType::junction) == "agree");
  CHECK(transfer_verdict(joint(false, 0.5, 0.01), plain, PartType::junction) == "DISAGREE");
  // Electro-thermal Rs 0.52 ± 0.01 against AC-only 0.50 ± 0.01: 0.02 ≤ 3·0.0141.
  CHECK(transfer_verdict(joint(false, 0.5, 0.01), fit_with_heating(0.52, 0.01), PartType::junction) ==
        "consistent once heating is modelled");
  // 0.60 is 7 combined standard errors away.
  CHECK(transfer_verdict(joint(false, 0.5, 0.01), fit_with_heating(0.60, 0.01), PartType::junction) == "DISAGREE");
}

TEST_CASE("transfer verdict when the electro-thermal AC model held the junction's charge") {
  // The stored fit has a Cj(V) law (or a TT): juncod's electro-thermal AC
  // model held it, the AC-alone line did not, so their Rs are not compared
  // (the line's is biased high by the capacitance); the stored fit's own
  // chi2 test, which made it "fitted", stands. Not used: DISAGREE as before.
  FitRecord with_cap = fit_with_heating(0.60, 0.01);
  with_cap.cj0_f = {2e-12, 1e-15};
  CHECK(transfer_verdict(joint(false, 0.7, 0.01), with_cap, PartType::junction) == "consistent once heating is modelled");
  FitRecord with_tt = fit_with_heating(0.60, 0.01);
  with_tt.tt_s = {4e-9, 1e-11};
  CHECK(transfer_verdict(joint(false, 0.7, 0.01), with_tt, PartType::junction) == "consistent once heating is modelled");
  with_cap.electrothermal->status = "not_used";
  CHECK(transfer_verdict(joint(false, 0.7, 0.01), with_cap, PartType::junction) == "DISAGREE");
}

TEST_CASE("transfer verdict of a PIN part names the PIN law, whatever the junction model's fit says") {
  for (const bool agree : {true, false}) {
    const std::string v = transfer_verdict(joint(agree, 0.5, 0.01), fit_with_heating(0.52, 0.01), PartType::pin);
    CHECK(v.rfind("PIN part", 0) == 0);
    CHECK(v.find("part.fit pin") != std::string::npos);
  }
}

TEST_CASE("part types read from the plan's spelling") {
  CHECK(part_type_from_string("junction") == PartType::junction);
  CHECK(part_type_from_string("pin") == PartType::pin);
  CHECK_FALSE(part_type_from_string("PIN").has_value());
}
