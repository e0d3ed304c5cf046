// Opening a copy of a damaged ledger for `recover`: whatever RocksDB can still read, with its
// checks relaxed step by step; the hash chain then proves how far the copy goes.
#include <fstream>

#include "store/rocksdb_internal.hpp"

namespace alphaledger::rocks {

// The newest MANIFEST-<n> in the folder, "" when none.
std::string newest_manifest(const std::string& folder) {
  std::uint64_t best = 0;
  std::string name;
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(folder, ec)) {
    const std::string n = entry.path().filename().string();
    if (!n.starts_with("MANIFEST-")) continue;
    const std::string digits = n.substr(9);
    if (digits.empty() || digits.find_first_not_of("0123456789") != std::string::npos) continue;
    if (const auto v = std::stoull(digits); v >= best) {
      best = v;
      name = n;
    }
  }
  return name;
}

Result<std::unique_ptr<Store>> open_salvage_copy(const std::string& path) {
  std::error_code ec;
  const std::string manifest = newest_manifest(path);
  if (manifest.empty()) {
    return corruption("cannot read ledger copy " + path +
                      ": it has no MANIFEST file (the list of table files)");
  }
  auto current = read_file(fs::path(path) / "CURRENT");
  if (!current || current->empty() || current->back() != '\n' ||
      !fs::exists(fs::path(path) / current->substr(0, current->size() - 1), ec)) {
    std::ofstream(fs::path(path) / "CURRENT", std::ios::trunc | std::ios::binary) << manifest << '\n';
  }
  fs::remove(fs::path(path) / kSealFile, ec);
  rocksdb::Options o = base_options(/*read_only=*/false);
  o.info_log = std::make_shared<SilentLogger>();
  o.paranoid_checks = false;
  o.track_and_verify_wals_in_manifest = false;
  // First skip damaged log records, so that records after the damage (such as the stream's
  // later head, which tells how many steps existed) are still seen; the hash chain then proves how
  // far the copy goes. If RocksDB cannot apply what follows the damage ("write batch content
  // corrupted": without checksums it applies a damaged batch), keep everything before the first
  // damaged record, with checksums on. Last, table files alone.
  o.wal_recovery_mode = rocksdb::WALRecoveryMode::kSkipAnyCorruptedRecords;
  rocksdb::DB* raw = nullptr;
  auto s = rocksdb::DB::Open(o, path, &raw);
  if (!s.ok()) {
    o.wal_recovery_mode = rocksdb::WALRecoveryMode::kPointInTimeRecovery;
    o.paranoid_checks = true;
    raw = nullptr;
    s = rocksdb::DB::Open(o, path, &raw);
    o.paranoid_checks = false;
  }
  if (!s.ok()) {
    o.best_efforts_recovery = true;
    raw = nullptr;
    const auto s2 = rocksdb::DB::Open(o, path, &raw);
    if (!s2.ok()) return translate(s, "cannot read ledger copy " + path, path);
  }
  return make_salvage_store(std::unique_ptr<rocksdb::DB>(raw), path);
}

}  // namespace alphaledger::rocks
