// Damaged ledgers through the command line: a changed byte in the write-ahead log is refused by
// every command (exit 4, "corrupt", the file named, nothing changed), `recover --to NEWDIR` copies
// what can be proven into a new folder and reports what was lost, and the read commands work
// beside a process holding the ledger's lock (docs/ledger.md "Damaged files", "Reading beside a
// writer", "Recovering a damaged ledger").
#include <doctest/doctest.h>
#include <fcntl.h>
#include <sys/stat.h>

#include <algorithm>
#include <map>
#include <nlohmann/json.hpp>

#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

using alphaledger::test_support::complete_lines;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;
namespace fs = std::filesystem;

namespace {

std::vector<std::string> with_ledger(const std::string& db, std::vector<std::string> args) {
  args.insert(args.begin(), {"--ledger", db});
  return args;
}

// Ids t1..tn with p-values spread over (0, 1): a simple fixed log (numbers are not checked here).
std::string make_log(std::size_t n) {
  std::string out = "id,p_value\n";
  for (std::size_t i = 1; i <= n; ++i) {
    const double p = static_cast<double>((i * 7919) % 1000 + 1) / 1001.0 / (i % 5 == 0 ? 100.0 : 1.0);
    char buf[64];
    std::snprintf(buf, sizeof buf, "t%zu,%.17g\n", i, p);
    out += buf;
  }
  return out;
}

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// name -> (contents, mtime in ns) of every file in the folder but LOCK (empty; and closing a
// descriptor of it would drop a lock this process holds on it).
std::map<std::string, std::pair<std::string, std::int64_t>> snapshot(const std::string& folder) {
  std::map<std::string, std::pair<std::string, std::int64_t>> out;
  for (const auto& e : fs::directory_iterator(folder)) {
    if (e.path().filename() == "LOCK") continue;
    struct stat st {};
    REQUIRE(::stat(e.path().c_str(), &st) == 0);
    out[e.path().filename().string()] = {slurp(e.path()),
                                         std::int64_t{st.st_mtim.tv_sec} * 1000000000 + st.st_mtim.tv_nsec};
  }
  return out;
}

fs::path live_log(const std::string& folder) {
  std::vector<std::string> logs;
  for (const auto& e : fs::directory_iterator(folder))
    if (e.path().extension() == ".log") logs.push_back(e.path().filename().string());
  REQUIRE_FALSE(logs.empty());
  std::sort(logs.begin(), logs.end());
  return fs::path(folder) / logs.back();
}

// Flips a payload byte of the record at about `fraction` of the log (RocksDB log format: 32 KiB
// blocks, 7-byte record headers; db/log_format.h).
void flip_log_record(const fs::path& log, double fraction) {
  const std::string bytes = slurp(log);
  std::vector<std::size_t> starts;
  for (std::size_t pos = 0; pos + 7 <= bytes.size();) {
    const std::size_t left = 32768 - pos % 32768;
    if (left < 7) {
      pos += left;
      continue;
    }
    const std::size_t len = static_cast<unsigned char>(bytes[pos + 4]) |
                            (static_cast<std::size_t>(static_cast<unsigned char>(bytes[pos + 5])) << 8);
    if (len == 0 && bytes[pos + 6] == 0) break;
    starts.push_back(pos);
    pos += 7 + len;
  }
  REQUIRE(starts.size() > 4);
  const std::size_t at =
      starts[static_cast<std::size_t>(fraction * static_cast<double>(starts.size() - 1))] + 7 + 5;
  std::fstream f(log, std::ios::in | std::ios::out | std::ios::binary);
  f.seekg(static_cast<std::streamoff>(at));
  char c = 0;
  f.get(c);
  f.seekp(static_cast<std::streamoff>(at));
  f.put(static_cast<char>(c ^ 0x01));
}

// A ledger with stream "s" holding `n` decisions made by one decide --file run in groups of 50.
std::string build(const TempDir& dir, const std::string& name, std::size_t n) {
  const std::string db = dir.sub(name);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  const std::string log = dir.write(name + ".csv", make_log(n));
  auto r = run_alphaledger(with_ledger(db, {"decide", "s", "--file", log, "--sync-every", "50"}));
  REQUIRE(r.exit_code == 0);
  return db;
}

}  // namespace

TEST_CASE("Recover: a changed byte in the log is refused by every command and changes nothing") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 2000);
  flip_log_record(live_log(db), 0.5);
  const auto before = snapshot(db);
  for (const std::vector<std::string>& cmd :
       std::vector<std::vector<std::string>>{{"verify", "s"},
                                             {"status", "s"},
                                             {"history", "s"},
                                             {"next", "s"},
                                             {"streams"},
                                             {"decide", "s", "--id", "t2000", "--p", "0.9"}}) {
    auto r = run_alphaledger(with_ledger(db, cmd));
    INFO(cmd[0] << ": " << r.err);
    CHECK(r.exit_code == 4);
    CHECK(r.err.find("is corrupt") != std::string::npos);
    CHECK(r.err.find(live_log(db).filename().string()) != std::string::npos);
    CHECK(r.err.find("Corruption:") == std::string::npos);  // our words, not RocksDB's
    CHECK(r.out.empty());
  }
  CHECK(snapshot(db) == before);
}

TEST_CASE("Recover: recover --to copies the provable steps, reports the lost ones, and verifies") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 2000);
  flip_log_record(live_log(db), 0.5);
  const auto before = snapshot(db);
  const std::string to = dir.sub("recovered");
  auto r = run_alphaledger(with_ledger(db, {"--json", "recover", "--to", to}));
  INFO(r.err);
  CHECK(r.exit_code == 4);
  CHECK(snapshot(db) == before);
  const auto lines = complete_lines(r.out);
  REQUIRE(lines.size() == 2);
  const auto s = nlohmann::json::parse(lines[0]);
  CHECK(s["stream"] == "s");
  const std::uint64_t kept = s["kept_steps"];
  CHECK(kept > 0);
  CHECK(kept < 2000);
  CHECK(kept % 50 == 0);  // whole groups: each synced group is one log record
  CHECK(s["lost_from_step"] == kept + 1);
  CHECK(s["complete"] == false);
  const auto summary = nlohmann::json::parse(lines[1]);
  CHECK(summary["complete"] == false);
  CHECK(summary["source_problem"].get<std::string>().find("is corrupt") != std::string::npos);
  // No scratch folder is left behind.
  for (const auto& e : fs::directory_iterator(dir.sub("")))
    CHECK(e.path().filename().string().find(".alphaledger-recover") == std::string::npos);

  auto v = run_alphaledger(with_ledger(to, {"--json", "verify", "s"}));
  REQUIRE(v.exit_code == 0);
  CHECK(nlohmann::json::parse(v.out)["steps"] == kept);
  // The recovered ledger takes new decisions, and the lost ids are new to it.
  auto d = run_alphaledger(with_ledger(to, {"--json", "decide", "s", "--id", "t2000", "--p", "0.5"}));
  REQUIRE(d.exit_code == 0);
  CHECK(nlohmann::json::parse(d.out)["step"] == kept + 1);

  // Text form, into another folder.
  auto t = run_alphaledger(with_ledger(db, {"recover", "--to", dir.sub("again")}));
  CHECK(t.exit_code == 4);
  CHECK(t.out.find("stream s: kept steps 1.." + std::to_string(kept)) != std::string::npos);
}

TEST_CASE("Recover: a healthy ledger is copied whole with exit 0; a used target is refused") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 300);
  const auto before = snapshot(db);
  auto r = run_alphaledger(with_ledger(db, {"recover", "--to", dir.sub("copy")}));
  INFO(r.err);
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.find("stream s: kept steps 1..300\n") != std::string::npos);
  CHECK(snapshot(db) == before);
  auto a = run_alphaledger(with_ledger(db, {"--json", "verify", "s"}));
  auto b = run_alphaledger(with_ledger(dir.sub("copy"), {"--json", "verify", "s"}));
  REQUIRE(a.exit_code == 0);
  REQUIRE(b.exit_code == 0);
  CHECK(nlohmann::json::parse(a.out)["chain_hash"] == nlohmann::json::parse(b.out)["chain_hash"]);

  fs::create_directories(dir.sub("used"));
  dir.write("used/notes.txt", "x");
  auto used = run_alphaledger(with_ledger(db, {"recover", "--to", dir.sub("used")}));
  CHECK(used.exit_code == 2);
  CHECK(used.err.find("not an empty folder") != std::string::npos);
  auto none = run_alphaledger(with_ledger(dir.sub("absent"), {"recover", "--to", dir.sub("x")}));
  CHECK(none.exit_code == 3);
  CHECK_FALSE(fs::exists(dir.sub("x")));
}

// RocksDB locks <ledger>/LOCK with fcntl; this test holds that lock itself, as a running serve
// would. The read commands take no lock and write nothing.
TEST_CASE("Recover: read commands work while another process holds the ledger, and write nothing") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 200);
  const int fd = ::open((db + "/LOCK").c_str(), O_RDWR | O_CLOEXEC);
  REQUIRE(fd >= 0);
  struct flock fl {};
  fl.l_type = F_WRLCK;
  fl.l_whence = SEEK_SET;
  REQUIRE(::fcntl(fd, F_SETLK, &fl) == 0);
  const auto before = snapshot(db);
  for (const std::vector<std::string>& cmd : std::vector<std::vector<std::string>>{
           {"verify", "s"}, {"status", "s"}, {"history", "s"}, {"next", "s"}, {"streams"}}) {
    auto r = run_alphaledger(with_ledger(db, cmd));
    INFO(cmd[0] << ": " << r.err);
    CHECK(r.exit_code == 0);
    CHECK_FALSE(r.out.empty());
  }
  auto w = run_alphaledger(with_ledger(db, {"decide", "s", "--id", "x", "--p", "0.5"}));
  CHECK(w.exit_code == 4);
  CHECK(w.err.find("in use") != std::string::npos);
  ::close(fd);
  CHECK(snapshot(db) == before);
}

TEST_CASE("Recover: a closed stream stays closed with its closing hash when the closing is intact") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 300);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "still-open", "--rule", "saffron"})).exit_code == 0);
  auto closed = run_alphaledger(with_ledger(db, {"--json", "close", "s"}));
  REQUIRE(closed.exit_code == 0);
  const auto cj = nlohmann::json::parse(closed.out);
  const std::string closed_at = cj["closed_at"], closing_hash = cj["closing_hash"];

  const std::string to = dir.sub("copy");
  auto r = run_alphaledger(with_ledger(db, {"--json", "recover", "--to", to}));
  INFO(r.err);
  REQUIRE(r.exit_code == 0);
  const auto lines = complete_lines(r.out);
  REQUIRE(lines.size() == 3);
  const auto s = nlohmann::json::parse(lines[0]);
  CHECK(s["stream"] == "s");
  CHECK(s["kept_steps"] == 300);
  CHECK(s["complete"] == true);
  CHECK(s["closed_at"] == closed_at);
  CHECK(s["closing_hash"] == closing_hash);
  CHECK(s["closing_proven"] == true);
  CHECK(s["closing_problem"] == "");
  const auto open = nlohmann::json::parse(lines[1]);
  CHECK(open["stream"] == "still-open");
  CHECK_FALSE(open.contains("closed_at"));
  const auto summary = nlohmann::json::parse(lines[2]);
  CHECK(summary["other_keys_copied"] == 0);
  CHECK(summary["other_keys_verified"] == false);
  CHECK(summary["streams_without_configuration"].empty());

  // The copy holds the same closing: the anchor noted at the closing matches, status shows it,
  // and the stream still takes no tests.
  CHECK(run_alphaledger(with_ledger(to, {"verify", "s", "--expect", "closed:" + closing_hash})).exit_code ==
        0);
  CHECK(nlohmann::json::parse(run_alphaledger(with_ledger(to, {"--json", "status", "s"})).out)["closed_at"] ==
        closed_at);
  auto d = run_alphaledger(with_ledger(to, {"decide", "s", "--id", "later", "--p", "0.5"}));
  CHECK(d.exit_code == 3);
  CHECK(d.err.find("closed since " + closed_at) != std::string::npos);
  CHECK(run_alphaledger(with_ledger(to, {"decide", "still-open", "--id", "x", "--p", "0.5"})).exit_code == 0);

  auto text = run_alphaledger(with_ledger(db, {"recover", "--to", dir.sub("copy-text")}));
  REQUIRE(text.exit_code == 0);
  CHECK(text.out.find("stream s: kept steps 1..300; closed since " + closed_at +
                      ", closing kept (closing hash " + closing_hash + ")\n") != std::string::npos);
}

// A byte changed in the middle of a large group (256 decisions per synced write, the default)
// must still leave every group before it provable: RocksDB only stops cleanly before a damaged
// record when it checks record checksums (without them it applies the damaged batch and fails).
TEST_CASE("Recover: a byte changed inside a large group keeps every earlier group") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--file", dir.write("l.csv", make_log(2000))}))
              .exit_code == 0);
  const fs::path log = live_log(db);
  {
    std::fstream f(log, std::ios::in | std::ios::out | std::ios::binary);
    const auto size = static_cast<std::streamoff>(fs::file_size(log));
    f.seekg(size / 2);
    char c = 0;
    f.get(c);
    f.seekp(size / 2);
    f.put(static_cast<char>(c ^ 0x40));
  }
  auto r = run_alphaledger(with_ledger(db, {"--json", "recover", "--to", dir.sub("to")}));
  INFO(r.err);
  CHECK(r.exit_code == 4);
  const auto lines = complete_lines(r.out);
  REQUIRE(lines.size() == 2);
  const std::uint64_t kept = nlohmann::json::parse(lines[0])["kept_steps"];
  CHECK(kept >= 256);  // at least the first group, which lies wholly before the middle of the log
  CHECK(kept < 2000);
  CHECK(kept % 256 == 0);
  CHECK(run_alphaledger(with_ledger(dir.sub("to"), {"verify", "s"})).exit_code == 0);
}

// Launch-time events through the command line (docs/ledger.md "Launch-time levels"): a stream
// with launches, finishes and abandons is copied whole, and the copy lists the same running tests
// with the same reserved levels (the source is the reference; common practice, no source).
TEST_CASE("Recover: a stream with launches, finishes and abandons is copied whole with its running tests") {
  TempDir dir;
  const std::string db = build(dir, "ledger", 20);
  auto ok = [&](std::vector<std::string> args) {
    auto r = run_alphaledger(with_ledger(db, std::move(args)));
    INFO(r.err);
    REQUIRE(r.exit_code == 0);
  };
  for (const char* id : {"x1", "x2", "x3", "x4"}) ok({"launch", "s", "--id", id});
  ok({"decide", "s", "--id", "x2", "--p", "0.0001"});
  ok({"abandon", "s", "--id", "x1"});
  ok({"decide", "s", "--id", "y1", "--p", "0.4"});
  ok({"launch", "s", "--id", "x5"});
  ok({"decide", "s", "--id", "x4", "--p", "0.2"});
  const auto before = snapshot(db);
  const std::string to = dir.sub("copy");
  auto r = run_alphaledger(with_ledger(db, {"--json", "recover", "--to", to}));
  INFO(r.err);
  REQUIRE(r.exit_code == 0);
  CHECK(snapshot(db) == before);
  const auto s = nlohmann::json::parse(complete_lines(r.out).at(0));
  CHECK(s["complete"] == true);
  auto a = run_alphaledger(with_ledger(db, {"--json", "verify", "s"}));
  auto b = run_alphaledger(with_ledger(to, {"--json", "verify", "s"}));
  REQUIRE(a.exit_code == 0);
  REQUIRE(b.exit_code == 0);
  CHECK(s["kept_steps"] == nlohmann::json::parse(a.out)["steps"]);
  CHECK(nlohmann::json::parse(b.out)["chain_hash"] == nlohmann::json::parse(a.out)["chain_hash"]);
  auto ra = run_alphaledger(with_ledger(db, {"running", "s"}));
  auto rb = run_alphaledger(with_ledger(to, {"running", "s"}));
  REQUIRE(rb.exit_code == 0);
  CHECK(rb.out == ra.out);
  const auto rows = complete_lines(rb.out);
  REQUIRE(rows.size() == 3);  // the header, x3 and x5
  CHECK(rows[1].rfind("x3,", 0) == 0);
  CHECK(rows[2].rfind("x5,", 0) == 0);
  // The running test is decided in the copy at its reserved level; the abandoned one is refused.
  auto d = run_alphaledger(with_ledger(to, {"--json", "decide", "s", "--id", "x3", "--p", "0.3"}));
  REQUIRE(d.exit_code == 0);
  CHECK(nlohmann::json::parse(d.out)["launch"] == 23);
  CHECK(run_alphaledger(with_ledger(to, {"decide", "s", "--id", "x1", "--p", "0.3"})).exit_code == 3);
}
