// The socket API's descriptions agree, checked in both directions:
//  - every row of the method registry (daemon/methods.hpp) has a schema in
//    schema/api/ whose params are exactly the row's, and a section in
//    docs/api.md;
//  - every schema in schema/api/ (events aside) is a row of the registry, and
//    every method section of docs/api.md names a row or an event;
//  - the real juncod serves each row, takes exactly its params (others are
//    refused, -32602 naming the field) and answers an unknown method -32601.
#include "daemon/methods.hpp"
#include "tests/support/bench_daemon.hpp"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <regex>
#include <set>

using namespace junco;
using Json = nlohmann::json;
namespace fs = std::filesystem;

namespace {

std::string api_doc() {
  std::ifstream doc_file(std::string(JUNCO_SOURCE_DIR) + "/docs/api.md");
  return std::string((std::istreambuf_iterator<char>(doc_file)), std::istreambuf_iterator<char>());
}

std::set<std::string> registry_names() {
  std::set<std::string> out;
  for (const auto& m : daemon::method_specs()) out.insert(std::string(m.name));
  return out;
}

}  // namespace

TEST_CASE("every registry row has its schema with the same params and a docs/api.md section", "[api]") {
  const std::string doc = api_doc();
  REQUIRE(daemon::method_specs().size() >= 20);
  for (const auto& m : daemon::method_specs()) {
    const std::string name(m.name);
    INFO(name);
    REQUIRE(fs::exists(fs::path(JUNCO_SOURCE_DIR) / "schema/api" / (name + ".json")));
    const Json schema = test::api_schema(name);
    CHECK(schema["title"] == name);
    std::set<std::string> schema_params;
    for (const auto& [key, spec] : schema["params"]["properties"].items()) {
      (void)spec;
      schema_params.insert(key);
    }
    CHECK(schema_params == std::set<std::string>(m.params.begin(), m.params.end()));
    CHECK(schema["params"]["additionalProperties"] == false);
    CHECK(doc.find("### `" + name + "`") != std::string::npos);
    CHECK(!m.summary.empty());
  }
}

TEST_CASE("every schema and every documented method is a registry row", "[api]") {
  const auto rows = registry_names();
  std::set<std::string> events;
  for (const auto& e : fs::directory_iterator(fs::path(JUNCO_SOURCE_DIR) / "schema/api")) {
    const std::string name = e.path().stem().string();
    INFO(name);
    if (name.rfind("event.", 0) == 0) {  // notifications, not methods
      events.insert(name.substr(6));
      continue;
    }
    CHECK(rows.count(name) == 1);
  }
  REQUIRE(events.count("job.state") == 1);
  const std::string doc = api_doc();
  const std::regex section("\n### `([a-z_.]+)`");
  std::size_t sections = 0;
  for (auto it = std::sregex_iterator(doc.begin(), doc.end(), section); it != std::sregex_iterator(); ++it) {
    const std::string name = (*it)[1];
    INFO("docs/api.md section " << name);
    CHECK((rows.count(name) == 1 || events.count(name) == 1));
    ++sections;
  }
  CHECK(sections == rows.size() + events.size());
}

TEST_CASE("juncod serves every registry row with exactly its params", "[api]") {
  test::BenchDaemonOptions options;
  options.roles = {"source", "meter", "scanner"};
  test::BenchDaemon b("contract", {"--settle-ms", "0"}, options);
  for (const auto& m : daemon::method_specs()) {
    const std::string name(m.name);
    INFO(name);
    // A param no row has: refused by name, which also proves the method exists.
    const Json reply = b.client().request(name, {{"no_such_param_xyz", 1}});
    CHECK(reply["error"]["code"] == -32602);
    CHECK(reply["error"]["data"]["field"] == "no_such_param_xyz");
    // Each of the row's params is known: sent alone it may be wrong or
    // incomplete, but never "unknown".
    for (const auto& key : m.params) {
      const Json r = b.client().request(name, {{std::string(key), nullptr}});
      INFO(key << " → " << r.dump().substr(0, 300));
      if (r.contains("error")) CHECK(r["error"]["message"].get<std::string>().find("unknown param") == std::string::npos);
    }
  }
  // An unknown method is not found, not invalid params.
  CHECK(b.client().request("part.nonexistent", {{"no_such_param_xyz", 1}})["error"]["code"] == -32601);
}
