#include "drivers/framer.hpp"

#include "drivers/errors.hpp"

namespace junco::drivers {

std::optional<std::string> LineFramer::next() {
  auto at = buffer_.find(terminator_);
  if (at == std::string::npos) {
    if (buffer_.size() > max_message_bytes) {
      buffer_.clear();
      throw DriverError(ErrorKind::garbled,
                        "reply longer than " + std::to_string(max_message_bytes) + " bytes without a terminator");
    }
    return std::nullopt;
  }
  std::string message = buffer_.substr(0, at);
  buffer_.erase(0, at + terminator_.size());
  if (terminator_ == "\n" && !message.empty() && message.back() == '\r') message.pop_back();
  if (message.size() > max_message_bytes)
    throw DriverError(ErrorKind::garbled, "reply longer than " + std::to_string(max_message_bytes) + " bytes");
  return message;
}

}  // namespace junco::drivers
