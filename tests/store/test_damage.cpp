// FAULT INJECTION ON THE LEDGER'S FILES (docs/ledger.md "Damaged files").
//
// A ledger of 3,000 decisions is built in two sessions: the first 2,000 end up in table files
// (.sst; RocksDB writes the log's contents to a table file when the second session opens it), the
// last 1,000 only in the live write-ahead log (.log). Each case below damages one file (a changed
// byte, the file removed, the file cut short at a log record boundary or inside a record), then
// opens the ledger as the commands do, and asserts:
//   - the damage is reported, as kCorruption "is corrupt", by the read-only open that status,
//     history, next and streams use, or (table data blocks, which RocksDB reads only on demand)
//     by the full check that verify and recover use; and the read-write open refuses it too;
//   - the failed opens changed no file: same names, sizes, contents and modification times;
//   - no acknowledged decision is silently lost: nothing opens with fewer than 3,000 records.
// What is not covered (documented in docs/ledger.md): LOG/LOG.old (RocksDB's own text log),
// IDENTITY and LOCK hold no ledger data; a removed seal file is not noticed.
#include <doctest/doctest.h>
#include <fcntl.h>
#include <sys/mount.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <filesystem>
#include <fstream>
#include <map>
#include <thread>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store_test_util.hpp"
#include "store/faulty_store.hpp"

using namespace alphaledger;
using store_test::numbered;
using store_test::TempDir;
namespace fs = std::filesystem;

namespace {

constexpr std::size_t kFirst = 2000, kSecond = 1000, kTotal = kFirst + kSecond;

RuleConfig lord() { return *resolve_config({.rule = "lord++"}); }

std::vector<TestInput> inputs(std::size_t from, std::size_t n, std::uint64_t seed) {
  const auto p = store_test::random_p_values(seed, from + n);
  std::vector<TestInput> out;
  for (std::size_t i = from; i < from + n; ++i) out.push_back({numbered("t", i + 1), p[i]});
  return out;
}

// Builds the two-session ledger in `path`.
void build_ledger(const std::string& path) {
  {
    auto ledger = Ledger::open(path, store_test::ticking_clock());
    REQUIRE(ledger.ok());
    REQUIRE((*ledger)->create_stream("s", lord()).ok());
    auto b = (*ledger)->decide_batch("s", inputs(0, kFirst, 11), 100);
    REQUIRE(b.ok());
    REQUIRE_FALSE(b->error);
  }
  auto ledger = Ledger::open(path, store_test::ticking_clock(1800000000000));
  REQUIRE(ledger.ok());
  auto b = (*ledger)->decide_batch("s", inputs(kFirst, kSecond, 11), 100);
  REQUIRE(b.ok());
  REQUIRE_FALSE(b->error);
}

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

struct FileState {
  std::string content;
  std::int64_t mtime_ns = 0;
  friend bool operator==(const FileState&, const FileState&) = default;
};

// Every file of the folder: contents and modification time (we run as root: permissions prove
// nothing, so "writes nothing" is checked on the files themselves).
std::map<std::string, FileState> snapshot(const std::string& folder) {
  std::map<std::string, FileState> out;
  for (const auto& e : fs::directory_iterator(folder)) {
    struct stat st {};
    REQUIRE(::stat(e.path().c_str(), &st) == 0);
    out[e.path().filename().string()] = {slurp(e.path()),
                                         std::int64_t{st.st_mtim.tv_sec} * 1000000000 + st.st_mtim.tv_nsec};
  }
  return out;
}

std::vector<std::string> files_named(const std::string& folder, const std::string& suffix_or_prefix) {
  std::vector<std::string> out;
  for (const auto& e : fs::directory_iterator(folder)) {
    const std::string n = e.path().filename().string();
    if (n.ends_with(suffix_or_prefix) || n.starts_with(suffix_or_prefix)) out.push_back(n);
  }
  std::sort(out.begin(), out.end());
  return out;
}

void flip_byte(const fs::path& p, std::size_t offset) {
  std::fstream f(p, std::ios::in | std::ios::out | std::ios::binary);
  REQUIRE(f);
  f.seekg(static_cast<std::streamoff>(offset));
  char c = 0;
  f.get(c);
  f.seekp(static_cast<std::streamoff>(offset));
  f.put(static_cast<char>(c ^ 0x5a));
}

// Start offsets of the records of a RocksDB write-ahead log (32 KiB blocks of records, each with a
// 7-byte header: checksum 4, length 2, type 1; RocksDB's log format, db/log_format.h).
std::vector<std::size_t> log_record_starts(const std::string& bytes) {
  std::vector<std::size_t> starts;
  constexpr std::size_t kBlock = 32768, kHeader = 7;
  std::size_t pos = 0;
  while (pos + kHeader <= bytes.size()) {
    const std::size_t left_in_block = kBlock - pos % kBlock;
    if (left_in_block < kHeader) {
      pos += left_in_block;
      continue;
    }
    const std::size_t len = static_cast<unsigned char>(bytes[pos + 4]) |
                            (static_cast<std::size_t>(static_cast<unsigned char>(bytes[pos + 5])) << 8);
    if (len == 0 && bytes[pos + 6] == 0) break;  // preallocated zeros
    starts.push_back(pos);
    pos += kHeader + len;
  }
  return starts;
}

// The live (newest) write-ahead log.
fs::path live_log(const std::string& folder) {
  auto logs = files_named(folder, ".log");
  REQUIRE_FALSE(logs.empty());
  return fs::path(folder) / logs.back();
}

RocksStoreOptions read_only_options(bool full) {
  return {.create_if_missing = false, .read_only = true, .check_all_files = full};
}

// The common assertions after one damage: see the file comment. `seen_by_plain_open` says whether
// the read-only open without the full check must already refuse (false only for table data).
void check_refused(const std::string& path, bool seen_by_plain_open, const std::string& file_hint) {
  const auto before = snapshot(path);
  auto plain = Ledger::open(path, read_only_options(false));
  if (!plain.ok()) MESSAGE(plain.error().message);
  if (seen_by_plain_open) {
    REQUIRE_FALSE(plain.ok());
    CHECK(plain.error().kind == ErrorKind::kCorruption);
    CHECK(plain.error().message.find("is corrupt") != std::string::npos);
    if (!file_hint.empty()) CHECK(plain.error().message.find(file_hint) != std::string::npos);
    INFO(plain.error().message);
  } else if (plain.ok()) {
    // Reading the damaged records fails; nothing is returned short.
    auto h = (*plain)->history("s");
    if (h.ok()) CHECK(h->size() == kTotal);
  }
  plain = Result<std::unique_ptr<Ledger>>(io_error("closed"));
  auto full = Ledger::open(path, read_only_options(true));
  REQUIRE_FALSE(full.ok());
  CHECK(full.error().kind == ErrorKind::kCorruption);
  CHECK(full.error().message.find("is corrupt") != std::string::npos);
  CHECK(full.error().message.find("verify") == std::string::npos);
  auto writer = Ledger::open(path);
  if (seen_by_plain_open) {
    REQUIRE_FALSE(writer.ok());
    CHECK(writer.error().kind == ErrorKind::kCorruption);
  } else if (writer.ok()) {
    auto h = (*writer)->history("s");
    if (h.ok()) CHECK(h->size() == kTotal);
  }
  if (!writer.ok()) {
    const auto after = snapshot(path);
    CHECK(after.size() == before.size());
    for (const auto& [name, state] : before) {
      INFO("file " << name);
      REQUIRE(after.count(name) == 1);
      CHECK(after.at(name) == state);
    }
  }
}

// A fresh copy of the built ledger for each case (building takes a moment; copying is cheap).
class Fixture {
 public:
  Fixture() {
    build_ledger(dir_.sub("master"));
    REQUIRE(files_named(dir_.sub("master"), ".sst").size() >= 1);
  }
  // Each call gets its own folder (doctest runs a test case once per subcase).
  std::string fresh(const std::string& name) {
    const std::string p = dir_.sub(name + "-" + std::to_string(++copies_));
    fs::copy(dir_.sub("master"), p);
    return p;
  }

 private:
  TempDir dir_;
  int copies_ = 0;
};

Fixture& fixture() {
  static Fixture f;
  return f;
}

}  // namespace

TEST_CASE("Damage: the built ledger is healthy, and a read-only open writes nothing") {
  const std::string p = fixture().fresh("healthy");
  const auto before = snapshot(p);
  {
    auto ledger = Ledger::open(p, read_only_options(true));
    REQUIRE(ledger.ok());
    auto v = (*ledger)->verify("s");
    REQUIRE(v.ok());
    CHECK(v->ok);
    CHECK(v->steps == kTotal);
    CHECK((*ledger)->streams().value().size() == 1);
    auto d = (*ledger)->decide("s", "new-one", 0.5);
    REQUIRE_FALSE(d.ok());
    CHECK(d.error().kind == ErrorKind::kIOError);
  }
  CHECK(snapshot(p) == before);
  CHECK_FALSE(fs::exists(fs::path(p) / "LOG.old"));
}

TEST_CASE("Damage: a changed byte in the live write-ahead log is refused, not dropped") {
  for (const char* where : {"first record", "middle record", "last record"}) {
    SUBCASE(where) {
      const std::string p = fixture().fresh(std::string("wal-flip-") + where[0]);
      const fs::path log = live_log(p);
      const auto starts = log_record_starts(slurp(log));
      REQUIRE(starts.size() >= 3);
      const std::string w = where;
      const std::size_t rec = w == "first record"    ? 0
                              : w == "middle record" ? starts.size() / 2
                                                     : starts.size() - 1;
      flip_byte(log, starts[rec] + 7 + 3);  // a payload byte
      check_refused(p, true, log.filename().string());
    }
  }
}

TEST_CASE("Damage: the live write-ahead log cut short or removed is refused") {
  const std::string p = fixture().fresh("wal-cut");
  const fs::path log = live_log(p);
  const std::string bytes = slurp(log);
  const auto starts = log_record_starts(bytes);
  REQUIRE(starts.size() >= 3);
  SUBCASE("at a record boundary (the last record dropped whole)") { fs::resize_file(log, starts.back()); }
  SUBCASE("at a record boundary half way") { fs::resize_file(log, starts[starts.size() / 2]); }
  SUBCASE("inside the last record") { fs::resize_file(log, bytes.size() - 10); }
  SUBCASE("to nothing") { fs::resize_file(log, 0); }
  SUBCASE("removed") { fs::remove(log); }
  check_refused(p, true, "");
}

TEST_CASE("Damage: table files: a changed footer, a changed data byte, cut short, removed") {
  const std::string p = fixture().fresh("sst");
  const auto ssts = files_named(p, ".sst");
  const fs::path sst = fs::path(p) / ssts.front();
  const auto size = fs::file_size(sst);
  SUBCASE("footer byte (read on open)") {
    flip_byte(sst, size - 1);  // the footer's magic number
    check_refused(p, true, "");
  }
  SUBCASE("data byte (read on demand: the full check finds it)") {
    flip_byte(sst, 100);
    check_refused(p, false, "");
  }
  SUBCASE("cut short") {
    fs::resize_file(sst, size / 2);
    check_refused(p, true, "");
  }
  SUBCASE("removed") {
    fs::remove(sst);
    check_refused(p, true, "");
  }
}

TEST_CASE("Damage: MANIFEST, CURRENT, OPTIONS and the seal file") {
  const std::string p = fixture().fresh("meta");
  const fs::path manifest = fs::path(p) / files_named(p, "MANIFEST-").back();
  const fs::path options = fs::path(p) / files_named(p, "OPTIONS-").back();
  const fs::path current = fs::path(p) / "CURRENT";
  const fs::path seal = fs::path(p) / "ALPHALEDGER-SEAL";
  REQUIRE(fs::exists(seal));
  SUBCASE("MANIFEST byte") {
    flip_byte(manifest, fs::file_size(manifest) / 2);
    check_refused(p, true, "");
  }
  SUBCASE("MANIFEST cut short") {
    fs::resize_file(manifest, fs::file_size(manifest) / 2);
    check_refused(p, true, "");
  }
  SUBCASE("MANIFEST removed") {
    fs::remove(manifest);
    check_refused(p, true, "");
  }
  SUBCASE("CURRENT byte") {
    flip_byte(current, 12);
    check_refused(p, true, "");
  }
  SUBCASE("CURRENT removed") {
    fs::remove(current);
    check_refused(p, true, "CURRENT");
  }
  SUBCASE("OPTIONS byte") {
    flip_byte(options, fs::file_size(options) / 2);
    check_refused(p, true, options.filename().string());
  }
  SUBCASE("OPTIONS removed") {
    fs::remove(options);
    check_refused(p, true, options.filename().string());
  }
  SUBCASE("seal byte") {
    flip_byte(seal, 9);
    check_refused(p, true, "ALPHALEDGER-SEAL");
  }
}

// A read-only open beside a process that keeps writing (as status beside a running serve): every
// open succeeds and sees a consistent prefix of the history.
TEST_CASE("Damage: read-only opens beside a live writer succeed and are consistent") {
  TempDir dir;
  const std::string p = dir.sub("live");
  auto writer = Ledger::open(p);
  REQUIRE(writer.ok());
  REQUIRE((*writer)->create_stream("s", lord()).ok());
  std::atomic<bool> stop{false};
  std::thread t([&] {
    const auto in = inputs(0, 4000, 5);
    for (std::size_t i = 0; i < in.size() && !stop; i += 20) {
      std::vector<TestInput> group(in.begin() + static_cast<std::ptrdiff_t>(i),
                                   in.begin() + static_cast<std::ptrdiff_t>(std::min(in.size(), i + 20)));
      if (!(*writer)->decide_batch("s", group, 20).ok()) break;
    }
  });
  std::uint64_t last = 0;
  for (int i = 0; i < 20; ++i) {
    auto reader = Ledger::open(p, read_only_options(false));
    REQUIRE_MESSAGE(reader.ok(), (reader.ok() ? "" : reader.error().message));
    auto v = (*reader)->verify("s");
    REQUIRE(v.ok());
    CHECK(v->ok);
    CHECK(v->steps >= last);
    last = v->steps;
  }
  stop = true;
  t.join();
}

// A really read-only folder: a read-only bind mount, when this machine lets the test make one.
TEST_CASE("Damage: a ledger on a read-only mount opens for reading") {
  const std::string src = fixture().fresh("ro-src");
  TempDir mnt;
  if (::mount(src.c_str(), mnt.path().c_str(), nullptr, MS_BIND, nullptr) != 0) {
    MESSAGE("skipped: cannot bind-mount here (needs root and mount rights)");
    return;
  }
  if (::mount(nullptr, mnt.path().c_str(), nullptr, MS_REMOUNT | MS_BIND | MS_RDONLY, nullptr) != 0) {
    ::umount(mnt.path().c_str());
    MESSAGE("skipped: cannot remount read-only here");
    return;
  }
  {
    auto ledger = Ledger::open(mnt.path(), read_only_options(true));
    CHECK_MESSAGE(ledger.ok(), (ledger.ok() ? "" : ledger.error().message));
    if (ledger.ok()) CHECK((*ledger)->verify("s").value().steps == kTotal);
    auto writer = Ledger::open(mnt.path());
    REQUIRE_FALSE(writer.ok());
    CHECK(writer.error().kind == ErrorKind::kIOError);
    CHECK(writer.error().message.find("IO error") == std::string::npos);
  }
  CHECK(::umount(mnt.path().c_str()) == 0);
}

// A full disk: a small tmpfs filled up. Writes fail with a message in our words, failing() says
// so, and once space is freed the next write succeeds without a restart (RocksDB keeps a
// background error until resumed).
TEST_CASE("Damage: after a full disk is freed, decisions work again without a restart") {
  TempDir mnt;
  if (::mount("tmpfs", mnt.path().c_str(), "tmpfs", 0, "size=4m") != 0) {
    MESSAGE("skipped: cannot mount a tmpfs here (needs root and mount rights)");
    return;
  }
  {
    const std::string p = mnt.sub("ledger");
    auto store = open_rocksdb_store(p);
    REQUIRE(store.ok());
    Store* raw = store->get();
    auto ledger = Ledger::open(std::move(*store));
    REQUIRE(ledger.ok());
    REQUIRE((*ledger)->create_stream("s", lord()).ok());
    REQUIRE((*ledger)->decide("s", "a", 0.01).ok());
    CHECK_FALSE(raw->failing());
    {
      std::ofstream filler(mnt.sub("filler"), std::ios::binary);
      const std::string mb(1 << 20, 'x');
      for (int i = 0; i < 8 && filler; ++i) filler << mb << std::flush;
    }
    bool failed = false;
    for (int i = 0; i < 200 && !failed; ++i) {
      auto d = (*ledger)->decide("s", numbered("full", i), 0.5);
      if (!d.ok()) {
        failed = true;
        CHECK(d.error().kind == ErrorKind::kIOError);
        CHECK(d.error().message.find("IO error") == std::string::npos);
        INFO(d.error().message);
        CHECK(d.error().message.find("full") != std::string::npos);
      }
    }
    REQUIRE(failed);
    REQUIRE(raw->failing());
    CHECK(raw->failing()->find(p) != std::string::npos);
    fs::remove(mnt.sub("filler"));
    auto d = (*ledger)->decide("s", "after", 0.02);
    CHECK_MESSAGE(d.ok(), (d.ok() ? "" : d.error().message));
    CHECK_FALSE(raw->failing());
    auto v = (*ledger)->verify("s");
    REQUIRE(v.ok());
    CHECK(v->ok);
  }
  CHECK(::umount(mnt.path().c_str()) == 0);
}

TEST_CASE("Damage: FaultyStore reports failing() until a write succeeds") {
  MemoryStore inner;
  FaultyStore faulty(inner);
  WriteBatch b;
  b.put("k", "v");
  CHECK_FALSE(faulty.failing());
  faulty.fail_all_writes("No space left on device");
  CHECK_FALSE(faulty.write(b).ok());
  REQUIRE(faulty.failing());
  CHECK(faulty.failing()->find("No space left") != std::string::npos);
  faulty.clear_faults();
  CHECK(faulty.write(b).ok());
  CHECK_FALSE(faulty.failing());
}

TEST_CASE("Damage: wrong places for a ledger give our own messages and create nothing") {
  TempDir dir;
  SUBCASE("a folder with other files") {
    const std::string p = dir.sub("other");
    fs::create_directories(p);
    std::ofstream(p + "/notes.txt") << "mine\n";
    auto s = open_rocksdb_store(p);
    REQUIRE_FALSE(s.ok());
    CHECK(s.error().kind == ErrorKind::kIOError);
    CHECK(s.error().message.find("holds other files") != std::string::npos);
    CHECK(std::distance(fs::directory_iterator(p), fs::directory_iterator()) == 1);
  }
  SUBCASE("a parent folder that is a file") {
    std::ofstream(dir.sub("file")) << "x\n";
    auto s = open_rocksdb_store(dir.sub("file") + "/ledger");
    REQUIRE_FALSE(s.ok());
    CHECK(s.error().kind == ErrorKind::kIOError);
    CHECK(s.error().message.find("IO error") == std::string::npos);
    CHECK(s.error().message.find(dir.sub("file")) != std::string::npos);
  }
  SUBCASE("read-only open of a missing ledger") {
    auto s = open_rocksdb_store(dir.sub("absent"), read_only_options(false));
    REQUIRE_FALSE(s.ok());
    CHECK(s.error().kind == ErrorKind::kNotFound);
    CHECK_FALSE(fs::exists(dir.sub("absent")));
  }
}
