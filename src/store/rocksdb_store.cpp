// The RocksDB store: the only file that includes RocksDB headers; rocksdb::Status is translated
// to Error here and nowhere else (DEVELOPERS.md).
//
// Damage is refused, never repaired on the quiet (docs/ledger.md "Damaged files"):
//   - every open first opens the folder read-only (nothing written, no lock, no info LOG) with
//     strict checks: the write-ahead log's record checksums, the MANIFEST, the table files it
//     names, and our seal file. Only if that passes is a read-write open made;
//   - the seal file (kSealFile) records the highest sequence number of a synced write and a hash of
//     the OPTIONS file RocksDB wrote when the ledger was last opened for writing. It is overwritten
//     in place with one pwrite() after each synced write (no extra fsync), so a log that was cut
//     short or removed after it had acknowledged decisions is found on the next open.
#include <fcntl.h>
#include <rocksdb/db.h>
#include <rocksdb/env.h>
#include <rocksdb/filter_policy.h>
#include <rocksdb/listener.h>
#include <rocksdb/options.h>
#include <rocksdb/slice_transform.h>
#include <rocksdb/table.h>
#include <rocksdb/write_batch.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <chrono>
#include <cstdarg>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <mutex>
#include <set>
#include <shared_mutex>
#include <thread>

#include "alphaledger/store.hpp"
#include "store/sha256.hpp"

namespace alphaledger {
namespace {

namespace fs = std::filesystem;

// Our side file in the ledger folder. RocksDB ignores files whose names it does not know.
constexpr const char* kSealFile = "ALPHALEDGER-SEAL";
constexpr std::string_view kSealMagic{"alseal1\0", 8};
// magic, sequence, newest table file number, OPTIONS number, its hash, check
constexpr std::size_t kSealSize = 8 + 8 + 8 + 8 + 32 + 8;
// A writer that leaves at least this many entries in memory writes them to a table file when it
// closes; see ~RocksStore. A decision writes two or three entries, so this is 5,000 to 8,000
// decisions; a read-only open replays at most that much log (about 1 MB, about 25 ms of CPU on our
// loaded machine). (RocksDB's memtable size in bytes is no measure: it counts whole arena blocks.)
constexpr std::uint64_t kFlushOnCloseEntries = 16384;

// Who holds the fcntl lock RocksDB takes on <path>/LOCK: asks the kernel with F_GETLK, which
// reports another process's lock (never our own). Only called when RocksDB said the lock is held
// by another process, or from a read-only open (which takes no lock): opening and closing the
// file in a process that holds the lock would drop it.
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

// A RocksDB info logger that writes no file (a read-only open must not create a LOG file). It
// keeps the last few warnings in memory: RocksDB names a damaged log file only there.
class SilentLogger final : public rocksdb::Logger {
 public:
  SilentLogger() : rocksdb::Logger(rocksdb::InfoLogLevel::WARN_LEVEL) {}
  using rocksdb::Logger::Logv;
  void Logv(const char* format, va_list ap) override { Logv(rocksdb::InfoLogLevel::WARN_LEVEL, format, ap); }
  void Logv(const rocksdb::InfoLogLevel level, const char* format, va_list ap) override {
    if (level < rocksdb::InfoLogLevel::WARN_LEVEL) return;
    char buf[512];
    std::vsnprintf(buf, sizeof buf, format, ap);
    std::lock_guard lock(mu_);
    if (lines_.size() >= 16) lines_.erase(lines_.begin());
    lines_.emplace_back(buf);
  }
  std::string text() const {
    std::lock_guard lock(mu_);
    std::string out;
    for (const auto& l : lines_) out += l + "\n";
    return out;
  }

 private:
  mutable std::mutex mu_;
  std::vector<std::string> lines_;
};

// Which kind of ledger file `name` is, for messages.
std::string file_kind(const std::string& name) {
  if (name.ends_with(".log")) return "write-ahead log";
  if (name.ends_with(".sst") || name.ends_with(".ldb")) return "table file";
  if (name.starts_with("MANIFEST")) return "MANIFEST (the list of table files)";
  if (name == "CURRENT") return "CURRENT (the pointer to the MANIFEST)";
  if (name.starts_with("OPTIONS")) return "OPTIONS file";
  if (name == kSealFile) return "seal file";
  return "file";
}

// The first ledger file named in RocksDB's text (a path inside `folder`, or a bare numbered file
// name), as "file <path> (<kind>)"; empty when none is named.
// Whether `name` is one of the files a ledger folder holds (RocksDB's numbered files, MANIFEST,
// CURRENT, OPTIONS, IDENTITY, LOCK, our seal), so that a RocksDB source file named in its message
// (e.g. "db_impl/db_impl_open.cc") is never taken for a ledger file.
bool is_ledger_file_name(const std::string& name) {
  for (const char* ext : {".log", ".sst", ".ldb", ".blob"}) {
    if (name.ends_with(ext)) {
      const auto stem = name.substr(0, name.size() - std::string_view(ext).size());
      return !stem.empty() && stem.find_first_not_of("0123456789") == std::string::npos;
    }
  }
  return name.starts_with("MANIFEST-") || name.starts_with("OPTIONS-") || name == "CURRENT" ||
         name == "IDENTITY" || name == "LOCK" || name == kSealFile;
}

std::string named_file(const std::string& text, const std::string& folder) {
  std::string name;
  const std::string prefix = folder + "/";
  for (auto at = text.find(prefix); at != std::string::npos; at = text.find(prefix, at + 1)) {
    if (at > 0 && text[at - 1] != ' ' && text[at - 1] != ':' && text[at - 1] != '\'' &&
        text[at - 1] != '"' && text[at - 1] != '\t' && text[at - 1] != '\n' && text[at - 1] != '(')
      continue;  // "l/" inside a longer path such as "db_impl/..."
    auto end = text.find_first_of(" :,;\n\t)", at + prefix.size());
    std::string candidate = text.substr(at + prefix.size(),
                                        end == std::string::npos ? std::string::npos : end - at - prefix.size());
    if (is_ledger_file_name(candidate)) {
      name = std::move(candidate);
      break;
    }
  }
  if (name.empty()) {
    // e.g. "... 000012.sst ..." or "MANIFEST-000005"
    for (const char* pattern : {".sst", ".log", "MANIFEST-", "OPTIONS-"}) {
      auto at = text.find(pattern);
      if (at == std::string::npos) continue;
      auto begin = text.find_last_of(" :/\t\n", at);
      begin = begin == std::string::npos ? 0 : begin + 1;
      auto end = text.find_first_of(" :,;\n\t)", at);
      std::string candidate = text.substr(begin, end == std::string::npos ? std::string::npos : end - begin);
      if (!is_ledger_file_name(candidate)) continue;
      name = std::move(candidate);
      break;
    }
  }
  if (name.empty() || name.size() > 64) return {};
  if (name.ends_with(".ldb")) name = name.substr(0, name.size() - 4) + ".sst";  // RocksDB's fallback name
  return "file " + (fs::path(folder) / name).string() + " (" + file_kind(name) + ")";
}

// The cause of a RocksDB failure in our words: what kind of failure, and which file if it says.
std::string cause_of(const rocksdb::Status& s, const std::string& folder, const std::string& hint = {}) {
  const std::string text = s.ToString();
  std::string what;
  if (text.find("No such file") != std::string::npos) {
    what = "a file is missing";
  } else if (s.IsCorruption()) {
    what = "damaged data";
  } else if (s.IsNoSpace() || text.find("No space left") != std::string::npos) {
    what = "the disk is full";
  } else if (text.find("Read-only file system") != std::string::npos) {
    what = "the disk is read-only";
  } else if (text.find("Permission denied") != std::string::npos) {
    what = "permission denied";
  } else if (s.IsPathNotFound()) {
    what = "a file or folder is missing";
  } else if (s.IsIOError()) {
    what = "a disk error";
  } else if (s.IsBusy() || s.IsTryAgain()) {
    what = "the ledger is busy";
  } else if (s.IsInvalidArgument() || s.IsNotSupported()) {
    what = "the folder does not hold a ledger this build can open";
  } else {
    what = "an unexpected storage failure";
  }
  std::string file = named_file(text, folder);
  if (file.empty() && !hint.empty()) file = named_file(hint, folder);
  return file.empty() ? what : what + " in " + file;
}

Error translate(const rocksdb::Status& s, const std::string& what, const std::string& folder) {
  if (s.IsCorruption()) return corruption(what + ": " + cause_of(s, folder));
  if (s.IsBusy() || s.IsTimedOut()) return busy(what + ": " + cause_of(s, folder));
  return io_error(what + ": " + cause_of(s, folder));
}

std::string damaged(const std::string& path, const std::string& detail) {
  return "ledger " + path + " is corrupt: " + detail +
         ". Nothing was changed. Copy what can be proven into a new folder with: alphaledger --ledger " +
         path + " recover --to NEWDIR (docs/ledger.md \"Damaged files\")";
}

// ---- the seal file ------------------------------------------------------------------------

struct Seal {
  std::uint64_t sequence = 0;
  std::uint64_t newest_table = 0;    // highest number of a table file the MANIFEST listed
  std::uint64_t options_number = 0;  // OPTIONS-<n> the last read-write open wrote
  store::Digest options_hash{};
};

void put_u64(std::string& out, std::uint64_t v) {
  for (int i = 0; i < 8; ++i) out.push_back(static_cast<char>((v >> (8 * i)) & 0xff));
}

std::uint64_t get_u64(std::string_view in) {
  std::uint64_t v = 0;
  for (int i = 7; i >= 0; --i) v = (v << 8) | static_cast<unsigned char>(in[static_cast<std::size_t>(i)]);
  return v;
}

std::string encode_seal(const Seal& seal) {
  std::string out(kSealMagic);
  put_u64(out, seal.sequence);
  put_u64(out, seal.newest_table);
  put_u64(out, seal.options_number);
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
  seal.sequence = get_u64(bytes.substr(8));
  seal.newest_table = get_u64(bytes.substr(16));
  seal.options_number = get_u64(bytes.substr(24));
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

// ---- the store ----------------------------------------------------------------------------

// The seal of one read-write open, shared by the store and by the listener RocksDB calls when it
// writes a table file (during the open too, before the store exists).
class SealKeeper {
 public:
  ~SealKeeper() {
    if (fd_ >= 0) ::close(fd_);
  }
  void note_table(std::uint64_t number) {
    std::lock_guard lock(mu_);
    if (number <= seal_.newest_table) return;
    seal_.newest_table = number;
    (void)write_locked();
  }
  void note_sequence(std::uint64_t sequence) {
    std::lock_guard lock(mu_);
    if (sequence <= seal_.sequence) return;
    seal_.sequence = sequence;
    (void)write_locked();  // best effort: a stale seal only weakens the next open's check
  }
  // Opens the seal file and writes the whole seal, synced. Errors: a message.
  std::optional<std::string> start(const std::string& folder, std::uint64_t sequence,
                                   std::uint64_t newest_table) {
    std::lock_guard lock(mu_);
    const fs::path seal_path = fs::path(folder) / kSealFile;
    if (fd_ >= 0) ::close(fd_);
    fd_ = ::open(seal_path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
    if (fd_ < 0)
      return "cannot write its seal file " + seal_path.string() + " (" + std::strerror(errno) + ")";
    seal_.options_number = newest_options_number(folder);
    if (seal_.options_number != 0) {
      auto content = read_file(fs::path(folder) / options_file_name(seal_.options_number));
      if (content) {
        seal_.options_hash = store::sha256(*content);
      } else {
        seal_.options_number = 0;
      }
    }
    seal_.sequence = std::max(seal_.sequence, sequence);
    seal_.newest_table = std::max(seal_.newest_table, newest_table);
    if (!write_locked() || ::fsync(fd_) != 0)
      return "cannot write its seal file " + seal_path.string() + " (" + std::strerror(errno) + ")";
    return std::nullopt;
  }

 private:
  bool write_locked() {
    if (fd_ < 0) return false;
    const std::string bytes = encode_seal(seal_);
    return ::pwrite(fd_, bytes.data(), bytes.size(), 0) == static_cast<ssize_t>(bytes.size());
  }

  std::mutex mu_;
  Seal seal_;
  int fd_ = -1;
};

class SealListener final : public rocksdb::EventListener {
 public:
  explicit SealListener(std::shared_ptr<SealKeeper> keeper) : keeper_(std::move(keeper)) {}
  void OnFlushCompleted(rocksdb::DB* /*db*/, const rocksdb::FlushJobInfo& info) override {
    keeper_->note_table(info.file_number);
  }
  void OnCompactionCompleted(rocksdb::DB* /*db*/, const rocksdb::CompactionJobInfo& info) override {
    for (const auto& f : info.output_file_infos) keeper_->note_table(f.file_number);
  }

 private:
  std::shared_ptr<SealKeeper> keeper_;
};

// The highest number of a table file the open database lists.
std::uint64_t newest_table(rocksdb::DB& db) {
  std::vector<rocksdb::LiveFileMetaData> files;
  db.GetLiveFilesMetaData(&files);
  std::uint64_t best = 0;
  for (const auto& f : files) best = std::max<std::uint64_t>(best, f.file_number);
  return best;
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
  o.table_factory.reset(rocksdb::NewBlockBasedTableFactory(table));
  if (!read_only) {
    o.memtable_prefix_bloom_size_ratio = 0.05;
    o.memtable_whole_key_filtering = true;
    o.memtable_insert_with_hint_prefix_extractor = std::make_shared<RecordKeyPrefix>();
  }
  return o;
}

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
      if (rocksdb::DB::OpenForReadOnly(base_options(true), path_, &ro).ok()) db_.reset(ro);
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
    auto s = rocksdb::DB::OpenForReadOnly(options, path, &raw);
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
    return corruption(damaged(path, *problem));
  }
}

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
  return std::unique_ptr<Store>(std::make_unique<RocksStore>(std::unique_ptr<rocksdb::DB>(raw), path, false));
}

}  // namespace

Result<std::unique_ptr<Store>> open_rocksdb_store(const std::string& path, const RocksStoreOptions& options) {
  if (options.salvage_copy) return open_salvage_copy(path);
  std::error_code ec;
  const bool exists = fs::exists(path, ec);
  if (exists && !fs::is_directory(path, ec)) {
    return io_error("cannot open ledger " + path +
                         ": it exists and is not a folder (a ledger is a folder; give a folder path)");
  }
  const bool has_current = exists && fs::exists(fs::path(path) / "CURRENT", ec);
  if (exists && !has_current && has_ledger_files(path)) {
    return corruption(damaged(
        path, "file " + (fs::path(path) / "CURRENT").string() + " (the pointer to the MANIFEST) is missing"));
  }
  if (!has_current) {
    if (!options.create_if_missing || options.read_only) {
      return not_found("no ledger at " + path +
                           " (create a stream first, or give the ledger folder with --ledger DIR)",
                       "no_ledger");
    }
    if (exists && !folder_is_empty(path)) {
      return io_error("cannot create a ledger in " + path +
                           ": the folder holds other files and no ledger (give an empty or new folder)");
    }
  }

  const std::string lock_file = (fs::path(path) / "LOCK").string();
  if (has_current && !options.read_only) {
    // In use: say so before the checks, which could meet a write in progress.
    if (held_here(path)) {
      return busy("ledger " + path + " is in use: its lock file " + lock_file +
                           " is held by this process (pid " + std::to_string(::getpid()) +
                           ") through another open ledger");
    }
    if (std::string holder = lock_holder(lock_file); !holder.empty()) {
      return busy(
          "ledger " + path + " is in use: its lock file " + lock_file + " is held by " + holder +
          "; wait for it to finish, or stop it (alphaledger serve holds the ledger while it runs)");
    }
  }
  if (has_current) {
    auto checked = open_checked(path, options.check_all_files);
    if (!checked) return checked.error();
    if (options.read_only) {
      return std::unique_ptr<Store>(std::make_unique<RocksStore>(std::move(*checked), path, true));
    }
  }

  rocksdb::Options o = base_options(/*read_only=*/false);
  o.create_if_missing = !has_current;
  auto keeper = std::make_shared<SealKeeper>();
  o.listeners.push_back(std::make_shared<SealListener>(keeper));
  if (!has_current) {
    fs::create_directories(path, ec);
    if (ec) {
      return io_error("cannot create ledger folder " + path + ": " + ec.message() +
                           " (check that the parent folder exists and is writable)");
    }
  }
  rocksdb::DB* raw = nullptr;
  const auto s = rocksdb::DB::Open(o, path, &raw);
  if (!s.ok()) {
    const std::string text = s.ToString();
    if (text.find("lock hold by current process") != std::string::npos) {
      return busy("ledger " + path + " is in use: its lock file " + lock_file +
                           " is held by this process (pid " + std::to_string(::getpid()) +
                           ") through another open ledger");
    }
    if (text.find("While lock file") != std::string::npos) {
      std::string holder = lock_holder(lock_file);
      if (holder.empty()) holder = "another process";
      return busy(
          "ledger " + path + " is in use: its lock file " + lock_file + " is held by " + holder +
          "; wait for it to finish, or stop it (alphaledger serve holds the ledger while it runs)");
    }
    if (s.IsCorruption()) return corruption(damaged(path, cause_of(s, path)));
    return translate(s, "cannot open ledger " + path, path);
  }
  auto store = std::make_unique<RocksStore>(std::unique_ptr<rocksdb::DB>(raw), path, false);
  if (auto st = store->start_seal(keeper); !st) return st.error();
  store->set_reopen_options(o);
  return std::unique_ptr<Store>(std::move(store));
}

}  // namespace alphaledger
