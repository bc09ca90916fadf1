#include "daemon/supervisor.hpp"

#include "daemon/bench.hpp"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/signalfd.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cmath>
#include <cstring>
#include <deque>
#include <optional>
#include <thread>

namespace junco::daemon {

std::string make_bench_safe_alone(const Config& config, int attempts, std::chrono::milliseconds gap, const Log& log) {
  std::string errors;
  for (int k = 0; k < std::max(1, attempts); ++k) {
    if (k > 0) std::this_thread::sleep_for(gap);
    try {
      // Opening is lazy (a dialect and a spec; the connection is made by the
      // first command), so the supply gets its OUTP OFF first even when a
      // later instrument does not answer.
      const auto bench = open_bench(config, log);
      bench->log = log;
      errors = bench->make_safe();
      if (const std::string parked = bench->park_chamber(config.safety.chamber_idle_k); !parked.empty())
        errors += (errors.empty() ? "" : "; ") + parked;
      for (const auto& m : bench->missing) errors += (errors.empty() ? "" : "; ") + m;
    } catch (const std::exception& e) {
      errors = std::string("cannot open the bench: ") + e.what();
    }
    if (errors.empty()) return errors;
  }
  return errors;
}

namespace {

using Clock = std::chrono::steady_clock;

std::string signal_name(int sig) {
  switch (sig) {
    case SIGKILL: return "SIGKILL";
    case SIGSEGV: return "SIGSEGV";
    case SIGABRT: return "SIGABRT";
    case SIGTERM: return "SIGTERM";
    case SIGINT: return "SIGINT";
    case SIGHUP: return "SIGHUP";
    case SIGBUS: return "SIGBUS";
    case SIGFPE: return "SIGFPE";
    case SIGILL: return "SIGILL";
    default: return "signal " + std::to_string(sig);
  }
}

std::string describe_status(int status) {
  if (WIFEXITED(status)) return "exited with status " + std::to_string(WEXITSTATUS(status));
  if (WIFSIGNALED(status)) return std::string("killed by ") + signal_name(WTERMSIG(status)) + (WCOREDUMP(status) ? " (core dumped)" : "");
  return "ended (status " + std::to_string(status) + ")";
}

std::string seconds_text(double s) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f s", s);
  return buf;
}

class Supervisor {
 public:
  Supervisor(const Config& config, const SupervisorOptions& options) : config_(config), o_(options) {}

  int run() {
    sigset_t set;
    sigemptyset(&set);
    for (int s : {SIGCHLD, SIGTERM, SIGINT, SIGHUP}) sigaddset(&set, s);
    // Blocked and read from a signalfd: no handler races with fork/waitpid.
    if (::sigprocmask(SIG_BLOCK, &set, &old_mask_) != 0) return fail("sigprocmask");
    sfd_ = ::signalfd(-1, &set, SFD_CLOEXEC | SFD_NONBLOCK);
    if (sfd_ < 0) return fail("signalfd");

    // No make-safe here: the worker's first act on the bench is exactly that,
    // before it opens the database (make_bench_safe_first), and it listens
    // on its socket first, so clients see why a mute bench takes long. A
    // worker that dies before that is followed by safe_now() below.
    log(LogLevel::info, "starting the worker; it makes the bench safe at start, before it opens the database");

    for (;;) {
      const auto now = Clock::now();
      if (worker_ < 0) {
        if (stopping_) return finish(0);
        if (now >= restart_at_) {
          if (!spawn()) return finish(1);
          continue;
        }
      }
      int timeout_ms = -1;
      if (worker_ < 0) timeout_ms = ms_until(restart_at_);
      else if (stopping_) timeout_ms = ms_until(kill_at_);
      pollfd fds[2] = {{sfd_, POLLIN, 0}, {ready_fd_, POLLIN, 0}};
      const int n = ::poll(fds, ready_fd_ >= 0 ? 2 : 1, timeout_ms);
      if (n < 0 && errno != EINTR) return fail("poll");
      if (n > 0 && ready_fd_ >= 0 && (fds[1].revents & (POLLIN | POLLHUP | POLLERR))) read_ready();
      if (n > 0 && (fds[0].revents & POLLIN)) {
        if (auto code = handle_signals()) return finish(*code);
      }
      if (worker_ > 0 && stopping_ && Clock::now() >= kill_at_ && !killed_) {
        log(LogLevel::warn, "worker pid " + std::to_string(worker_) + " did not stop within " +
                        std::to_string(o_.stop_timeout.count()) + " s: SIGKILL");
        ::kill(worker_, SIGKILL);
        killed_ = true;
      }
    }
  }

 private:
  void log(LogLevel level, const std::string& message) const {
    if (o_.log.enabled(level)) o_.log.write(level, "supervisor: " + message);
  }

  int fail(const char* what) {
    log(LogLevel::error, std::string(what) + ": " + std::strerror(errno));
    return finish(1);
  }

  int finish(int code) {
    if (sfd_ >= 0) ::close(sfd_);
    sfd_ = -1;
    if (ready_fd_ >= 0) ::close(ready_fd_);
    ready_fd_ = -1;
    ::sigprocmask(SIG_SETMASK, &old_mask_, nullptr);
    return code;
  }

  static int ms_until(Clock::time_point t) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(t - Clock::now()).count();
    return static_cast<int>(std::clamp<long long>(left, 0, 60000));
  }

  // Make-safe now; logs how long it took, measured from `since` when given.
  void safe_now(const std::string& when, std::optional<Clock::time_point> since = std::nullopt) {
    const auto t0 = since.value_or(Clock::now());
    const std::string errors = make_bench_safe_alone(config_, 3, std::chrono::milliseconds(200), o_.log);
    const double ms = std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
    char took[48];
    std::snprintf(took, sizeof took, "%.0f ms", ms);
    if (errors.empty()) log(LogLevel::info, "make-safe " + when + ": every output off, scanner open (" + took + ")");
    else log(LogLevel::error, "make-safe " + when + " failed (" + took + "): " + errors + "; check the bench");
  }

  bool spawn() {
    int ready[2];
    if (::pipe2(ready, O_CLOEXEC) != 0) {
      log(LogLevel::error, std::string("pipe: ") + std::strerror(errno));
      return false;
    }
    // Everything the child needs is built before fork: after it only
    // async-signal-safe calls.
    std::vector<std::string> args = o_.worker_argv;
    args.push_back("--worker-ready-fd");
    args.push_back(std::to_string(ready[1]));
    std::vector<char*> argv;
    for (auto& a : args) argv.push_back(a.data());
    argv.push_back(nullptr);
    const pid_t self = ::getpid();
    const pid_t pid = ::fork();
    if (pid == 0) {
      // The worker stops cleanly (outputs off) if this supervisor dies.
      if (::prctl(PR_SET_PDEATHSIG, SIGTERM) != 0) ::_exit(126);
      if (::getppid() != self) ::_exit(126);  // died before the line above took effect
      ::fcntl(ready[1], F_SETFD, 0);          // keep the ready pipe across exec
      struct sigaction dfl {};
      dfl.sa_handler = SIG_DFL;
      for (int s : {SIGCHLD, SIGTERM, SIGINT, SIGHUP}) ::sigaction(s, &dfl, nullptr);
      ::sigprocmask(SIG_SETMASK, &old_mask_, nullptr);
      ::execv(o_.exe.c_str(), argv.data());
      ::_exit(127);
    }
    ::close(ready[1]);
    if (pid < 0) {
      ::close(ready[0]);
      log(LogLevel::error, std::string("fork: ") + std::strerror(errno));
      return false;
    }
    // Never block on it: a read after the worker's death must return at once.
    ::fcntl(ready[0], F_SETFL, ::fcntl(ready[0], F_GETFL) | O_NONBLOCK);
    worker_ = pid;
    ready_fd_ = ready[0];
    serving_ = false;
    killed_ = false;
    started_ = Clock::now();
    log(LogLevel::info, "worker pid " + std::to_string(pid) + " started");
    return true;
  }

  void read_ready() {
    char c = 0;
    const ssize_t n = ::read(ready_fd_, &c, 1);
    if (n == 1 && c == 'R') {
      serving_ = true;
      log(LogLevel::info, "worker pid " + std::to_string(worker_) + " serving");
    }
    if (n < 0 && errno == EAGAIN) return;  // nothing yet
    if (n <= 0 || serving_) {
      ::close(ready_fd_);
      ready_fd_ = -1;
    }
  }

  // Returns an exit code when the supervisor is done.
  std::optional<int> handle_signals() {
    signalfd_siginfo si{};
    while (::read(sfd_, &si, sizeof si) == static_cast<ssize_t>(sizeof si)) {
      const int sig = static_cast<int>(si.ssi_signo);
      if (sig == SIGCHLD) {
        if (auto code = reap()) return code;
        continue;
      }
      if (stopping_) continue;
      stopping_ = true;
      if (worker_ < 0) {
        log(LogLevel::info, signal_name(sig) + ": stopping (no worker running; outputs are off)");
        return 0;
      }
      log(LogLevel::info, signal_name(sig) + ": stopping worker pid " + std::to_string(worker_) + " (it turns the outputs off)");
      ::kill(worker_, SIGTERM);
      kill_at_ = Clock::now() + o_.stop_timeout;
    }
    return std::nullopt;
  }

  std::optional<int> reap() {
    int status = 0;
    pid_t pid;
    while ((pid = ::waitpid(-1, &status, WNOHANG)) > 0) {
      if (pid != worker_) continue;
      const auto died = Clock::now();
      worker_ = -1;
      if (ready_fd_ >= 0) {
        // A ready byte may still sit in the pipe if the worker died right after serving.
        read_ready();
        if (ready_fd_ >= 0) ::close(ready_fd_);
        ready_fd_ = -1;
      }
      const std::string what = "worker pid " + std::to_string(pid) + " " + describe_status(status);
      const bool clean = WIFEXITED(status) && WEXITSTATUS(status) == 0;
      if (stopping_) {
        if (clean) {
          log(LogLevel::info, what + ": stopped");
          return 0;
        }
        log(LogLevel::warn, what + " while stopping");
        safe_now("after the worker's death", died);
        return 0;
      }
      if (clean) {
        // Someone stopped the worker itself (SIGTERM to its pid): it made the
        // bench safe on the way out; nothing to restart.
        log(LogLevel::info, what + " by itself; supervisor exits too");
        return 0;
      }
      const double lived_s = std::chrono::duration<double>(died - started_).count();
      log(LogLevel::warn, what + " after " + seconds_text(lived_s) + (serving_ ? "" : ", before it served"));
      safe_now("after the worker's death", died);
      return schedule_restart(died);
    }
    return std::nullopt;
  }

  std::optional<int> schedule_restart(Clock::time_point died) {
    if (!serving_) {
      ++start_failures_;
      if (start_failures_ >= o_.start_failure_limit) {
        log(LogLevel::error, "giving up: the worker failed to start " + std::to_string(start_failures_) +
                         " times in a row (its error is logged above); outputs are off; fix the cause and start juncod again");
        return 1;
      }
      auto delay = o_.start_backoff * (1LL << std::min(start_failures_ - 1, 20));
      if (delay > o_.start_backoff_max) delay = o_.start_backoff_max;
      log(LogLevel::warn, "restarting in " + seconds_text(std::chrono::duration<double>(delay).count()) + " (start failure " +
                      std::to_string(start_failures_) + " of " + std::to_string(o_.start_failure_limit) + ")");
      restart_at_ = died + delay;
      return std::nullopt;
    }
    start_failures_ = 0;
    crashes_.push_back(died);
    while (!crashes_.empty() && died - crashes_.front() > o_.crash_window) crashes_.pop_front();
    if (static_cast<int>(crashes_.size()) > o_.crash_limit) {
      log(LogLevel::error, "giving up: " + std::to_string(crashes_.size()) + " worker deaths within " +
                       std::to_string(o_.crash_window.count()) + " s (limit " + std::to_string(o_.crash_limit) +
                       ", --restart-limit); outputs are off; see the errors above");
      return 1;
    }
    log(LogLevel::warn, "restarting in " + seconds_text(std::chrono::duration<double>(o_.restart_delay).count()) + " (" +
                    std::to_string(crashes_.size()) + " death(s) in the last " + std::to_string(o_.crash_window.count()) + " s)");
    restart_at_ = died + o_.restart_delay;
    return std::nullopt;
  }

  const Config& config_;
  const SupervisorOptions& o_;
  sigset_t old_mask_{};
  int sfd_ = -1;
  int ready_fd_ = -1;
  pid_t worker_ = -1;
  bool serving_ = false;
  bool stopping_ = false;
  bool killed_ = false;
  int start_failures_ = 0;
  std::deque<Clock::time_point> crashes_;
  Clock::time_point started_{};
  Clock::time_point restart_at_{};
  Clock::time_point kill_at_{};
};

}  // namespace

int run_supervisor(const Config& config, const SupervisorOptions& options) {
  Supervisor s(config, options);
  return s.run();
}

}  // namespace junco::daemon
