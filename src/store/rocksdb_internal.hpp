// Internals of the RocksDB store, shared by its files (not installed, store layer only):
//   rocksdb_store.cpp     the store itself (reads, writes, close)
//   rocksdb_open.cpp      open_rocksdb_store(): the folder, the lock, then the checked open
//   rocksdb_checks.cpp    the seal file and the strict read-only open that runs before every open
//   rocksdb_salvage.cpp   opening a copy of a damaged ledger for `recover`
//   rocksdb_messages.cpp  rocksdb::Status and lock holders in our words
// Only these files include RocksDB headers; rocksdb::Status becomes Error here and nowhere else.
#pragma once

#include <rocksdb/db.h>
#include <rocksdb/env.h>
#include <rocksdb/listener.h>
#include <rocksdb/options.h>
#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdarg>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/store.hpp"
#include "store/sha256.hpp"

namespace alphaledger::rocks {

namespace fs = std::filesystem;

// Our side file in the ledger folder. RocksDB ignores files whose names it does not know.
constexpr const char* kSealFile = "ALPHALEDGER-SEAL";
constexpr std::string_view kSealMagic{"alseal1\0", 8};
// magic, sequence, newest table file number, OPTIONS number, its hash, check
constexpr std::size_t kSealSize = 8 + 8 + 8 + 8 + 32 + 8;

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

// ---- messages (rocksdb_messages.cpp) --------------------------------------------------------

// Who holds the fcntl lock RocksDB takes on <path>/LOCK, as "process <pid> (<name>)"; empty when
// nobody else does. See the definition for when it may be called.
std::string lock_holder(const std::string& lock_file);
// The cause of a RocksDB failure in our words: what kind of failure, and which file if it says.
std::string cause_of(const rocksdb::Status& s, const std::string& folder, const std::string& hint = {});
Error translate(const rocksdb::Status& s, const std::string& what, const std::string& folder);
// The error for a damaged ledger folder (corruption, reason "damaged_ledger", subject the folder):
// what was found and that nothing was changed.
Error damaged(const std::string& path, const std::string& detail);

// ---- the seal file and the checked open (rocksdb_checks.cpp) ---------------------------------

struct Seal {
  std::uint64_t sequence = 0;
  std::uint64_t newest_table = 0;    // highest number of a table file the MANIFEST listed
  std::uint64_t options_number = 0;  // OPTIONS-<n> the last read-write open wrote
  store::Digest options_hash{};
};

std::string encode_seal(const Seal& seal);
std::optional<std::string> read_file(const fs::path& p);
std::uint64_t newest_options_number(const std::string& folder);
std::string options_file_name(std::uint64_t number);
// The highest number of a table file the open database lists.
std::uint64_t newest_table(rocksdb::DB& db);
bool folder_is_empty(const std::string& path);
// Does the folder hold any of RocksDB's own files, even without CURRENT?
bool has_ledger_files(const std::string& path);
// The read-only open with every check; on success the checked database.
Result<std::unique_ptr<rocksdb::DB>> open_checked(const std::string& path, bool check_all_files);

// rocksdb::DB::OpenForReadOnly without its first attempt to open the folder as a "fully
// compacted" database. That attempt (made when max_open_files is -1, as here) reads the MANIFEST
// and opens every table file; on every ledger measured it then failed, and the ordinary read-only
// open did it all again (docs/benchmarks.md). This is the ordinary open alone, with the same
// options and checks.
rocksdb::Status open_read_only(const rocksdb::Options& options, const std::string& path, rocksdb::DB** db);

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

// ---- the store (rocksdb_store.cpp) -------------------------------------------------------------

// Is `path` open for writing in this process (through another open ledger)?
bool held_here(const std::string& path);
// The options every open starts from.
rocksdb::Options base_options(bool read_only);
// A store over a database opened by the salvage path (read-write, no seal).
std::unique_ptr<Store> make_salvage_store(std::unique_ptr<rocksdb::DB> db, const std::string& path);
// A store over a database opened read-only (checked by open_checked).
std::unique_ptr<Store> make_reader_store(std::unique_ptr<rocksdb::DB> db, const std::string& path);
// A store over a database just opened read-write with `options`, whose listener feeds `keeper`:
// the seal started (an error when it cannot be written).
Result<std::unique_ptr<Store>> make_writer_store(std::unique_ptr<rocksdb::DB> db, const std::string& path,
                                                 std::shared_ptr<SealKeeper> keeper,
                                                 const rocksdb::Options& options);

// ---- opening (rocksdb_open.cpp) ----------------------------------------------------------------

// The refusal for a ledger whose LOCK file is held: by this process through another open ledger
// (`here`), else by `holder` (empty: another process).
Error in_use(const std::string& path, const std::string& lock_file, bool here, std::string holder = {});

// ---- recover's copy (rocksdb_salvage.cpp) --------------------------------------------------

Result<std::unique_ptr<Store>> open_salvage_copy(const std::string& path);

}  // namespace alphaledger::rocks
