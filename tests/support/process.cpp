#include "support/process.hpp"

#include <fcntl.h>
#include <poll.h>
#include <spawn.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <stdexcept>
#include <thread>

extern char** environ;

namespace alphaledger::test_support {
namespace {

[[noreturn]] void fail(const std::string& what) {
  throw std::runtime_error(what + ": " + std::strerror(errno));
}

// argv for posix_spawn: program, args..., nullptr. The strings must outlive the call.
std::vector<char*> make_argv(std::vector<std::string>& text) {
  std::vector<char*> argv;
  for (auto& a : text) argv.push_back(a.data());
  argv.push_back(nullptr);
  return argv;
}

// An unlinked temporary file holding `text`, positioned at its start (the child's stdin).
int stdin_file_with(const std::string& text) {
  std::string pattern = (std::filesystem::temp_directory_path() / "alphaledger-stdin-XXXXXX").string();
  const int fd = ::mkostemp(pattern.data(), O_CLOEXEC);  // the child gets it only as its stdin
  if (fd < 0) fail("cannot make a temporary stdin file");
  ::unlink(pattern.c_str());
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::write(fd, text.data() + done, text.size() - done);
    if (n <= 0) fail("cannot write the stdin file");
    done += static_cast<std::size_t>(n);
  }
  ::lseek(fd, 0, SEEK_SET);
  return fd;
}

int decode_status(int status) { return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status); }

}  // namespace

ProcessResult run_process(const std::string& program, const std::vector<std::string>& args,
                          const RunOptions& options) {
  int out_pipe[2], err_pipe[2];
  if (::pipe2(out_pipe, O_CLOEXEC) != 0 || ::pipe2(err_pipe, O_CLOEXEC) != 0) fail("pipe2");
  const int in_fd = options.stdin_text ? stdin_file_with(*options.stdin_text) : -1;
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, out_pipe[1], STDOUT_FILENO);
  posix_spawn_file_actions_adddup2(&actions, err_pipe[1], STDERR_FILENO);
  if (in_fd >= 0) {
    posix_spawn_file_actions_adddup2(&actions, in_fd, STDIN_FILENO);
  } else {
    posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
  }
  std::vector<std::string> argv_text = {program};
  argv_text.insert(argv_text.end(), args.begin(), args.end());
  auto argv = make_argv(argv_text);
  pid_t pid = 0;
  const int rc = ::posix_spawn(&pid, program.c_str(), &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  ::close(out_pipe[1]);
  ::close(err_pipe[1]);
  if (in_fd >= 0) ::close(in_fd);
  if (rc != 0) {
    ::close(out_pipe[0]);
    ::close(err_pipe[0]);
    errno = rc;
    fail("cannot start " + program);
  }

  ProcessResult run;
  const auto start = std::chrono::steady_clock::now();
  bool out_open = true, err_open = true, kill_sent = false, timeout_sent = false;
  char buf[65536];
  while (out_open || err_open) {
    using std::chrono::duration_cast;
    using std::chrono::microseconds;
    const auto elapsed = duration_cast<microseconds>(std::chrono::steady_clock::now() - start);
    long long wait_us = -1;  // the time until the next planned signal
    if (options.kill_after && !kill_sent) {
      const auto left = *options.kill_after - elapsed;
      if (left.count() <= 0) {
        ::kill(pid, options.kill_signal);
        kill_sent = true;
      } else {
        wait_us = left.count();
      }
    }
    if (!timeout_sent) {
      const auto left = duration_cast<microseconds>(options.timeout) - elapsed;
      if (left.count() <= 0) {
        ::kill(pid, SIGKILL);
        timeout_sent = true;
      } else if (wait_us < 0 || left.count() < wait_us) {
        wait_us = left.count();
      }
    }
    pollfd fds[2] = {{out_open ? out_pipe[0] : -1, POLLIN, 0}, {err_open ? err_pipe[0] : -1, POLLIN, 0}};
    const int timeout_ms = wait_us < 0 ? -1 : static_cast<int>((wait_us + 999) / 1000);
    const int n = ::poll(fds, 2, timeout_ms);
    if (n < 0) {
      if (errno == EINTR) continue;
      fail("poll");
    }
    for (int i = 0; i < 2; ++i) {
      if (fds[i].fd < 0 || fds[i].revents == 0) continue;
      const ssize_t got = ::read(fds[i].fd, buf, sizeof buf);
      if (got > 0) {
        (i == 0 ? run.out : run.err).append(buf, static_cast<std::size_t>(got));
      } else if (got == 0 || errno != EINTR) {
        (i == 0 ? out_open : err_open) = false;
      }
    }
  }
  ::close(out_pipe[0]);
  ::close(err_pipe[0]);
  int status = 0;
  while (::waitpid(pid, &status, 0) != pid) {
    if (errno != EINTR) fail("waitpid");
  }
  run.exit_code = decode_status(status);
  if (WIFSIGNALED(status)) {
    run.killed = kill_sent && WTERMSIG(status) == options.kill_signal;
    run.timed_out = timeout_sent && WTERMSIG(status) == SIGKILL;
  }
  return run;
}

BackgroundProcess::BackgroundProcess(const std::string& program, const std::vector<std::string>& args,
                                     const Io& io) {
  int in_pipe[2] = {-1, -1};
  if (!io.stdin_file && ::pipe2(in_pipe, O_CLOEXEC) != 0) fail("pipe2");
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  if (io.stdin_file) {
    posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, io.stdin_file->c_str(), O_RDONLY, 0);
  } else {
    posix_spawn_file_actions_adddup2(&actions, in_pipe[0], STDIN_FILENO);
  }
  posix_spawn_file_actions_addopen(&actions, STDOUT_FILENO, io.stdout_file.c_str(),
                                   O_WRONLY | O_CREAT | O_TRUNC, 0644);
  posix_spawn_file_actions_addopen(&actions, STDERR_FILENO, io.stderr_file.c_str(),
                                   O_WRONLY | O_CREAT | O_TRUNC, 0644);
  std::vector<std::string> argv_text = {program};
  argv_text.insert(argv_text.end(), args.begin(), args.end());
  auto argv = make_argv(argv_text);
  const int rc = ::posix_spawn(&pid_, program.c_str(), &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  if (!io.stdin_file) {
    ::close(in_pipe[0]);
    stdin_fd_ = in_pipe[1];
  }
  if (rc != 0) {
    close_stdin();
    pid_ = -1;
    errno = rc;
    fail("cannot start " + program);
  }
}

BackgroundProcess::~BackgroundProcess() {
  close_stdin();
  if (pid_ > 0 && !exit_status_) {
    ::kill(pid_, SIGKILL);
    int status = 0;
    ::waitpid(pid_, &status, 0);
  }
}

void BackgroundProcess::write_stdin(const std::string& text) {
  if (stdin_fd_ < 0) throw std::runtime_error("write_stdin: the child's stdin is not an open pipe");
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::write(stdin_fd_, text.data() + done, text.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) fail("write to the child's stdin");
    done += static_cast<std::size_t>(n);
  }
}

void BackgroundProcess::close_stdin() {
  if (stdin_fd_ >= 0) ::close(stdin_fd_);
  stdin_fd_ = -1;
}

void BackgroundProcess::signal(int sig) {
  if (::kill(pid_, sig) != 0) fail("kill");
}

std::optional<int> BackgroundProcess::wait(std::chrono::milliseconds limit) {
  if (exit_status_) return exit_status_;
  const auto deadline = std::chrono::steady_clock::now() + limit;
  while (true) {
    int status = 0;
    const pid_t r = ::waitpid(pid_, &status, WNOHANG);
    if (r == pid_) {
      exit_status_ = decode_status(status);
      return exit_status_;
    }
    if (std::chrono::steady_clock::now() > deadline) return std::nullopt;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
}

}  // namespace alphaledger::test_support
