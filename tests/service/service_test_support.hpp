// Helpers for the service tests: temporary folders, the real `alphaledger` binary as a child
// process, a server started on a free loopback port, and the replay comparison of a history.
#pragma once

#include <doctest/doctest.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <optional>
#include <set>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger::testing {

// A fresh folder under the system temp folder, removed at the end of the test.
class TempDir {
 public:
  TempDir() {
    std::string pattern = (std::filesystem::temp_directory_path() / "alphaledger-service-XXXXXX").string();
    std::vector<char> buf(pattern.begin(), pattern.end());
    buf.push_back('\0');
    REQUIRE(::mkdtemp(buf.data()) != nullptr);
    path_ = buf.data();
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  std::string path() const { return path_; }
  std::string file(const std::string& name) const { return path_ + "/" + name; }

 private:
  std::string path_;
};

// prefix followed by n, e.g. tag("t", 7) == "t7". Built by append: GCC 12's -Wrestrict misfires
// on "t" + std::to_string(n) (GCC PR 105651).
inline std::string tag(std::string_view prefix, long long n) {
  std::string out(prefix);
  out.append(std::to_string(n));
  return out;
}

inline std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

inline void write_file(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
}

inline std::vector<std::string> split_lines(const std::string& text) {
  std::vector<std::string> lines;
  std::string line;
  std::istringstream in(text);
  while (std::getline(in, line)) lines.push_back(line);
  return lines;
}

// The built `alphaledger` executable as a child process. stdin comes from a file or a pipe the
// test writes to; stdout and stderr go to files (so a chatty child can never block on a full pipe).
class Child {
 public:
  struct Io {
    std::optional<std::string> stdin_file;  // else a pipe: write_stdin() / close_stdin()
    std::string stdout_file;
    std::string stderr_file;
  };

  Child(const std::vector<std::string>& args, const Io& io) {
    int in_pipe[2] = {-1, -1};
    if (!io.stdin_file) REQUIRE(::pipe2(in_pipe, O_CLOEXEC) == 0);
    pid_ = ::fork();
    REQUIRE(pid_ >= 0);
    if (pid_ == 0) {
      int in = io.stdin_file ? ::open(io.stdin_file->c_str(), O_RDONLY) : in_pipe[0];
      int out = ::open(io.stdout_file.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
      int err = ::open(io.stderr_file.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
      if (in < 0 || out < 0 || err < 0) ::_exit(127);
      ::dup2(in, 0);
      ::dup2(out, 1);
      ::dup2(err, 2);
      std::vector<char*> argv;
      std::string binary = ALPHALEDGER_BINARY;
      argv.push_back(binary.data());
      std::vector<std::string> copy = args;
      for (auto& a : copy) argv.push_back(a.data());
      argv.push_back(nullptr);
      ::execv(binary.c_str(), argv.data());
      ::_exit(127);
    }
    if (!io.stdin_file) {
      ::close(in_pipe[0]);
      stdin_fd_ = in_pipe[1];
    }
  }
  ~Child() {
    close_stdin();
    if (pid_ > 0 && !exit_status_) {
      ::kill(pid_, SIGKILL);
      int status = 0;
      ::waitpid(pid_, &status, 0);
    }
  }
  Child(const Child&) = delete;
  Child& operator=(const Child&) = delete;

  void write_stdin(const std::string& text) {
    REQUIRE(stdin_fd_ >= 0);
    std::size_t done = 0;
    while (done < text.size()) {
      const ssize_t n = ::write(stdin_fd_, text.data() + done, text.size() - done);
      REQUIRE(n > 0);
      done += static_cast<std::size_t>(n);
    }
  }
  void close_stdin() {
    if (stdin_fd_ >= 0) ::close(stdin_fd_);
    stdin_fd_ = -1;
  }
  void signal(int sig) { REQUIRE(::kill(pid_, sig) == 0); }
  pid_t pid() const { return pid_; }

  // Waits up to `limit` for the child to end. Returns the exit code, 128 + signal if it was
  // killed, or nullopt if it is still running after the limit.
  std::optional<int> wait(std::chrono::milliseconds limit = std::chrono::seconds(60)) {
    if (exit_status_) return exit_status_;
    const auto deadline = std::chrono::steady_clock::now() + limit;
    while (true) {
      int status = 0;
      const pid_t r = ::waitpid(pid_, &status, WNOHANG);
      if (r == pid_) {
        exit_status_ = WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
        return exit_status_;
      }
      if (std::chrono::steady_clock::now() > deadline) return std::nullopt;
      std::this_thread::sleep_for(std::chrono::milliseconds(5));
    }
  }

 private:
  pid_t pid_ = -1;
  int stdin_fd_ = -1;
  std::optional<int> exit_status_;
};

// `alphaledger --ledger DIR serve --listen 127.0.0.1:0 ...`, waiting (at most 20 s) for the
// "listening" line that names the port it bound.
class ServerProcess {
 public:
  ServerProcess(const std::string& ledger_dir, const std::string& log_file,
                std::vector<std::string> extra = {}) {
    // `serve` refuses a folder without a ledger: make an empty one first (as `new` would).
    if (!std::filesystem::exists(ledger_dir)) {
      auto made = Ledger::open(ledger_dir);
      REQUIRE_MESSAGE(made.ok(), (made.ok() ? "" : made.error().message));
    }
    std::vector<std::string> args = {"--ledger", ledger_dir, "serve", "--listen", "127.0.0.1:0"};
    for (auto& e : extra) args.push_back(e);
    child_ = std::make_unique<Child>(args, Child::Io{"/dev/null", log_file + ".out", log_file});
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
    while (port_ == 0) {
      for (const auto& line : split_lines(read_file(log_file))) {
        auto j = nlohmann::json::parse(line, nullptr, false);
        if (!j.is_discarded() && j.is_object() && j.value("event", "") == "listening") {
          const std::string address = j.value("address", "");
          port_ = std::stoi(address.substr(address.rfind(':') + 1));
        }
      }
      if (port_ != 0) break;
      if (auto code = child_->wait(std::chrono::milliseconds(1))) {
        FAIL("the server exited with code " << *code << " before listening: " << read_file(log_file));
      }
      REQUIRE_MESSAGE(std::chrono::steady_clock::now() < deadline, "the server did not start within 20 s");
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
  }
  int port() const { return port_; }
  Child& child() { return *child_; }

  // SIGTERM and wait: the exit code of a graceful stop (nullopt if it did not stop in 30 s).
  std::optional<int> stop() {
    child_->signal(SIGTERM);
    return child_->wait(std::chrono::seconds(30));
  }

 private:
  std::unique_ptr<Child> child_;
  int port_ = 0;
};

// Checks a stream's stored history: each id once, steps 1..n, and every level, decision and
// wealth bit-identical to replay() of the same (id, p_value) sequence under the stream's rule.
inline void check_history_equals_replay(const std::vector<DecisionRecord>& history,
                                        const RuleConfig& config) {
  TestLog log;
  log.source = "history";
  std::set<std::string> ids;
  for (const auto& r : history) {
    CHECK_MESSAGE(ids.insert(r.id).second, "id " << r.id << " appears twice in the history");
    TestRecord t;
    t.id = r.id;
    t.p_value = r.p_value;
    log.records.push_back(t);
  }
  const std::vector<Procedure> procs = {Procedure{std::string(rule_name(config.kind)), config}};
  const ReplayResult replayed = replay(log, procs);
  REQUIRE(replayed.decisions.size() == 1);
  REQUIRE(replayed.decisions[0].size() == history.size());
  for (std::size_t k = 0; k < history.size(); ++k) {
    const Decision& d = replayed.decisions[0][k];
    INFO("step " << k + 1 << " id " << history[k].id);
    CHECK(history[k].step == k + 1);
    CHECK(d.step == history[k].step);
    CHECK(d.level == history[k].level);  // bit-identical: same inputs, same outputs
    CHECK(d.rejected == history[k].rejected);
    REQUIRE(d.wealth.has_value());
    CHECK(*d.wealth == history[k].wealth);
  }
}

}  // namespace alphaledger::testing
