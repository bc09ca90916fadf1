// The socket API's three descriptions agree: every method with a schema in
// schema/api/ is served by juncod, takes exactly the params its schema lists
// (others are refused, -32602 naming the field), and has a section in
// docs/api.md. (The converse, a served method without a schema, is caught by
// review: juncod has no method that lists its methods.)
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <set>

using namespace junco;
using Json = nlohmann::json;
namespace fs = std::filesystem;

TEST_CASE("schemas, docs and juncod's methods agree", "[api]") {
  test::BenchDaemonOptions options;
  options.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("contract", {"--settle-ms", "0"}, options);
  std::ifstream doc_file(std::string(JUNCO_SOURCE_DIR) + "/docs/api.md");
  const std::string doc((std::istreambuf_iterator<char>(doc_file)), std::istreambuf_iterator<char>());
  std::set<std::string> methods;
  for (const auto& e : fs::directory_iterator(std::string(JUNCO_SOURCE_DIR) + "/schema/api")) {
    const std::string name = e.path().stem().string();
    if (name.rfind("event.", 0) == 0) continue;  // notifications, not methods
    methods.insert(name);
    INFO(name);
    const Json schema = test::api_schema(name);
    CHECK(schema["title"] == name);
    CHECK(doc.find("### `" + name + "`") != std::string::npos);
    // A param no schema has: refused by name, which also proves the method exists.
    const Json reply = b.client().request(name, {{"no_such_param_xyz", 1}});
    CHECK(reply["error"]["code"] == -32602);
    CHECK(reply["error"]["data"]["field"] == "no_such_param_xyz");
    // Each documented param is known: sent alone it may be wrong or
    // incomplete, but never "unknown".
    for (const auto& [key, spec] : schema["params"]["properties"].items()) {
      (void)spec;
      const Json r = b.client().request(name, {{key, nullptr}});
      INFO(key << " → " << r.dump().substr(0, 300));
      if (r.contains("error"))
        CHECK(r["error"]["message"].get<std::string>().find("unknown param") == std::string::npos);
    }
  }
  CHECK(methods.count("part.design") == 1);
  CHECK(methods.count("lot.stats") == 1);
  // And the other way round: an unknown method is not found, not invalid params.
  CHECK(b.client().request("part.nonexistent", {{"no_such_param_xyz", 1}})["error"]["code"] == -32601);
}
