#include "drivers/scpi.hpp"

#include "drivers/errors.hpp"
#include "drivers/reply_parser.hpp"

#include <algorithm>

namespace junco::drivers {

namespace {

[[noreturn]] void rethrow_with(const DriverError& e, const std::string& prefix) {
  throw DriverError(e.kind(), prefix + e.what(), e.scpi_code());
}

ErrorKind kind_of(ParseStatus status) {
  return status == ParseStatus::overrange ? ErrorKind::overrange : ErrorKind::garbled;
}

}  // namespace

ScpiSession::ScpiSession(std::unique_ptr<Transport> transport, SessionOptions options)
    : transport_(std::move(transport)), options_(std::move(options)) {
  log("#", "open " + transport_->describe());
}

void ScpiSession::log(std::string_view direction, std::string_view line) const {
  if (options_.traffic_log) options_.traffic_log(direction, line);
}

void ScpiSession::command(std::string_view line) {
  log(">", line);
  try {
    transport_->write_message(line);
  } catch (const DriverError& e) {
    rethrow_with(e, "command '" + std::string(line) + "': ");
  }
}

std::string ScpiSession::read_reply(std::string_view sent) {
  try {
    std::string reply = transport_->read_message(options_.reply_timeout);
    log("<", reply);
    return reply;
  } catch (const DriverError& e) {
    rethrow_with(e, "query '" + std::string(sent) + "': ");
  }
}

std::string ScpiSession::query(std::string_view line) {
  command(line);
  return read_reply(line);
}

double ScpiSession::query_number(std::string_view line, std::string_view suffix) {
  std::string reply = query(line);
  NumberReply n = parse_number(reply, suffix);
  if (n.status != ParseStatus::ok) throw DriverError(kind_of(n.status), "query '" + std::string(line) + "': " + n.why);
  return n.value;
}

Identity ScpiSession::identify() {
  std::string reply = query("*IDN?");
  IdentityReply id = parse_identity(reply);
  if (id.status != ParseStatus::ok) throw DriverError(ErrorKind::garbled, "query '*IDN?': " + id.why);
  return id.identity;
}

void ScpiSession::reset() {
  command("*RST");
  clear();
}

void ScpiSession::clear() { command("*CLS"); }

void ScpiSession::sync() {
  std::string reply = query("*OPC?");
  IntegerReply n = parse_integer(reply);
  if (n.status != ParseStatus::ok || n.value != 1)
    throw DriverError(ErrorKind::garbled, "query '*OPC?': expected 1, got '" + reply.substr(0, 40) + "'");
}

void ScpiSession::drain_errors() {
  int first_code = 0;
  std::string first_text;
  int more = 0;
  for (int reads = 0; reads < options_.max_error_reads; ++reads) {
    std::string reply = query("SYST:ERR?");
    ErrorEntryReply entry = parse_error_entry(reply);
    if (entry.status != ParseStatus::ok) throw DriverError(ErrorKind::garbled, "query 'SYST:ERR?': " + entry.why);
    if (entry.code == 0) {
      if (first_code == 0) return;
      std::string message = "instrument error " + std::to_string(first_code) + ",\"" + first_text + "\"";
      if (more > 0) message += " (and " + std::to_string(more) + " more in the error queue)";
      throw DriverError(ErrorKind::instrument, message, first_code);
    }
    if (first_code == 0) {
      first_code = entry.code;
      first_text = entry.text;
    } else {
      ++more;
    }
  }
  throw DriverError(ErrorKind::garbled, "query 'SYST:ERR?': error queue did not empty after " +
                                            std::to_string(options_.max_error_reads) + " reads");
}

std::vector<std::string> ScpiSession::clear_error_queue() {
  std::vector<std::string> found;
  auto read_all = [&] {
    for (int reads = 0; reads < options_.max_error_reads; ++reads) {
      std::string reply = query("SYST:ERR?");
      ErrorEntryReply entry = parse_error_entry(reply);
      if (entry.status != ParseStatus::ok) {
        found.push_back("unreadable SYST:ERR? reply '" + reply.substr(0, 40) + "'");
        return;  // *CLS below clears whatever it was
      }
      if (entry.code == 0) return;
      found.push_back(std::to_string(entry.code) + ",\"" + entry.text + "\"");
    }
  };
  read_all();
  clear();
  read_all();  // normally "0,..." at once; an instrument whose *CLS keeps the queue shows it here
  return found;
}

std::optional<std::pair<int, std::string>> ScpiSession::error_after_timeout() {
  // A live instrument answers SYST:ERR? at once; a short wait keeps the cost
  // small when it is mute (the timeout then stands as it was).
  constexpr std::chrono::milliseconds kErrorQueryWait{250};
  command("SYST:ERR?");
  std::string reply;
  try {
    reply = transport_->read_message(std::min(options_.reply_timeout, kErrorQueryWait));
  } catch (const DriverError&) {
    return std::nullopt;
  }
  log("<", reply);
  ErrorEntryReply entry = parse_error_entry(reply);
  if (entry.status != ParseStatus::ok || entry.code == 0) return std::nullopt;
  return std::make_pair(entry.code, "instrument error " + std::to_string(entry.code) + ",\"" + entry.text + "\"");
}

void ScpiSession::reconnect() {
  log("#", "reconnect " + transport_->describe());
  transport_->reconnect();
  if (transport_->clean_after_reconnect()) return;
  resynchronise();
}

// A reply delayed past its deadline may still arrive on a serial line, and
// so may the "1" of an earlier resynchronisation that timed out. Ask *OPC?,
// skip lines until a "1", then keep discarding whatever follows within a
// short quiet window (answers to queries still queued in the instrument
// come back to back), so no stale reply is taken for the next query's.
void ScpiSession::resynchronise() {
  command("*OPC?");
  const auto quiet = std::min(std::chrono::milliseconds(100), options_.reply_timeout / 2);
  auto deadline = std::chrono::steady_clock::now() + options_.reply_timeout;
  int discarded = 0;
  bool synced = false;
  while (true) {
    auto now = std::chrono::steady_clock::now();
    if (now >= deadline) break;
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - now);
    std::string line;
    try {
      line = transport_->read_message(std::max(left, std::chrono::milliseconds(1)));
    } catch (const DriverError& e) {
      if (e.kind() != ErrorKind::timeout) rethrow_with(e, "resynchronising with '*OPC?': ");
      break;
    }
    log("<", line);
    IntegerReply n = parse_integer(line);
    if (!synced && n.status == ParseStatus::ok && n.value == 1) {
      synced = true;
      deadline = std::chrono::steady_clock::now() + quiet;
      continue;
    }
    ++discarded;
    log("#", "discarded stale reply while resynchronising");
    if (synced) deadline = std::chrono::steady_clock::now() + quiet;
  }
  if (synced) return;
  if (discarded > 0)
    throw DriverError(ErrorKind::garbled, "resynchronising with '*OPC?': " + std::to_string(discarded) +
                                              " replies, none of them the expected 1");
  throw DriverError(ErrorKind::timeout, "resynchronising with '*OPC?': no answer within " +
                                            std::to_string(options_.reply_timeout.count()) + " ms");
}

}  // namespace junco::drivers
