// JSON-RPC 2.0 line framing and request validation, from labelled inputs.
// Expected codes and reply shapes follow the JSON-RPC 2.0 specification
// (https://www.jsonrpc.org/specification, sections 4, 5, 5.1, 6 and its
// "Examples" section, whose batch and error cases are reproduced below).
#include "protocol/framing.hpp"

#include <catch2/catch.hpp>

using junco::daemon::Json;
using junco::daemon::RpcCode;
namespace rpc = junco::daemon::rpc;

namespace {
int code_of(const rpc::Item& item) { return item.error_reply.at("error").at("code").get<int>(); }
}  // namespace

TEST_CASE("LineFramer splits lines, keeps partial input and strips CR", "[rpc][framing]") {
  rpc::LineFramer f(100);
  auto lines = f.feed("abc\ndef");
  REQUIRE(lines.size() == 1);
  CHECK(lines[0].text == "abc");
  CHECK(f.pending_bytes() == 3);
  lines = f.feed("gh\r\n\nxyz\n");
  REQUIRE(lines.size() == 3);
  CHECK(lines[0].text == "defgh");
  CHECK(lines[1].text.empty());
  CHECK(lines[2].text == "xyz");
  CHECK(f.pending_bytes() == 0);
}

TEST_CASE("LineFramer reports an overlong line once and resumes after its newline", "[rpc][framing]") {
  rpc::LineFramer f(10);
  SECTION("overlong line split over several feeds") {
    auto lines = f.feed("0123456789A");  // 11 bytes, no newline yet
    REQUIRE(lines.size() == 1);
    CHECK(lines[0].kind == rpc::LineFramer::LineKind::too_long);
    CHECK(f.feed(std::string(5000, 'x')).empty());  // still discarding
    CHECK(f.pending_bytes() == 0);
    lines = f.feed("tail\nok\n");
    REQUIRE(lines.size() == 1);
    CHECK(lines[0].kind == rpc::LineFramer::LineKind::line);
    CHECK(lines[0].text == "ok");
  }
  SECTION("exactly at the limit is accepted") {
    auto lines = f.feed("0123456789\n");
    REQUIRE(lines.size() == 1);
    CHECK(lines[0].kind == rpc::LineFramer::LineKind::line);
  }
  SECTION("overlong line arriving whole with its newline") {
    auto lines = f.feed("0123456789AB\nnext\n");
    REQUIRE(lines.size() == 2);
    CHECK(lines[0].kind == rpc::LineFramer::LineKind::too_long);
    CHECK(lines[1].text == "next");
  }
}

TEST_CASE("parse_line classifies labelled inputs", "[rpc][framing]") {
  struct Case {
    const char* label;
    const char* line;
    int code;  // 0 = a valid request
  };
  // Codes from the JSON-RPC 2.0 specification, section 5.1.
  const Case cases[] = {
      {"valid with params", R"({"jsonrpc":"2.0","id":1,"method":"job.get","params":{"job_id":3}})", 0},
      {"valid without params", R"({"jsonrpc":"2.0","id":"a","method":"daemon.status"})", 0},
      {"valid with null id", R"({"jsonrpc":"2.0","id":null,"method":"daemon.status"})", 0},
      {"truncated JSON", R"({"jsonrpc":"2.0","method":"foobar, "params")", -32700},
      {"garbage", "hello there", -32700},
      {"trailing garbage", R"({"jsonrpc":"2.0","id":1,"method":"x"} junk)", -32700},
      {"not an object", "42", -32600},
      {"string", R"("daemon.status")", -32600},
      {"missing method", R"({"jsonrpc":"2.0","id":1})", -32600},
      {"method not a string", R"({"jsonrpc":"2.0","id":1,"method":1,"params":"bar"})", -32600},
      {"wrong version", R"({"jsonrpc":"1.0","id":1,"method":"x"})", -32600},
      {"missing version", R"({"id":1,"method":"x"})", -32600},
      {"id is an object", R"({"jsonrpc":"2.0","id":{},"method":"x"})", -32600},
      {"params a string", R"({"jsonrpc":"2.0","id":1,"method":"x","params":"s"})", -32600},
      {"positional params", R"({"jsonrpc":"2.0","id":1,"method":"x","params":[1,2]})", -32602},
      {"empty batch", "[]", -32600},
  };
  for (const auto& c : cases) {
    INFO(c.label);
    const auto parsed = rpc::parse_line(c.line);
    REQUIRE(parsed.items.size() == 1);
    if (c.code == 0) {
      REQUIRE(parsed.items[0].request);
      CHECK_FALSE(parsed.items[0].request->notification);
    } else {
      REQUIRE_FALSE(parsed.items[0].request);
      CHECK(code_of(parsed.items[0]) == c.code);
      CHECK_FALSE(parsed.items[0].error_reply["error"]["message"].get<std::string>().empty());
      CHECK(parsed.items[0].error_reply["jsonrpc"] == "2.0");
    }
  }
}

TEST_CASE("parse_line keeps the id for errors it can attribute", "[rpc][framing]") {
  const auto parsed = rpc::parse_line(R"({"jsonrpc":"2.0","id":7})");
  REQUIRE(parsed.items.size() == 1);
  CHECK(parsed.items[0].error_reply["id"] == 7);
  // A parse error cannot know the id: the specification says null.
  CHECK(rpc::parse_line("{").items[0].error_reply["id"].is_null());
}

TEST_CASE("parse_line: notifications and blank lines", "[rpc][framing]") {
  const auto n = rpc::parse_line(R"({"jsonrpc":"2.0","method":"events.unsubscribe"})");
  REQUIRE(n.items.size() == 1);
  REQUIRE(n.items[0].request);
  CHECK(n.items[0].request->notification);
  CHECK(n.items[0].request->params == Json::object());
  CHECK(rpc::parse_line("").items.empty());
  CHECK(rpc::parse_line("  \t").items.empty());
}

TEST_CASE("parse_line: the specification's mixed batch example", "[rpc][framing]") {
  // JSON-RPC 2.0 specification, Examples, "rpc call Batch": two calls, a
  // notification, an invalid element and a call → 5 items, 1 notification,
  // 1 invalid request.
  const auto parsed = rpc::parse_line(
      R"([{"jsonrpc":"2.0","method":"sum","params":{"a":1},"id":"1"},)"
      R"({"jsonrpc":"2.0","method":"notify_hello","params":{"v":7}},)"
      R"({"jsonrpc":"2.0","method":"subtract","params":{"a":42},"id":"2"},)"
      R"({"foo":"boo"},)"
      R"({"jsonrpc":"2.0","method":"get_data","id":"9"}])");
  CHECK(parsed.batch);
  REQUIRE(parsed.items.size() == 5);
  CHECK(parsed.items[1].request->notification);
  REQUIRE_FALSE(parsed.items[3].request);
  CHECK(code_of(parsed.items[3]) == -32600);
  CHECK(parsed.items[4].request->id == "9");
  // "rpc call with invalid Batch (but not empty)": [1] → one invalid request in an array.
  const auto ones = rpc::parse_line("[1,2,3]");
  CHECK(ones.batch);
  REQUIRE(ones.items.size() == 3);
  for (const auto& item : ones.items) CHECK(code_of(item) == -32600);
}

TEST_CASE("parse_line refuses oversized batches with one error", "[rpc][framing]") {
  std::string line = "[";
  for (std::size_t i = 0; i <= rpc::max_batch_size; ++i)
    line += std::string(i ? "," : "") + R"({"jsonrpc":"2.0","id":1,"method":"x"})";
  line += "]";
  const auto parsed = rpc::parse_line(line);
  CHECK_FALSE(parsed.batch);
  REQUIRE(parsed.items.size() == 1);
  CHECK(code_of(parsed.items[0]) == -32600);
}

TEST_CASE("replies and notifications have the JSON-RPC 2.0 shape", "[rpc][framing]") {
  const auto r = rpc::make_result(3, Json{{"ok", true}});
  CHECK(r == Json::parse(R"({"jsonrpc":"2.0","id":3,"result":{"ok":true}})"));
  const auto e = rpc::make_error("x", RpcCode::not_found, "no job with id 9");
  CHECK(e == Json::parse(R"({"jsonrpc":"2.0","id":"x","error":{"code":-32001,"message":"no job with id 9"}})"));
  const auto n = rpc::make_notification("job.progress", Json{{"job_id", 1}});
  CHECK_FALSE(n.contains("id"));
  const auto line = rpc::to_line(n);
  CHECK(line.back() == '\n');
  CHECK(line.find('\n') == line.size() - 1);  // one message, one line
}

TEST_CASE("to_line never throws on invalid UTF-8", "[rpc][framing]") {
  const Json bad{{"label", std::string("\xff\xfe")}};
  std::string line;
  REQUIRE_NOTHROW(line = rpc::to_line(bad));
  CHECK(Json::parse(line).contains("label"));
}

namespace {
// `levels` nested arrays: "[[[…]]]".
std::string nested(std::size_t levels) { return std::string(levels, '[') + std::string(levels, ']'); }
}  // namespace

TEST_CASE("parse_line refuses params nested deeper than the limit, naming it, with the request's id", "[rpc][framing][limits]") {
  // The 10^5-level case is what made juncod overflow its stack (issue 10):
  // the copy of params recursed once per level. The id comes after the deep
  // part, so the parse must go on past it to find the id.
  for (const std::size_t levels : {std::size_t{65}, std::size_t{100000}}) {
    INFO(levels << " levels");
    const std::string line = R"({"jsonrpc":"2.0","method":"no.such.method","params":{"x":)" + nested(levels - 1) + R"(},"id":42})";
    const auto parsed = rpc::parse_line(line);
    REQUIRE(parsed.items.size() == 1);
    REQUIRE_FALSE(parsed.items[0].request);
    CHECK(code_of(parsed.items[0]) == -32602);
    CHECK(parsed.items[0].error_reply["id"] == 42);
    CHECK(parsed.items[0].error_reply["error"]["message"] == "invalid params: params nested deeper than 64 levels");
  }
  // Exactly at the limit: params (level 1) + 63 levels inside is accepted.
  const auto ok = rpc::parse_line(R"({"jsonrpc":"2.0","id":1,"method":"m","params":{"x":)" + nested(63) + "}}");
  REQUIRE(ok.items.size() == 1);
  REQUIRE(ok.items[0].request);
  CHECK(ok.items[0].request->params.contains("x"));
}

TEST_CASE("parse_line: deep nesting elsewhere in a request or a batch", "[rpc][framing][limits]") {
  const auto deep = nested(100000);
  SECTION("a deep id is refused with id null") {
    const auto p = rpc::parse_line(R"({"jsonrpc":"2.0","method":"m","id":)" + deep + "}");
    REQUIRE(p.items.size() == 1);
    CHECK(code_of(p.items[0]) == -32600);
    CHECK(p.items[0].error_reply["id"].is_null());
    CHECK(p.items[0].error_reply["error"]["message"].get<std::string>().find("nested deeper than 64 levels") != std::string::npos);
  }
  SECTION("a deep batch element is refused alone; the others run") {
    const auto p = rpc::parse_line(R"([{"jsonrpc":"2.0","id":1,"method":"a"},{"jsonrpc":"2.0","id":2,"method":"b","params":{"p":)" + deep +
                                   R"(}},{"jsonrpc":"2.0","id":3,"method":"c"}])");
    REQUIRE(p.items.size() == 3);
    CHECK(p.items[0].request);
    REQUIRE_FALSE(p.items[1].request);
    CHECK(code_of(p.items[1]) == -32602);
    CHECK(p.items[1].error_reply["id"] == 2);
    REQUIRE(p.items[2].request);
    CHECK(p.items[2].request->id == 3);
  }
  SECTION("a top-level batch of deep arrays is answered, element by element") {
    const auto p = rpc::parse_line("[" + deep + "]");
    REQUIRE(p.items.size() == 1);
    CHECK(code_of(p.items[0]) == -32600);
  }
}

TEST_CASE("a notification is never answered, whatever is wrong with its params (JSON-RPC 2.0 §4.1)", "[rpc][framing]") {
  // Specification §4.1: "The Server MUST NOT reply to a Notification,
  // including those that are within a batch request."
  const std::string cases[] = {
      R"({"jsonrpc":"2.0","method":"job.get","params":[1,2]})",                   // positional params
      R"({"jsonrpc":"2.0","method":"job.get","params":"s"})",                     // params not structured
      R"({"jsonrpc":"2.0","method":"job.get","params":7})",
      R"({"jsonrpc":"2.0","method":"job.get","params":{"x":)" + nested(100000) + "}}",  // nested too deep
      R"({"jsonrpc":"2.0","method":"no.such","params":)" + nested(100000) + "}",
  };
  for (const auto& line : cases) {
    INFO(line.substr(0, 80));
    const auto parsed = rpc::parse_line(line);
    REQUIRE(parsed.items.size() == 1);
    CHECK_FALSE(parsed.items[0].request);
    CHECK(parsed.items[0].error_reply.is_null());
    CHECK_FALSE(rpc::respond(parsed, [](const rpc::Request&) { return Json(); }));
  }
  // In a batch, the refused notification is left out of the reply array.
  const auto batch = rpc::parse_line(R"([{"jsonrpc":"2.0","method":"a","params":[1]},{"jsonrpc":"2.0","id":5,"method":"b","params":[1]}])");
  const auto reply = rpc::respond(batch, [](const rpc::Request&) { return Json(); });
  REQUIRE(reply);
  REQUIRE(reply->is_array());
  REQUIRE(reply->size() == 1);
  CHECK((*reply)[0]["id"] == 5);
  CHECK((*reply)[0]["error"]["code"] == -32602);
  // Not a request at all (no valid method): still answered, id null (spec, Examples).
  const auto bad = rpc::parse_line(R"({"jsonrpc":"2.0","method":1,"params":"bar"})");
  CHECK(rpc::respond(bad, [](const rpc::Request&) { return Json(); }));
}
