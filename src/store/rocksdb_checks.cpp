// The seal file and the strict read-only open that precedes every open of a ledger (see the
// top of rocksdb_store.cpp for what they protect against).
#include <algorithm>
#include <chrono>
#include <fstream>
#include <thread>

#include "core/bytes.hpp"

#include "store/rocksdb_internal.hpp"

namespace alphaledger::rocks {

std::string encode_seal(const Seal& seal) {
  std::string out(kSealMagic);
  bytes::put_u64(out, seal.sequence);
  bytes::put_u64(out, seal.newest_table);
  bytes::put_u64(out, seal.options_number);
  out.append(store::as_bytes(seal.options_hash));
  const auto check = store::sha256(out);
  out.append(store::as_bytes(check).substr(0, 8));
  return out;
}

std::optional<Seal> decode_seal(std::string_view bytes) {
  if (bytes.size() != kSealSize || bytes.substr(0, 8) != kSealMagic) return std::nullopt;
  const auto check = store::sha256(bytes.substr(0, kSealSize - 8));
  if (store::as_bytes(check).substr(0, 8) != bytes.substr(kSealSize - 8)) return std::nullopt;
  Seal seal;
  seal.sequence = bytes::get_u64(bytes.substr(8));
  seal.newest_table = bytes::get_u64(bytes.substr(16));
  seal.options_number = bytes::get_u64(bytes.substr(24));
  std::memcpy(seal.options_hash.data(), bytes.data() + 32, 32);
  return seal;
}

std::optional<std::string> read_file(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  if (!in) return std::nullopt;
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  if (in.bad()) return std::nullopt;
  return bytes;
}

// The newest OPTIONS-<n> file in the folder: its number (0 when there is none).
std::uint64_t newest_options_number(const std::string& folder) {
  std::uint64_t best = 0;
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(folder, ec)) {
    const std::string name = entry.path().filename().string();
    if (!name.starts_with("OPTIONS-") || name.ends_with(".dbtmp")) continue;
    const std::string digits = name.substr(8);
    if (digits.empty() || digits.find_first_not_of("0123456789") != std::string::npos) continue;
    best = std::max<std::uint64_t>(best, std::stoull(digits));
  }
  return best;
}

std::string options_file_name(std::uint64_t number) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "OPTIONS-%06llu", static_cast<unsigned long long>(number));
  return buf;
}

// Checks the seal against what the read-only open found. `sequence_found` is the highest
// sequence number the log and tables hold. std::nullopt when all is well or there is no seal (a
// ledger written before seals existed).
std::optional<std::string> check_seal(const std::string& folder, std::uint64_t sequence_found,
                                      std::uint64_t newest_table_found) {
  const fs::path seal_path = fs::path(folder) / kSealFile;
  std::error_code ec;
  if (!fs::exists(seal_path, ec)) return std::nullopt;
  auto bytes = read_file(seal_path);
  if (!bytes) return "file " + seal_path.string() + " (seal file) cannot be read";
  auto seal = decode_seal(*bytes);
  if (!seal) return "file " + seal_path.string() + " (seal file) is damaged (its check does not match)";
  if (sequence_found < seal->sequence) {
    return "the write-ahead log ends before the last write this ledger acknowledged (write number " +
           std::to_string(seal->sequence) + " was synced, the files hold writes up to number " +
           std::to_string(sequence_found) + "): a .log file in " + folder +
           " was cut short or removed, and decisions are missing";
  }
  if (newest_table_found < seal->newest_table) {
    return "file " + (fs::path(folder) / "CURRENT").string() +
           " points to a MANIFEST (the list of table files) that does not list table file " +
           std::to_string(seal->newest_table) +
           ", which the ledger had written: the MANIFEST was cut short or replaced";
  }
  if (seal->options_number != 0) {
    const fs::path opts = fs::path(folder) / options_file_name(seal->options_number);
    auto content = read_file(opts);
    // A read-write open writes a new OPTIONS file (RocksDB keeps the newest two) before it updates
    // the seal; one stopped in between (kill -9) leaves the seal naming an older file, which the
    // next such open removes. So the file may be gone only if a newer one exists. Both are
    // RocksDB's record of settings the ledger sets in code; it never reads them back.
    if (!content && newest_options_number(folder) > seal->options_number) return std::nullopt;
    if (!content) return "file " + opts.string() + " (OPTIONS file) is missing";
    if (store::sha256(*content) != seal->options_hash)
      return "file " + opts.string() + " (OPTIONS file) was changed since the ledger wrote it";
  }
  return std::nullopt;
}

// The highest number of a table file the open database lists.
std::uint64_t newest_table(rocksdb::DB& db) {
  std::vector<rocksdb::LiveFileMetaData> files;
  db.GetLiveFilesMetaData(&files);
  std::uint64_t best = 0;
  for (const auto& f : files) best = std::max<std::uint64_t>(best, f.file_number);
  return best;
}

bool folder_is_empty(const std::string& path) {
  std::error_code ec;
  return fs::is_empty(path, ec) && !ec;
}

// Does the folder hold any of RocksDB's own files, even without CURRENT?
bool has_ledger_files(const std::string& path) {
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(path, ec)) {
    const std::string name = entry.path().filename().string();
    if (name.starts_with("MANIFEST-") || name.ends_with(".sst") || name.ends_with(".log") ||
        name == kSealFile || name == "IDENTITY")
      return true;
  }
  return false;
}

rocksdb::Status open_read_only(const rocksdb::Options& options, const std::string& path, rocksdb::DB** db) {
  const std::vector<rocksdb::ColumnFamilyDescriptor> families{
      {rocksdb::kDefaultColumnFamilyName, rocksdb::ColumnFamilyOptions(options)}};
  std::vector<rocksdb::ColumnFamilyHandle*> handles;
  auto s = rocksdb::DB::OpenForReadOnly(rocksdb::DBOptions(options), path, families, &handles, db);
  // The database keeps its own handle of the default family (DefaultColumnFamily()), which every
  // call here uses; the one returned is released at once.
  for (auto* h : handles) delete h;
  return s;
}

// The read-only open with every check; on success the checked database. A read-only open beside
// a process that is writing can meet a log record or MANIFEST entry that is still being written:
// then it tries again a few times before calling the folder damaged.
Result<std::unique_ptr<rocksdb::DB>> open_checked(const std::string& path, bool check_all_files) {
  auto options = base_options(/*read_only=*/true);
  auto logger = std::make_shared<SilentLogger>();
  options.info_log = logger;
  const std::string lock_file = (fs::path(path) / "LOCK").string();
  for (int attempt = 0;; ++attempt) {
    rocksdb::DB* raw = nullptr;
    // Read the seal before the log: the seal never runs ahead of what is synced.
    auto s = open_read_only(options, path, &raw);
    std::unique_ptr<rocksdb::DB> db(raw);
    std::optional<std::string> problem;
    if (!s.ok()) {
      problem = s.IsCorruption() || s.IsIOError() || s.IsPathNotFound() || s.IsInvalidArgument()
                    ? cause_of(s, path, logger->text())
                    : std::string{};
      if (problem->empty()) return translate(s, "cannot open ledger " + path, path);
    } else {
      if (check_all_files) {
        const auto v = db->VerifyChecksum();
        if (!v.ok()) problem = cause_of(v, path);
      }
      if (!problem) problem = check_seal(path, db->GetLatestSequenceNumber(), newest_table(*db));
    }
    if (!problem) return db;
    db.reset();
    if (attempt < 4 && (held_here(path) || !lock_holder(lock_file).empty())) {
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
      continue;
    }
    if (s.IsIOError() && !s.IsCorruption() && problem->find("damaged") == std::string::npos &&
        problem->find("missing") == std::string::npos) {
      return io_error("cannot open ledger " + path + ": " + *problem);
    }
    return damaged(path, *problem);
  }
}

}  // namespace alphaledger::rocks
