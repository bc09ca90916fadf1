// Splits a byte stream into messages at the read terminator. Pure and
// shared by every transport. When the terminator is "\n" a CR before it is
// dropped too (CR LF accepted). A message longer than max_message_bytes is
// refused (DriverError garbled), so a runaway instrument cannot eat memory.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace junco::drivers {

inline constexpr std::size_t max_message_bytes = 65536;

class LineFramer {
 public:
  explicit LineFramer(std::string terminator) : terminator_(std::move(terminator)) {}
  void feed(std::string_view bytes) { buffer_.append(bytes); }
  // The next complete message, or nothing yet. Throws DriverError(garbled)
  // when the buffer exceeds max_message_bytes without a terminator.
  std::optional<std::string> next();
  void clear() { buffer_.clear(); }
  bool empty() const { return buffer_.empty(); }

 private:
  std::string terminator_;
  std::string buffer_;
};

}  // namespace junco::drivers
