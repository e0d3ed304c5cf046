// The ledger commands as a user runs them: one process per command (docs/cli.md "The ledger").
#include <doctest/doctest.h>
#include <fcntl.h>

#include <cmath>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>

#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

using alphaledger::test_support::complete_lines;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;

namespace {

// The p-value stream of docs/methods.md section 14 and its LORD++ levels (14.3: Ramdas, Yang,
// Wainwright & Jordan 2017, the LORD++ display, W0 = alpha/2, JM gamma), 10 significant digits.
const std::vector<double> kStream = {0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100};
const std::vector<double> kLordLevels = {0.001370386057,  0.0016684017,   0.003292613799, 0.001060948593,
                                         0.00363847711,   0.001351990812, 0.00115660396,  0.000989535854,
                                         0.0008614799781, 0.0007620915508};
const std::vector<bool> kLordRejected = {true, true, false, true, false, false, false, false, false, false};

std::string num(double v) {
  std::ostringstream s;
  s.precision(17);
  s << v;
  return s.str();
}

// a + b, built by append: GCC 12's -Wrestrict misfires on "literal" + std::string (GCC PR 105651).
std::string cat(std::string_view a, std::string_view b) {
  std::string out(a);
  out.append(b);
  return out;
}

std::vector<std::string> with_ledger(const std::string& ledger, std::vector<std::string> args) {
  args.insert(args.begin(), {"--ledger", ledger});
  return args;
}

}  // namespace

// A session across separate processes; each level is checked against docs/methods.md 14.3 (1e-9
// relative) and each decision exactly; the history replayed by `replay` gives the same rows bit
// for bit (issue 3 item 2).
TEST_CASE("LedgerCli: a stream decided one test per process matches docs/methods.md 14.3 and replay") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  auto created = run_alphaledger(with_ledger(db, {"new", "checkout", "--rule", "lord++"}));
  REQUIRE(created.exit_code == 0);
  CHECK(created.out.find("created stream checkout") != std::string::npos);
  auto again = run_alphaledger(with_ledger(db, {"new", "checkout", "--rule", "lord++", "--alpha", "0.05"}));
  CHECK(again.exit_code == 0);
  CHECK(again.out.find("nothing changed") != std::string::npos);

  for (std::size_t i = 0; i < kStream.size(); ++i) {
    CAPTURE(i + 1);
    auto next = run_alphaledger(with_ledger(db, {"--json", "next", "checkout"}));
    REQUIRE(next.exit_code == 0);
    auto d = run_alphaledger(with_ledger(db, {"--json", "decide", "checkout", "--id",
                                              "exp-" + std::to_string(i + 1), "--p", num(kStream[i])}));
    REQUIRE(d.exit_code == 0);
    auto j = nlohmann::json::parse(d.out);
    CHECK(j["step"] == i + 1);
    CHECK(j["stream"] == "checkout");
    CHECK(j["repeat"] == false);
    CHECK(j["rejected"] == (kLordRejected[i] ? 1 : 0));
    const double level = j["level"].get<double>();
    CHECK(std::abs(level - kLordLevels[i]) <= 1e-9 * kLordLevels[i]);
    CHECK(nlohmann::json::parse(next.out)["level"].get<double>() == level);  // next promised this level
  }
  // Text output marks a rejection visibly.
  auto text = run_alphaledger(with_ledger(db, {"decide", "checkout", "--id", "exp-1", "--p", "0.0004"}));
  CHECK(text.exit_code == 0);
  CHECK(text.out.find("REJECTED") != std::string::npos);
  CHECK(text.out.find("repeat") != std::string::npos);

  auto history = run_alphaledger(with_ledger(db, {"history", "checkout"}));
  REQUIRE(history.exit_code == 0);
  const std::string history_file = dir.write("history.csv", history.out);
  auto replayed = run_alphaledger({"replay", history_file, "--rules", "lord++"});
  REQUIRE(replayed.exit_code == 0);
  auto h = complete_lines(history.out);
  auto r = complete_lines(replayed.out);
  REQUIRE(h.size() == 11);
  REQUIRE(r.size() == 11);
  CHECK(h[0] == "rule,step,id,p_value,level,rejected,wealth,decided_at,launch,reserved_at,abandoned");
  for (std::size_t i = 1; i < h.size(); ++i) {
    CAPTURE(h[i]);
    std::string head = h[i];
    for (int k = 0; k < 4; ++k) head = head.substr(0, head.rfind(','));  // drop decided_at .. abandoned
    CHECK(head == r[i]);  // identical text: identical doubles
  }

  auto status = run_alphaledger(with_ledger(db, {"--json", "status", "checkout"}));
  REQUIRE(status.exit_code == 0);
  auto s = nlohmann::json::parse(status.out);
  CHECK(s["tests"] == 10);
  CHECK(s["rejections"] == 3);
  CHECK(s["rule"] == "lord++");
  auto streams = run_alphaledger(with_ledger(db, {"streams"}));
  CHECK(streams.exit_code == 0);
  CHECK(complete_lines(streams.out).size() == 1);
  auto verify = run_alphaledger(with_ledger(db, {"verify", "checkout"}));
  CHECK(verify.exit_code == 0);
  CHECK(verify.out.find("10 records") != std::string::npos);
  auto at = run_alphaledger(with_ledger(db, {"--json", "verify", "checkout", "--at-step", "10"}));
  REQUIRE(at.exit_code == 0);
  auto vj = nlohmann::json::parse(at.out);
  CHECK(vj["ok"] == true);
  CHECK(vj["chain_hash_at_step"] == vj["chain_hash"]);  // step 10 is the last record
  CHECK(vj["chain_hash"].get<std::string>().size() == 64);
}

// docs/cli.md exit codes: 3 for refusals (conflict, unknown stream, other configuration), 2 for
// invalid input, each with a message on stderr; the history is unchanged after every failure.
TEST_CASE("LedgerCli: refusals and bad input give the contract's exit codes and change nothing") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "saffron"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--id", "a", "--p", "0.01"})).exit_code == 0);
  const std::string before = run_alphaledger(with_ledger(db, {"history", "s"})).out;

  struct Case {
    std::vector<std::string> args;
    int code;
    std::string says;
  };
  const std::vector<Case> cases = {
      {{"--json", "decide", "s", "--id", "a", "--p", "0.02"}, 3, "already decided"},
      {{"decide", "nope", "--id", "b", "--p", "0.02"}, 3, "no stream named 'nope'"},
      {{"new", "s", "--rule", "saffron", "--candidate-threshold", "0.4"}, 3, "another configuration"},
      {{"new", "t", "--rule", "lord++", "--payout", "0.01"}, 2, "payout"},
      {{"new", "a/b", "--rule", "lord++"}, 2, "stream name"},
      {{"decide", "s", "--id", "b", "--p", "1.3"}, 2, "[0, 1], got 1.3"},
      {{"decide", "s", "--id", "b", "--p", "abc"}, 2, "p_value"},
      {{"decide", "s", "--id", "", "--p", "0.3"}, 2, "id must not be empty"},
      {{"decide", "s", "--id", std::string(257, 'x'), "--p", "0.3"}, 2, "at most 256 bytes"},
      {{"decide", "s", "--id", "bad\tid", "--p", "0.3"}, 2, "control characters"},
      {{"decide", "s", "--id", "b"}, 2, "--p"},
      {{"decide", "s", "--id", "b", "--p", "0.3", "--file", "x.csv"}, 2, "not both"},
      {{"verify", "nope"}, 3, "no stream"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.args.size() > 1 ? c.args[1] : c.args[0]);
    CAPTURE(c.says);
    auto r = run_alphaledger(with_ledger(db, c.args));
    CHECK(r.exit_code == c.code);
    // With --json the error is one JSON object on stderr (docs/errors.md).
    const bool json = c.args.front() == "--json";
    CHECK(r.err.find(json ? "{\"error\":{\"code\":\"conflict\"" : "alphaledger: error: ") != std::string::npos);
    CHECK(r.err.find(c.says) != std::string::npos);
    CHECK(r.out.empty());
  }
  CHECK(run_alphaledger(with_ledger(db, {"history", "s"})).out == before);
  CHECK(complete_lines(run_alphaledger(with_ledger(db, {"streams"})).out).size() == 1);

  // A read-only command on a folder with no ledger: refused, and no folder is created.
  auto missing = run_alphaledger(with_ledger(dir.sub("absent"), {"status", "s"}));
  CHECK(missing.exit_code == 3);
  CHECK(missing.err.find("no ledger at") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(dir.sub("absent")));
}

// decide --file: a bad row (exit 2, file:line) or a conflicting row (exit 3, file:line) refuses
// the whole file and nothing is decided; a good file prints replay's rows; running it again
// repeats every decision (idempotence makes it resumable).
TEST_CASE("LedgerCli: decide --file refuses a bad file whole and resumes a good one") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--id", "e3", "--p", "0.36"})).exit_code == 0);
  const std::string before = run_alphaledger(with_ledger(db, {"history", "s"})).out;

  const std::string bad_p = dir.write("bad.csv", "id,p_value\ne1,0.0004\ne2,1.5\n");
  auto r1 = run_alphaledger(with_ledger(db, {"decide", "s", "--file", bad_p}));
  CHECK(r1.exit_code == 2);
  CHECK(r1.err.find("bad.csv:3") != std::string::npos);
  const std::string conflict =
      dir.write("conflict.jsonl", "{\"id\":\"e1\",\"p_value\":0.0004}\n{\"id\":\"e3\",\"p_value\":0.5}\n");
  auto r2 = run_alphaledger(with_ledger(db, {"decide", "s", "--file", conflict}));
  CHECK(r2.exit_code == 3);
  CHECK(r2.err.find("conflict.jsonl:2") != std::string::npos);
  CHECK(run_alphaledger(with_ledger(db, {"history", "s"})).out == before);

  const std::string good = dir.write("good.csv",
                                     "id,p_value,finished_at\ne1,0.0004,2025-03-01\ne2,0.0012,2025-03-02\n"
                                     "e3,0.36,2025-02-28\ne4,0.0009,2025-03-03\n");
  auto r3 = run_alphaledger(with_ledger(db, {"decide", "s", "--file", good, "--sync-every", "2"}));
  REQUIRE(r3.exit_code == 0);
  auto lines = complete_lines(r3.out);
  REQUIRE(lines.size() == 5);
  CHECK(lines[0] == "rule,step,id,p_value,level,rejected,wealth");
  CHECK(lines[1].rfind("lord++,1,e3,", 0) == 0);  // ordered by finished_at; e3 was step 1
  CHECK(lines[2].rfind("lord++,2,e1,", 0) == 0);
  auto r4 = run_alphaledger(with_ledger(db, {"--json", "decide", "s", "--file", good}));
  REQUIRE(r4.exit_code == 0);
  for (const auto& line : complete_lines(r4.out)) CHECK(nlohmann::json::parse(line)["repeat"] == true);
  CHECK(complete_lines(run_alphaledger(with_ledger(db, {"history", "s"})).out).size() == 5);
}

// Issue 3 item 5: a ledger held by another process gets exit 4 and a message naming the lock
// file and the holder. RocksDB 7.8.3 locks <ledger>/LOCK with fcntl(F_SETLK) (checked by running
// it: its error reads "While lock file: .../LOCK: Resource temporarily unavailable"); this test
// holds that lock itself, so the holder is this test process.
TEST_CASE("LedgerCli: a ledger locked by another process gives exit 4 naming the holder") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lond"})).exit_code == 0);
  const int fd = ::open((db + "/LOCK").c_str(), O_RDWR | O_CLOEXEC);
  REQUIRE(fd >= 0);
  struct flock fl {};
  fl.l_type = F_WRLCK;
  fl.l_whence = SEEK_SET;
  REQUIRE(::fcntl(fd, F_SETLK, &fl) == 0);
  auto r = run_alphaledger(with_ledger(db, {"decide", "s", "--id", "a", "--p", "0.001"}));
  ::close(fd);  // releases the lock
  CHECK(r.exit_code == 4);
  CHECK(r.err.find(db + "/LOCK") != std::string::npos);
  CHECK(r.err.find("process " + std::to_string(::getpid())) != std::string::npos);
  CHECK(r.out.empty());
  auto status = run_alphaledger(with_ledger(db, {"--json", "status", "s"}));
  REQUIRE(status.exit_code == 0);
  CHECK(nlohmann::json::parse(status.out)["tests"] == 0);
}

// A stream created with --alternative decides summary rows (docs/formats.md "Summary columns") in
// that direction. Reference p-values: tests/data/ledger_summary_reference.csv, written by
// make_ledger_summary_reference.py with SciPy 1.10.1 (pooled two-proportion z-test,
// scipy.stats.norm.sf / cdf); 1e-12 relative.
TEST_CASE("LedgerCli: a stream's direction applies to the summary rows it decides") {
  std::ifstream ref(std::string(ALPHALEDGER_TEST_DATA) + "/ledger_summary_reference.csv");
  REQUIRE(ref.good());
  std::string line;
  std::string input = "id,control_n,control_conversions,treatment_n,treatment_conversions\n";
  std::map<std::string, std::map<std::string, double>> expected;  // id -> direction -> p
  while (std::getline(ref, line)) {
    if (line.empty() || line[0] == '#' || line.rfind("id,", 0) == 0) continue;
    const auto f = alphaledger::test_support::split_csv_simple(line);
    REQUIRE(f.size() == 8);
    input += f[0] + "," + f[1] + "," + f[2] + "," + f[3] + "," + f[4] + "\n";
    expected[f[0]] = {
        {"two-sided", std::stod(f[5])}, {"greater", std::stod(f[6])}, {"less", std::stod(f[7])}};
  }
  REQUIRE(expected.size() == 3);
  TempDir dir;
  const std::string db = dir.sub("ledger");
  const std::string file = dir.write("summaries.csv", input);
  for (const std::string direction : {"two-sided", "greater", "less"}) {
    CAPTURE(direction);
    const std::string stream = "s-" + direction;
    REQUIRE(run_alphaledger(with_ledger(db, {"new", stream, "--rule", "lord++", "--alternative", direction}))
                .exit_code == 0);
    auto status = run_alphaledger(with_ledger(db, {"--json", "status", stream}));
    auto sj = nlohmann::json::parse(status.out);
    if (direction == "two-sided") {
      CHECK_FALSE(sj.contains("alternative"));  // shown only when it is not the default
    } else {
      CHECK(sj["alternative"] == direction);
    }
    auto r = run_alphaledger(with_ledger(db, {"--json", "decide", stream, "--file", file}));
    REQUIRE(r.exit_code == 0);
    const auto lines = complete_lines(r.out);
    REQUIRE(lines.size() == 3);
    for (const auto& l : lines) {
      auto j = nlohmann::json::parse(l);
      const double want = expected[j["id"].get<std::string>()][direction];
      CHECK(std::abs(j["p_value"].get<double>() - want) <= 1e-12 * want);
    }
  }
  auto bad = run_alphaledger(with_ledger(db, {"new", "x", "--rule", "lord++", "--alternative", "sideways"}));
  CHECK(bad.exit_code == 2);
  CHECK(bad.err.find("--alternative") != std::string::npos);
}

// Closing a stream (docs/ledger.md "Closing a stream"): decisions are refused with exit 3 naming
// the closing time, closing again changes nothing, status and streams show it, and verify covers
// it with the closing hash the close command printed (common practice, no source).
TEST_CASE("LedgerCli: a closed stream refuses tests and still verifies") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  for (int i = 0; i < 3; ++i) {
    REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--id", cat("e", std::to_string(i)), "--p",
                                             num(kStream[static_cast<std::size_t>(i)])}))
                .exit_code == 0);
  }
  const std::string history_before = run_alphaledger(with_ledger(db, {"history", "s"})).out;
  auto closed = run_alphaledger(with_ledger(db, {"close", "s"}));
  REQUIRE(closed.exit_code == 0);
  CHECK(closed.out.find("closed stream s at ") != std::string::npos);
  CHECK(closed.out.find("tests 3") != std::string::npos);
  auto again = run_alphaledger(with_ledger(db, {"--json", "close", "s"}));
  REQUIRE(again.exit_code == 0);
  auto cj = nlohmann::json::parse(again.out);
  CHECK(cj["closed_now"] == false);
  CHECK(cj["tests"] == 3);
  const std::string closed_at = cj["closed_at"].get<std::string>();
  CHECK(closed.out.find(closed_at) != std::string::npos);  // the same closing, not a new one
  const std::string closing_hash = cj["closing_hash"].get<std::string>();
  CHECK(closing_hash.size() == 64);
  CHECK(closed.out.find(closing_hash) != std::string::npos);

  const std::string file = dir.write("more.csv", "id,p_value\nx1,0.001\n");
  const std::vector<std::vector<std::string>> refused_args = {
      {"decide", "s", "--id", "late", "--p", "0.001"},
      {"--json", "decide", "s", "--id", "e0", "--p", num(kStream[0])},  // a repeat, refused too
      {"decide", "s", "--file", file},
      {"next", "s"},
  };
  for (const auto& args : refused_args) {
    CAPTURE(args[args[0] == "--json" ? 1 : 0]);
    auto r = run_alphaledger(with_ledger(db, args));
    CHECK(r.exit_code == 3);
    CHECK(r.err.find(cat("stream 's' is closed since ", closed_at)) != std::string::npos);
  }
  CHECK(run_alphaledger(with_ledger(db, {"history", "s"})).out == history_before);

  auto status = run_alphaledger(with_ledger(db, {"--json", "status", "s"}));
  REQUIRE(status.exit_code == 0);
  CHECK(nlohmann::json::parse(status.out)["closed_at"] == closed_at);
  auto text_status = run_alphaledger(with_ledger(db, {"status", "s"}));
  CHECK(text_status.out.find(cat("closed      ", closed_at)) != std::string::npos);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "open-one", "--rule", "lond"})).exit_code == 0);
  auto streams = run_alphaledger(with_ledger(db, {"--json", "streams"}));
  const auto lines = complete_lines(streams.out);
  REQUIRE(lines.size() == 2);
  CHECK_FALSE(nlohmann::json::parse(lines[0]).contains("closed_at"));  // open-one
  CHECK(nlohmann::json::parse(lines[1])["closed_at"] == closed_at);    // s
  CHECK(run_alphaledger(with_ledger(db, {"streams"})).out.find(cat("closed ", closed_at)) !=
        std::string::npos);

  auto verify = run_alphaledger(with_ledger(db, {"verify", "s"}));
  REQUIRE(verify.exit_code == 0);
  CHECK(verify.out.find("ends at step 3, chain hash ") != std::string::npos);
  CHECK(verify.out.find(cat("closing hash ", closing_hash)) != std::string::npos);
  auto vj = nlohmann::json::parse(run_alphaledger(with_ledger(db, {"--json", "verify", "s"})).out);
  CHECK(vj["closing_hash"] == closing_hash);
  CHECK(vj["closed_at"] == closed_at);
  auto anchored = run_alphaledger(with_ledger(db, {"verify", "s", "--expect", cat("closed:", closing_hash)}));
  CHECK(anchored.exit_code == 0);
  CHECK(anchored.out.find("anchors: all 1 match") != std::string::npos);
  auto open_anchor =
      run_alphaledger(with_ledger(db, {"verify", "open-one", "--expect", cat("closed:", closing_hash)}));
  CHECK(open_anchor.exit_code == 3);
  CHECK(open_anchor.err.find("not closed") != std::string::npos);

  CHECK(run_alphaledger(with_ledger(db, {"close", "nope"})).exit_code == 3);
  CHECK(run_alphaledger(with_ledger(db, {"close", "a/b"})).exit_code == 2);
  auto missing = run_alphaledger(with_ledger(dir.sub("absent"), {"close", "s"}));
  CHECK(missing.exit_code == 3);
  CHECK(missing.err.find("no ledger at") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(dir.sub("absent")));
}

// The auditor's case end to end: the ledger folder is replaced by an older copy (a restore that
// lost the last five decisions). What remains is consistent, so plain verify passes; the anchor
// noted from verify's output before the loss makes verify exit 3 naming its step (common
// practice, no source).
TEST_CASE("LedgerCli: verify --expect catches a ledger that lost its last decisions") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  const std::string backup = dir.sub("backup");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "saffron"})).exit_code == 0);
  auto decide_range = [&](std::size_t from, std::size_t to) {
    std::string rows = "id,p_value\n";
    for (std::size_t i = from; i < to; ++i)
      rows += cat(cat("e", std::to_string(i)), ",") + num(kStream[i]) + "\n";
    const std::string file = dir.write("rows.csv", rows);
    REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--file", file})).exit_code == 0);
  };
  decide_range(0, 5);
  std::filesystem::copy(db, backup, std::filesystem::copy_options::recursive);
  decide_range(5, 10);

  auto noted = run_alphaledger(with_ledger(db, {"verify", "s"}));
  REQUIRE(noted.exit_code == 0);
  const std::string marker = "--expect ";
  const auto at = noted.out.find(marker);
  REQUIRE(at != std::string::npos);
  const std::string anchor10 = noted.out.substr(at + marker.size(), 3 + 64);
  REQUIRE(anchor10.rfind("10:", 0) == 0);
  auto at3 = nlohmann::json::parse(
      run_alphaledger(with_ledger(db, {"--json", "verify", "s", "--at-step", "3"})).out);
  const std::string anchor3 = cat("3:", at3["chain_hash_at_step"].get<std::string>());
  CHECK(run_alphaledger(with_ledger(db, {"verify", "--expect", anchor10, "s", "--expect", anchor3}))
            .exit_code == 0);

  std::filesystem::remove_all(db);
  std::filesystem::copy(backup, db, std::filesystem::copy_options::recursive);
  auto plain = run_alphaledger(with_ledger(db, {"verify", "s"}));
  CHECK(plain.exit_code == 0);  // the older copy is consistent by itself
  CHECK(plain.out.find("ends at step 5,") != std::string::npos);
  CHECK(run_alphaledger(with_ledger(db, {"verify", "s", "--expect", anchor3})).exit_code == 0);
  auto lost = run_alphaledger(with_ledger(db, {"verify", "s", "--expect", anchor3, "--expect", anchor10}));
  CHECK(lost.exit_code == 3);
  CHECK(lost.err.find("fails verification at step 10") != std::string::npos);
  CHECK(lost.err.find("holds only 5 records") != std::string::npos);
  auto lost_json = run_alphaledger(with_ledger(db, {"--json", "verify", "s", "--expect", anchor10}));
  CHECK(lost_json.exit_code == 3);
  auto lj = nlohmann::json::parse(lost_json.out);
  CHECK(lj["ok"] == false);
  CHECK(lj["first_bad_step"] == 10);

  for (const std::string& bad :
       std::vector<std::string>{"10", cat("ten:", anchor10.substr(3)), "10:abc", std::string(5000, '9')}) {
    CAPTURE(bad.substr(0, 20));
    auto r = run_alphaledger(with_ledger(db, {"verify", "s", "--expect", bad}));
    CHECK(r.exit_code == 2);
    CHECK(r.err.find("--expect") != std::string::npos);
    CHECK(r.err.size() < 700);  // an excerpt of the value, not all of it
  }
}

// history --from and --limit print a slice, row by row, with the header once (common practice,
// no source); the rows equal the matching rows of the whole history.
TEST_CASE("LedgerCli: history prints a slice with --from and --limit") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lond"})).exit_code == 0);
  std::string rows = "id,p_value\n";
  for (std::size_t i = 0; i < kStream.size(); ++i)
    rows += cat(cat("e", std::to_string(i)), ",") + num(kStream[i]) + "\n";
  REQUIRE(
      run_alphaledger(with_ledger(db, {"decide", "s", "--file", dir.write("rows.csv", rows)})).exit_code ==
      0);
  const auto all = complete_lines(run_alphaledger(with_ledger(db, {"history", "s"})).out);
  REQUIRE(all.size() == 11);
  auto slice = run_alphaledger(with_ledger(db, {"history", "s", "--from", "4", "--limit", "3"}));
  REQUIRE(slice.exit_code == 0);
  CHECK(complete_lines(slice.out) == std::vector<std::string>{all[0], all[4], all[5], all[6]});
  auto tail = run_alphaledger(with_ledger(db, {"--json", "history", "s", "--from", "9"}));
  REQUIRE(tail.exit_code == 0);
  const auto tail_lines = complete_lines(tail.out);
  REQUIRE(tail_lines.size() == 2);
  CHECK(nlohmann::json::parse(tail_lines[0])["step"] == 9);
  CHECK(nlohmann::json::parse(tail_lines[1])["step"] == 10);
  auto past = run_alphaledger(with_ledger(db, {"history", "s", "--from", "11"}));
  CHECK(past.exit_code == 0);
  CHECK(complete_lines(past.out).size() == 1);  // the header only
  auto zero = run_alphaledger(with_ledger(db, {"history", "s", "--limit", "0"}));
  CHECK(zero.exit_code == 2);
  CHECK(zero.err.find("--limit") != std::string::npos);
}
