// Typed failures of the instrument layer. Every driver failure is a
// DriverError; callers decide on retry/pause from kind(), never from text.
#pragma once

#include <stdexcept>
#include <string>

namespace junco::drivers {

enum class ErrorKind {
  timeout,       // no complete reply within the deadline
  disconnected,  // the link dropped or could not be opened
  garbled,       // a reply arrived but does not parse as expected
  instrument,    // the instrument reported an error (SCPI code + text)
  overrange,     // the instrument answered an overload marker (9.9E37 ...)
  config,        // bad address, dialect file or option (never retried)
};

const char* to_string(ErrorKind kind);

class DriverError : public std::runtime_error {
 public:
  DriverError(ErrorKind kind, std::string message, int scpi_code = 0)
      : std::runtime_error(std::move(message)), kind_(kind), scpi_code_(scpi_code) {}
  ErrorKind kind() const { return kind_; }
  int scpi_code() const { return scpi_code_; }  // 0 unless kind() == instrument
  // A retry may help (timeout, disconnected, garbled); config errors never.
  bool transient() const {
    return kind_ == ErrorKind::timeout || kind_ == ErrorKind::disconnected || kind_ == ErrorKind::garbled;
  }
  // SCPI-99 command errors (-100 … -199: syntax, undefined header, bad
  // parameter type …) say the command text itself is wrong: sending it again
  // gives the same error.
  bool command_error() const { return kind_ == ErrorKind::instrument && scpi_code_ <= -100 && scpi_code_ >= -199; }
  // Never worth a retry at any layer: bad configuration or a command error.
  bool permanent() const { return kind_ == ErrorKind::config || command_error(); }

 private:
  ErrorKind kind_;
  int scpi_code_;
};

}  // namespace junco::drivers
