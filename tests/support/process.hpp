// The one way the tests start a process: run a program to the end with stdin text and captured
// stdout/stderr (optionally killed after a delay or a timeout), or start it in the background,
// signal it and wait for it. run_alphaledger() runs the built executable (ALPHALEDGER_BINARY, set
// for every test binary by tests/CMakeLists.txt).
#pragma once

#include <sys/types.h>

#include <chrono>
#include <csignal>
#include <optional>
#include <string>
#include <vector>

namespace alphaledger::test_support {

struct RunOptions {
  // Written to the child's standard input; nullopt: stdin is /dev/null.
  std::optional<std::string> stdin_text;
  // Sends kill_signal once this much time has passed, if the child still runs; `killed` reports it.
  std::optional<std::chrono::microseconds> kill_after;
  int kill_signal = SIGKILL;
  // A limit that is a failure when reached: SIGKILL and `timed_out` (default: 10 minutes).
  std::chrono::milliseconds timeout = std::chrono::minutes(10);
};

struct ProcessResult {
  int exit_code = -1;      // the exit status, or 128 + signal number if a signal ended it
  bool killed = false;     // ended by the signal sent for kill_after
  bool timed_out = false;  // ended by the timeout
  std::string out, err;    // everything written to stdout and stderr
};

// Runs `program args...` to its end. Throws std::runtime_error if it cannot be started.
ProcessResult run_process(const std::string& program, const std::vector<std::string>& args,
                          const RunOptions& options = {});

#ifdef ALPHALEDGER_BINARY
inline ProcessResult run_alphaledger(const std::vector<std::string>& args, const RunOptions& options) {
  return run_process(ALPHALEDGER_BINARY, args, options);
}
// `input` becomes the standard input (empty: an empty file, so a reader sees end of input at once).
inline ProcessResult run_alphaledger(const std::vector<std::string>& args, const std::string& input = {}) {
  RunOptions options;
  options.stdin_text = input;
  return run_process(ALPHALEDGER_BINARY, args, options);
}
#endif

// A child process running in the background. stdin comes from a file or from a pipe the test
// writes to; stdout and stderr go to files (so a chatty child never blocks on a full pipe). The
// destructor kills (SIGKILL) and reaps a child that is still running.
class BackgroundProcess {
 public:
  struct Io {
    std::optional<std::string> stdin_file;  // else a pipe: write_stdin() / close_stdin()
    std::string stdout_file;
    std::string stderr_file;
  };

  BackgroundProcess(const std::string& program, const std::vector<std::string>& args, const Io& io);
#ifdef ALPHALEDGER_BINARY
  // The built alphaledger executable.
  BackgroundProcess(const std::vector<std::string>& args, const Io& io)
      : BackgroundProcess(ALPHALEDGER_BINARY, args, io) {}
#endif
  ~BackgroundProcess();
  BackgroundProcess(const BackgroundProcess&) = delete;
  BackgroundProcess& operator=(const BackgroundProcess&) = delete;

  // Throws std::runtime_error if stdin is not a pipe or the write fails.
  void write_stdin(const std::string& text);
  void close_stdin();
  // Throws std::runtime_error if the signal cannot be sent.
  void signal(int sig);
  pid_t pid() const { return pid_; }

  // Waits up to `limit` for the child to end. Returns the exit code, 128 + signal if a signal
  // ended it, or nullopt if it still runs after the limit.
  std::optional<int> wait(std::chrono::milliseconds limit = std::chrono::seconds(60));

 private:
  pid_t pid_ = -1;
  int stdin_fd_ = -1;
  std::optional<int> exit_status_;
};

}  // namespace alphaledger::test_support
