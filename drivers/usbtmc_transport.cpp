// USBTMC through the Linux character device (/dev/usbtmcN) with plain
// read()/write(). The usbtmc driver turns one write() into one bulk-out
// message and one read() into one bulk-in transfer; it does not report
// readable through poll() for such reads, so on a real device the deadline
// is the driver's own timeout (USBTMC_IOCTL_SET_TIMEOUT) around a blocking
// read. Any other character device that refuses that ioctl (the tests use a
// raw pseudo-terminal as a stand-in) is waited on with poll().
#include "drivers/errors.hpp"
#include "drivers/fd_transport.hpp"
#include "drivers/transport_impl.hpp"

#include <algorithm>
#include <cerrno>
#include <fcntl.h>
#include <linux/usb/tmc.h>
#include <sys/ioctl.h>
#include <unistd.h>

namespace junco::drivers::detail {

namespace {

class UsbtmcTransport final : public FdTransport {
 public:
  UsbtmcTransport(const std::string& path, TransportOptions options) : FdTransport(path, std::move(options)) {
    open();
  }
  std::string describe() const override {
    return "usbtmc " + path_ + (real_device_ ? "" : " (stand-in: not a usbtmc device, poll() deadlines)");
  }

 protected:
  int open_fd() override {
    int fd = ::open(path_.c_str(), O_RDWR | O_NOCTTY | O_CLOEXEC);
    if (fd < 0) fail_errno("open");
    __u32 timeout_ms = 1000;
    real_device_ = ::ioctl(fd, USBTMC_IOCTL_SET_TIMEOUT, &timeout_ms) == 0;
    if (!real_device_) ::fcntl(fd, F_SETFL, ::fcntl(fd, F_GETFL) | O_NONBLOCK);
    return fd;
  }

  std::size_t read_some(char* buf, std::size_t size, long wait_ms) override {
    if (!real_device_) return FdTransport::read_some(buf, size, wait_ms);
    // The usbtmc driver refuses timeouts under 100 ms (USBTMC_MIN_TIMEOUT).
    __u32 timeout_ms = static_cast<__u32>(std::max(100L, wait_ms));
    ::ioctl(fd_, USBTMC_IOCTL_SET_TIMEOUT, &timeout_ms);
    ssize_t n = ::read(fd_, buf, size);
    if (n > 0) return static_cast<std::size_t>(n);
    if (n < 0 && (errno == ETIMEDOUT || errno == EINTR)) return 0;
    if (n == 0) return 0;
    fail_errno("read");
  }

 private:
  bool real_device_ = false;
};

}  // namespace

std::unique_ptr<Transport> open_usbtmc(const std::string& path, const TransportOptions& options) {
  return std::make_unique<UsbtmcTransport>(path, options);
}

}  // namespace junco::drivers::detail
