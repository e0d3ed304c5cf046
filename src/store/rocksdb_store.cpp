// The RocksDB store: the only file that includes RocksDB headers; rocksdb::Status is translated
// to Error here and nowhere else (STYLE.md 7).
#include <fcntl.h>
#include <rocksdb/db.h>
#include <rocksdb/options.h>
#include <rocksdb/write_batch.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>

#include "alphaledger/store.hpp"

namespace alphaledger {
namespace {

// Who holds the fcntl lock RocksDB takes on <path>/LOCK: asks the kernel with F_GETLK, which
// reports another process's lock (never our own). Only called when RocksDB said the lock is held
// by another process: opening and closing the file in a process that holds the lock would drop it.
std::string lock_holder(const std::string& lock_file) {
  const int fd = ::open(lock_file.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return {};
  struct flock fl {};
  fl.l_type = F_WRLCK;
  fl.l_whence = SEEK_SET;
  fl.l_start = 0;
  fl.l_len = 0;
  std::string out;
  if (::fcntl(fd, F_GETLK, &fl) == 0 && fl.l_type != F_UNLCK && fl.l_pid > 0) {
    out = "process " + std::to_string(fl.l_pid);
    std::ifstream comm("/proc/" + std::to_string(fl.l_pid) + "/comm");
    std::string name;
    if (comm && std::getline(comm, name) && !name.empty()) out += " (" + name + ")";
  }
  ::close(fd);
  return out;
}

Error translate(const rocksdb::Status& s, const std::string& what) {
  return storage_error(what + ": " + s.ToString());
}

class RocksStore final : public Store {
 public:
  RocksStore(std::unique_ptr<rocksdb::DB> db, std::string path)
      : db_(std::move(db)), path_(std::move(path)) {}

  ~RocksStore() override {
    if (db_) {
      // Close flushes nothing we rely on: every acknowledged write was synced to the WAL.
      (void)db_->Close();
    }
  }

  Result<std::optional<std::string>> get(std::string_view key) override {
    std::string value;
    const auto s = db_->Get(rocksdb::ReadOptions(), rocksdb::Slice(key.data(), key.size()), &value);
    if (s.IsNotFound()) return std::optional<std::string>{};
    if (!s.ok()) return translate(s, "cannot read ledger " + path_);
    return std::optional<std::string>{std::move(value)};
  }

  Status write(const WriteBatch& batch, bool sync) override {
    rocksdb::WriteBatch wb;
    for (const auto& op : batch.ops) {
      const rocksdb::Slice key(op.key.data(), op.key.size());
      const auto s =
          op.erase ? wb.Delete(key) : wb.Put(key, rocksdb::Slice(op.value.data(), op.value.size()));
      if (!s.ok()) return translate(s, "cannot prepare a write to ledger " + path_);
    }
    rocksdb::WriteOptions wo;
    wo.sync = sync;
    const auto s = db_->Write(wo, &wb);
    if (!s.ok()) return translate(s, "cannot write to ledger " + path_);
    return {};
  }

  Status scan(std::string_view prefix, const Visitor& visit) override {
    rocksdb::ReadOptions ro;
    std::unique_ptr<rocksdb::Iterator> it(db_->NewIterator(ro));  // an implicit snapshot
    for (it->Seek(rocksdb::Slice(prefix.data(), prefix.size())); it->Valid(); it->Next()) {
      const auto k = it->key();
      const std::string_view key(k.data(), k.size());
      if (!key.starts_with(prefix)) break;
      const auto v = it->value();
      if (!visit(key, std::string_view(v.data(), v.size()))) break;
    }
    if (!it->status().ok()) return translate(it->status(), "cannot read ledger " + path_);
    return {};
  }

  std::string describe() const override { return path_; }

 private:
  std::unique_ptr<rocksdb::DB> db_;
  std::string path_;
};

}  // namespace

Result<std::unique_ptr<Store>> open_rocksdb_store(const std::string& path, const RocksStoreOptions& options) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (!options.create_if_missing && !fs::exists(fs::path(path) / "CURRENT", ec)) {
    return refused("no ledger at " + path +
                   " (create a stream first, or give the ledger folder with --ledger DIR)");
  }
  if (fs::exists(path, ec) && !fs::is_directory(path, ec)) {
    return storage_error("cannot open ledger " + path + ": it exists and is not a folder");
  }
  rocksdb::Options o;
  o.create_if_missing = options.create_if_missing;
  o.paranoid_checks = true;
  o.info_log_level = rocksdb::InfoLogLevel::WARN_LEVEL;
  o.keep_log_file_num = 2;
  o.max_log_file_size = 1 << 20;
  o.max_manifest_file_size = 4 << 20;
  // Small memtables: the write-ahead log replayed on the next open stays small (a few MB), so
  // opening after a long run of decisions takes well under a second. Default 64 MB.
  o.write_buffer_size = 8 << 20;
  // Replays the write-ahead log up to the last intact entry: a batch torn by a crash is dropped
  // whole; anything synced before it is kept (docs/ledger.md "What is durable when").
  o.wal_recovery_mode = rocksdb::WALRecoveryMode::kPointInTimeRecovery;
  rocksdb::DB* raw = nullptr;
  const auto s = rocksdb::DB::Open(o, path, &raw);
  if (!s.ok()) {
    const std::string text = s.ToString();
    const std::string lock_file = (fs::path(path) / "LOCK").string();
    if (text.find("lock hold by current process") != std::string::npos) {
      return storage_error("ledger " + path + " is in use: its lock file " + lock_file +
                           " is held by this process (pid " + std::to_string(::getpid()) +
                           ") through another open ledger");
    }
    if (text.find("While lock file") != std::string::npos) {
      std::string holder = lock_holder(lock_file);
      if (holder.empty()) holder = "another process";
      return storage_error(
          "ledger " + path + " is in use: its lock file " + lock_file + " is held by " + holder +
          "; wait for it to finish, or stop it (alphaledger serve holds the ledger while it runs)");
    }
    if (s.IsCorruption()) return storage_error("ledger " + path + " is corrupt: " + text);
    return storage_error("cannot open ledger " + path + ": " + text);
  }
  return std::unique_ptr<Store>(std::make_unique<RocksStore>(std::unique_ptr<rocksdb::DB>(raw), path));
}

}  // namespace alphaledger
