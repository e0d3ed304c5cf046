// alphaledger explain, end to end (docs/cli.md "Explain").
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <algorithm>
#include <map>
#include <sstream>
#include <vector>
#include <string>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

using alphaledger::test_support::run_alphaledger;

TEST_CASE("explain: the next level and a decided test's level, term by term, in text and JSON") {
  const alphaledger::test_support::TempDir dir;
  const std::string db = dir.path() + "/db";
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "lord++"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "decide", "s", "--id", "a", "--p", "0.0004"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "decide", "s", "--id", "b", "--p", "0.0012"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "decide", "s", "--id", "c", "--p", "0.36"}).exit_code == 0);

  const auto text = run_alphaledger({"--ledger", db, "explain", "s", "--id", "c"});
  REQUIRE(text.exit_code == 0);
  CHECK(text.out.find("rule lord++ (exact), test 3") != std::string::npos);
  CHECK(text.out.find("deposit alpha of rejection 2 (test 2), lag 1") != std::string::npos);
  CHECK(text.out.find("cap: none") != std::string::npos);
  // docs/methods.md section 14.3 (LORD++, Ramdas et al. 2017, defaults): alpha_3 = 0.003292613799.
  CHECK(text.out.find("level: 0.00329261379") != std::string::npos);

  for (const std::vector<std::string>& args : {std::vector<std::string>{"explain", "s"},
                                              std::vector<std::string>{"explain", "s", "--id", "b"}}) {
    std::vector<std::string> full = {"--ledger", db, "--json"};
    full.insert(full.end(), args.begin(), args.end());
    const auto r = run_alphaledger(full);
    REQUIRE(r.exit_code == 0);
    const auto j = nlohmann::json::parse(r.out);
    double sum = 0;
    for (const auto& t : j["terms"]) sum += t["amount"].get<double>();
    CHECK(j["cap"].is_null());
    CHECK(sum == doctest::Approx(j["level"].get<double>()).epsilon(1e-12));  // common practice, no source
  }
  const auto next = nlohmann::json::parse(run_alphaledger({"--ledger", db, "--json", "explain", "s"}).out);
  const auto status = nlohmann::json::parse(run_alphaledger({"--ledger", db, "--json", "status", "s"}).out);
  CHECK(next["level"].get<double>() == status["next_level"].get<double>());
  CHECK(next["test"] == 4);
}

TEST_CASE("explain: an unknown stream or id exits 3 with a clear message; bad usage exits 2") {
  const alphaledger::test_support::TempDir dir;
  const std::string db = dir.path() + "/db";
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "saffron"}).exit_code == 0);
  const auto no_stream = run_alphaledger({"--ledger", db, "explain", "nope"});
  CHECK(no_stream.exit_code == 3);
  CHECK(no_stream.err.find("no stream named 'nope'") != std::string::npos);
  const auto no_id = run_alphaledger({"--ledger", db, "explain", "s", "--id", "x"});
  CHECK(no_id.exit_code == 3);
  CHECK(no_id.err.find("no decided or running test with id 'x'") != std::string::npos);
  const auto neither = run_alphaledger({"--ledger", db, "explain"});
  CHECK(neither.exit_code == 2);
}

TEST_CASE("explain --log: a log replayed through the rule, e-values for e-lond") {
  const alphaledger::test_support::TempDir dir;
  const std::string log = dir.write("e.csv", "id,e_value\na,1000\nb,0.5\nc,2\n");
  const auto r = run_alphaledger({"--json", "explain", "--log", log, "--rule", "e-lond", "--id", "c"});
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["test"] == 3);
  REQUIRE(j["terms"].size() == 2);  // alpha gamma_3, and one rejection (a: 1000 >= 1/alpha_1 = 365)
  CHECK(j["terms"][1]["kind"] == "rejections_so_far");
  CHECK(j["terms"][1]["rejection"] == 1);
}

TEST_CASE("explain: tests launched before others finished get the level reserved at their launch") {
  // Overlapping launches (docs/ledger.md "Launch-time levels"): each test's explained level must be
  // the level the ledger reserved at its launch, bit for bit (explain itself refuses a mismatch
  // with exit 3), whether it is decided or still running. The reference numbers are the ledger's
  // own reservations; the sums are common practice, no source.
  for (const std::string rule : {"lord++", "saffron", "addis", "alpha-investing", "lond"}) {
    CAPTURE(rule);
    const alphaledger::test_support::TempDir dir;
    const std::string db = dir.path() + "/db";
    const auto json = [&](std::vector<std::string> args) {
      args.insert(args.begin(), {"--ledger", db, "--json"});
      const auto r = run_alphaledger(args);
      INFO(r.err);
      REQUIRE(r.exit_code == 0);
      return nlohmann::json::parse(r.out);
    };
    REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", rule}).exit_code == 0);
    std::map<std::string, double> reserved;
    reserved["a"] = json({"launch", "s", "--id", "a"})["level"].get<double>();
    reserved["b"] = json({"launch", "s", "--id", "b"})["level"].get<double>();
    json({"decide", "s", "--id", "a", "--p", "0.00001"});
    reserved["c"] = json({"launch", "s", "--id", "c"})["level"].get<double>();
    reserved["d"] = json({"decide", "s", "--id", "d", "--p", "0.3"})["level"].get<double>();  // launched and decided at once
    reserved["e"] = json({"launch", "s", "--id", "e"})["level"].get<double>();
    json({"decide", "s", "--id", "b", "--p", "0.8"});
    reserved["f"] = json({"launch", "s", "--id", "f"})["level"].get<double>();
    json({"abandon", "s", "--id", "e"});
    reserved["g"] = json({"launch", "s", "--id", "g"})["level"].get<double>();
    // Running now: c, f, g. Decided: a, b, d. Abandoned: e.
    for (const auto& [id, level] : reserved) {
      CAPTURE(id);
      if (id == "e") continue;
      const auto j = json({"explain", "s", "--id", id});
      CHECK(j["level"].get<double>() == level);
      double sum = 0;
      for (const auto& t : j["terms"]) sum += t["amount"].get<double>();
      CHECK(sum == doctest::Approx(j["uncapped"].get<double>()).epsilon(1e-12));
    }
    const auto text = run_alphaledger({"--ledger", db, "explain", "s", "--id", "g"});
    CHECK(text.out.find("test 'g' (running, reserved at launch 7)") != std::string::npos);
    const auto next = json({"explain", "s"});
    CHECK(next["level"].get<double>() == json({"status", "s"})["next_level"].get<double>());
    CHECK(next["test"] == 8);
    const auto abandoned = run_alphaledger({"--ledger", db, "explain", "s", "--id", "e"});
    CHECK(abandoned.exit_code == 3);
    CHECK(abandoned.err.find("was abandoned") != std::string::npos);
  }
}

TEST_CASE("explain --log: a log with launched_at is explained at launch time, as replay decides it") {
  // Each test's explained level must be the level replay gives it (the level reserved at its
  // launch: docs/formats.md "Launch times"), its terms must add up to it to 1e-12 relative (common
  // practice, no source), and `running` lists the tests launched and not finished at that launch.
  const alphaledger::test_support::TempDir dir;
  const std::string log = dir.write("l.csv",
                                    "id,launched_at,finished_at,p_value\n"
                                    "a,1,5,0.00001\n"
                                    "b,2,3,0.4\n"
                                    "c,4,8,0.002\n"
                                    "d,6,7,0.9\n"
                                    "e,6,9,0.03\n");
  const std::map<std::string, std::vector<std::string>> running_at_launch = {
      {"a", {}}, {"b", {"a"}}, {"c", {"a"}}, {"d", {"c"}}, {"e", {"c", "d"}}};
  for (const std::string rule : {"lord++", "saffron", "addis", "alpha-investing", "lond"}) {
    CAPTURE(rule);
    const auto replay = run_alphaledger({"replay", log, "--rules", rule});
    REQUIRE(replay.exit_code == 0);
    std::map<std::string, double> level;  // id -> level, from replay's CSV
    std::istringstream lines(replay.out);
    const auto split = [](const std::string& line) {
      std::vector<std::string> cells;
      std::istringstream in(line);
      for (std::string c; std::getline(in, c, ',');) cells.push_back(c);
      return cells;
    };
    std::string line;
    std::getline(lines, line);
    const auto header = split(line);
    const auto column = [&](const std::string& name) {
      return static_cast<std::size_t>(std::find(header.begin(), header.end(), name) - header.begin());
    };
    while (std::getline(lines, line)) {
      const auto cells = split(line);
      REQUIRE(cells.size() == header.size());
      level[cells.at(column("id"))] = std::strtod(cells.at(column("level")).c_str(), nullptr);
    }
    REQUIRE(level.size() == 5);
    for (const auto& [id, expected_running] : running_at_launch) {
      CAPTURE(id);
      const auto r = run_alphaledger({"--json", "explain", "--log", log, "--rule", rule, "--id", id});
      INFO(r.err);
      REQUIRE(r.exit_code == 0);
      const auto j = nlohmann::json::parse(r.out);
      CHECK(j["level"].get<double>() == level.at(id));
      double sum = 0;
      for (const auto& t : j["terms"]) sum += t["amount"].get<double>();
      const double bound = j["cap"].is_null() ? sum : j["cap"]["value"].get<double>();
      CHECK(bound == doctest::Approx(j["level"].get<double>()).epsilon(1e-12));
      std::vector<std::string> running;
      double reserved = 0;
      for (const auto& t : j["running"]["tests"]) {
        running.push_back(t["id"].get<std::string>());
        reserved += t["level"].get<double>();
        CHECK(t["level"].get<double>() == level.at(t["id"].get<std::string>()));
      }
      CHECK(running == expected_running);
      CHECK(j["running"]["reserved"].get<double>() == reserved);
      CHECK(j["running"]["explained_test_running"] == false);
    }
  }
}

TEST_CASE("explain --json: `running` says whether the explained test is still running") {
  const alphaledger::test_support::TempDir dir;
  const std::string db = dir.path() + "/db";
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "lord++"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "launch", "s", "--id", "a"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "launch", "s", "--id", "b"}).exit_code == 0);
  const auto b = nlohmann::json::parse(run_alphaledger({"--ledger", db, "--json", "explain", "s", "--id", "b"}).out);
  CHECK(b["running"]["explained_test_running"] == true);
  REQUIRE(b["running"]["tests"].size() == 1);
  CHECK(b["running"]["tests"][0]["id"] == "a");
  CHECK(b["running"]["tests"][0]["launch"] == 1);
  const auto next = nlohmann::json::parse(run_alphaledger({"--ledger", db, "--json", "explain", "s"}).out);
  CHECK(next["running"]["explained_test_running"] == false);
  CHECK(next["running"]["tests"].size() == 2);
  const auto text = run_alphaledger({"--ledger", db, "explain", "s"});
  CHECK(text.out.find("running when it was set: 2 tests reserving ") != std::string::npos);
}
