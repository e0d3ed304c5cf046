// launch, abandon, running, decide of a launched test, status and plan --test, as a user runs them:
// one process per command (docs/ledger.md "Launch-time levels", docs/cli.md).
#include <doctest/doctest.h>

#include <cmath>
#include <nlohmann/json.hpp>

#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

using alphaledger::test_support::complete_lines;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;
using Json = nlohmann::json;

namespace {

// docs/methods.md section 14.3 (Ramdas, Yang, Wainwright & Jordan 2017, the LORD++ display, W0 = alpha/2,
// JM gamma), 10 significant digits, on the section 14 stream.
const std::vector<double> kStream = {0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100};
const std::vector<double> kLordLevels = {0.001370386057,  0.0016684017,   0.003292613799, 0.001060948593,
                                         0.00363847711,   0.001351990812, 0.00115660396,  0.000989535854,
                                         0.0008614799781, 0.0007620915508};

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

Json json_of(const std::string& out) {
  auto lines = complete_lines(out);
  REQUIRE(lines.size() == 1);
  return Json::parse(lines[0]);
}

// What a reader sees of a stream: status, running tests, history and verify. Equal before and
// after a refused command means the ledger is unchanged as far as any command can tell.
std::string observed(const std::string& db, const std::string& stream) {
  std::string out;
  for (const auto& args : std::vector<std::vector<std::string>>{{"--json", "status", stream},
                                                                {"running", stream},
                                                                {"history", stream},
                                                                {"verify", stream}}) {
    auto r = run_alphaledger(with_ledger(db, args));
    REQUIRE(r.exit_code == 0);
    out += r.out;
  }
  return out;
}

}  // namespace

// Synchronous equivalence (docs/methods.md 9.1: launches that each finish before the next give
// the synchronous levels): launch then decide, one process each, gives docs/methods.md 14.3's LORD++
// levels (1e-9 relative), and the decision is made at the level printed by launch.
TEST_CASE("LaunchCli: launch then decide gives docs/methods.md 14.3 levels (synchronous equivalence)") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  for (std::size_t i = 0; i < kStream.size(); ++i) {
    const std::string id = cat("t", std::to_string(i + 1));
    auto l = run_alphaledger(with_ledger(db, {"--json", "launch", "s", "--id", id}));
    REQUIRE(l.exit_code == 0);
    const Json lj = json_of(l.out);
    CHECK(lj["launch"] == i + 1);
    CHECK(std::fabs(lj["level"].get<double>() / kLordLevels[i] - 1) < 1e-9);
    auto d = run_alphaledger(with_ledger(db, {"--json", "decide", "s", "--id", id, "--p", num(kStream[i])}));
    REQUIRE(d.exit_code == 0);
    const Json dj = json_of(d.out);
    CHECK(dj["level"].get<double>() == lj["level"].get<double>());
    CHECK(dj["launch"] == i + 1);
  }
  auto v = run_alphaledger(with_ledger(db, {"verify", "s"}));
  CHECK(v.exit_code == 0);
}

TEST_CASE("LaunchCli: overlapping tests, running, status, plan --test, abandon and history") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "team", "--rule", "lord++"})).exit_code == 0);
  auto a = run_alphaledger(with_ledger(db, {"launch", "team", "--id", "exp-a"}));
  REQUIRE(a.exit_code == 0);
  CHECK(a.out.find("reserved for test exp-a") != std::string::npos);
  auto bj = json_of(run_alphaledger(with_ledger(db, {"--json", "launch", "team", "--id", "exp-b"})).out);
  const double level_b = bj["level"].get<double>();
  CHECK(bj["repeat"] == false);

  // A retried launch returns the stored reservation.
  auto again = json_of(run_alphaledger(with_ledger(db, {"--json", "launch", "team", "--id", "exp-b"})).out);
  CHECK(again["repeat"] == true);
  CHECK(again["level"].get<double>() == level_b);
  CHECK(again["launched_at"] == bj["launched_at"]);

  auto status = json_of(run_alphaledger(with_ledger(db, {"--json", "status", "team"})).out);
  CHECK(status["running"] == 2);
  CHECK(status["reserved"].get<double>() > level_b);  // exp-a's level plus exp-b's
  auto text_status = run_alphaledger(with_ledger(db, {"status", "team"}));
  CHECK(text_status.out.find("running     2 tests") != std::string::npos);

  auto running = run_alphaledger(with_ledger(db, {"running", "team"}));
  REQUIRE(running.exit_code == 0);
  auto rows = complete_lines(running.out);
  REQUIRE(rows.size() == 3);
  CHECK(rows[0] == "id,launch,level,launched_at");
  CHECK(rows[1].rfind("exp-a,1,", 0) == 0);
  CHECK(rows[2].rfind(cat("exp-b,2,", num(level_b).substr(0, 8)), 0) == 0);

  // plan at the reserved level: the same level, no note that it can differ.
  auto plan = run_alphaledger(with_ledger(db, {"--json", "plan", "proportions", "--baseline", "0.05",
                                               "--min-effect", "0.01", "--stream", "team", "--test", "exp-b"}));
  REQUIRE(plan.exit_code == 0);
  const Json pj = json_of(plan.out);
  CHECK(pj["level"].get<double>() == level_b);
  CHECK(pj["level_source"] == "reserved");
  CHECK(pj["launch"] == 2);
  CHECK_FALSE(pj.contains("note"));
  auto plan_text = run_alphaledger(with_ledger(
      db, {"plan", "proportions", "--baseline", "0.05", "--min-effect", "0.01", "--stream", "team", "--test", "exp-b"}));
  REQUIRE(plan_text.exit_code == 0);
  CHECK(plan_text.out.find("can differ") == std::string::npos);
  CHECK(plan_text.out.find("reserved for running test exp-b") != std::string::npos);

  // exp-a is decided after exp-b launched: exp-b keeps its reserved level.
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "team", "--id", "exp-a", "--p", "0.0001"})).exit_code == 0);
  auto db_ = json_of(run_alphaledger(with_ledger(db, {"--json", "decide", "team", "--id", "exp-b", "--p", "0.3"})).out);
  CHECK(db_["level"].get<double>() == level_b);
  CHECK(db_["launch"] == 2);

  REQUIRE(run_alphaledger(with_ledger(db, {"launch", "team", "--id", "exp-c"})).exit_code == 0);
  auto ab = run_alphaledger(with_ledger(db, {"--json", "abandon", "team", "--id", "exp-c"}));
  REQUIRE(ab.exit_code == 0);
  CHECK(json_of(ab.out)["repeat"] == false);
  auto ab2 = run_alphaledger(with_ledger(db, {"--json", "abandon", "team", "--id", "exp-c"}));
  REQUIRE(ab2.exit_code == 0);
  CHECK(json_of(ab2.out)["repeat"] == true);

  auto history = run_alphaledger(with_ledger(db, {"history", "team"}));
  REQUIRE(history.exit_code == 0);
  auto h = complete_lines(history.out);
  REQUIRE(h.size() == 4);  // header, exp-a, exp-b, exp-c (abandoned)
  CHECK(h[0] == "rule,step,id,p_value,level,rejected,wealth,decided_at,launch,reserved_at,abandoned");
  CHECK(h[1].find(",exp-a,") != std::string::npos);
  CHECK(h[3].find(",exp-c,") != std::string::npos);
  CHECK(h[3].substr(h[3].size() - 2) == ",1");
  CHECK(h[2].substr(h[2].size() - 2) == ",0");
  CHECK(run_alphaledger(with_ledger(db, {"verify", "team"})).exit_code == 0);
}

// The "Bad input" list on the command line: exit code as docs/errors.md (2 bad usage, 3
// refused by the ledger), a message naming the id, and nothing changed.
TEST_CASE("LaunchCli: refusals exit 2 or 3, name the id and leave the ledger unchanged") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "saffron"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "s", "--id", "done", "--p", "0.2"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"launch", "s", "--id", "gone"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"abandon", "s", "--id", "gone"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"launch", "s", "--id", "live"})).exit_code == 0);
  const std::string batch = dir.write("batch.csv", "id,p_value\nnew1,0.3\nlive,0.2\n");
  const std::string before = observed(db, "s");

  struct Case {
    std::vector<std::string> args;
    int exit_code;
    std::string named;
  };
  const std::vector<Case> cases = {
      {{"abandon", "s", "--id", "nope"}, 3, "nope"},
      {{"decide", "s", "--id", "gone", "--p", "0.1"}, 3, "gone"},
      {{"abandon", "s", "--id", "done"}, 3, "done"},
      {{"launch", "s", "--id", "done"}, 3, "done"},
      {{"launch", "s", "--id", "gone"}, 3, "gone"},
      {{"launch", "nostream", "--id", "x"}, 3, "nostream"},
      {{"launch", "s", "--id", " bad"}, 2, "--id"},
      {{"launch", "s"}, 2, "--id"},
      {{"plan", "proportions", "--baseline", "0.05", "--min-effect", "0.01", "--stream", "s", "--test", "nope"},
       3,
       "nope"},
      {{"plan", "proportions", "--baseline", "0.05", "--min-effect", "0.01", "--stream", "s", "--test", "done"},
       3,
       "done"},
      {{"plan", "proportions", "--baseline", "0.05", "--min-effect", "0.01", "--test", "live"}, 2, "--stream"},
      {{"decide", "s", "--file", batch}, 3, "live"},
  };
  for (const auto& c : cases) {
    std::string shown;
    for (const auto& a : c.args) {
      shown.append(a);
      shown.push_back(' ');
    }
    INFO(shown);
    auto r = run_alphaledger(with_ledger(db, c.args));
    CHECK(r.exit_code == c.exit_code);
    CHECK(r.err.find(c.named) != std::string::npos);
    CHECK(observed(db, "s") == before);
  }
  // --json failures are one error object with a code.
  auto j = run_alphaledger(with_ledger(db, {"--json", "abandon", "s", "--id", "nope"}));
  CHECK(j.exit_code == 3);
  CHECK(j.err.find("\"unknown_test\"") != std::string::npos);
}

// The text answer of launch says how to decide the test: with --p on a p-value stream, with --e on
// an e-lond stream (its rule takes e-values; decide refuses --p there). Following the hint works.
TEST_CASE("LaunchCli: the decide hint of launch names --e on an e-lond stream, --p elsewhere") {
  TempDir dir;
  const std::string db = dir.sub("ledger");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "ev", "--rule", "e-lond"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "pv", "--rule", "lord++"})).exit_code == 0);
  auto e = run_alphaledger(with_ledger(db, {"launch", "ev", "--id", "a"}));
  REQUIRE(e.exit_code == 0);
  CHECK(e.out.find("alphaledger decide ev --id a --e E)") != std::string::npos);
  CHECK(e.out.find("--p P") == std::string::npos);
  auto p = run_alphaledger(with_ledger(db, {"launch", "pv", "--id", "a"}));
  REQUIRE(p.exit_code == 0);
  CHECK(p.out.find("alphaledger decide pv --id a --p P)") != std::string::npos);
  CHECK(p.out.find("--e E") == std::string::npos);
  // The hint is the one decide accepts: --e decides the running e-lond test (an e-value >= 0).
  CHECK(run_alphaledger(with_ledger(db, {"decide", "ev", "--id", "a", "--e", "3"})).exit_code == 0);
  CHECK(run_alphaledger(with_ledger(db, {"decide", "pv", "--id", "a", "--p", "0.5"})).exit_code == 0);
}
