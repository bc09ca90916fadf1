#include "tools/sim/app.hpp"

#include <sstream>
#include <stdexcept>

namespace junco::sim {

SimApp::SimApp(SimConfig config) : bench_(std::move(config)) {
  std::uint64_t k = 0;
  for (const auto& role : all_roles) {
    // Each instrument has its own noise stream, derived from the seed.
    const std::uint64_t seed = bench_.config().seed * 0x9E3779B97F4A7C15ull + (++k);
    instruments_[role] = make_instrument(role, bench_.config().families.at(role), bench_, seed);
  }
  for (const auto& f : bench_.config().faults) apply_fault(f);
}

std::string SimApp::start() {
  nlohmann::json endpoints, families;
  for (const auto& role : all_roles) {
    LineHandler h = [this, role](const std::string& line) { return instrument_line(role, line); };
    endpoints[role] = bench_.config().serial_roles.count(role) ? start_pty_endpoint(std::move(h))
                                                               : start_tcp_endpoint(std::move(h));
    families[role] = bench_.config().families.at(role);
  }
  endpoints["control"] = start_tcp_endpoint([this](const std::string& line) {
    return LineOutcome{control_line(line), 0, false};
  });
  // "families" is the former name of "dialects", kept for readers of the old line.
  return nlohmann::json{{"ready", true}, {"endpoints", endpoints}, {"dialects", families}, {"families", families}}.dump();
}

LineOutcome SimApp::instrument_line(const std::string& role, const std::string& line) {
  std::lock_guard lock(bench_.mutex());
  SimInstrument& inst = *instruments_.at(role);
  FaultState& f = inst.faults();
  LineOutcome out;
  if (f.drop_after == 0) {  // the drop is one shot: a reconnecting client gets back in
    f.drop_after = -1;
    out.close = true;
    return out;
  }
  if (f.drop_after > 0) --f.drop_after;
  if (f.silent) return out;
  out.reply = inst.handle_line(line);
  if (out.reply) {
    if (f.garble > 0) {
      --f.garble;
      out.reply = inst.garble(*out.reply);
    }
    if (f.late_ms > 0) {
      out.delay_ms = f.late_ms;
      f.late_ms = 0;
    }
  }
  return out;
}

void SimApp::apply_fault(const FaultSpec& fault) {
  auto it = instruments_.find(fault.role);
  if (it == instruments_.end()) throw std::invalid_argument("unknown role '" + fault.role + "'");
  FaultState& f = it->second->faults();
  auto count = [&](const std::string& what) {
    try {
      size_t pos = 0;
      const long v = std::stol(fault.arg, &pos);
      if (pos != fault.arg.size() || v < 0) throw std::invalid_argument("");
      return static_cast<int>(v);
    } catch (const std::exception&) {
      throw std::invalid_argument("fault " + fault.mode + " wants " + what + ", got '" + fault.arg + "'");
    }
  };
  if (fault.mode == "drop-after") f.drop_after = count("a command count N");
  else if (fault.mode == "late") f.late_ms = count("milliseconds");
  else if (fault.mode == "garble") f.garble = count("a reply count N");
  else if (fault.mode == "silent") f.silent = true;
  else if (fault.mode == "clear") f = FaultState{};
  else if (fault.mode == "error") {
    std::istringstream in(fault.arg);
    int code = 0;
    if (!(in >> code)) throw std::invalid_argument("fault error wants CODE TEXT, got '" + fault.arg + "'");
    std::string text;
    std::getline(in, text);
    const auto b = text.find_first_not_of(' ');
    text = b == std::string::npos ? std::string("Injected error") : text.substr(b);
    it->second->status().push_error(code, text);
  } else {
    throw std::invalid_argument("unknown fault mode '" + fault.mode + "'");
  }
}

std::string SimApp::control_line(const std::string& line) {
  using nlohmann::json;
  std::istringstream in(line);
  std::string word;
  in >> word;
  try {
    if (word == "state?") {
      std::lock_guard lock(bench_.mutex());
      json j = bench_.state_json(Clock::now());
      json faults;
      for (const auto& [role, inst] : instruments_) {
        const auto& f = inst->faults();
        faults[role] = {{"drop_after", f.drop_after}, {"late_ms", f.late_ms}, {"garble", f.garble},
                        {"silent", f.silent}, {"errors_queued", inst->status().queued()}};
      }
      j["faults"] = faults;
      return j.dump();
    }
    if (word == "lot?") {
      std::lock_guard lock(bench_.mutex());
      return bench_.lot_json().dump();
    }
    if (word == "chamber?") {
      std::lock_guard lock(bench_.mutex());
      return bench_.chamber_json(Clock::now()).dump();
    }
    if (word == "outputs?") {
      std::lock_guard lock(bench_.mutex());
      return bench_.outputs_json().dump();
    }
    if (word == "bias?") {
      std::lock_guard lock(bench_.mutex());
      return bench_.bias_log_json().dump();
    }
    if (word == "fault") {
      FaultSpec f;
      in >> f.role >> f.mode;
      std::getline(in, f.arg);
      const auto b = f.arg.find_first_not_of(' ');
      f.arg = b == std::string::npos ? std::string() : f.arg.substr(b);
      if (f.role.empty() || f.mode.empty()) throw std::invalid_argument("usage: fault ROLE MODE [ARG]");
      std::lock_guard lock(bench_.mutex());
      apply_fault(f);
      return json{{"ok", true}}.dump();
    }
    if (word == "quit") {
      on_quit();
      return json{{"ok", true}}.dump();
    }
    throw std::invalid_argument("unknown control command '" + word + "' (state?, lot?, chamber?, outputs?, bias?, fault, quit)");
  } catch (const std::invalid_argument& e) {
    return json{{"ok", false}, {"error", e.what()}}.dump();
  }
}

}  // namespace junco::sim
