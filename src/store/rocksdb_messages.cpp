// RocksDB failures and lock holders in our words (see rocksdb_internal.hpp).
#include <fstream>

#include "store/rocksdb_internal.hpp"

namespace alphaledger::rocks {

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
std::string cause_of(const rocksdb::Status& s, const std::string& folder, const std::string& hint) {
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

Error damaged(const std::string& path, const std::string& detail) {
  // The command line adds how to copy what can be proven (src/cli/cli_errors.cpp).
  return with_reason(corruption("ledger " + path + " is corrupt: " + detail + ". Nothing was changed."),
                     "damaged_ledger", path);
}

}  // namespace alphaledger::rocks
