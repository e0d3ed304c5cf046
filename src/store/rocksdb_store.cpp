// The RocksDB store. Only the rocksdb_* files of the store include RocksDB headers; rocksdb::Status
// is translated to Error there and nowhere else (DEVELOPERS.md).
//
// Damage is refused, never repaired on the quiet (docs/ledger.md "Damaged files"):
//   - every open first opens the folder read-only (nothing written, no lock, no info LOG) with
//     strict checks: the write-ahead log's record checksums, the MANIFEST, the table files it
//     names, and our seal file. Only if that passes is a read-write open made;
//   - the seal file (kSealFile) records the highest sequence number of a synced write and a hash of
//     the OPTIONS file RocksDB wrote when the ledger was last opened for writing. It is overwritten
//     in place with one pwrite() after each synced write (no extra fsync), so a log that was cut
//     short or removed after it had acknowledged decisions is found on the next open.
//
// The other files of the store are listed in store/rocksdb_internal.hpp.
#include <rocksdb/cache.h>
#include <rocksdb/db.h>
#include <rocksdb/env.h>
#include <rocksdb/filter_policy.h>
#include <rocksdb/slice_transform.h>
#include <rocksdb/table.h>
#include <rocksdb/write_batch.h>

#include <atomic>
#include <chrono>
#include <mutex>
#include <set>
#include <shared_mutex>
#include <thread>

#include "store/rocksdb_internal.hpp"

namespace alphaledger::rocks {

// A writer that leaves at least this many entries in memory writes them to a table file when it
// closes; see ~RocksStore. A decision writes two or three entries, so this is 5,000 to 8,000
// decisions; a read-only open replays at most that much log (about 1 MB, about 25 ms of CPU on our
// loaded machine). (RocksDB's memtable size in bytes is no measure: it counts whole arena blocks.)
constexpr std::uint64_t kFlushOnCloseEntries = 16384;

// Folders this process holds open for writing. F_GETLK (lock_holder) must not be used on those:
// closing any descriptor of the LOCK file drops the process's lock on it.
std::mutex g_open_mu;
std::set<std::string> g_open_for_writing;

std::string canonical_key(const std::string& path) {
  std::error_code ec;
  auto p = fs::weakly_canonical(path, ec);
  return ec ? path : p.string();
}

bool held_here(const std::string& path) {
  std::lock_guard lock(g_open_mu);
  return g_open_for_writing.count(canonical_key(path)) > 0;
}

// The prefix "r/<stream>/" of a record key. A stream's records are written in step order, so
// the memtable can insert each one after the previous one of its stream (a remembered position)
// instead of searching its skip list from the top. Other keys are inserted as before.
class RecordKeyPrefix final : public rocksdb::SliceTransform {
 public:
  const char* Name() const override { return "alphaledger.RecordKeyPrefix"; }
  rocksdb::Slice Transform(const rocksdb::Slice& key) const override {
    const auto* slash = static_cast<const char*>(std::memchr(key.data() + 2, '/', key.size() - 2));
    return {key.data(), static_cast<std::size_t>(slash - key.data()) + 1};
  }
  bool InDomain(const rocksdb::Slice& key) const override {
    return key.size() > 2 && key[0] == 'r' && key[1] == '/' &&
           std::memchr(key.data() + 2, '/', key.size() - 2) != nullptr;
  }
};

// The environment of a read-only open: the process's own, except that opening does not start
// RocksDB's two background threads (one for flushes, one for compactions). A read-only database
// never flushes or compacts; starting and later joining those threads was a measurable part of a
// read command's cost (docs/benchmarks.md "CLI fixed cost after lazy start"). Should anything be
// scheduled after all, the pool starts a thread for it then, as it does for any first job.
class ReaderEnv final : public rocksdb::EnvWrapper {
 public:
  ReaderEnv() : rocksdb::EnvWrapper(rocksdb::Env::Default()) {}
  const char* Name() const override { return "alphaledger.ReaderEnv"; }
  void IncBackgroundThreadsIfNeeded(int /*number*/, Priority /*pri*/) override {}
};

rocksdb::Env* reader_env() {
  static ReaderEnv env;  // built at the first read-only open, not at start-up
  return &env;
}

rocksdb::Options base_options(bool read_only) {
  rocksdb::Options o;
  o.create_if_missing = false;
  o.paranoid_checks = true;
  o.info_log_level = rocksdb::InfoLogLevel::WARN_LEVEL;
  if (read_only) o.info_log = std::make_shared<SilentLogger>();
  o.keep_log_file_num = 2;
  o.max_log_file_size = 1 << 20;
  o.max_manifest_file_size = 4 << 20;
  // Small memtables: the write-ahead log replayed on the next open stays small (a few MB), so
  // opening after a long run of decisions takes well under a second. Default 64 MB.
  o.write_buffer_size = 8 << 20;
  // A record with a wrong checksum anywhere in the log is an error (never skipped); only an
  // incomplete record at the very end of the last log is dropped, as a kill during a write() of
  // an unacknowledged batch leaves it. Acknowledged writes are protected by the seal.
  o.wal_recovery_mode = rocksdb::WALRecoveryMode::kTolerateCorruptedTailRecords;
  // Closed logs are listed in the MANIFEST with their sizes: a removed or cut one is an error.
  o.track_and_verify_wals_in_manifest = true;
  // The fixed cost of one CLI process (docs/benchmarks.md "Ledger"). None of these skips a check:
  //  - table files are opened (footer, index, unique id checked) by one thread, not by 16 new
  //    threads created for each open: a ledger has a handful of table files;
  //  - no statistics timer thread, and no statistics read from every table file at open (they
  //    only guide compaction);
  o.max_file_opening_threads = 1;
  o.stats_dump_period_sec = 0;
  o.stats_persist_period_sec = 0;
  o.skip_stats_update_on_db_open = true;
  // The cost of a decision (docs/benchmarks.md "Ledger throughput"). Every new test first looks
  // up its id, which is almost always absent. Bloom filters answer most such lookups without
  // searching: one per table file (10 bits a key, about 1% false positives; files written
  // before this have none and are searched as before) and, for a writer, one over the memtable's
  // whole keys (a read-only open does not pay for building it while it replays the log).
  // The bytes of keys and values are unchanged; only RocksDB's table files gain a filter block.
  rocksdb::BlockBasedTableOptions table;
  table.filter_policy.reset(rocksdb::NewBloomFilterPolicy(10));
  if (read_only) {
    // A reader of a few keys (status, next) or one pass over a stream (history, verify): an 8 MB
    // block cache and a table cache in one shard each, not RocksDB's default of 16 and 64 shards
    // built for many threads; building those was most of a read-only open's set-up.
    table.block_cache = rocksdb::NewLRUCache(8 << 20, /*num_shard_bits=*/0);
    o.table_cache_numshardbits = 0;
    o.env = reader_env();
  }
  o.table_factory.reset(rocksdb::NewBlockBasedTableFactory(table));
  if (!read_only) {
    o.memtable_prefix_bloom_size_ratio = 0.05;
    o.memtable_whole_key_filtering = true;
    o.memtable_insert_with_hint_prefix_extractor = std::make_shared<RecordKeyPrefix>();
  }
  return o;
}

namespace {

class RocksStore final : public Store {
 public:
  RocksStore(std::unique_ptr<rocksdb::DB> db, std::string path, bool read_only)
      : db_(std::move(db)), path_(std::move(path)), read_only_(read_only) {
    if (!read_only_) {
      std::lock_guard lock(g_open_mu);
      g_open_for_writing.insert(canonical_key(path_));
    }
  }

  ~RocksStore() override {
    if (!read_only_) {
      std::lock_guard lock(g_open_mu);
      g_open_for_writing.erase(canonical_key(path_));
    }
    if (db_) {
      // Every acknowledged write was synced to the write-ahead log already. A writer still moves
      // what it wrote into a table file before it closes, so that the next read-only open (which
      // cannot do that itself) does not replay a long log into memory: after 10,000 decisions by
      // one `decide --file`, that replay was most of a `next`'s time. The next read-write open
      // would write the same table file anyway; a failure here loses nothing (the log stays).
      // A short log (one `decide --id`, a small `decide --file`) is left to that open: replaying
      // it costs little, and flushing here would add four syncs to every single decision.
      if (!read_only_ && !failing_) {
        std::uint64_t in_memory = 0;
        if (db_->GetIntProperty(rocksdb::DB::Properties::kNumEntriesActiveMemTable, &in_memory) &&
            in_memory >= kFlushOnCloseEntries) {
          rocksdb::FlushOptions fo;
          fo.wait = true;
          (void)db_->Flush(fo);
        }
      }
      (void)db_->Close();
    }
  }

  // After a read-write open: records the OPTIONS file just written, the current sequence and
  // the newest table file in the seal, synced once; later writes keep it up to date.
  Status start_seal(std::shared_ptr<SealKeeper> keeper) {
    seal_ = std::move(keeper);
    if (auto e = seal_->start(path_, db_->GetLatestSequenceNumber(), newest_table(*db_))) {
      return io_error("cannot open ledger " + path_ + ": " + *e);
    }
    return {};
  }

  Result<std::optional<std::string>> get(std::string_view key) override {
    std::string value;
    std::shared_lock db_lock(db_mu_);
    if (!db_)
      return io_error("cannot read ledger " + path_ + ": it could not be reopened after a failed write");
    const auto s = db_->Get(rocksdb::ReadOptions(), rocksdb::Slice(key.data(), key.size()), &value);
    if (s.IsNotFound()) return std::optional<std::string>{};
    if (!s.ok()) return translate(s, "cannot read ledger " + path_, path_);
    return std::optional<std::string>{std::move(value)};
  }

  Status write(const WriteBatch& batch, bool sync) override {
    if (read_only_) {
      return io_error("cannot write to ledger " + path_ + ": it was opened for reading only");
    }
    std::size_t bytes = 64;
    for (const auto& op : batch.ops) bytes += op.key.size() + op.value.size() + 16;
    rocksdb::WriteBatch wb(bytes);  // one allocation for the whole batch
    for (const auto& op : batch.ops) {
      const rocksdb::Slice key(op.key.data(), op.key.size());
      const auto s =
          op.erase ? wb.Delete(key) : wb.Put(key, rocksdb::Slice(op.value.data(), op.value.size()));
      if (!s.ok()) return translate(s, "cannot prepare a write to ledger " + path_, path_);
    }
    std::unique_lock lock(write_mu_);
    // A failed write leaves RocksDB stopped (a background error) until it is resumed. We first
    // ask it to resume; if it will not, or if a write fails again after resuming, we close and
    // reopen the database (its own recovery replays the log). So the ledger works again once the
    // disk has room (or is writable) again, without restarting the process. While failing, writes
    // are made one at a time (under write_mu_); when healthy, write_mu_ is released before the
    // write, so that concurrent synced writes (different streams in `serve`) reach RocksDB together
    // and share one log sync (its write group) instead of queueing for one sync each.
    if (failing_) {
      auto r = db_->Resume();
      for (int i = 0; i < 10 && (r.IsBusy() || r.IsTryAgain()); ++i) {
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
        r = db_->Resume();
      }
      if (!r.ok() || resumed_once_) {
        if (auto e = reopen(); !e) {
          failing_ = "writes to ledger " + path_ + " fail: " + e.error().message;
          return io_error(*failing_ + " (the write was not made; retry when the disk is fixed)");
        }
      }
      resumed_once_ = true;
    } else {
      lock.unlock();
    }
    rocksdb::WriteOptions wo;
    wo.sync = sync;
    rocksdb::Status s;
    std::uint64_t synced_up_to = 0;
    {
      // Synced writes may run together; an unsynced one runs alone. So when a synced write
      // returns, every write RocksDB has published was synced, and the latest sequence number is
      // one the seal may record (the seal must never run ahead of the synced log).
      std::shared_lock sync_shared(sync_mu_, std::defer_lock);
      std::unique_lock sync_alone(sync_mu_, std::defer_lock);
      if (sync) {
        sync_shared.lock();
      } else {
        sync_alone.lock();
      }
      std::shared_lock db_lock(db_mu_);
      if (!db_) return io_error("cannot write to ledger " + path_ + ": it could not be reopened");
      s = db_->Write(wo, &wb);
      if (s.ok() && sync) synced_up_to = db_->GetLatestSequenceNumber();
    }
    if (!lock.owns_lock()) lock.lock();
    if (!s.ok()) {
      failing_ = "writes to ledger " + path_ + " fail: " + cause_of(s, path_);
      return io_error("cannot write to ledger " + path_ + ": " + cause_of(s, path_));
    }
    failing_.reset();
    resumed_once_ = false;
    lock.unlock();
    // Everything up to this sequence is now on stable storage.
    if (sync && seal_) seal_->note_sequence(synced_up_to);
    return {};
  }

  Status scan(std::string_view prefix, const Visitor& visit) override {
    rocksdb::ReadOptions ro;
    std::shared_lock db_lock(db_mu_);
    if (!db_)
      return io_error("cannot read ledger " + path_ + ": it could not be reopened after a failed write");
    std::unique_ptr<rocksdb::Iterator> it(db_->NewIterator(ro));  // an implicit snapshot
    for (it->Seek(rocksdb::Slice(prefix.data(), prefix.size())); it->Valid(); it->Next()) {
      const auto k = it->key();
      const std::string_view key(k.data(), k.size());
      if (!key.starts_with(prefix)) break;
      const auto v = it->value();
      if (!visit(key, std::string_view(v.data(), v.size()))) break;
    }
    if (!it->status().ok()) return translate(it->status(), "cannot read ledger " + path_, path_);
    return {};
  }

  std::string describe() const override { return path_; }
  bool read_only() const override { return read_only_; }
  std::optional<std::string> failing() const override {
    std::lock_guard lock(write_mu_);
    return failing_;
  }

 private:
  // REQUIRES: write_mu_ held. Closes and reopens the database with the options of the first open.
  Status reopen() {
    if (!reopen_options_) return io_error("the ledger cannot be reopened");
    std::unique_lock db_lock(db_mu_);
    (void)db_->Close();
    db_.reset();
    rocksdb::DB* raw = nullptr;
    const auto s = rocksdb::DB::Open(*reopen_options_, path_, &raw);
    if (!s.ok()) {
      // Keep a usable object: a read-only view, so reads keep working and writes keep failing.
      rocksdb::DB* ro = nullptr;
      if (open_read_only(base_options(true), path_, &ro).ok()) db_.reset(ro);
      return io_error(cause_of(s, path_));
    }
    db_.reset(raw);
    if (seal_) {
      if (auto e = seal_->start(path_, db_->GetLatestSequenceNumber(), newest_table(*db_)))
        return io_error(*e);
    }
    return {};
  }

 public:
  void set_reopen_options(const rocksdb::Options& o) { reopen_options_ = o; }

 private:
  std::unique_ptr<rocksdb::DB> db_;
  mutable std::shared_mutex db_mu_;  // exclusive only while reopening
  std::optional<rocksdb::Options> reopen_options_;
  bool resumed_once_ = false;
  std::string path_;
  bool read_only_ = false;
  mutable std::mutex write_mu_;  // failing_, resumed_once_, and writes while failing
  std::shared_mutex sync_mu_;    // shared: synced writes; exclusive: an unsynced write
  std::optional<std::string> failing_;
  std::shared_ptr<SealKeeper> seal_;  // null when read-only or salvaging
};

}  // namespace

std::unique_ptr<Store> make_salvage_store(std::unique_ptr<rocksdb::DB> db, const std::string& path) {
  return std::make_unique<RocksStore>(std::move(db), path, false);
}

std::unique_ptr<Store> make_reader_store(std::unique_ptr<rocksdb::DB> db, const std::string& path) {
  return std::make_unique<RocksStore>(std::move(db), path, true);
}

Result<std::unique_ptr<Store>> make_writer_store(std::unique_ptr<rocksdb::DB> db, const std::string& path,
                                                 std::shared_ptr<SealKeeper> keeper,
                                                 const rocksdb::Options& options) {
  auto store = std::make_unique<RocksStore>(std::move(db), path, false);
  if (auto st = store->start_seal(std::move(keeper)); !st) return st.error();
  store->set_reopen_options(options);
  return std::unique_ptr<Store>(std::move(store));
}

}  // namespace alphaledger::rocks
