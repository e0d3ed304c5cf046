// The PostgreSQL side of the tests: the throwaway cluster scripts/pg_cluster.sh starts (CI starts
// one; docs/testing.md "PostgreSQL"), found through $ALPHALEDGER_TEST_PG. Without it the PostgreSQL
// tests are skipped with a message. Each test makes a fresh database of its own (PgDatabase), so
// runs never see each other's streams.
#pragma once

#include <arpa/inet.h>
#include <doctest/doctest.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdlib>
#include <optional>
#include <stdexcept>
#include <string>

#include "support/process.hpp"
#include "support/text.hpp"

namespace alphaledger::test_support {

inline std::string env_or_empty(const char* name) {
  const char* v = std::getenv(name);
  return v == nullptr ? std::string() : std::string(v);
}

// $ALPHALEDGER_TEST_PG: a URI of a role that may create databases; nullopt (and a MESSAGE saying
// how to run them) when unset.
inline std::optional<std::string> test_pg_uri() {
  std::string uri = env_or_empty("ALPHALEDGER_TEST_PG");
  if (uri.empty()) {
    MESSAGE(
        "skipped: no PostgreSQL for the tests; start one with scripts/pg_cluster.sh start DIR and "
        "eval its output (docs/testing.md, \"PostgreSQL\")");
    return std::nullopt;
  }
  return uri;
}

// `uri` with its database (the path after host[:port]) replaced by `database`; query kept.
inline std::string uri_with_database(const std::string& uri, const std::string& database) {
  const auto scheme_end = uri.find("://");
  const auto path = uri.find('/', scheme_end == std::string::npos ? 0 : scheme_end + 3);
  const auto query = uri.find('?');
  std::string out = uri.substr(0, path == std::string::npos ? uri.find('?') : path);
  out += "/";
  out += database;
  if (query != std::string::npos) out += uri.substr(query);
  return out;
}

// The password in a URI ("" if none), so a test can check it is never printed.
inline std::string uri_password(const std::string& uri) {
  const auto scheme_end = uri.find("://");
  if (scheme_end == std::string::npos) return {};
  const auto at = uri.find('@', scheme_end);
  const auto colon = uri.find(':', scheme_end + 3);
  if (at == std::string::npos || colon == std::string::npos || colon > at) return {};
  return uri.substr(colon + 1, at - colon - 1);
}

// psql of the cluster's bin folder ($ALPHALEDGER_TEST_PG_BIN), else /usr/bin/psql (Debian's wrapper).
inline std::string psql_program() {
  const std::string bin = env_or_empty("ALPHALEDGER_TEST_PG_BIN");
  return bin.empty() ? std::string("/usr/bin/psql") : bin + "/psql";
}

// Runs one SQL command with psql on `uri`; fails the test with psql's message when it fails.
inline ProcessResult run_sql(const std::string& uri, const std::string& sql) {
  auto r = run_process(psql_program(), {"-X", "-q", "-v", "ON_ERROR_STOP=1", "-d", uri, "-c", sql});
  INFO("psql: " << r.err);
  CHECK(r.exit_code == 0);
  return r;
}

// A fresh, empty database for one test, dropped at the end (even if a server still holds a
// connection to it).
class PgDatabase {
 public:
  explicit PgDatabase(const std::string& admin_uri) : admin_uri_(admin_uri) {
    static std::atomic<int> counter{0};
    name_ = concat("alt_", std::to_string(::getpid()), "_", std::to_string(counter++), "_",
                   std::to_string(std::chrono::steady_clock::now().time_since_epoch().count() % 1000000));
    auto r = run_process(psql_program(), {"-X", "-q", "-v", "ON_ERROR_STOP=1", "-d", admin_uri_, "-c",
                                          concat("CREATE DATABASE ", name_)});
    if (r.exit_code != 0) throw std::runtime_error(concat("cannot create a test database: ", r.err));
    uri_ = uri_with_database(admin_uri_, name_);
  }
  ~PgDatabase() {
    try {
      run_process(psql_program(), {"-X", "-q", "-d", admin_uri_, "-c",
                                   concat("DROP DATABASE IF EXISTS ", name_, " WITH (FORCE)")});
    } catch (...) {
    }
  }
  PgDatabase(const PgDatabase&) = delete;
  PgDatabase& operator=(const PgDatabase&) = delete;

  const std::string& uri() const { return uri_; }
  const std::string& name() const { return name_; }

 private:
  std::string admin_uri_, name_, uri_;
};

// A cluster of the test's own (scripts/pg_cluster.sh) on a free loopback port, for tests that stop
// and restart the server, which must not disturb other tests using $ALPHALEDGER_TEST_PG. Stopped and
// removed by the destructor. Needs the PostgreSQL server programs (the cluster's bin folder).
class PrivateCluster {
 public:
  PrivateCluster() {
    static std::atomic<int> counter{0};
    const std::string tmp = env_or_empty("TMPDIR").empty() ? std::string("/tmp") : env_or_empty("TMPDIR");
    // Not inside a TempDir: the cluster's folder must be reachable by the postgres user.
    dir_ = concat(tmp, "/alphaledger-test-pg-", std::to_string(::getpid()), "-", std::to_string(counter++));
    const std::string port = std::to_string(free_port());
    auto r = run_process("/bin/bash", {script(), "start", dir_, port});
    if (r.exit_code != 0) throw std::runtime_error(concat("pg_cluster.sh start failed: ", r.err));
    for (std::size_t at = r.out.find("export "); at != std::string::npos;
         at = r.out.find("export ", at + 1)) {
      const auto eq = r.out.find('=', at);
      const auto nl = r.out.find('\n', at);
      const std::string name = r.out.substr(at + 7, eq - at - 7);
      if (name == "ALPHALEDGER_TEST_PG") uri_ = r.out.substr(eq + 1, nl - eq - 1);
    }
    if (uri_.empty())
      throw std::runtime_error(concat("pg_cluster.sh printed no ALPHALEDGER_TEST_PG: ", r.out));
  }
  ~PrivateCluster() {
    try {
      run_process("/bin/bash", {script(), "stop", dir_});
    } catch (...) {
    }
  }
  PrivateCluster(const PrivateCluster&) = delete;
  PrivateCluster& operator=(const PrivateCluster&) = delete;

  const std::string& uri() const { return uri_; }
  // pg_ctl -m immediate stop (as a crash would), then start again.
  bool halt() { return run_process("/bin/bash", {script(), "halt", dir_}).exit_code == 0; }
  bool resume() { return run_process("/bin/bash", {script(), "resume", dir_}).exit_code == 0; }

 private:
  static std::string script() { return std::string(ALPHALEDGER_SOURCE_DIR) + "/scripts/pg_cluster.sh"; }
  static int free_port() {
    const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in a{};
    a.sin_family = AF_INET;
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    a.sin_port = 0;
    socklen_t len = sizeof a;
    int port = 0;
    if (::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) == 0 &&
        ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len) == 0) {
      port = ntohs(a.sin_port);
    }
    ::close(fd);
    if (port == 0) throw std::runtime_error("no free port for a test cluster");
    return port;
  }
  std::string dir_, uri_;
};

}  // namespace alphaledger::test_support
