// Opening a RocksDB ledger (open_rocksdb_store, include/alphaledger/store.hpp): the folder's
// state, the lock, the strict read-only checks every open makes first (rocksdb_checks.cpp), then
// the read-write open with the seal (see rocksdb_store.cpp for the order and its reasons).
#include "store/rocksdb_internal.hpp"

namespace alphaledger::rocks {

Error in_use(const std::string& path, const std::string& lock_file, bool here, std::string holder) {
  if (here) {
    return busy("ledger " + path + " is in use: its lock file " + lock_file +
                " is held by this process (pid " + std::to_string(::getpid()) +
                ") through another open ledger");
  }
  if (holder.empty()) holder = "another process";
  return busy("ledger " + path + " is in use: its lock file " + lock_file + " is held by " + holder +
              "; wait for it to finish, or stop it (alphaledger serve holds the ledger while it runs)");
}

namespace {

// Whether `path` holds a ledger (its CURRENT file), after refusing a path that is not a folder, a
// folder with ledger files but no CURRENT, and, when no ledger is to be made there, a missing
// ledger or a folder that holds other files.
Result<bool> ledger_present(const std::string& path, const RocksStoreOptions& options) {
  std::error_code ec;
  const bool exists = fs::exists(path, ec);
  if (exists && !fs::is_directory(path, ec)) {
    return io_error("cannot open ledger " + path +
                    ": it exists and is not a folder (a ledger is a folder; give a folder path)");
  }
  const bool has_current = exists && fs::exists(fs::path(path) / "CURRENT", ec);
  if (exists && !has_current && has_ledger_files(path)) {
    return damaged(
        path, "file " + (fs::path(path) / "CURRENT").string() + " (the pointer to the MANIFEST) is missing");
  }
  if (!has_current) {
    if (!options.create_if_missing || options.read_only) {
      return not_found("no ledger at " + path, "no_ledger");  // the CLI adds how to make or name one
    }
    if (exists && !folder_is_empty(path)) {
      return io_error("cannot create a ledger in " + path +
                      ": the folder holds other files and no ledger (give an empty or new folder)");
    }
  }
  return has_current;
}

// The read-write open, creating the ledger when `create`; its errors in our words.
Result<std::unique_ptr<Store>> open_writer(const std::string& path, bool create) {
  rocksdb::Options o = base_options(/*read_only=*/false);
  o.create_if_missing = create;
  auto keeper = std::make_shared<SealKeeper>();
  o.listeners.push_back(std::make_shared<SealListener>(keeper));
  if (create) {
    std::error_code ec;
    fs::create_directories(path, ec);
    if (ec) {
      return io_error("cannot create ledger folder " + path + ": " + ec.message() +
                      " (check that the parent folder exists and is writable)");
    }
  }
  const std::string lock_file = (fs::path(path) / "LOCK").string();
  rocksdb::DB* raw = nullptr;
  const auto s = rocksdb::DB::Open(o, path, &raw);
  if (!s.ok()) {
    const std::string text = s.ToString();
    if (text.find("lock hold by current process") != std::string::npos) return in_use(path, lock_file, true);
    if (text.find("While lock file") != std::string::npos)
      return in_use(path, lock_file, false, lock_holder(lock_file));
    if (s.IsCorruption()) return damaged(path, cause_of(s, path));
    return translate(s, "cannot open ledger " + path, path);
  }
  return make_writer_store(std::unique_ptr<rocksdb::DB>(raw), path, std::move(keeper), o);
}

}  // namespace
}  // namespace alphaledger::rocks

namespace alphaledger {

Result<std::unique_ptr<Store>> open_rocksdb_store(const std::string& path, const RocksStoreOptions& options) {
  using namespace rocks;  // NOLINT(google-build-using-namespace): the store's own internals
  if (options.salvage_copy) return open_salvage_copy(path);
  auto has_current = ledger_present(path, options);
  if (!has_current) return has_current.error();
  if (*has_current && !options.read_only) {
    // In use: say so before the checks, which could meet a write in progress.
    const std::string lock_file = (fs::path(path) / "LOCK").string();
    if (held_here(path)) return in_use(path, lock_file, true);
    if (std::string holder = lock_holder(lock_file); !holder.empty())
      return in_use(path, lock_file, false, holder);
  }
  if (*has_current) {
    auto checked = open_checked(path, options.check_all_files);
    if (!checked) return checked.error();
    if (options.read_only) return make_reader_store(std::move(*checked), path);
  }
  return open_writer(path, !*has_current);
}

}  // namespace alphaledger
