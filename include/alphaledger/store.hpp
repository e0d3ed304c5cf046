// The narrow storage interface under the ledger: ordered keys and values, atomic write batches,
// prefix scans. Three implementations: RocksDB (a folder on disk, the default ledger), PostgreSQL
// (a database several processes share; docs/postgresql.md) and an in-memory store (tests,
// examples). A library user may implement Store over any ordered key-value store.
//
// The ledger's key layout and value grammar are in docs/ledger-format.md; nothing here knows
// about streams or records.
//
// Example:
//   auto store = open_rocksdb_store("scratch.db");   // a new folder (not a ledger's)
//   WriteBatch batch;
//   batch.put("greeting", "hello");
//   (*store)->write(batch);            // durable (synced) when it returns ok
//   (*store)->get("greeting");         // std::optional<std::string> holding "hello"
//
// Thread-safety: every Store is safe to use from many threads; each write() is atomic (all of the
// batch or none of it) with respect to readers and to a crash.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"

namespace alphaledger {

// An ordered list of puts and deletes applied together.
struct WriteBatch {
  struct Op {
    std::string key;
    std::string value;
    bool erase = false;  // delete `key` (value ignored)
  };
  std::vector<Op> ops;

  void put(std::string key, std::string value) { ops.push_back({std::move(key), std::move(value), false}); }
  void erase(std::string key) { ops.push_back({std::move(key), {}, true}); }
  bool empty() const { return ops.empty(); }
};

class Store {
 public:
  virtual ~Store() = default;

  // The value at `key`, std::nullopt if absent. Errors: kIOError (disk), kCorruption.
  virtual Result<std::optional<std::string>> get(std::string_view key) = 0;

  // Applies every op of `batch` atomically. With sync (Default: true) the batch is on stable
  // storage (fsync'd) when this returns ok. On error (kIOError) none of the batch was applied as
  // far as readers of this store can see; after a crash an unsynced or failed batch is either
  // wholly present or wholly absent, never partial.
  virtual Status write(const WriteBatch& batch, bool sync = true) = 0;

  // Calls visit(key, value) for every key starting with `prefix`, in ascending byte order, until
  // visit returns false. Errors: kIOError. The scan sees one consistent snapshot.
  using Visitor = std::function<bool(std::string_view key, std::string_view value)>;
  virtual Status scan(std::string_view prefix, const Visitor& visit) = 0;

  // A short description for messages, e.g. the folder path.
  virtual std::string describe() const = 0;

  // True when this store was opened read-only: every write() fails and nothing on disk changes.
  virtual bool read_only() const { return false; }

  // Why the last write failed, if it did and no write has succeeded since; std::nullopt when
  // storage is healthy as far as this store knows (the HTTP health route reports it).
  virtual std::optional<std::string> failing() const { return std::nullopt; }

  // Applies `batch` as write() does, but only if the value at `key` is still `expected`
  // (std::nullopt: `key` is still absent), checked and written atomically. Otherwise nothing is
  // written and the error is kConflict with code "head_moved" (another writer got there first:
  // read again and redo). The ledger calls it only on a shared() store, once per write, with the
  // stream's head key. The default implementation is correct for a store that only this object
  // writes; the shipped stores override it.
  virtual Status write_if(const WriteBatch& batch, std::string_view key,
                          const std::optional<std::string>& expected, bool sync = true);

  // True when other processes may write this store while it is open (PostgreSQL): the ledger
  // then re-reads each stream's head before using its cached state and writes with write_if().
  // False (the default) for a store this process owns alone (RocksDB, memory).
  virtual bool shared() const { return false; }

  // For stores that keep a readable copy of the ledger beside its bytes (PostgreSQL's decisions
  // and streams tables): the first row of `stream` that differs from what its entries decode to,
  // or std::nullopt when all agree (and always for stores without such a copy). verify reports it.
  struct ProjectionProblem {
    std::uint64_t step = 0;  // the chain entry whose row differs; 0 for the stream's own row
    std::string problem;     // names the table, the stream, the step and the column
  };
  virtual Result<std::optional<ProjectionProblem>> check_projection(std::string_view /*stream*/) {
    return std::optional<ProjectionProblem>{};
  }
};

// The error write_if() returns when the value at its key moved (kConflict, code "head_moved").
Error head_moved(std::string_view key);
inline bool is_head_moved(const Error& e) { return e.kind == ErrorKind::kConflict && e.code == "head_moved"; }

struct RocksStoreOptions {
  bool create_if_missing = true;  // Default: true (the default ledger location needs no set-up)
  // Open for reading only: no lock is taken (works beside a running `serve` and in a read-only
  // folder), no info LOG and no other file is created, changed, deleted or truncated; write()
  // fails with kIOError. Default: false.
  bool read_only = false;
  // Also read every table file in full and check all its block checksums on open (cost grows with
  // the ledger's size; `verify` and `recover` use it). Default: false: table blocks are checked
  // when they are read.
  bool check_all_files = false;
  // For `recover` only, on a copy of a damaged folder: open read-write without the checks,
  // skipping log records that fail their checksum, pointing a missing or bad CURRENT at the
  // newest MANIFEST, and falling back to the newest consistent set of table files (without the
  // log) when a table file is missing. This CHANGES the folder. Default: false.
  bool salvage_copy = false;
};

// Opens (or creates) a RocksDB database in folder `path`. Before a read-write open, the folder is
// first opened read-only and checked, so a damaged ledger is refused with every file left as it
// was (docs/ledger.md "Damaged files").
// Errors, each naming the folder (and the damaged file when known):
//   - kBusy: held by another process (names the LOCK file and, when the system reports it, the
//     pid); held by this process (a second open of the same folder); a damaged file: a byte
//     changed, a file missing or cut short (write-ahead log, table, MANIFEST, CURRENT, OPTIONS or
//     the seal file); unreadable or unwritable folder; `path` is a regular file; a folder that
//     holds files but no ledger when creating.
//   - kNotFound (code no_ledger): no ledger in the folder and create_if_missing == false ("no ledger at ...").
Result<std::unique_ptr<Store>> open_rocksdb_store(const std::string& path,
                                                  const RocksStoreOptions& options = {});

// Options of open_postgres_store().
struct PostgresStoreOptions {
  // Create the schema (tables alphaledger.*) when the database has none. Default: true. False: a
  // database without it is kNotFound (code no_ledger).
  bool create_if_missing = true;
  // Every transaction read-only (SET default_transaction_read_only); the schema is never
  // created; write() fails with kIOError. Default: false.
  bool read_only = false;
  // Seconds to wait for a connection (libpq connect_timeout) unless the URI sets it. Default: 10.
  int connect_timeout_s = 10;
  // Idle connections kept for reuse; more are opened while more threads use the store at once.
  // Default: 32 (a busy `serve` has a worker thread per client; a call that finds no idle
  // connection opens one, which costs a server process and a password exchange).
  std::size_t idle_connections = 32;
};

// True when `location` is a PostgreSQL connection URI (starts with postgresql:// or postgres://).
bool is_postgres_uri(std::string_view location);

// `uri` with its password (user:PASSWORD@ or a password= parameter) replaced by ***, for
// messages and logs. Anything else is returned as it is.
std::string redact_uri(std::string_view uri);

// Opens a ledger store in the PostgreSQL database named by `uri` (a libpq connection URI;
// credentials also come from PGPASSWORD and ~/.pgpass as libpq reads them), creating the schema
// on first read-write use (docs/postgresql.md). The store is shared(): several processes may use
// one database at once. describe() is the URI with its password hidden.
// Errors: kIOError (server unreachable, authentication refused, a user not allowed to create the
// schema, server gone: retry later), kNotFound code no_ledger (no schema and create_if_missing
// false or read_only), kCorruption (a schema version this build does not know).
Result<std::unique_ptr<Store>> open_postgres_store(const std::string& uri,
                                                   const PostgresStoreOptions& options = {});

// Opens the store at a ledger location: PostgreSQL when is_postgres_uri(location) (create_if_missing
// and read_only carried over; the other options are RocksDB's), else a RocksDB folder.
Result<std::unique_ptr<Store>> open_store_at(const std::string& location, const RocksStoreOptions& options = {});

// An in-memory store: a std::map under a mutex. write() is atomic; sync is a no-op.
class MemoryStore final : public Store {
 public:
  Result<std::optional<std::string>> get(std::string_view key) override;
  Status write(const WriteBatch& batch, bool sync = true) override;
  Status write_if(const WriteBatch& batch, std::string_view key, const std::optional<std::string>& expected,
                  bool sync = true) override;
  Status scan(std::string_view prefix, const Visitor& visit) override;
  std::string describe() const override { return "memory store"; }

 private:
  mutable std::mutex mu_;
  std::map<std::string, std::string, std::less<>> data_;
};

}  // namespace alphaledger
