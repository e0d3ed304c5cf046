// Running one test body on every ledger backend: the in-memory store, a RocksDB folder and, when
// $ALPHALEDGER_TEST_PG holds a PostgreSQL URI (postgresql://USER@HOST:PORT/DB), a scratch database
// made on that server for the test and dropped after it. Header-only, for test binaries that link
// the store and libpq (the store itself loads libpq only when it opens a PostgreSQL ledger).
//
// Example:
//   for (auto& backend : test_support::ledger_backends()) {
//     SUBCASE_NAMED(backend.name) ...   // or CAPTURE(backend.name)
//     auto store = backend.open();      // a fresh, empty store
//   }
#pragma once

#include <doctest/doctest.h>
#include <postgresql/libpq-fe.h>
#include <unistd.h>

#include <atomic>
#include <cstdlib>
#include <functional>
#include <memory>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "support/temp_dir.hpp"

namespace alphaledger::test_support {

// The server the PostgreSQL tests use, from $ALPHALEDGER_TEST_PG; nothing when unset.
inline std::optional<std::string> test_pg_uri() {
  const char* v = std::getenv("ALPHALEDGER_TEST_PG");
  if (v == nullptr || *v == '\0') return std::nullopt;
  return std::string(v);
}

// `uri` naming database `db` instead of its own (the path after host[:port]).
inline std::string with_database(const std::string& uri, const std::string& db) {
  const auto scheme = uri.find("://");
  const std::size_t host = scheme == std::string::npos ? 0 : scheme + 3;
  const auto query = uri.find('?', host);
  const std::string head = uri.substr(0, query);
  const std::string tail = query == std::string::npos ? "" : uri.substr(query);
  const auto slash = head.find('/', host);
  return (slash == std::string::npos ? head : head.substr(0, slash)) + "/" + db + tail;
}

// Runs `sql` on the database `uri` names; throws with the server's message on failure.
inline void pg_exec(const std::string& uri, const std::string& sql) {
  PGconn* conn = PQconnectdb(uri.c_str());
  if (PQstatus(conn) != CONNECTION_OK) {
    const std::string message = PQerrorMessage(conn);
    PQfinish(conn);
    throw std::runtime_error("cannot connect to the test server: " + message);
  }
  PQsetNoticeProcessor(
      conn, [](void*, const char*) {}, nullptr);
  PGresult* r = PQexec(conn, sql.c_str());
  const auto status = PQresultStatus(r);
  const std::string message = PQresultErrorMessage(r);
  PQclear(r);
  PQfinish(conn);
  if (status != PGRES_COMMAND_OK && status != PGRES_TUPLES_OK)
    throw std::runtime_error("SQL failed on the test server: " + message + " (" + sql.substr(0, 200) + ")");
}

// The first column of the first row of `sql`'s answer, as text ("" when none).
inline std::string pg_value(const std::string& uri, const std::string& sql) {
  PGconn* conn = PQconnectdb(uri.c_str());
  if (PQstatus(conn) != CONNECTION_OK) {
    const std::string message = PQerrorMessage(conn);
    PQfinish(conn);
    throw std::runtime_error("cannot connect to the test server: " + message);
  }
  PGresult* r = PQexec(conn, sql.c_str());
  std::string out;
  if (PQresultStatus(r) == PGRES_TUPLES_OK && PQntuples(r) > 0) out = PQgetvalue(r, 0, 0);
  const bool failed = PQresultStatus(r) != PGRES_TUPLES_OK;
  const std::string message = PQresultErrorMessage(r);
  PQclear(r);
  PQfinish(conn);
  if (failed) throw std::runtime_error("SQL failed on the test server: " + message);
  return out;
}

// A database of its own on the $ALPHALEDGER_TEST_PG server, dropped (with every connection to it)
// when this goes out of scope.
class ScratchDatabase {
 public:
  explicit ScratchDatabase(const std::string& server) : server_(server) {
    static std::atomic<int> counter{0};
    name_ = "alphaledger_test_" + std::to_string(::getpid()) + "_" + std::to_string(counter++);
    pg_exec(server_, "DROP DATABASE IF EXISTS " + name_ + " WITH (FORCE)");
    pg_exec(server_, "CREATE DATABASE " + name_);
    uri_ = with_database(server_, name_);
  }
  ~ScratchDatabase() {
    try {
      pg_exec(server_, "DROP DATABASE IF EXISTS " + name_ + " WITH (FORCE)");
    } catch (...) {
    }
  }
  ScratchDatabase(const ScratchDatabase&) = delete;
  ScratchDatabase& operator=(const ScratchDatabase&) = delete;
  const std::string& uri() const { return uri_; }
  const std::string& name() const { return name_; }

 private:
  std::string server_;
  std::string name_;
  std::string uri_;
};

// One backend: its name and how to open a fresh store on it (each call on the same backend object
// opens the same data again: the same folder, the same database).
struct Backend {
  std::string name;  // memory, rocksdb, postgresql
  std::function<std::unique_ptr<Store>()> open;
  std::shared_ptr<void> keep;  // the folder or database, alive as long as the backend
};

// Memory, RocksDB and (when $ALPHALEDGER_TEST_PG is set) PostgreSQL; without it, a doctest
// MESSAGE says PostgreSQL was skipped.
inline std::vector<Backend> ledger_backends() {
  std::vector<Backend> out;
  auto memory = std::make_shared<MemoryStore>();
  out.push_back(Backend{"memory", [memory] { return borrow_store(*memory); }, memory});
  auto dir = std::make_shared<TempDir>();
  out.push_back(Backend{"rocksdb",
                        [dir] {
                          auto s = open_rocksdb_store(dir->sub("ledger"));
                          REQUIRE_MESSAGE(s.ok(), (s.ok() ? "" : s.error().message));
                          return std::move(*s);
                        },
                        dir});
  if (auto server = test_pg_uri()) {
    auto db = std::make_shared<ScratchDatabase>(*server);
    out.push_back(Backend{"postgresql",
                          [db] {
                            auto s = open_postgres_store(db->uri());
                            REQUIRE_MESSAGE(s.ok(), (s.ok() ? "" : s.error().message));
                            return std::move(*s);
                          },
                          db});
  } else {
    MESSAGE("PostgreSQL backend skipped: set ALPHALEDGER_TEST_PG to a server URI to run it");
  }
  return out;
}

}  // namespace alphaledger::test_support
