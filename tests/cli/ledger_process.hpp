// Runs the built alphaledger executable (ALPHALEDGER_BINARY) as a child process, capturing stdout
// and stderr, optionally killing it with SIGKILL after a delay. Used by the ledger and crash tests.
#pragma once

#include <doctest/doctest.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

extern char** environ;

namespace ledger_test {

struct Run {
  int exit_code = -1;   // when the process exited
  bool killed = false;  // ended by our SIGKILL
  std::string out, err;
};

// Runs `alphaledger args...`. With kill_after, sends SIGKILL once that much time has passed (if the
// process is still running) and reports killed = true.
inline Run run_alphaledger(const std::vector<std::string>& args,
                           std::optional<std::chrono::microseconds> kill_after = std::nullopt) {
  int out_pipe[2], err_pipe[2];
  REQUIRE(::pipe2(out_pipe, O_CLOEXEC) == 0);
  REQUIRE(::pipe2(err_pipe, O_CLOEXEC) == 0);
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, out_pipe[1], STDOUT_FILENO);
  posix_spawn_file_actions_adddup2(&actions, err_pipe[1], STDERR_FILENO);
  posix_spawn_file_actions_addopen(&actions, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
  std::vector<std::string> argv_text = {ALPHALEDGER_BINARY};
  argv_text.insert(argv_text.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : argv_text) argv.push_back(a.data());
  argv.push_back(nullptr);
  pid_t pid = 0;
  const int rc = ::posix_spawn(&pid, ALPHALEDGER_BINARY, &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  ::close(out_pipe[1]);
  ::close(err_pipe[1]);
  REQUIRE(rc == 0);

  Run run;
  const auto start = std::chrono::steady_clock::now();
  bool out_open = true, err_open = true, kill_sent = false;
  char buf[65536];
  while (out_open || err_open) {
    int timeout_ms = -1;
    if (kill_after && !kill_sent) {
      const auto left = *kill_after - std::chrono::duration_cast<std::chrono::microseconds>(
                                          std::chrono::steady_clock::now() - start);
      if (left.count() <= 0) {
        ::kill(pid, SIGKILL);
        kill_sent = true;
      } else {
        timeout_ms = static_cast<int>((left.count() + 999) / 1000);
      }
    }
    pollfd fds[2] = {{out_pipe[0], POLLIN, 0}, {err_pipe[0], POLLIN, 0}};
    if (!out_open) fds[0].fd = -1;
    if (!err_open) fds[1].fd = -1;
    const int n = ::poll(fds, 2, timeout_ms);
    if (n < 0) {
      if (errno == EINTR) continue;
      FAIL("poll failed");
    }
    for (int i = 0; i < 2; ++i) {
      if (fds[i].fd < 0 || fds[i].revents == 0) continue;
      const ssize_t got = ::read(fds[i].fd, buf, sizeof buf);
      if (got > 0) {
        (i == 0 ? run.out : run.err).append(buf, static_cast<std::size_t>(got));
      } else {
        (i == 0 ? out_open : err_open) = false;
      }
    }
  }
  ::close(out_pipe[0]);
  ::close(err_pipe[0]);
  int status = 0;
  REQUIRE(::waitpid(pid, &status, 0) == pid);
  if (WIFSIGNALED(status)) {
    run.killed = WTERMSIG(status) == SIGKILL && kill_sent;
    run.exit_code = 128 + WTERMSIG(status);
  } else {
    run.exit_code = WEXITSTATUS(status);
  }
  return run;
}

// The complete lines of `text` (a trailing partial line, cut by a kill, is dropped).
inline std::vector<std::string> complete_lines(const std::string& text) {
  std::vector<std::string> lines;
  std::size_t start = 0;
  for (std::size_t nl = text.find('\n'); nl != std::string::npos; nl = text.find('\n', start)) {
    lines.push_back(text.substr(start, nl - start));
    start = nl + 1;
  }
  return lines;
}

inline std::vector<std::string> split_csv_simple(const std::string& line) {  // no quoted fields
  std::vector<std::string> out;
  std::stringstream ss(line);
  std::string f;
  while (std::getline(ss, f, ',')) out.push_back(f);
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

// A fresh temporary folder, removed at scope exit.
class ScratchDir {
 public:
  ScratchDir() {
    std::string tmpl = (std::filesystem::temp_directory_path() / "alphaledger-cli-XXXXXX").string();
    REQUIRE(::mkdtemp(tmpl.data()) != nullptr);
    path_ = tmpl;
  }
  ~ScratchDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  ScratchDir(const ScratchDir&) = delete;
  ScratchDir& operator=(const ScratchDir&) = delete;
  std::string sub(const std::string& name) const { return (std::filesystem::path(path_) / name).string(); }
  std::string write(const std::string& name, const std::string& content) const {
    const std::string p = sub(name);
    std::ofstream(p) << content;
    return p;
  }

 private:
  std::string path_;
};

}  // namespace ledger_test
