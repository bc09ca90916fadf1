// part.touchstone on juncod (a real process on a real socket, measuring
// junco-sim over TCP): the served .s2p is the library's text for the part's
// exported model document, and malformed requests are refused naming the field.
#include "formats/touchstone.hpp"
#include "formats/model_document.hpp"
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

using namespace junco;
using Json = nlohmann::json;

TEST_CASE("part.touchstone serves the fitted part's two-port, the same text as the offline export", "[daemon][touchstone]") {
  test::BenchDaemon b("touchstone", {"--settle-ms", "0", "--config", std::string(JUNCO_SOURCE_DIR) + "/tools/sim/no-heating.json"});
  Json plan{{"lot", "WREN-0912"},
            {"parts", {{{"slot", 1}, {"label", "K24B-031"}}}},
            {"sweep", {{"mode", "current"}, {"spacing", "log"}, {"start", 1e-5}, {"stop", 0.01}, {"count", 10}, {"settle_s", 0}}},
            {"reverse_v", {0, 1, 2, 5}},
            {"ac", {{"freqs_hz", {1e7}}, {"amplitude", 0.002}, {"unit", "vrms"}, {"settle_s", 0},
                    {"off_state", {{"amplitude", 0.05}, {"freqs_hz", {1e8}}}}}}};
  b.run_plan(plan);
  const auto model = fitting::parse_model_document(b.result("part.export", {{"part_id", 1}, {"format", "json"}})["content"].get<std::string>());
  REQUIRE(model);
  REQUIRE(model->cj0_f > 0);  // the off-state readings gave a C–V law

  const std::vector<double> freqs{1e6, 1e7, 1e8, 1e9};
  for (const Json& bias : {Json{{"bias_i_a", 0.01}}, Json{{"reverse_v", 5.0}}}) {
    Json params{{"part_id", 1}, {"freqs_hz", freqs}, {"mount", "shunt"}, {"ls_h", 1.2e-9}, {"cp_f", 0.15e-12}};
    params.update(bias);
    const Json r = b.result("part.touchstone", params);
    CHECK(test::schema_problem(test::api_schema("part.touchstone")["result"], r) == "");
    fitting::TouchstoneRequest req;
    req.bias = bias.contains("bias_i_a") ? fitting::BiasState{fitting::BiasState::Kind::forward_current, 0.01}
                                         : fitting::BiasState{fitting::BiasState::Kind::reverse_voltage, 5.0};
    req.freqs_hz = freqs;
    req.mount = fitting::SwitchKind::shunt;
    req.package = {1.2e-9, 0.15e-12};
    CHECK(r["content"] == fitting::touchstone_s2p(*model, req));
  }

  // Refusals: no bias, both, frequencies not increasing, an unknown mount.
  const auto code_field = [&](const Json& params) {
    const Json reply = b.client().request("part.touchstone", params);
    INFO(reply.dump());
    REQUIRE(reply.contains("error"));
    return reply["error"]["data"].value("field", std::string());
  };
  CHECK(code_field({{"part_id", 1}, {"freqs_hz", freqs}}) == "bias_i_a");
  CHECK(code_field({{"part_id", 1}, {"freqs_hz", freqs}, {"bias_i_a", 0.01}, {"reverse_v", 1.0}}) == "reverse_v");
  CHECK(code_field({{"part_id", 1}, {"freqs_hz", {1e9, 1e6}}, {"bias_i_a", 0.01}}) == "freqs_hz");
  CHECK(code_field({{"part_id", 1}, {"freqs_hz", freqs}, {"bias_i_a", 0.01}, {"mount", "tee"}}) == "mount");
}
