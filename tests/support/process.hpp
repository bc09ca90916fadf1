// Starting programs from tests: the one process helper (tests/support/).
//
// ChildProcess: a child started with fork + execve from an argv (no shell),
// its stdout read line by line with a deadline, stopped on destruction
// with SIGTERM, then SIGKILL if it has not exited within the grace period, and
// always reaped (no zombies). The child is also SIGKILLed by the kernel if the
// test dies without running destructors (a crash, a sanitizer report, an
// uncaught signal): an orphaned daemon or simulator would otherwise keep
// ctest's output pipe open and the test would hang until ctest's timeout.
// (PR_SET_PDEATHSIG follows the spawning thread: create children on a thread
// that outlives them, e.g. the test's own.) A bare program name ("ngspice")
// is looked up in PATH before the fork.
//
// run_program / run_shell: run to completion and collect stdout + stderr
// (ChildProcess underneath), for programs that answer and exit.
// Header-only; Linux only.
//
//   junco::test::ChildProcess p({"/path/junco-sim", "--seed", "1"});
//   auto line = p.read_line(std::chrono::seconds(5));   // nullopt on timeout/EOF
//   auto r = junco::test::run_program({"ngspice", "-b", "x.cir"});  // r.exit_code, r.out
//   auto s = junco::test::run_shell_command("junco fit a.csv | head -3");
#pragma once

#include <poll.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>
#include <fcntl.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstdlib>
#include <cstring>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

extern char** environ;

namespace junco::test {

// True when this test program is built with AddressSanitizer (the debug
// preset builds the programs it starts the same way). GCC defines
// __SANITIZE_ADDRESS__, clang answers __has_feature(address_sanitizer).
#if defined(__SANITIZE_ADDRESS__)
inline constexpr bool kAddressSanitizer = true;
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
inline constexpr bool kAddressSanitizer = true;
#else
inline constexpr bool kAddressSanitizer = false;
#endif
#else
inline constexpr bool kAddressSanitizer = false;
#endif

struct ChildOptions {
  std::string stderr_path;  // empty: the child's stderr is the test's stderr
  bool stderr_to_stdout = false;  // the child's stderr joins its stdout (stderr_path then unused)
  std::chrono::milliseconds stop_grace{3000};  // SIGTERM → SIGKILL delay
};

// argv[0] as execve needs it: a name without '/' is looked up in PATH (in the
// parent: the child may only make async-signal-safe calls). Throws if absent.
inline std::string resolve_program(const std::string& name) {
  if (name.find('/') != std::string::npos) return name;
  const char* path = std::getenv("PATH");
  std::string dirs = path ? path : "/usr/local/bin:/usr/bin:/bin";
  std::size_t start = 0;
  for (;;) {
    const std::size_t end = dirs.find(':', start);
    std::string dir = dirs.substr(start, end == std::string::npos ? std::string::npos : end - start);
    if (dir.empty()) dir = ".";
    const std::string candidate = dir + "/" + name;
    if (::access(candidate.c_str(), X_OK) == 0) return candidate;
    if (end == std::string::npos) break;
    start = end + 1;
  }
  throw std::runtime_error("exec " + name + ": not found in PATH (" + dirs + "); tools/setup installs what the tests run");
}

class ChildProcess {
 public:
  explicit ChildProcess(std::vector<std::string> argv, ChildOptions options = {}) : options_(std::move(options)) {
    if (argv.empty()) throw std::invalid_argument("ChildProcess: empty argv");
    argv[0] = resolve_program(argv[0]);
    int fds[2];
    if (::pipe2(fds, O_CLOEXEC) != 0) throw std::runtime_error(std::string("pipe: ") + std::strerror(errno));
    int exec_status[2];  // the child writes errno here if execve fails; closed by a successful exec
    if (::pipe2(exec_status, O_CLOEXEC) != 0) {
      const int e = errno;
      ::close(fds[0]);
      ::close(fds[1]);
      throw std::runtime_error(std::string("pipe: ") + std::strerror(e));
    }
    std::vector<char*> cargv;
    for (auto& a : argv) cargv.push_back(a.data());
    cargv.push_back(nullptr);
    const char* stderr_path = options_.stderr_path.empty() ? nullptr : options_.stderr_path.c_str();
    const pid_t parent = ::getpid();
    pid_ = ::fork();
    if (pid_ == 0) {
      // Async-signal-safe calls only until execve (the test may have threads).
      auto fail = [&](int e) {
        (void)!::write(exec_status[1], &e, sizeof e);
        ::_exit(127);
      };
      if (::prctl(PR_SET_PDEATHSIG, SIGKILL) != 0) fail(errno);
      if (::getppid() != parent) ::_exit(127);  // the test died before the line above took effect
      if (::dup2(fds[1], STDOUT_FILENO) < 0) fail(errno);
      const int in = ::open("/dev/null", O_RDONLY);
      if (in < 0 || ::dup2(in, STDIN_FILENO) < 0) fail(errno);
      if (in != STDIN_FILENO) ::close(in);
      if (options_.stderr_to_stdout) {
        if (::dup2(fds[1], STDERR_FILENO) < 0) fail(errno);
      } else if (stderr_path) {
        const int err = ::open(stderr_path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
        if (err < 0 || ::dup2(err, STDERR_FILENO) < 0) fail(errno);
        if (err != STDERR_FILENO) ::close(err);
      }
      ::execve(cargv[0], cargv.data(), environ);
      fail(errno);
    }
    const int fork_errno = errno;
    ::close(fds[1]);
    ::close(exec_status[1]);
    if (pid_ < 0) {
      ::close(fds[0]);
      ::close(exec_status[0]);
      throw std::runtime_error("fork " + argv[0] + ": " + std::strerror(fork_errno));
    }
    int child_errno = 0;
    ssize_t got;
    while ((got = ::read(exec_status[0], &child_errno, sizeof child_errno)) < 0 && errno == EINTR) {
    }
    ::close(exec_status[0]);
    if (got > 0) {
      int status = 0;
      while (::waitpid(pid_, &status, 0) < 0 && errno == EINTR) {
      }
      ::close(fds[0]);
      throw std::runtime_error("exec " + argv[0] + ": " + std::strerror(child_errno));
    }
    out_fd_ = fds[0];
  }
  ChildProcess(const ChildProcess&) = delete;
  ChildProcess& operator=(const ChildProcess&) = delete;
  ~ChildProcess() {
    stop();
    if (out_fd_ >= 0) ::close(out_fd_);
  }

  pid_t pid() const { return pid_; }

  // Next stdout line without its LF; nullopt on timeout or end of stream.
  std::optional<std::string> read_line(std::chrono::milliseconds deadline) {
    const auto until = std::chrono::steady_clock::now() + deadline;
    for (;;) {
      if (auto nl = buffer_.find('\n'); nl != std::string::npos) {
        std::string line = buffer_.substr(0, nl);
        buffer_.erase(0, nl + 1);
        return line;
      }
      if (out_fd_ < 0) return std::nullopt;
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - std::chrono::steady_clock::now());
      if (left.count() <= 0) return std::nullopt;
      pollfd p{out_fd_, POLLIN, 0};
      const int r = ::poll(&p, 1, static_cast<int>(left.count()));
      if (r < 0 && errno == EINTR) continue;
      if (r <= 0) return std::nullopt;
      char chunk[4096];
      const ssize_t n = ::read(out_fd_, chunk, sizeof chunk);
      if (n <= 0) {
        ::close(out_fd_);
        out_fd_ = -1;
        continue;
      }
      buffer_.append(chunk, static_cast<size_t>(n));
    }
  }

  // Everything the child still writes until it closes stdout (normally: until
  // it exits); nullopt when the deadline passes first.
  std::optional<std::string> read_all(std::chrono::milliseconds deadline) {
    const auto until = std::chrono::steady_clock::now() + deadline;
    while (out_fd_ >= 0) {
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - std::chrono::steady_clock::now());
      if (left.count() <= 0) return std::nullopt;
      pollfd p{out_fd_, POLLIN, 0};
      const int r = ::poll(&p, 1, static_cast<int>(left.count()));
      if (r < 0 && errno == EINTR) continue;
      if (r <= 0) return std::nullopt;
      char chunk[4096];
      const ssize_t n = ::read(out_fd_, chunk, sizeof chunk);
      if (n < 0 && errno == EINTR) continue;
      if (n <= 0) {
        ::close(out_fd_);
        out_fd_ = -1;
        break;
      }
      buffer_.append(chunk, static_cast<size_t>(n));
    }
    std::string all;
    all.swap(buffer_);
    return all;
  }

  // True when the child ended by a signal (after wait/stop/running saw it end).
  bool signalled() const { return signalled_; }

  // True while the child has not exited (reaps it if it has).
  bool running() {
    if (exited_) return false;
    int status = 0;
    const pid_t r = ::waitpid(pid_, &status, WNOHANG);
    if (r == pid_) record(status);
    return !exited_;
  }

  // Waits for exit; returns the exit code (128+signal when killed), nullopt on timeout.
  std::optional<int> wait(std::chrono::milliseconds deadline) {
    const auto until = std::chrono::steady_clock::now() + deadline;
    while (running()) {
      if (std::chrono::steady_clock::now() >= until) return std::nullopt;
      std::this_thread::sleep_for(std::chrono::milliseconds(5));
    }
    return exit_code_;
  }

  void signal(int sig) {
    if (!exited_) ::kill(pid_, sig);
  }

  // SIGTERM, grace period, SIGKILL; always reaps. Returns the exit code.
  int stop() {
    if (exited_) return exit_code_;
    signal(SIGTERM);
    if (auto code = wait(options_.stop_grace)) return *code;
    signal(SIGKILL);
    int status = 0;
    while (::waitpid(pid_, &status, 0) < 0 && errno == EINTR) {
    }
    record(status);
    return exit_code_;
  }

 private:
  void record(int status) {
    exited_ = true;
    signalled_ = WIFSIGNALED(status);
    exit_code_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
  }

  ChildOptions options_;
  pid_t pid_ = -1;
  int out_fd_ = -1;
  std::string buffer_;
  bool exited_ = false;
  bool signalled_ = false;
  int exit_code_ = -1;
};

struct ProgramRun {
  int exit_code = -1;      // 128 + signal when killed
  bool signalled = false;  // ended by a signal
  std::string out;         // stdout and stderr together, in the order written
};

// Runs argv to completion (stdin /dev/null) and collects its output. Throws
// when it cannot start or runs longer than `timeout` (it is killed first).
inline ProgramRun run_program(std::vector<std::string> argv,
                              std::chrono::milliseconds timeout = std::chrono::minutes(5)) {
  const std::string what = argv.empty() ? std::string() : argv.back();
  ChildOptions options;
  options.stderr_to_stdout = true;
  ChildProcess child(std::move(argv), options);
  const auto started = std::chrono::steady_clock::now();
  auto out = child.read_all(timeout);
  const auto left = timeout - std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::steady_clock::now() - started);
  std::optional<int> code;
  if (out) code = child.wait(std::max(left, std::chrono::milliseconds(1)));
  if (!out || !code) {
    child.stop();
    throw std::runtime_error("run_program: still running after " + std::to_string(timeout.count()) + " ms, killed: " + what);
  }
  return {*code, child.signalled(), std::move(*out)};
}

// Runs a command line with /bin/sh -c (for pipes and redirections).
inline ProgramRun run_shell_command(const std::string& command,
                                    std::chrono::milliseconds timeout = std::chrono::minutes(5)) {
  return run_program({"/bin/sh", "-c", command}, timeout);
}

}  // namespace junco::test
