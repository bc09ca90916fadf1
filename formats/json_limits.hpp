// Depth and size limits for every JSON document junco reads from outside:
// socket requests (protocol/framing.cpp), plan files (junco submit),
// juncod's config (daemon/config.cpp), dialect files (drivers/dialect.cpp),
// junco-sim's config (tools/sim/config.cpp) and model documents
// (formats/model_document.cpp).
//
// Why: nlohmann's parser is iterative, but copying, dumping, comparing and
// walking a json value recurse once per nesting level. A 200 KB line of
// "[[[[…" nests 10^5 deep and overflows a thread's stack in the first copy.
// So the depth is checked *while parsing*, by a parser callback that refuses
// (or discards) any container opened deeper than the limit: a deep document
// never becomes a json value, and nothing recursive ever sees it.
//
// Why here: fitting/ is the lowest library: it depends on no other junco
// library, and every JSON reader links it or can include from it — daemon/,
// the CLI and junco-sim link it; drivers/ (which does not link it) includes
// this header by path, which costs nothing because it is header-only and needs
// nlohmann_json alone (no Ceres, no link dependency); the fuzz targets compile
// it without Ceres. fitting/ itself reads model documents. One exception to
// fitting/'s "no I/O" rule: read_json_file below, a bounded file read, kept
// next to the size limit it enforces so that limit has one home.
#pragma once

#include <nlohmann/json.hpp>

#include <cstddef>
#include <fstream>
#include <stdexcept>
#include <string>
#include <string_view>

namespace junco {

// Deepest nesting accepted anywhere (top level = level 1). The deepest real
// document (a plan: plan → ac → off_state → freqs_hz) needs 5; 64 leaves room
// and keeps every recursive walk far from any stack limit.
inline constexpr int max_json_depth = 64;
// Largest JSON file read (config, dialect, plan, model document, sim config).
// The socket has its own, smaller line limit (protocol/framing.hpp).
inline constexpr std::size_t max_json_file_bytes = std::size_t{4} << 20;  // 4 MiB

// A document over a limit; what() names the limit ("nested deeper than 64 levels").
class JsonLimitError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// "<what> nested deeper than <max_depth> levels" — the one wording for every reader.
inline std::string too_deep_message(std::string_view what, int max_depth = max_json_depth) {
  return std::string(what) + " nested deeper than " + std::to_string(max_depth) + " levels";
}

// "<what> larger than the limit of <max_bytes> bytes"
inline std::string too_big_message(std::string_view what, std::size_t max_bytes = max_json_file_bytes) {
  return std::string(what) + " larger than the limit of " + std::to_string(max_bytes) + " bytes";
}

// A parser callback that throws JsonLimitError(too_deep_message(what)) as soon
// as an object or array opens deeper than max_depth levels.
inline nlohmann::json::parser_callback_t depth_guard(std::string what, int max_depth = max_json_depth) {
  return [what = std::move(what), max_depth](int depth, nlohmann::json::parse_event_t event, nlohmann::json&) {
    // depth = containers already open, so the one opening now is at level depth + 1.
    if ((event == nlohmann::json::parse_event_t::object_start || event == nlohmann::json::parse_event_t::array_start) &&
        depth + 1 > max_depth)
      throw JsonLimitError(too_deep_message(what, max_depth));
    return true;
  };
}

// Json::parse with both limits. Throws JsonLimitError for a limit and
// nlohmann::json::exception for text that is not JSON (as Json::parse does).
inline nlohmann::json parse_json_limited(std::string_view text, std::string_view what, bool ignore_comments = false,
                                         int max_depth = max_json_depth, std::size_t max_bytes = max_json_file_bytes) {
  if (text.size() > max_bytes) throw JsonLimitError(too_big_message(what, max_bytes));
  return nlohmann::json::parse(text.begin(), text.end(), depth_guard(std::string(what), max_depth), true, ignore_comments);
}

// Reads a whole file (a pipe too), refusing one over max_bytes without
// holding more than max_bytes + one chunk. Throws std::runtime_error("cannot
// read <path>") or JsonLimitError.
inline std::string read_json_file(const std::string& path, std::size_t max_bytes = max_json_file_bytes) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw std::runtime_error("cannot read " + path);
  std::string text;
  char chunk[65536];
  while (in.read(chunk, sizeof chunk) || in.gcount() > 0) {
    text.append(chunk, static_cast<std::size_t>(in.gcount()));
    if (text.size() > max_bytes) throw JsonLimitError(too_big_message(path + ":", max_bytes));
  }
  if (in.bad()) throw std::runtime_error("cannot read " + path);
  return text;
}

}  // namespace junco
