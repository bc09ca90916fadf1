// A transport over a file descriptor with poll()-based deadlines: the base
// of the termios serial path and the USBTMC character-device path.
#pragma once

#include "drivers/framer.hpp"
#include "drivers/transport.hpp"

#include <string>

namespace junco::drivers::detail {

class FdTransport : public Transport {
 public:
  FdTransport(std::string path, TransportOptions options);
  ~FdTransport() override;
  FdTransport(const FdTransport&) = delete;
  FdTransport& operator=(const FdTransport&) = delete;

  void write_message(std::string_view message) override;
  std::string read_message(std::chrono::milliseconds deadline) override;
  void close() override;
  void reconnect() override;

 protected:
  // Opens path_ and returns the descriptor (non-blocking); throws DriverError.
  virtual int open_fd() = 0;
  // Reads what is available into buf within `wait_ms`; returns bytes read, 0
  // when nothing came. Default: poll() then read(). Throws on EOF/error.
  virtual std::size_t read_some(char* buf, std::size_t size, long wait_ms);
  void open();
  [[noreturn]] void fail_errno(const char* what) const;

  std::string path_;
  TransportOptions options_;
  int fd_ = -1;
  LineFramer framer_;
};

}  // namespace junco::drivers::detail
