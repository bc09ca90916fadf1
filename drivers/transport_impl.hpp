// Concrete transports behind open_transport(); internal to drivers/.
#pragma once

#include "drivers/address.hpp"
#include "drivers/framer.hpp"
#include "drivers/transport.hpp"

#include <cstddef>
#include <functional>
#include <memory>
#include <string>

namespace junco::drivers::detail {

std::unique_ptr<Transport> open_tcp(const Address& address, const TransportOptions& options);
std::unique_ptr<Transport> open_serial_libserialport(const SerialSettings& serial, const TransportOptions& options);
std::unique_ptr<Transport> open_serial_termios(const SerialSettings& serial, const TransportOptions& options);
std::unique_ptr<Transport> open_usbtmc(const std::string& path, const TransportOptions& options);

// True when PATH is a UNIX98 pseudo-terminal slave (under /dev/pts, or a
// character device with a pty slave major number 136..143).
bool is_pseudo_terminal(const std::string& path);

// Milliseconds left until `deadline`, at least 0.
long remaining_ms(std::chrono::steady_clock::time_point deadline);

// The read loop every transport shares: returns the next complete message
// from `framer`, calling read_some(buf, size, left_ms) for more bytes until
// `deadline_ms` runs out (then DriverError timeout naming `who`). read_some
// returns the bytes it stored (0 when it timed out) and throws on failure.
std::string read_framed(LineFramer& framer, std::chrono::milliseconds deadline_ms, const std::string& who,
                        const std::function<std::size_t(char* buf, std::size_t size, long left_ms)>& read_some);

}  // namespace junco::drivers::detail
