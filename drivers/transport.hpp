// One small interface for every link to an instrument: serial, raw TCP,
// USBTMC. Blocking calls with a deadline per call; an instrument conversation
// is sequential, so nothing here is asynchronous. No Asio or libserialport
// type appears in this header.
#pragma once

#include <chrono>
#include <memory>
#include <string>
#include <string_view>

namespace junco::drivers {

class Transport {
 public:
  virtual ~Transport() = default;
  // Sends one message; the write terminator is appended by the transport.
  virtual void write_message(std::string_view message) = 0;
  // Reads up to and excluding the read terminator. Throws DriverError
  // (timeout) if no complete message arrives within `deadline`.
  virtual std::string read_message(std::chrono::milliseconds deadline) = 0;
  virtual void close() = 0;
  // Closes and opens again; pending input is discarded.
  virtual void reconnect() = 0;
  // Human-readable endpoint, e.g. "tcp 127.0.0.1:5025".
  virtual std::string describe() const = 0;
  // True when reconnect() gives a fresh stream with nothing stale in it
  // (a new TCP connection); false where a late reply may still arrive
  // (serial, USBTMC), so the session resynchronises after reconnecting.
  virtual bool clean_after_reconnect() const { return false; }
};

// Address syntax (documented in DEVELOPERS.md):
//   tcp:HOST:PORT                        raw socket, e.g. tcp:127.0.0.1:5025
//   serial:PATH[?baud=9600&bits=8&parity=none&stop=1&flow=none]
//   usbtmc:PATH                          e.g. usbtmc:/dev/usbtmc0
struct TransportOptions {
  std::chrono::milliseconds connect_timeout{2000};
  std::string write_terminator = "\n";
  std::string read_terminator = "\n";  // CR LF is accepted when this is "\n"
};

std::unique_ptr<Transport> open_transport(std::string_view address, const TransportOptions& options = {});

}  // namespace junco::drivers
