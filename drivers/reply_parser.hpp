// Pure parsers for instrument replies: numbers (NR1/NR2/NR3 with an
// optional unit suffix), integers for bit tests, SYST:ERR? entries and
// *IDN? replies. No I/O, no exceptions, no allocation beyond the result:
// each takes a string_view and says what it found or why it refused.
// These are fuzz targets; keep them total (every input gives a result).
#pragma once

#include "drivers/roles.hpp"

#include <string>
#include <string_view>

namespace junco::drivers {

// Longest reply any parser here accepts; longer input is refused unread.
inline constexpr std::size_t max_parsed_reply = 256;

enum class ParseStatus {
  ok,
  empty,       // nothing but blanks
  overlong,    // longer than max_parsed_reply
  malformed,   // does not match the grammar (garbage, truncated, wrong suffix)
  overrange,   // the SCPI overload (9.9E37) or NaN (9.91E37) marker
};

const char* to_string(ParseStatus status);

struct NumberReply {
  ParseStatus status = ParseStatus::malformed;
  double value = 0.0;  // valid only when status == ok
  std::string why;     // one line when status != ok
};

// A decimal number: [+-] digits [. digits] [E [+-] digits], leading and
// trailing blanks (space, tab, CR, LF) ignored. When `suffix` is not empty
// the reply must end in it (case-insensitive), e.g. "VDC" in
// "+6.52301E-01VDC". No "inf"/"nan" words, no hex, no second value.
NumberReply parse_number(std::string_view reply, std::string_view suffix = {});

struct IntegerReply {
  ParseStatus status = ParseStatus::malformed;
  long long value = 0;
  std::string why;
};

// An integer register value (NR1, or an NR2/NR3 whose value is integral),
// 0 .. 2^53: for bit tests such as STAT:QUES:COND?.
IntegerReply parse_integer(std::string_view reply);

struct ErrorEntryReply {
  ParseStatus status = ParseStatus::malformed;
  int code = 0;      // 0 means "no error"
  std::string text;  // the quoted text, quotes removed ("" unescaped)
  std::string why;
};

// One SYST:ERR? entry: <code>,"<text>", e.g. -113,"Undefined header".
ErrorEntryReply parse_error_entry(std::string_view reply);

struct IdentityReply {
  ParseStatus status = ParseStatus::malformed;
  Identity identity;
  std::string why;
};

// IEEE 488.2 *IDN?: exactly four comma-separated fields, manufacturer and
// model not empty, printable ASCII only.
IdentityReply parse_identity(std::string_view reply);

}  // namespace junco::drivers
