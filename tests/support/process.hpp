// A child process for tests: started with posix_spawn from an argv (no shell),
// its stdout read line by line with a deadline, stopped on destruction with
// SIGTERM, then SIGKILL if it has not exited within the grace period, and
// always reaped (no zombies). Header-only; POSIX only.
//
//   junco::test::ChildProcess p({"/path/junco-sim", "--seed", "1"});
//   auto line = p.read_line(std::chrono::seconds(5));   // nullopt on timeout/EOF
#pragma once

#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>
#include <fcntl.h>

#include <cerrno>
#include <chrono>
#include <cstring>
#include <optional>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

extern char** environ;

namespace junco::test {

struct ChildOptions {
  std::string stderr_path;  // empty: the child's stderr is the test's stderr
  std::chrono::milliseconds stop_grace{3000};  // SIGTERM → SIGKILL delay
};

class ChildProcess {
 public:
  explicit ChildProcess(std::vector<std::string> argv, ChildOptions options = {}) : options_(std::move(options)) {
    if (argv.empty()) throw std::invalid_argument("ChildProcess: empty argv");
    int fds[2];
    if (::pipe2(fds, O_CLOEXEC) != 0) throw std::runtime_error(std::string("pipe: ") + std::strerror(errno));
    posix_spawn_file_actions_t actions;
    posix_spawn_file_actions_init(&actions);
    posix_spawn_file_actions_adddup2(&actions, fds[1], STDOUT_FILENO);
    posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
    if (!options_.stderr_path.empty())
      posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, options_.stderr_path.c_str(),
                                       O_WRONLY | O_CREAT | O_TRUNC, 0644);
    std::vector<char*> cargv;
    for (auto& a : argv) cargv.push_back(a.data());
    cargv.push_back(nullptr);
    const int rc = ::posix_spawn(&pid_, cargv[0], &actions, nullptr, cargv.data(), environ);
    posix_spawn_file_actions_destroy(&actions);
    ::close(fds[1]);
    if (rc != 0) {
      ::close(fds[0]);
      throw std::runtime_error("posix_spawn " + argv[0] + ": " + std::strerror(rc));
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
    exit_code_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
  }

  ChildOptions options_;
  pid_t pid_ = -1;
  int out_fd_ = -1;
  std::string buffer_;
  bool exited_ = false;
  int exit_code_ = -1;
};

}  // namespace junco::test
