#include "tools/sim/instrument.hpp"

namespace junco::sim {

SimInstrument::SimInstrument(std::string role, std::string family, std::string idn, Bench& bench, std::uint64_t seed)
    : bench_(bench), role_(std::move(role)), family_(std::move(family)), idn_(std::move(idn)),
      status_(static_cast<size_t>(bench.config().error_queue_depth)), rng_(seed) {}

void SimInstrument::add(std::string pattern, Handler handler) { routes_.emplace_back(std::move(pattern), std::move(handler)); }

std::optional<std::string> SimInstrument::handle_line(std::string_view line) {
  std::string joined;
  bool any = false;
  for (const auto& cmd : split_message(line)) {
    std::optional<std::string> reply;
    try {
      reply = dispatch(cmd);
    } catch (const ScpiError& e) {
      status_.push_error(e.code, e.text);
    }
    if (reply) {
      if (any) joined += ';';
      joined += *reply;
      any = true;
    }
  }
  if (!any) return std::nullopt;
  return joined;
}

std::optional<std::string> SimInstrument::dispatch(const ScpiCommand& cmd) {
  bool handled = false;
  auto reply = common(cmd, handled);
  if (handled) return reply;
  for (const auto& [pattern, handler] : routes_) {
    if (header_matches(pattern, cmd.header)) return handler(cmd.args);
  }
  throw ScpiError{-113, "Undefined header"};
}

std::optional<std::string> SimInstrument::common(const ScpiCommand& cmd, bool& handled) {
  handled = true;
  const std::string h = upper(cmd.header);
  auto no_args = [&] {
    if (!cmd.args.empty()) throw ScpiError{-108, "Parameter not allowed"};
  };
  if (h == "*IDN?") return no_args(), idn_;
  if (h == "*RST") return no_args(), reset_settings(), std::nullopt;
  if (h == "*CLS") return no_args(), status_.clear(), std::nullopt;
  if (h == "*OPC?") return no_args(), std::string("1");  // every operation completes before the reply
  if (h == "*OPC") return no_args(), status_.set_opc(), std::nullopt;
  if (h == "*WAI") return no_args(), std::nullopt;
  if (h == "*TST?") return no_args(), std::string("0");
  if (h == "*ESR?") return no_args(), std::to_string(status_.read_and_clear_esr());
  if (h == "*ESE?") return no_args(), std::to_string(ese_);
  if (h == "*ESE") {
    const auto v = parse_number(cmd.args);
    if (!v) throw ScpiError{cmd.args.empty() ? -109 : -104, cmd.args.empty() ? "Missing parameter" : "Data type error"};
    if (*v < 0 || *v > 255) throw ScpiError{-222, "Data out of range"};
    ese_ = static_cast<int>(*v);
    return std::nullopt;
  }
  if (h == "*STB?") {
    // bit 2: error queue not empty (SCPI); bit 5: ESB summary is not computed
    // without reading ESR, so only the queue bit is reported here.
    return no_args(), std::to_string(status_.queued() ? 4 : 0);
  }
  if (header_matches("SYSTem:ERRor?", cmd.header) || header_matches("SYSTem:ERRor:NEXT?", cmd.header))
    return no_args(), status_.pop_error();
  if (header_matches("SYSTem:VERSion?", cmd.header)) return no_args(), std::string("1999.0");
  handled = false;
  return std::nullopt;
}

std::string SimInstrument::garble(const std::string& reply) {
  // Every form contains at least one byte that no number (and no IDN or
  // error reply) can contain, so a checking driver always rejects it.
  const unsigned mode = garble_count_++ % 3;
  std::string out = reply.empty() ? std::string("?") : reply;
  if (mode == 0) {  // flipped characters
    for (size_t i = out.size() / 3; i < out.size(); i += 3) out[i] = '#';
    out[out.size() / 2] = '#';
  } else if (mode == 1) {  // truncated, with junk where the rest was
    out = out.substr(0, (out.size() + 1) / 2) + "\x7f~";
  } else {  // binary junk of the same length (no LF, no CR)
    for (auto& c : out) c = static_cast<char>(0x80 | (rng_() & 0x7f));
  }
  return out;
}

}  // namespace junco::sim
