// The PostgreSQL store (include/alphaledger/store.hpp, docs/postgresql.md): the ledger's keys and
// values in alphaledger.entries, with a readable copy in alphaledger.streams and
// alphaledger.decisions written in the same transaction.
//
// Connections: a small pool. A caller takes an idle connection or opens a new one (so a scan's
// visitor that reads the store again never waits for itself), and gives it back when done; at
// most PostgresStoreOptions::idle_connections stay open while idle. A connection that failed (the
// server restarted) is dropped, and the next call opens a fresh one; a call that failed on a
// connection taken from the pool before the server went away is tried once more on a fresh one.
//
// Every write is one round trip: the statements of the batch sent as one query string, which
// PostgreSQL runs as one transaction (all or nothing), committed with the server's
// synchronous_commit (default on: durable when it returns).
#include <map>
#include <mutex>
#include <vector>

#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/postgres_internal.hpp"

namespace alphaledger {

namespace {

using store::pg::pq;
using store::pg::ResultPtr;

struct ConnDeleter {
  void operator()(PGconn* c) const { pq().PQfinish(c); }
};
using ConnPtr = std::unique_ptr<PGconn, ConnDeleter>;

void ignore_notice(void*, const char*) {}

Status as_status(const Result<std::monostate>& r) {
  if (!r) return r.error();
  return {};
}

// The password the URI holds (as libpq reads it), so that no message shows it.
std::string password_of(const std::string& uri) {
  char* err = nullptr;
  PQconninfoOption* opts = pq().PQconninfoParse(uri.c_str(), &err);
  if (err) pq().PQfreemem(err);
  if (!opts) return {};
  std::string out;
  for (PQconninfoOption* o = opts; o->keyword; ++o) {
    if (std::string_view(o->keyword) == "password" && o->val) out = o->val;
  }
  pq().PQconninfoFree(opts);
  return out;
}

class PostgresStore final : public Store {
 public:
  PostgresStore(std::string uri, PostgresStoreOptions options)
      : uri_(std::move(uri)), where_(redact_uri(uri_)), secret_(password_of(uri_)), options_(options) {}

  ~PostgresStore() override = default;

  // A connection handed to one caller; back to the pool on destruction unless it failed.
  class Lease {
   public:
    Lease(PostgresStore& store, ConnPtr conn, bool reused)
        : store_(store), conn_(std::move(conn)), reused_(reused) {}
    ~Lease() { store_.give_back(std::move(conn_)); }
    Lease(const Lease&) = delete;
    Lease& operator=(const Lease&) = delete;
    PGconn* get() const { return conn_.get(); }
    bool reused() const { return reused_; }

   private:
    PostgresStore& store_;
    ConnPtr conn_;
    bool reused_;
  };

  Result<ConnPtr> connect(const std::string& what) {
    const std::string timeout = std::to_string(options_.connect_timeout_s);
    // Defaults first: the URI's own settings (expanded from dbname) override them.
    const char* keywords[] = {"connect_timeout", "fallback_application_name", "client_encoding", "dbname",
                              nullptr};
    const char* values[] = {timeout.c_str(), "alphaledger", "UTF8", uri_.c_str(), nullptr};
    ConnPtr conn(pq().PQconnectdbParams(keywords, values, 1));
    if (!conn) return io_error(what + ": cannot connect to the PostgreSQL server: out of memory");
    if (pq().PQstatus(conn.get()) != CONNECTION_OK) {
      return io_error(
          what + ": cannot connect to the PostgreSQL server: " +
          store::pg::clean_message(pq().PQerrorMessage(conn.get()), secret_) +
          " (check the URI, the server, and the credentials in the URI, PGPASSWORD or ~/.pgpass)");
    }
    pq().PQsetNoticeProcessor(conn.get(), ignore_notice, nullptr);
    if (options_.read_only) {
      ResultPtr r(pq().PQexec(conn.get(), "SET default_transaction_read_only = on"));
      if (pq().PQresultStatus(r.get()) != PGRES_COMMAND_OK)
        return store::pg::translate(conn.get(), r.get(), what, secret_);
    }
    return conn;
  }

  Result<std::unique_ptr<Lease>> take(const std::string& what, bool fresh = false) {
    if (!fresh) {
      std::lock_guard lock(mu_);
      if (!idle_.empty()) {
        ConnPtr c = std::move(idle_.back());
        idle_.pop_back();
        return std::make_unique<Lease>(*this, std::move(c), true);
      }
    }
    auto c = connect(what);
    if (!c) return c.error();
    return std::make_unique<Lease>(*this, std::move(*c), false);
  }

  void give_back(ConnPtr conn) {
    if (!conn || pq().PQstatus(conn.get()) != CONNECTION_OK) return;
    if (pq().PQtransactionStatus(conn.get()) != PQTRANS_IDLE) {
      ResultPtr r(pq().PQexec(conn.get(), "ROLLBACK"));
      if (pq().PQtransactionStatus(conn.get()) != PQTRANS_IDLE) return;
    }
    std::lock_guard lock(mu_);
    if (idle_.size() < options_.idle_connections) idle_.push_back(std::move(conn));
  }

  // Runs `body` on a connection; when it fails because a connection taken from the pool had
  // lost its server, once more on a fresh connection.
  template <typename T, typename Body>
  Result<T> with_connection(const std::string& what, const Body& body) {
    for (int attempt = 0;; ++attempt) {
      auto lease = take(what, attempt > 0);
      if (!lease) return lease.error();
      bool lost = false;
      Result<T> r = body((*lease)->get(), lost);
      if (r || !lost || !(*lease)->reused() || attempt > 0) return r;
    }
  }

  Result<std::optional<std::string>> get(std::string_view key) override {
    const std::string what = "cannot read ledger " + where_;
    return with_connection<std::optional<std::string>>(
        what, [&](PGconn* conn, bool& lost) -> Result<std::optional<std::string>> {
          const char* values[] = {key.data()};
          const int lengths[] = {static_cast<int>(key.size())};
          const int formats[] = {1};
          const Oid types[] = {17};  // bytea
          ResultPtr r(pq().PQexecParams(conn, "SELECT value FROM alphaledger.entries WHERE key = $1", 1, types,
                                   values, lengths, formats, 1));
          if (pq().PQresultStatus(r.get()) != PGRES_TUPLES_OK) {
            lost = store::pg::connection_lost(conn, r.get());
            return store::pg::translate(conn, r.get(), what, secret_);
          }
          if (pq().PQntuples(r.get()) == 0) return std::optional<std::string>{};
          return std::optional<std::string>{
              std::string(pq().PQgetvalue(r.get(), 0, 0), pq().PQgetlength(r.get(), 0, 0))};
        });
  }

  Status write(const WriteBatch& batch, bool sync) override {
    return write_checked(batch, nullptr, {}, sync);
  }

  Status write_if(const WriteBatch& batch, std::string_view key, const std::optional<std::string>& expected,
                  bool sync) override {
    return write_checked(batch, &key, expected, sync);
  }

  Status scan(std::string_view prefix, const Visitor& visit) override {
    const std::string what = "cannot read ledger " + where_;
    // The keys after `prefix`'s range start at its successor (the prefix with its last byte below
    // 0xff raised by one, trailing 0xff bytes dropped); none when the prefix is all 0xff or empty.
    std::string upper(prefix);
    while (!upper.empty() && static_cast<unsigned char>(upper.back()) == 0xff) upper.pop_back();
    if (!upper.empty()) upper.back() = static_cast<char>(static_cast<unsigned char>(upper.back()) + 1);
    bool visited = false;  // a scan that failed after visiting rows is not made again
    return as_status(
        with_connection<std::monostate>(what, [&](PGconn* conn, bool& lost) -> Result<std::monostate> {
          // One snapshot over all pages.
          ResultPtr begin(pq().PQexec(conn, "BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY"));
          if (pq().PQresultStatus(begin.get()) != PGRES_COMMAND_OK) {
            lost = store::pg::connection_lost(conn, begin.get());
            return store::pg::translate(conn, begin.get(), what, secret_);
          }
          std::string from(prefix);
          bool first = true;
          int limit = 64;
          while (true) {
            std::string sql = first ? "SELECT key, value FROM alphaledger.entries WHERE key >= $1"
                                    : "SELECT key, value FROM alphaledger.entries WHERE key > $1";
            if (!upper.empty()) sql += " AND key < $2";
            sql += " ORDER BY key LIMIT " + std::to_string(limit);
            const char* values[] = {from.data(), upper.data()};
            const int lengths[] = {static_cast<int>(from.size()), static_cast<int>(upper.size())};
            const int formats[] = {1, 1};
            const Oid types[] = {17, 17};
            ResultPtr r(
                pq().PQexecParams(conn, sql.c_str(), upper.empty() ? 1 : 2, types, values, lengths, formats, 1));
            if (pq().PQresultStatus(r.get()) != PGRES_TUPLES_OK) {
              lost = !visited && store::pg::connection_lost(conn, r.get());
              return store::pg::translate(conn, r.get(), what, secret_);
            }
            const int rows = pq().PQntuples(r.get());
            if (rows > 0) visited = true;
            for (int i = 0; i < rows; ++i) {
              const std::string_view k(pq().PQgetvalue(r.get(), i, 0), pq().PQgetlength(r.get(), i, 0));
              const std::string_view v(pq().PQgetvalue(r.get(), i, 1), pq().PQgetlength(r.get(), i, 1));
              if (!visit(k, v)) {
                ResultPtr end(pq().PQexec(conn, "COMMIT"));
                return std::monostate{};
              }
              if (i + 1 == rows) from.assign(k);
            }
            if (rows < limit) break;
            first = false;
            limit = std::min(limit * 4, 4096);
          }
          ResultPtr end(pq().PQexec(conn, "COMMIT"));
          if (pq().PQresultStatus(end.get()) != PGRES_COMMAND_OK) {
            lost = !visited && store::pg::connection_lost(conn, end.get());
            return store::pg::translate(conn, end.get(), what, secret_);
          }
          return std::monostate{};
        }));
  }

  std::string describe() const override { return where_; }
  bool read_only() const override { return options_.read_only; }
  bool shared() const override { return true; }

  std::optional<std::string> failing() const override {
    std::lock_guard lock(mu_);
    return failing_;
  }

  Result<std::optional<ProjectionProblem>> check_projection(std::string_view stream) override {
    const std::string what = "cannot verify ledger " + where_;
    return with_connection<std::optional<ProjectionProblem>>(
        what, [&](PGconn* conn, bool& lost) -> Result<std::optional<ProjectionProblem>> {
          auto r = store::pg::check_projection(conn, stream, where_, secret_);
          if (!r) lost = store::pg::connection_lost(conn, nullptr) && pq().PQstatus(conn) == CONNECTION_BAD;
          return r;
        });
  }

  // The first open: the schema checked (and created when allowed).
  Status start() {
    const std::string what = "cannot open ledger " + where_;
    auto lease = take(what);
    if (!lease) return lease.error();
    return store::pg::prepare_schema((*lease)->get(), what, where_,
                                     !options_.read_only && options_.create_if_missing, secret_);
  }

 private:
  Status write_checked(const WriteBatch& batch, const std::string_view* key,
                       const std::optional<std::string>& expected, bool sync) {
    const std::string what = "cannot write to ledger " + where_;
    if (options_.read_only) return io_error(what + ": it was opened for reading only");
    std::string sql;
    std::size_t bytes = 256;
    for (const auto& op : batch.ops) bytes += 2 * (op.key.size() + op.value.size()) + 160;
    sql.reserve(bytes * 2);
    if (!sync) sql += "SET LOCAL synchronous_commit TO OFF;\n";
    if (key && expected) {
      sql += "SELECT alphaledger.expect_value(";
      store::pg::append_bytea(sql, *key);
      sql += ", ";
      store::pg::append_bytea(sql, *expected);
      sql += ");\n";
    }
    for (const auto& op : batch.ops) {
      if (op.erase) {
        sql += "DELETE FROM alphaledger.entries WHERE key = ";
        store::pg::append_bytea(sql, op.key);
        sql += ";\n";
        continue;
      }
      sql += "INSERT INTO alphaledger.entries (key, value) VALUES (";
      store::pg::append_bytea(sql, op.key);
      sql += ", ";
      store::pg::append_bytea(sql, op.value);
      // A key that must be absent (a stream's creation) is inserted plainly: a concurrent creator's
      // row makes it a unique violation, which is a moved head.
      if (key && !expected && op.key == *key) {
        sql += ");\n";
      } else {
        sql += ") ON CONFLICT (key) DO UPDATE SET value = EXCLUDED.value;\n";
      }
    }
    auto projected = store::pg::append_projection(
        sql, batch, [&](std::string_view stream) { return e_values_of(stream, batch); });
    if (!projected) return note_failure(projected.error());
    auto r = with_connection<std::monostate>(what, [&](PGconn* conn, bool& lost) -> Result<std::monostate> {
      // Tried again on a fresh connection when a connection from the pool had lost its server. Safe
      // even if the first try had committed: a write_if then finds the head moved (the ledger's
      // redo finds what was written), and the ledger's plain writes are idempotent puts.
      ResultPtr res(pq().PQexec(conn, sql.c_str()));
      const auto status = pq().PQresultStatus(res.get());
      if (status != PGRES_COMMAND_OK && status != PGRES_TUPLES_OK) {
        lost = store::pg::connection_lost(conn, res.get());
        return store::pg::translate(conn, res.get(), what, secret_);
      }
      return std::monostate{};
    });
    if (!r) {
      if (is_head_moved(r.error())) return r.error();  // not a failure of the storage
      return note_failure(r.error());
    }
    std::lock_guard lock(mu_);
    failing_.reset();
    return {};
  }

  Error note_failure(Error e) {
    std::lock_guard lock(mu_);
    failing_ = e.message;
    return e;
  }

  // Whether `stream` takes e-values: from its configuration in the batch, else from the store
  // (once per stream: a configuration never changes).
  Result<bool> e_values_of(std::string_view stream, const WriteBatch& batch) {
    {
      std::lock_guard lock(mu_);
      if (auto it = e_values_.find(stream); it != e_values_.end()) return it->second;
    }
    const std::string key = store::config_key(stream);
    std::optional<std::string> bytes;
    for (const auto& op : batch.ops) {
      if (!op.erase && op.key == key) bytes = op.value;
    }
    if (!bytes) {
      auto stored = get(key);
      if (!stored) return stored.error();
      bytes = std::move(*stored);
    }
    if (!bytes) return false;
    auto config = store::decode_config(*bytes);
    if (!config) return false;  // no row to fill; verify reports the damaged configuration
    const bool e = rule_takes_e_values(config->config.kind);
    std::lock_guard lock(mu_);
    e_values_.emplace(std::string(stream), e);
    return e;
  }

  const std::string uri_;
  const std::string where_;
  const std::string secret_;
  const PostgresStoreOptions options_;
  mutable std::mutex mu_;
  std::vector<ConnPtr> idle_;
  std::optional<std::string> failing_;
  std::map<std::string, bool, std::less<>> e_values_;
};

}  // namespace

Result<std::unique_ptr<Store>> open_postgres_store(const std::string& uri,
                                                   const PostgresStoreOptions& options) {
  if (!is_postgres_uri(uri)) {
    return invalid_input("a PostgreSQL ledger location starts with postgresql:// or postgres://, got " +
                         excerpt(redact_uri(uri)));
  }
  if (auto lib = store::pg::load_libpq("cannot open ledger " + redact_uri(uri)); !lib) return lib.error();
  auto store = std::make_unique<PostgresStore>(uri, options);
  if (auto s = store->start(); !s) return s.error();
  return std::unique_ptr<Store>(std::move(store));
}

}  // namespace alphaledger
