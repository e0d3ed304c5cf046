// What the two HTTP load benchmarks (bench/load_http.cpp, bench/pg_load.cpp) share: running a
// program with its output in files, and an `alphaledger serve` on a free loopback port.
#pragma once

#include <errno.h>
#include <fcntl.h>
#include <httplib.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <memory>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

namespace alphaledger_bench {

// Prints "<program>: message" on stderr and exits 1.
[[noreturn]] inline void die(const std::string& message) {
  std::fprintf(stderr, "%s: %s\n", program_invocation_short_name, message.c_str());
  std::exit(1);
}

// Starts args[0] (looked up on PATH) with stdin from /dev/null and stdout, stderr into files.
inline pid_t spawn(const std::vector<std::string>& args, const std::string& out, const std::string& err) {
  const pid_t pid = ::fork();
  if (pid < 0) die("fork failed");
  if (pid == 0) {
    const int in = ::open("/dev/null", O_RDONLY);
    const int o = ::open(out.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    const int e = ::open(err.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (in < 0 || o < 0 || e < 0) ::_exit(127);
    ::dup2(in, 0);
    ::dup2(o, 1);
    ::dup2(e, 2);
    std::vector<std::string> copy = args;
    std::vector<char*> argv;
    for (auto& a : copy) argv.push_back(a.data());
    argv.push_back(nullptr);
    ::execvp(argv[0], argv.data());
    ::_exit(127);
  }
  return pid;
}

// The exit code of `pid` once it ends; 128 + the signal when a signal ended it.
inline int wait_exit(pid_t pid) {
  int status = 0;
  ::waitpid(pid, &status, 0);
  return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

inline std::string slurp(const std::string& path) {
  std::ifstream in(path);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// `binary --ledger LEDGER serve` on 127.0.0.1 with a port of the system's choosing (read from the
// "listening" line of its log), no access log and `threads` workers; stopped with SIGTERM by stop().
class ServeProcess {
 public:
  ServeProcess(const std::string& binary, const std::string& ledger, const std::string& out,
               const std::string& log, std::size_t threads, int start_timeout_s)
      : log_(log) {
    pid_ = spawn({binary, "--ledger", ledger, "serve", "--listen", "127.0.0.1:0", "--access-log", "off",
                  "--threads", std::to_string(threads)},
                 out, log_);
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(start_timeout_s);
    while (port_ == 0 && std::chrono::steady_clock::now() < deadline) {
      std::istringstream lines(slurp(log_));
      std::string line;
      while (std::getline(lines, line)) {
        auto j = nlohmann::json::parse(line, nullptr, false);
        if (!j.is_discarded() && j.is_object() && j.value("event", "") == "listening") {
          const std::string a = j.value("address", "");
          port_ = std::stoi(a.substr(a.rfind(':') + 1));
        }
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
    if (port_ == 0) die("the server did not start: " + slurp(log_));
  }
  int port() const { return port_; }
  void stop() {
    ::kill(pid_, SIGTERM);
    if (wait_exit(pid_) != 0) die("the server did not stop cleanly: " + slurp(log_));
  }

 private:
  std::string log_;
  pid_t pid_ = -1;
  int port_ = 0;
};

// A keep-alive client of 127.0.0.1:port with a 60-second read timeout.
inline std::unique_ptr<httplib::Client> client(int port) {
  auto c = std::make_unique<httplib::Client>("127.0.0.1", port);
  c->set_keep_alive(true);
  c->set_tcp_nodelay(true);
  c->set_read_timeout(60, 0);
  return c;
}

}  // namespace alphaledger_bench
