// junco-sim as a real child process for tests, plus a raw line client.
//
//   junco::test::SimProcess sim({"--seed", "7", "--serial", "meter"});
//   std::string addr = sim.endpoint("source");        // "tcp:127.0.0.1:40123"
//   nlohmann::json st = sim.control("state?");        // one JSON reply
//   junco::test::LineClient c(addr);                   // tcp:… or serial:/dev/pts/N
//   c.send("*IDN?"); auto reply = c.read_line(1s);
//
// The process contract (argv, ready line, control endpoint) is in
// docs/command-sets.md. The destructor stops the process (SIGTERM, SIGKILL).
#pragma once

#include "tests/support/process.hpp"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <termios.h>

#include <nlohmann/json.hpp>

#include <chrono>
#include <memory>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

#ifndef JUNCO_BIN_DIR
#error "JUNCO_BIN_DIR must be defined (tests/CMakeLists.txt does)"
#endif

namespace junco::test {

// A blocking line client on "tcp:HOST:PORT" or "serial:/dev/pts/N" (opened raw).
class LineClient {
 public:
  explicit LineClient(const std::string& address) {
    if (address.rfind("tcp:", 0) == 0) {
      const auto colon = address.rfind(':');
      const std::string host = address.substr(4, colon - 4);
      const int port = std::stoi(address.substr(colon + 1));
      fd_ = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
      sockaddr_in sa{};
      sa.sin_family = AF_INET;
      sa.sin_port = htons(static_cast<uint16_t>(port));
      ::inet_pton(AF_INET, host.c_str(), &sa.sin_addr);
      if (::connect(fd_, reinterpret_cast<sockaddr*>(&sa), sizeof sa) != 0) {
        ::close(fd_);
        throw std::runtime_error("connect " + address + ": " + std::strerror(errno));
      }
    } else if (address.rfind("serial:", 0) == 0) {
      const std::string path = address.substr(7, address.find('?') == std::string::npos ? std::string::npos
                                                                                         : address.find('?') - 7);
      fd_ = ::open(path.c_str(), O_RDWR | O_NOCTTY | O_CLOEXEC);
      if (fd_ < 0) throw std::runtime_error("open " + path + ": " + std::strerror(errno));
      termios t{};
      ::tcgetattr(fd_, &t);
      ::cfmakeraw(&t);
      ::tcsetattr(fd_, TCSANOW, &t);
    } else {
      throw std::invalid_argument("LineClient: unsupported address " + address);
    }
  }
  LineClient(const LineClient&) = delete;
  LineClient& operator=(const LineClient&) = delete;
  ~LineClient() { close(); }

  void close() {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }

  // Writes the bytes as given plus LF.
  void send(std::string_view line) { send_raw(std::string(line) + "\n"); }
  void send_raw(const std::string& bytes) {
    size_t off = 0;
    while (off < bytes.size()) {
      const ssize_t n = send_or_write(fd_, bytes.data() + off, bytes.size() - off);
      if (n <= 0) throw std::runtime_error("LineClient: write failed");
      off += static_cast<size_t>(n);
    }
  }

  // Next line without LF (a trailing CR is kept, so tests see the terminator);
  // nullopt on timeout or when the peer closed.
  std::optional<std::string> read_line(std::chrono::milliseconds deadline) {
    const auto until = std::chrono::steady_clock::now() + deadline;
    for (;;) {
      if (auto nl = buffer_.find('\n'); nl != std::string::npos) {
        std::string line = buffer_.substr(0, nl);
        buffer_.erase(0, nl + 1);
        return line;
      }
      if (closed_ || fd_ < 0) return std::nullopt;
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - std::chrono::steady_clock::now());
      if (left.count() <= 0) return std::nullopt;
      pollfd p{fd_, POLLIN, 0};
      const int r = ::poll(&p, 1, static_cast<int>(left.count()));
      if (r < 0 && errno == EINTR) continue;
      if (r <= 0) return std::nullopt;
      char chunk[4096];
      const ssize_t n = ::read(fd_, chunk, sizeof chunk);
      if (n <= 0) {
        closed_ = true;
        continue;
      }
      buffer_.append(chunk, static_cast<size_t>(n));
    }
  }

  std::optional<std::string> query(std::string_view line, std::chrono::milliseconds deadline = std::chrono::seconds(3)) {
    send(line);
    return read_line(deadline);
  }

  // True once the peer has closed (observed by a read).
  bool peer_closed() const { return closed_; }

 private:
  static ssize_t send_or_write(int fd, const char* p, size_t n) {
    const ssize_t r = ::send(fd, p, n, MSG_NOSIGNAL);
    if (r < 0 && errno == ENOTSOCK) return ::write(fd, p, n);
    return r;
  }
  int fd_ = -1;
  bool closed_ = false;
  std::string buffer_;
};

class SimProcess {
 public:
  explicit SimProcess(std::vector<std::string> extra_args = {}, ChildOptions options = {}) {
    std::vector<std::string> argv{std::string(JUNCO_BIN_DIR) + "/junco-sim"};
    argv.insert(argv.end(), extra_args.begin(), extra_args.end());
    process_ = std::make_unique<ChildProcess>(argv, options);
    const auto line = process_->read_line(std::chrono::seconds(10));
    if (!line) throw std::runtime_error("junco-sim printed no ready line");
    ready_ = nlohmann::json::parse(*line);
    if (!ready_.value("ready", false)) throw std::runtime_error("junco-sim not ready: " + *line);
  }

  const nlohmann::json& ready() const { return ready_; }
  std::string endpoint(std::string_view role) const { return ready_.at("endpoints").at(std::string(role)); }
  std::string family(std::string_view role) const { return ready_.at("families").at(std::string(role)); }

  // One control line → its JSON reply (throws on timeout). `quit` also
  // waits for the process to exit.
  nlohmann::json control(std::string_view line, std::chrono::milliseconds deadline = std::chrono::seconds(5)) {
    if (!control_) control_ = std::make_unique<LineClient>(endpoint("control"));
    const auto reply = control_->query(line, deadline);
    if (!reply) throw std::runtime_error("junco-sim control: no reply to " + std::string(line));
    if (line == "quit") process_->wait(std::chrono::seconds(5));
    return nlohmann::json::parse(*reply);
  }

  ChildProcess& process() { return *process_; }

 private:
  std::unique_ptr<ChildProcess> process_;
  nlohmann::json ready_;
  std::unique_ptr<LineClient> control_;
};

}  // namespace junco::test
