#include "tools/sim/server.hpp"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <pty.h>
#include <sys/socket.h>
#include <termios.h>
#include <unistd.h>

#include <cerrno>
#include <chrono>
#include <cstring>
#include <stdexcept>
#include <thread>

namespace junco::sim {
namespace {

constexpr size_t max_line_bytes = 4096;  // longer input is discarded up to the next LF

bool write_all(int fd, const std::string& data) {
  size_t off = 0;
  while (off < data.size()) {
    const ssize_t n = ::write(fd, data.data() + off, data.size() - off);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return false;
    off += static_cast<size_t>(n);
  }
  return true;
}

// Reads lines from fd until EOF or a drop; for a pty, a drop only discards.
void serve_stream(int fd, const LineHandler& handler, bool can_close) {
  std::string buf;
  bool overlong = false;
  char chunk[1024];
  for (;;) {
    const ssize_t n = ::read(fd, chunk, sizeof chunk);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      if (!can_close) {  // pty with no client: the slave is closed; poll again
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
        continue;
      }
      return;
    }
    buf.append(chunk, static_cast<size_t>(n));
    size_t nl;
    while ((nl = buf.find('\n')) != std::string::npos) {
      std::string line = buf.substr(0, nl);
      buf.erase(0, nl + 1);
      if (overlong) {
        overlong = false;
        continue;
      }
      if (!line.empty() && line.back() == '\r') line.pop_back();
      const LineOutcome out = handler(line);
      if (out.close) {
        if (can_close) return;
        buf.clear();
        continue;
      }
      if (out.delay_ms > 0) std::this_thread::sleep_for(std::chrono::milliseconds(out.delay_ms));
      if (out.reply && !write_all(fd, *out.reply + "\n") && can_close) return;
    }
    if (buf.size() > max_line_bytes) {
      buf.clear();
      overlong = true;
    }
  }
}

}  // namespace

std::string start_tcp_endpoint(LineHandler handler) {
  const int lfd = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (lfd < 0) throw std::runtime_error(std::string("socket: ") + std::strerror(errno));
  const int one = 1;
  ::setsockopt(lfd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  sockaddr_in sa{};
  sa.sin_family = AF_INET;
  sa.sin_addr.s_addr = htonl(INADDR_LOOPBACK);  // local only
  sa.sin_port = 0;
  if (::bind(lfd, reinterpret_cast<sockaddr*>(&sa), sizeof sa) != 0 || ::listen(lfd, 16) != 0)
    throw std::runtime_error(std::string("bind/listen: ") + std::strerror(errno));
  socklen_t len = sizeof sa;
  ::getsockname(lfd, reinterpret_cast<sockaddr*>(&sa), &len);
  const int port = ntohs(sa.sin_port);
  std::thread([lfd, handler = std::move(handler)] {
    for (;;) {
      const int cfd = ::accept4(lfd, nullptr, nullptr, SOCK_CLOEXEC);
      if (cfd < 0) {
        if (errno == EINTR || errno == ECONNABORTED) continue;
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
        continue;
      }
      const int nodelay = 1;
      ::setsockopt(cfd, IPPROTO_TCP, TCP_NODELAY, &nodelay, sizeof nodelay);
      std::thread([cfd, &handler] {
        serve_stream(cfd, handler, true);
        ::close(cfd);
      }).detach();
    }
  }).detach();
  return "tcp:127.0.0.1:" + std::to_string(port);
}

std::string start_pty_endpoint(LineHandler handler) {
  int master = -1, slave = -1;
  char name[256] = {};
  if (::openpty(&master, &slave, name, nullptr, nullptr) != 0)
    throw std::runtime_error(std::string("openpty: ") + std::strerror(errno));
  termios t{};
  ::tcgetattr(slave, &t);
  ::cfmakeraw(&t);  // no echo, no line discipline: bytes pass as on a real port
  ::tcsetattr(slave, TCSANOW, &t);
  ::fcntl(master, F_SETFD, FD_CLOEXEC);
  // Keep our slave descriptor open so the master never sees a hang-up
  // between clients (the driver opens and closes the slave at will).
  std::thread([master, handler = std::move(handler)] { serve_stream(master, handler, false); }).detach();
  return std::string("serial:") + name;
}

}  // namespace junco::sim
