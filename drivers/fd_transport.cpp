#include "drivers/fd_transport.hpp"

#include "drivers/errors.hpp"
#include "drivers/transport_impl.hpp"

#include <cerrno>
#include <cstring>
#include <fcntl.h>
#include <poll.h>
#include <unistd.h>

namespace junco::drivers::detail {

FdTransport::FdTransport(std::string path, TransportOptions options)
    : path_(std::move(path)), options_(std::move(options)), framer_(options_.read_terminator) {}

FdTransport::~FdTransport() {
  if (fd_ >= 0) ::close(fd_);
}

void FdTransport::open() {
  fd_ = open_fd();
  framer_.clear();
}

void FdTransport::fail_errno(const char* what) const {
  int err = errno;
  throw DriverError(ErrorKind::disconnected, describe() + ": " + what + ": " + std::strerror(err));
}

void FdTransport::write_message(std::string_view message) {
  if (fd_ < 0) throw DriverError(ErrorKind::disconnected, describe() + ": not open");
  std::string out = std::string(message) + options_.write_terminator;
  auto deadline = std::chrono::steady_clock::now() + options_.connect_timeout;
  std::size_t done = 0;
  while (done < out.size()) {
    ssize_t n = ::write(fd_, out.data() + done, out.size() - done);
    if (n > 0) {
      done += static_cast<std::size_t>(n);
      continue;
    }
    if (n < 0 && errno == EINTR) continue;
    if (n < 0 && errno != EAGAIN) fail_errno("write");
    long left = remaining_ms(deadline);
    if (left == 0) throw DriverError(ErrorKind::timeout, describe() + ": write did not complete in time");
    pollfd p{fd_, POLLOUT, 0};
    ::poll(&p, 1, static_cast<int>(left));
  }
}

std::size_t FdTransport::read_some(char* buf, std::size_t size, long wait_ms) {
  pollfd p{fd_, POLLIN, 0};
  int r = ::poll(&p, 1, static_cast<int>(wait_ms));
  if (r < 0 && errno != EINTR) fail_errno("poll");
  if (r <= 0) return 0;
  ssize_t n = ::read(fd_, buf, size);
  if (n > 0) return static_cast<std::size_t>(n);
  if (n < 0 && (errno == EAGAIN || errno == EINTR)) return 0;
  // A pty whose other side closed reads EIO; EOF on a device likewise.
  if (n == 0) throw DriverError(ErrorKind::disconnected, describe() + ": end of file (the other side closed)");
  fail_errno("read");
}

std::string FdTransport::read_message(std::chrono::milliseconds deadline_ms) {
  if (fd_ < 0) throw DriverError(ErrorKind::disconnected, describe() + ": not open");
  return read_framed(framer_, deadline_ms, describe(),
                     [this](char* buf, std::size_t size, long left) { return read_some(buf, size, left); });
}

void FdTransport::close() {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
  framer_.clear();
}

void FdTransport::reconnect() {
  close();
  open();
}

}  // namespace junco::drivers::detail
