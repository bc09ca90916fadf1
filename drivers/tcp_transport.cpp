// Raw TCP socket through Boost.Asio, blocking calls with a deadline each:
// start the asynchronous operation, run the io_context for at most the time
// left, cancel what has not finished (the blocking-client-with-timeouts
// pattern). The socket stays open after a read timeout; the session decides
// whether to reconnect.
#include "drivers/errors.hpp"
#include "drivers/framer.hpp"
#include "drivers/transport_impl.hpp"

#include <utility>  // before Asio: Boost 1.74 awaitable.hpp needs std::exchange

#include <boost/asio.hpp>

namespace junco::drivers::detail {

namespace {

namespace asio = boost::asio;
using asio::ip::tcp;

class TcpTransport final : public Transport {
 public:
  TcpTransport(const Address& address, TransportOptions options)
      : host_(address.host), port_(address.port), options_(std::move(options)), framer_(options_.read_terminator) {
    connect();
  }

  void write_message(std::string_view message) override {
    ensure_open();
    std::string out = std::string(message) + options_.write_terminator;
    boost::system::error_code result = asio::error::would_block;
    asio::async_write(socket_, asio::buffer(out), [&](const boost::system::error_code& ec, std::size_t) { result = ec; });
    run_for(options_.connect_timeout);
    if (result == asio::error::would_block || result == asio::error::operation_aborted)
      throw DriverError(ErrorKind::timeout, describe() + ": write did not complete in time");
    if (result) fail(result, "write");
  }

  std::string read_message(std::chrono::milliseconds deadline_ms) override {
    ensure_open();
    return read_framed(framer_, deadline_ms, describe(), [this](char* buf, std::size_t size, long left) {
      boost::system::error_code result = asio::error::would_block;
      std::size_t got = 0;
      socket_.async_read_some(asio::buffer(buf, size), [&](const boost::system::error_code& ec, std::size_t n) {
        result = ec;
        got = n;
      });
      run_for(std::chrono::milliseconds(left));
      if (!result || result == asio::error::would_block || result == asio::error::operation_aborted) return got;
      framer_.feed(std::string_view(buf, got));  // keep what arrived with the error
      fail(result, "read");
    });
  }

  void close() override {
    boost::system::error_code ignored;
    socket_.shutdown(tcp::socket::shutdown_both, ignored);
    socket_.close(ignored);
    framer_.clear();
  }

  void reconnect() override {
    close();
    connect();
  }

  std::string describe() const override { return "tcp " + host_ + ":" + std::to_string(port_); }
  bool clean_after_reconnect() const override { return true; }

 private:
  void connect() {
    boost::system::error_code ec;
    tcp::resolver resolver(io_);
    auto endpoints = resolver.resolve(host_, std::to_string(port_), ec);
    if (ec) throw DriverError(ErrorKind::disconnected, describe() + ": cannot resolve host: " + ec.message());
    boost::system::error_code result = asio::error::would_block;
    asio::async_connect(socket_, endpoints,
                        [&](const boost::system::error_code& e, const tcp::endpoint&) { result = e; });
    run_for(options_.connect_timeout);
    if (result == asio::error::would_block || result == asio::error::operation_aborted) {
      close();
      throw DriverError(ErrorKind::disconnected, describe() + ": connect timed out after " +
                                                     std::to_string(options_.connect_timeout.count()) + " ms");
    }
    if (result) {
      close();
      throw DriverError(ErrorKind::disconnected, describe() + ": connect failed: " + result.message());
    }
    socket_.set_option(tcp::no_delay(true), ec);
    framer_.clear();
  }

  void ensure_open() {
    if (!socket_.is_open()) throw DriverError(ErrorKind::disconnected, describe() + ": not connected");
  }

  // Runs the pending operation for at most `timeout`; cancels it if it is
  // still pending, and waits for its handler so no callback outlives us.
  void run_for(std::chrono::milliseconds timeout) {
    io_.restart();
    io_.run_for(timeout);
    if (!io_.stopped()) {
      boost::system::error_code ignored;
      socket_.cancel(ignored);
      io_.restart();
      io_.run();
    }
  }

  [[noreturn]] void fail(const boost::system::error_code& ec, const char* what) {
    close();
    if (ec == asio::error::eof)
      throw DriverError(ErrorKind::disconnected, describe() + ": connection closed by the instrument");
    throw DriverError(ErrorKind::disconnected, describe() + ": " + what + " failed: " + ec.message());
  }

  std::string host_;
  std::uint16_t port_;
  TransportOptions options_;
  LineFramer framer_;
  asio::io_context io_;
  tcp::socket socket_{io_};
};

}  // namespace

std::unique_ptr<Transport> open_tcp(const Address& address, const TransportOptions& options) {
  return std::make_unique<TcpTransport>(address, options);
}

}  // namespace junco::drivers::detail
