// Recovering a damaged ledger into a new folder (include/alphaledger/recover.hpp): the strict
// read-only open, the salvaged scratch copy, the new ledger and its verify. Each stream's copy is
// in recover_stream.cpp (store/recover_internal.hpp).
#include "alphaledger/recover.hpp"

#include <stdlib.h>

#include <filesystem>
#include <set>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/recover_internal.hpp"

namespace alphaledger {
namespace {

namespace fs = std::filesystem;
using recover_detail::copy_stream;
using recover_detail::flush;

// A scratch folder removed with everything in it at scope exit.
class Scratch {
 public:
  explicit Scratch(std::string path) : path_(std::move(path)) {}
  ~Scratch() {
    std::error_code ec;
    if (!path_.empty()) fs::remove_all(path_, ec);
  }
  Scratch(const Scratch&) = delete;
  Scratch& operator=(const Scratch&) = delete;
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

// Copies the regular files of `from` (not LOCK) into the existing folder `to`.
Status copy_files(const std::string& from, const std::string& to) {
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(from, ec)) {
    if (!entry.is_regular_file(ec)) continue;
    const auto name = entry.path().filename();
    if (name == "LOCK") continue;
    fs::copy_file(entry.path(), fs::path(to) / name, fs::copy_options::overwrite_existing, ec);
    if (ec) {
      return io_error("cannot copy " + entry.path().string() + " to the scratch folder " + to + ": " +
                      ec.message());
    }
  }
  if (ec) return io_error("cannot list ledger folder " + from + ": " + ec.message());
  return {};
}

}  // namespace

// Step 3 of recover_ledger: the new ledger at `target`, every stream copied from `from` up to its
// first unproven step, other keys copied as they were; what happened is added to `report`.
Status write_recovered(Store& from, const std::string& target, RecoveryReport& report) {
  auto to = open_rocksdb_store(target, RocksStoreOptions{.create_if_missing = true});
  if (!to) return to.error();
  WriteBatch batch;
  batch.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion));
  if (auto s = (*to)->write(batch, true); !s) return s.error();

  std::vector<std::pair<std::string, std::string>> configs;
  auto s = from.scan(store::kConfigPrefix, [&](std::string_view key, std::string_view value) {
    configs.emplace_back(std::string(key.substr(store::kConfigPrefix.size())), std::string(value));
    return true;
  });
  if (!s) {
    report.source_problem += std::string(report.source_problem.empty() ? "" : "; ") +
                             "the list of streams could not be read to the end: " + s.error().message;
  }
  for (const auto& [name, bytes] : configs) {
    StreamRecovery sr;
    sr.stream = name;
    if (auto st = copy_stream(from, **to, name, bytes, sr); !st) return st.error();
    report.streams.push_back(std::move(sr));
  }
  // Keys outside the six stream prefixes (c, h, r, i, t for running tests, l for look state) and the format
  // key: no part of the format, so they are copied as they were and named in the report as not verified. Keys
  // under a stream prefix whose stream has no configuration cannot be proven and are not copied; their
  // streams are named.
  std::set<std::string> with_config;
  for (const auto& c : configs) with_config.insert(c.first);
  std::set<std::string> orphans;
  WriteBatch other;
  s = from.scan("", [&](std::string_view key, std::string_view value) {
    if (key == store::kFormatKey) return true;
    if (key.starts_with("c/") || key.starts_with("h/") || key.starts_with("r/") || key.starts_with("i/") ||
        key.starts_with("t/") || key.starts_with("l/")) {
      std::string_view rest = key.substr(2);
      const std::string stream(rest.substr(0, rest.find('/')));
      if (!with_config.count(stream) && orphans.size() < 1000) orphans.insert(stream);
      return true;
    }
    other.put(std::string(key), std::string(value));
    if (report.other_key_names.size() < RecoveryReport::kShownKeys)
      report.other_key_names.push_back(excerpt(key, 40));
    ++report.other_keys_copied;
    return true;
  });
  for (const auto& o : orphans) report.streams_without_configuration.push_back(excerpt(o, 128));
  if (!s) {
    report.source_problem += std::string(report.source_problem.empty() ? "" : "; ") +
                             "some ledger-level keys could not be read: " + s.error().message;
  }
  if (auto st = flush(**to, other, true); !st) return st.error();
  WriteBatch none;
  none.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion));
  if (auto st = (*to)->write(none, true); !st) return st.error();  // a synced write covers all before it
  return {};
}

// Step 4 of recover_ledger: the new ledger must pass verify, stream by stream.
Status verify_recovered(const std::string& target, const RecoveryReport& report) {
  auto check = Ledger::open(
      target, RocksStoreOptions{.create_if_missing = false, .read_only = true, .check_all_files = true});
  if (!check) return check.error();
  for (const auto& sr : report.streams) {
    if (!sr.problem.empty() && sr.problem.starts_with("the configuration")) continue;
    // A proven closing must still be the source's: the closing hash is checked as an anchor.
    std::vector<Anchor> anchors;
    if (sr.closing_proven) anchors.push_back(Anchor{0, true, sr.closing_hash});
    auto v = (*check)->verify(sr.stream, anchors);
    if (!v) return v.error();
    if (!v->ok || v->steps != sr.kept_steps) {
      return corruption("the recovered ledger " + target + " fails verify for stream " + sr.stream + ": " +
                        v->problem + " (this is a bug; the source is unchanged)");
    }
  }
  return {};
}

Result<RecoveryReport> recover_ledger(const std::string& source, const std::string& target) {
  std::error_code ec;
  RecoveryReport report;
  report.source = source;
  report.target = target;
  if (fs::exists(target, ec)) {
    if (!fs::is_directory(target, ec) || !fs::is_empty(target, ec)) {
      return invalid_input("the target folder " + target +
                           " exists and is not an empty folder (give a new or empty folder; "
                           "recover never writes over anything)");
    }
  }
  if (fs::exists(source, ec) && fs::exists(target, ec) && fs::equivalent(source, target, ec)) {
    return invalid_input("the target folder " + target + " is the damaged ledger itself");
  }
  if (!fs::is_directory(source, ec)) {
    return not_found("no ledger at " + source, "no_ledger");  // the CLI adds which flag names it
  }

  // 1. The strict, read-only open: what damage is there? Writes nothing.
  {
    auto strict = open_rocksdb_store(source, RocksStoreOptions{
                                                 .create_if_missing = false,
                                                 .read_only = true,
                                                 .check_all_files = true,
                                             });
    if (!strict) {
      if (strict.error().kind == ErrorKind::kNotFound) return strict.error();
      report.source_problem = strict.error().message;
    }
  }

  // 2. A scratch copy beside the target, salvaged there.
  const fs::path target_path = fs::absolute(fs::path(target), ec);
  const fs::path parent = target_path.parent_path();
  fs::create_directories(parent, ec);
  std::string tmpl = (parent / ".alphaledger-recover-XXXXXX").string();
  if (::mkdtemp(tmpl.data()) == nullptr) {
    return io_error("cannot make a scratch folder in " + parent.string() +
                    " for the copy of the damaged ledger (is the folder writable?)");
  }
  Scratch scratch(tmpl);
  if (auto s = copy_files(source, scratch.path()); !s) return s.error();
  auto from =
      open_rocksdb_store(scratch.path(), RocksStoreOptions{.create_if_missing = false, .salvage_copy = true});
  if (!from) {
    Error e = from.error();
    e.message = "cannot read anything from ledger " + source +
                " (a copy was tried, the source is unchanged): " + e.message;
    return e;
  }

  // 3. The new ledger.
  if (auto st = write_recovered(**from, target, report); !st) return st.error();
  // 4. The new ledger must pass verify, stream by stream.
  if (auto st = verify_recovered(target, report); !st) return st.error();
  return report;
}

}  // namespace alphaledger
