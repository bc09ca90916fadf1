// JSON-RPC server on a Unix domain socket (see rpc_server.hpp).
#include "daemon/rpc_server.hpp"

#include "daemon/service_params.hpp"

#include <boost/asio/bind_executor.hpp>
#include <boost/asio/dispatch.hpp>
#include <boost/asio/local/stream_protocol.hpp>
#include <boost/asio/post.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/strand.hpp>
#include <boost/asio/write.hpp>

#include <grp.h>       // getgrnam_r
#include <sys/resource.h>  // getrlimit
#include <sys/socket.h>  // SO_PEERCRED
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <deque>
#include <map>
#include <mutex>
#include <set>
#include <stdexcept>
#include <unordered_map>

namespace junco::daemon {

namespace asio = boost::asio;
using stream = asio::local::stream_protocol;

namespace {

std::string errno_text(int err) { return std::strerror(err); }

std::string octal_mode(mode_t mode) {
  char text[8];
  std::snprintf(text, sizeof text, "%04o", static_cast<unsigned>(mode & 07777));
  return text;
}

std::string parent_dir(const std::string& path) {
  const auto slash = path.rfind('/');
  if (slash == std::string::npos) return ".";
  if (slash == 0) return "/";
  return path.substr(0, slash);
}

// The automatic connection cap: half the descriptor limit (the rest is for
// the store, the instruments and the accept() itself), at most 1024.
std::size_t auto_max_connections() {
  rlimit lim{};
  if (::getrlimit(RLIMIT_NOFILE, &lim) != 0 || lim.rlim_cur == RLIM_INFINITY) return 1024;
  return std::clamp<std::size_t>(static_cast<std::size_t>(lim.rlim_cur / 2), 4, 1024);
}

// Event kinds the Service publishes (service.hpp).
const std::set<std::string>& known_event_kinds() {
  static const std::set<std::string> kinds{"job.state", "job.progress", "point.added"};
  return kinds;
}

}  // namespace

int lookup_group(const std::string& name) {
  std::array<char, 4096> buf{};
  group entry{};
  group* found = nullptr;
  const int rc = getgrnam_r(name.c_str(), &entry, buf.data(), buf.size(), &found);
  if (rc != 0 || !found) throw std::runtime_error("unknown group '" + name + "' for the socket");
  return static_cast<int>(found->gr_gid);
}

void prepare_socket_dir(const std::string& dir, int gid) {
  struct stat st{};
  if (::stat(dir.c_str(), &st) != 0) {
    if (errno != ENOENT) throw std::runtime_error("cannot inspect socket directory " + dir + ": " + errno_text(errno));
    if (::mkdir(dir.c_str(), 0750) != 0)
      throw std::runtime_error("cannot create socket directory " + dir + ": " + errno_text(errno));
    // mkdir honours the umask; set the mode we promise explicitly.
    if (::chmod(dir.c_str(), 0750) != 0 || (gid >= 0 && ::chown(dir.c_str(), static_cast<uid_t>(-1), static_cast<gid_t>(gid)) != 0))
      throw std::runtime_error("cannot set owner/mode of socket directory " + dir + ": " + errno_text(errno));
    return;
  }
  if (const std::string problem = socket_dir_problem(dir, st); !problem.empty()) throw std::runtime_error(problem);
}

std::string socket_dir_problem(const std::string& dir, const struct stat& st) {
  if (!S_ISDIR(st.st_mode)) return "socket directory " + dir + " exists and is not a directory";
  if (st.st_uid != geteuid())
    return "refusing socket directory " + dir + ": owned by uid " + std::to_string(st.st_uid) + ", not by this daemon's user (uid " +
           std::to_string(geteuid()) + ")";
  if ((st.st_mode & S_IRWXO) != 0)
    return "refusing socket directory " + dir + ": mode " + octal_mode(st.st_mode) + " lets every user in; make it 0750 (chmod 0750 " +
           dir + ")";
  return "";
}

// One client connection. All members except the atomics and the event filter
// are touched only on strand_.
class Connection : public std::enable_shared_from_this<Connection> {
 public:
  Connection(stream::socket socket, std::shared_ptr<RpcServer::Impl> server);
  ~Connection();
  Connection(const Connection&) = delete;
  Connection& operator=(const Connection&) = delete;
  void start();
  void close(std::string_view why);
  void on_event(const Event& event);  // publisher's thread

 private:
  void read_more();
  void handle_lines(std::size_t n);
  void handle_line(std::string_view line);
  Json dispatch(const rpc::Request& req);
  Json subscribe(const Json& params);
  Json unsubscribe();
  void enqueue(std::string line);
  void write_next();
  void arm_idle_timer();

  stream::socket socket_;
  asio::strand<asio::any_io_executor> strand_;
  asio::steady_timer idle_timer_;
  std::shared_ptr<RpcServer::Impl> server_holder_;  // keeps the server alive while handlers run
  RpcServer::Impl& server_;
  rpc::LineFramer framer_;
  std::array<char, 16384> read_buf_{};
  std::deque<std::string> out_;
  bool writing_ = false;
  bool reading_ = false;
  bool closed_ = false;
  bool read_eof_ = false;  // the client shut its write side: finish writing, then close
  Caller caller_;
  std::string peer_;  // "pid 123 uid 1000" for logs
  std::atomic<std::size_t> queued_{0};  // messages enqueued or posted, not yet written
  std::atomic<bool> dropping_{false};
  std::mutex filter_mutex_;  // guards subscription_ and kinds_ (read by the publisher's thread)
  std::optional<EventBus::Token> subscription_;
  std::set<std::string> kinds_;
};

class RpcServer::Impl : public std::enable_shared_from_this<RpcServer::Impl> {
 public:
  Impl(asio::io_context& io, Service& service, ServerOptions options)
      : io_(io), service_(service), options_(std::move(options)), acceptor_(io), retry_timer_(io) {
    if (options_.max_connections == 0) options_.max_connections = auto_max_connections();
  }

  void log(LogLevel level, const std::string& message) const { options_.log.write(level, message); }

  void start() {
    const auto& path = options_.socket_path;
    if (path.empty()) throw std::runtime_error("no socket path configured");
    if (path.size() >= sizeof(sockaddr_un{}.sun_path))
      throw std::runtime_error("socket path too long (" + std::to_string(path.size()) + " bytes): " + path);
    const int gid = options_.group.empty() ? -1 : lookup_group(options_.group);
    prepare_socket_dir(parent_dir(path), gid);
    remove_stale_socket(path);
    stream::endpoint endpoint(path);
    acceptor_.open(endpoint.protocol());
    acceptor_.bind(endpoint);
    // bind creates the file with the umask; set the promised mode explicitly.
    if (::chmod(path.c_str(), 0660) != 0) throw std::runtime_error("cannot chmod socket " + path + ": " + errno_text(errno));
    if (gid >= 0 && ::chown(path.c_str(), static_cast<uid_t>(-1), static_cast<gid_t>(gid)) != 0)
      throw std::runtime_error("cannot give socket " + path + " to group " + options_.group + ": " + errno_text(errno));
    acceptor_.listen(asio::socket_base::max_listen_connections);
    bound_ = true;
    log(LogLevel::info, "listening on " + path + " (at most " + std::to_string(options_.max_connections) + " clients)");
    accept();
  }

  void stop() {
    std::vector<std::shared_ptr<Connection>> live;
    {
      std::lock_guard lock(mutex_);
      if (stopped_) return;
      stopped_ = true;
      for (auto& [raw, weak] : connections_)
        if (auto c = weak.lock()) live.push_back(std::move(c));
    }
    asio::post(acceptor_.get_executor(), [self = shared_from_this()] {
      boost::system::error_code ignored;
      self->acceptor_.close(ignored);
      self->retry_timer_.cancel();
    });
    for (auto& c : live) c->close("daemon stopping");
    if (bound_) ::unlink(options_.socket_path.c_str());
  }

  void forget(Connection* c) {
    std::lock_guard lock(mutex_);
    connections_.erase(c);
  }

  std::size_t count() const {
    std::lock_guard lock(mutex_);
    return connections_.size();
  }

  Service& service() { return service_; }
  const ServerOptions& options() const { return options_; }

 private:
  void remove_stale_socket(const std::string& path) {
    struct stat st{};
    if (::lstat(path.c_str(), &st) != 0) return;
    if (!S_ISSOCK(st.st_mode)) throw std::runtime_error(path + " exists and is not a socket; refusing to replace it");
    stream::socket probe(io_);
    boost::system::error_code ec;
    probe.connect(stream::endpoint(path), ec);
    if (!ec) throw std::runtime_error("another juncod is already listening on " + path);
    ::unlink(path.c_str());
    log(LogLevel::info, "removed stale socket " + path);
  }

  void accept() {
    acceptor_.async_accept(io_, [self = shared_from_this()](boost::system::error_code ec, stream::socket s) {
      if (ec == asio::error::operation_aborted || !self->acceptor_.is_open()) return;
      if (ec == asio::error::no_descriptors || ec.value() == ENFILE || ec == asio::error::no_buffer_space ||
          ec == asio::error::no_memory) {
        // Retrying at once would fail at once: wait for descriptors to free up.
        if (!self->starved_) self->log(LogLevel::warn, "accept failed: " + ec.message() + "; retrying every " +
                                                   std::to_string(self->options_.accept_retry_ms) + " ms");
        self->starved_ = true;
        self->retry_timer_.expires_after(std::chrono::milliseconds(self->options_.accept_retry_ms));
        self->retry_timer_.async_wait([self](boost::system::error_code tec) {
          if (!tec) self->accept();
        });
        return;
      }
      if (self->starved_) self->log(LogLevel::info, "accepting clients again");
      self->starved_ = false;
      if (ec) self->log(LogLevel::warn, "accept failed: " + ec.message());
      else self->admit(std::move(s));
      self->accept();
    });
  }

  void admit(stream::socket s) {
    bool full = false;
    {
      std::lock_guard lock(mutex_);
      if (stopped_) return;
      full = connections_.size() >= options_.max_connections;
    }
    if (full) {
      refuse_busy(std::move(s));
      return;
    }
    auto c = std::make_shared<Connection>(std::move(s), shared_from_this());
    {
      std::lock_guard lock(mutex_);
      if (stopped_) return;
      connections_[c.get()] = c;
    }
    c->start();
  }

  // One error line, best effort and never blocking, then close.
  void refuse_busy(stream::socket s) {
    static const std::string line = rpc::to_line(rpc::make_error(
        nullptr, RpcCode::unavailable, "server busy: too many clients connected; try again later"));
    boost::system::error_code ignored;
    s.non_blocking(true, ignored);
    s.write_some(asio::buffer(line), ignored);
    s.shutdown(stream::socket::shutdown_both, ignored);
    s.close(ignored);
    const auto n = ++refused_;
    // 1st, 10th, 100th, ...: the log shows the pressure without flooding.
    if (n == 1 || n == 10 || n == 100 || n % 1000 == 0)
      log(LogLevel::warn, "refused client #" + std::to_string(n) + ": " + std::to_string(options_.max_connections) + " clients connected");
  }

  asio::io_context& io_;
  Service& service_;
  ServerOptions options_;
  stream::acceptor acceptor_;
  asio::steady_timer retry_timer_;  // accept back-off when out of descriptors
  bool starved_ = false;           // touched only by the accept chain
  std::atomic<unsigned long> refused_{0};
  bool bound_ = false;
  mutable std::mutex mutex_;  // guards connections_ and stopped_
  std::unordered_map<Connection*, std::weak_ptr<Connection>> connections_;
  bool stopped_ = false;
};

Connection::Connection(stream::socket socket, std::shared_ptr<RpcServer::Impl> server)
    : socket_(std::move(socket)), strand_(asio::make_strand(socket_.get_executor())), idle_timer_(strand_),
      server_holder_(std::move(server)), server_(*server_holder_), framer_(server_.options().max_line_bytes) {
  ucred cred{};
  socklen_t len = sizeof cred;
  if (::getsockopt(socket_.native_handle(), SOL_SOCKET, SO_PEERCRED, &cred, &len) == 0) {
    caller_ = Caller{static_cast<int>(cred.pid), static_cast<int>(cred.uid), static_cast<int>(cred.gid)};
  }
  peer_ = "pid " + std::to_string(caller_.pid) + " uid " + std::to_string(caller_.uid);
}

Connection::~Connection() {
  if (subscription_) server_.service().events().unsubscribe(*subscription_);
}

void Connection::start() {
  server_.log(LogLevel::debug, "client connected: " + peer_);
  asio::dispatch(strand_, [self = shared_from_this()] {
    self->arm_idle_timer();
    self->read_more();
  });
}

// (Re)starts the idle countdown; on the strand. Setting a new expiry cancels
// the previous wait, whose handler then sees operation_aborted.
void Connection::arm_idle_timer() {
  const unsigned ms = server_.options().idle_timeout_ms;
  if (ms == 0 || closed_) return;
  idle_timer_.expires_after(std::chrono::milliseconds(ms));
  idle_timer_.async_wait(asio::bind_executor(strand_, [self = shared_from_this(), ms](boost::system::error_code ec) {
    if (ec || self->closed_) return;
    bool subscribed = false;
    {
      std::lock_guard lock(self->filter_mutex_);
      subscribed = self->subscription_.has_value();
    }
    if (subscribed || self->writing_ || !self->out_.empty()) {
      self->arm_idle_timer();  // waiting for events, or still being answered
      return;
    }
    self->server_.log(LogLevel::info, "client " + self->peer_ + " closed: sent nothing for " + std::to_string(ms / 1000.0).substr(0, 5) + " s");
    self->close("idle");
  }));
}

void Connection::close(std::string_view why) {
  asio::dispatch(strand_, [self = shared_from_this(), reason = std::string(why)] {
    if (self->closed_) return;
    self->closed_ = true;
    self->idle_timer_.cancel();
    self->unsubscribe();
    boost::system::error_code ignored;
    self->socket_.shutdown(stream::socket::shutdown_both, ignored);
    self->socket_.close(ignored);
    self->server_.forget(self.get());
    self->server_.log(LogLevel::debug, "client " + self->peer_ + " closed: " + reason);
  });
}

void Connection::read_more() {
  if (closed_ || reading_ || read_eof_) return;
  if (out_.size() >= server_.options().pause_reading_at) return;  // write_next resumes
  reading_ = true;
  socket_.async_read_some(asio::buffer(read_buf_), asio::bind_executor(strand_, [self = shared_from_this()](
                                                                                     boost::system::error_code ec, std::size_t n) {
    self->reading_ = false;
    if (ec == asio::error::eof) {
      // A half-closed client still gets every reply it asked for.
      self->read_eof_ = true;
      if (!self->writing_) self->close("end of stream");
      return;
    }
    if (ec) {
      self->close(ec.message());
      return;
    }
    self->arm_idle_timer();
    self->handle_lines(n);
    self->read_more();
  }));
}

void Connection::handle_lines(std::size_t n) {
  for (auto& line : framer_.feed(std::string_view(read_buf_.data(), n))) {
    if (closed_) return;
    if (line.kind == rpc::LineFramer::LineKind::too_long) {
      enqueue(rpc::to_line(rpc::make_error(nullptr, RpcCode::invalid_request,
                                           "invalid request: line longer than " +
                                               std::to_string(server_.options().max_line_bytes) +
                                               " bytes; discarded up to the next newline")));
      continue;
    }
    handle_line(line.text);
  }
}

void Connection::handle_line(std::string_view line) {
  const auto reply = rpc::respond(rpc::parse_line(line), [this](const rpc::Request& req) { return dispatch(req); });
  if (reply) enqueue(rpc::to_line(*reply));
}

// events.subscribe / events.unsubscribe are answered here (they belong to
// the connection); everything else goes to the Service (rpc::answer).
Json Connection::dispatch(const rpc::Request& req) {
  const rpc::LocalMethod local = [this](const rpc::Request& r) -> std::optional<Json> {
    if (r.method == "events.subscribe") return subscribe(r.params);
    if (r.method == "events.unsubscribe") {
      check_call("events.unsubscribe", r.params);  // the params of its row in daemon/methods.hpp
      return unsubscribe();
    }
    return std::nullopt;
  };
  return rpc::answer(server_.service(), req, caller_, local, [this](const std::string& what) { server_.log(LogLevel::error, what); });
}

Json Connection::subscribe(const Json& params) {
  check_call("events.subscribe", params);
  std::set<std::string> kinds;
  if (const auto it = params.find("kinds"); it != params.end()) {
    if (!it->is_array()) throw RequestError(RpcCode::invalid_params, "invalid params: \"kinds\" must be an array of strings");
    for (const auto& k : *it) {
      if (!k.is_string() || !known_event_kinds().count(k.get<std::string>()))
        throw RequestError(RpcCode::invalid_params, "invalid params: unknown event kind " + k.dump() +
                                                        " (known: job.state, job.progress, point.added)");
      kinds.insert(k.get<std::string>());
    }
  } else {
    kinds = known_event_kinds();
  }
  std::lock_guard lock(filter_mutex_);
  kinds_ = kinds;
  if (!subscription_) {
    std::weak_ptr<Connection> weak = shared_from_this();
    subscription_ = server_.service().events().subscribe([weak](const Event& e) {
      if (auto self = weak.lock()) self->on_event(e);
    });
  }
  return Json{{"kinds", Json(kinds)}};
}

Json Connection::unsubscribe() {
  std::optional<EventBus::Token> token;
  {
    std::lock_guard lock(filter_mutex_);
    token.swap(subscription_);
    kinds_.clear();
  }
  // Outside the lock: the bus may be calling on_event right now.
  if (token) server_.service().events().unsubscribe(*token);
  return Json{{"kinds", Json::array()}};
}

void Connection::on_event(const Event& event) {
  {
    std::lock_guard lock(filter_mutex_);
    if (!kinds_.count(event.kind)) return;
  }
  if (dropping_) return;
  if (queued_.fetch_add(1) >= server_.options().max_queued_messages) {
    queued_.fetch_sub(1);
    if (!dropping_.exchange(true)) {
      server_.log(LogLevel::warn, "dropping subscriber " + peer_ + ": " + std::to_string(server_.options().max_queued_messages) +
                              " messages queued and not read");
      close("slow subscriber");
    }
    return;
  }
  asio::post(strand_, [self = shared_from_this(), event] {
    self->queued_.fetch_sub(1);  // enqueue counts it again
    self->enqueue(rpc::to_line(rpc::make_notification(event.kind, event.data)));
  });
}

void Connection::enqueue(std::string line) {
  if (closed_) return;
  queued_.fetch_add(1);
  out_.push_back(std::move(line));
  if (!writing_) write_next();
}

void Connection::write_next() {
  if (closed_ || out_.empty()) {
    writing_ = false;
    if (read_eof_) close("end of stream");
    else read_more();
    return;
  }
  writing_ = true;
  asio::async_write(socket_, asio::buffer(out_.front()),
                    asio::bind_executor(strand_, [self = shared_from_this()](boost::system::error_code ec, std::size_t) {
                      if (ec) {
                        self->close("write failed: " + ec.message());
                        return;
                      }
                      self->out_.pop_front();
                      self->queued_.fetch_sub(1);
                      self->write_next();
                    }));
}

RpcServer::RpcServer(asio::io_context& io, Service& service, ServerOptions options)
    : impl_(std::make_shared<Impl>(io, service, std::move(options))) {}

RpcServer::~RpcServer() { stop(); }

void RpcServer::start() { impl_->start(); }
void RpcServer::stop() { impl_->stop(); }
std::size_t RpcServer::connection_count() const { return impl_->count(); }

}  // namespace junco::daemon
