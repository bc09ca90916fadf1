// Concrete transports behind open_transport(); internal to drivers/.
#pragma once

#include "drivers/address.hpp"
#include "drivers/transport.hpp"

#include <memory>

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

}  // namespace junco::drivers::detail
