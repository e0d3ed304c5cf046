// look, looks and decide --e as a user runs them: one process per command (docs/cli.md, docs/ledger.md
// "Watching a running test" and "Streams of e-values"). Exit codes: 2 bad input, 3 refused.
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>

#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

using alphaledger::test_support::complete_lines;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;
using Json = nlohmann::json;

namespace {

std::vector<std::string> with_ledger(const std::string& ledger, std::vector<std::string> args) {
  args.insert(args.begin(), {"--ledger", ledger});
  return args;
}

Json json_of(const std::string& out) {
  auto lines = complete_lines(out);
  REQUIRE(lines.size() == 1);
  return Json::parse(lines[0]);
}

// Everything a reader can see of a stream (status, history, verify, looks of `id`).
std::string observed(const std::string& db, const std::string& stream, const std::string& id) {
  std::string out;
  for (const auto& args : std::vector<std::vector<std::string>>{
           {"--json", "status", stream}, {"history", stream}, {"verify", stream}, {"looks", stream, "--id", id}}) {
    auto r = run_alphaledger(with_ledger(db, args));
    REQUIRE(r.exit_code == 0);
    out += r.out;
  }
  return out;
}

}  // namespace

TEST_CASE("look cli: continue, stop that decides the test, repeat, looks list, history and verify") {
  TempDir dir;
  const std::string db = dir.sub("db");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "shop", "--rule", "lord++"})).exit_code == 0);
  auto launched = run_alphaledger(with_ledger(db, {"--json", "launch", "shop", "--id", "exp-1"}));
  REQUIRE(launched.exit_code == 0);
  const double level = json_of(launched.out)["level"].get<double>();

  auto l1 = run_alphaledger(with_ledger(db, {"--json", "look", "shop", "--id", "exp-1", "--control", "8000:400",
                                             "--treatment", "8000:430", "--mixture-sd", "0.005"}));
  REQUIRE(l1.exit_code == 0);
  const Json j1 = json_of(l1.out);
  CHECK(j1["look"] == 1);
  CHECK(j1["verdict"] == "continue");
  CHECK(j1["level"].get<double>() == level);
  CHECK(j1["decision"].is_null());
  for (const char* key : {"anytime_p_value", "running_min", "e_value", "cs_low", "cs_high"})
    CHECK(j1.contains(key));

  auto text = run_alphaledger(with_ledger(db, {"look", "shop", "--id", "exp-1", "--control", "40000:2000",
                                               "--treatment", "40000:2400"}));
  REQUIRE(text.exit_code == 0);
  CHECK(text.out.find("stop: reject at the reserved level") != std::string::npos);

  auto again = run_alphaledger(with_ledger(db, {"--json", "look", "shop", "--id", "exp-1", "--control",
                                                "40000:2000", "--treatment", "40000:2400"}));
  REQUIRE(again.exit_code == 0);
  const Json j3 = json_of(again.out);
  CHECK(j3["repeat"] == true);
  CHECK(j3["verdict"] == "stop");
  CHECK(j3["decision"]["rejected"] == 1);
  CHECK(j3["decision"]["p_value"] == j3["running_min"]);

  auto looks = run_alphaledger(with_ledger(db, {"--json", "looks", "shop", "--id", "exp-1"}));
  REQUIRE(looks.exit_code == 0);
  CHECK(json_of(looks.out)["looks"].size() == 2);
  auto history = run_alphaledger(with_ledger(db, {"history", "shop"}));
  CHECK(complete_lines(history.out).size() == 2);  // header and the one decided test
  CHECK(run_alphaledger(with_ledger(db, {"verify", "shop"})).exit_code == 0);
}

TEST_CASE("look cli: bad input exits 2 naming the flag, refusals exit 3, the ledger unchanged") {
  TempDir dir;
  const std::string db = dir.sub("db");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "shop", "--rule", "lord++"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"decide", "shop", "--id", "done", "--p", "0.5"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"launch", "shop", "--id", "t"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"look", "shop", "--id", "t", "--control", "8000:400", "--treatment",
                                           "8000:420", "--mixture-sd", "0.005"}))
              .exit_code == 0);
  const std::string before = observed(db, "shop", "t");
  struct Case {
    std::vector<std::string> args;
    int exit;
    std::string words;
  };
  const std::vector<Case> cases = {
      {{"look", "shop", "--id", "t", "--control", "7000:400", "--treatment", "8000:420"}, 2, "--control"},
      {{"look", "shop", "--id", "t", "--control", "8000:400", "--treatment", "8000:410"}, 2,
       "treatment.conversions went down"},
      {{"look", "shop", "--id", "t", "--control", "9000:450", "--treatment", "9000:470", "--mixture-sd", "0"}, 2,
       "--mixture-sd"},
      {{"look", "shop", "--id", "t", "--control", "9000:450", "--treatment", "9000:470", "--mixture-sd", "-2"}, 2,
       "--mixture-sd"},
      {{"look", "shop", "--id", "t", "--control", "9000", "--treatment", "9000:470"}, 2, "--control"},
      {{"look", "shop", "--id", "never", "--control", "9000:450", "--treatment", "9000:470"}, 3, "never launched"},
      {{"look", "shop", "--id", "done", "--control", "9000:450", "--treatment", "9000:470"}, 3, "not running"},
      {{"look", "nope", "--id", "t", "--control", "9000:450", "--treatment", "9000:470"}, 3, "nope"},
  };
  for (const auto& c : cases) {
    auto r = run_alphaledger(with_ledger(db, c.args));
    INFO(c.args[4], " ", r.err);
    CHECK(r.exit_code == c.exit);
    CHECK(r.err.find(c.words) != std::string::npos);
  }
  CHECK(observed(db, "shop", "t") == before);
}

TEST_CASE("decide --e: e-LOND streams take e-values, other streams refuse them, exit codes") {
  TempDir dir;
  const std::string db = dir.sub("db");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "ev", "--rule", "e-lond"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "pv", "--rule", "lord++"})).exit_code == 0);
  auto first = run_alphaledger(with_ledger(db, {"--json", "decide", "ev", "--id", "a", "--e", "5000"}));
  REQUIRE(first.exit_code == 0);
  const Json d = json_of(first.out);
  CHECK(d["e_value"] == 5000.0);
  CHECK_FALSE(d.contains("p_value"));
  // e-LOND: rejected iff e >= 1/level (Xu & Ramdas 2024); 5000 >= 1/0.00274... (the first JM level).
  CHECK(d["rejected"] == 1);
  const std::string before = observed(db, "ev", "a");
  struct Case {
    std::vector<std::string> args;
    int exit;
    std::string words;
  };
  const std::vector<Case> cases = {
      {{"decide", "ev", "--id", "b", "--p", "0.01"}, 2, "--p: stream ev uses rule e-lond"},
      {{"decide", "pv", "--id", "b", "--e", "3"}, 2, "--e: stream pv uses rule lord++"},
      {{"decide", "ev", "--id", "b", "--e", "-1"}, 2, "--e"},
      {{"decide", "ev", "--id", "b", "--e", "nan"}, 2, "--e"},
      {{"decide", "ev", "--id", "b", "--e", "inf"}, 2, "--e"},
      {{"decide", "ev", "--id", "a", "--e", "6"}, 3, "e_value 5000"},
  };
  for (const auto& c : cases) {
    auto r = run_alphaledger(with_ledger(db, c.args));
    INFO(c.args[1], " ", c.args[4], " ", r.err);
    CHECK(r.exit_code == c.exit);
    CHECK(r.err.find(c.words) != std::string::npos);
  }
  const std::string after = observed(db, "ev", "a");
  CHECK(after == before);
  CHECK(after.find("e-lond,1,a,5000,") != std::string::npos);  // history's e_value column
  auto repeat = run_alphaledger(with_ledger(db, {"--json", "decide", "ev", "--id", "a", "--e", "5000"}));
  REQUIRE(repeat.exit_code == 0);
  CHECK(json_of(repeat.out)["repeat"] == true);
}

TEST_CASE("look cli: the pipe's summary line counts looks that said continue") {
  TempDir dir;
  const std::string db = dir.sub("db");
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "shop", "--rule", "lord++"})).exit_code == 0);
  const std::string in =
      R"({"event":"launch","id":"exp-1"})"
      "\n"
      R"({"event":"look","id":"exp-1","control":{"n":8000,"conversions":400},"treatment":{"n":8000,"conversions":430},"mixture_sd":0.005})"
      "\n";
  auto r = run_alphaledger(with_ledger(db, {"--log-level", "info", "pipe", "shop"}), in);
  REQUIRE(r.exit_code == 0);
  CHECK(complete_lines(r.out).size() == 2);
  CHECK(r.err.find("2 lines, 0 decided, 1 launched, 0 abandoned, 1 looked, 0 repeats, 0 refused") !=
        std::string::npos);
}
