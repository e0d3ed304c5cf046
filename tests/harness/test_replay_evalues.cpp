// e-values in replay: the e_value column (docs/formats.md), e-lond decided as the core decides it,
// e-bh as the offline e_benjamini_hochberg, and the errors of bad or missing e-values.
#include <doctest/doctest.h>

#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/offline.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/test_log.hpp"

using namespace alphaledger;

namespace {

Result<CompactLog> read_csv(const std::string& text, const std::string& name = "e.csv") {
  std::istringstream in(text);
  return read_compact_log(in, name, LogFormat::kCsv);
}

std::vector<double> random_e_values(std::uint64_t seed, std::size_t n) {
  std::mt19937_64 gen(seed);
  std::lognormal_distribution<double> d(0.0, 2.0);
  std::vector<double> e(n);
  for (auto& x : e) x = d(gen);
  return e;
}

std::string e_log(const std::vector<double>& e) {
  std::string text = "id,e_value\n";
  for (std::size_t i = 0; i < e.size(); ++i) {
    text += 't';
    text += std::to_string(i);
    text += ',';
    text += format_number(e[i]);
    text += '\n';
  }
  return text;
}

}  // namespace

TEST_CASE("Replay: e-lond on the e_value column decides as Rule::record_e on the same values") {
  auto e = random_e_values(11, 300);
  e[0] = 1e4;  // above 1/alpha_1 = 365 (jm, alpha = 0.05): a rejection, so later levels grow
  auto log = read_csv(e_log(e));
  REQUIRE(log.ok());
  CHECK(log->has_e_values);
  CHECK_FALSE(log->has_p_values);
  auto procs = resolve_procedures({"e-lond"}, RuleSpec{}, true);
  REQUIRE(procs.ok());
  REQUIRE(check_log_columns(*log, *procs).ok());
  Rule rule(std::get<RuleConfig>(procs->front().config));
  std::size_t seen = 0, rejected = 0;
  replay_each(*log, procs->front(), [&](std::size_t i, const Decision& d) {
    const Outcome o = rule.record_e(e[i]);
    CHECK(d.level == o.level);  // bit for bit: the same Rule, the same values
    CHECK(d.rejected == o.rejected);
    rejected += d.rejected ? 1 : 0;
    ++seen;
  });
  CHECK(seen == e.size());
  CHECK(rejected > 0);
}

TEST_CASE("Replay: e-bh equals the offline e_benjamini_hochberg on the same e-values") {
  const auto e = random_e_values(12, 200);
  auto log = read_csv(e_log(e));
  REQUIRE(log.ok());
  auto procs = resolve_procedures({"e-bh"}, RuleSpec{.alpha = 0.1}, true);
  REQUIRE(procs.ok());
  const OfflineDecisions od = e_benjamini_hochberg(e, 0.1);
  std::size_t rejected = 0;
  replay_each(*log, procs->front(), [&](std::size_t i, const Decision& d) {
    CHECK(d.rejected == od.rejected[i]);
    rejected += d.rejected ? 1 : 0;
  });
  CHECK(rejected == od.rejections);
  // The TestLog path gives the same decisions.
  std::istringstream in(e_log(e));
  auto full = read_test_log(in, "e.csv", LogFormat::kCsv);
  REQUIRE(full.ok());
  const ReplayResult r = replay(*full, *procs);
  for (std::size_t i = 0; i < e.size(); ++i) CHECK(r.decisions[0][i].rejected == od.rejected[i]);
}

TEST_CASE("Replay: a rule needing the column the log lacks is refused, naming the rule and the column") {
  auto only_p = read_csv("id,p_value\na,0.01\n");
  REQUIRE(only_p.ok());
  auto elond = resolve_procedures({"lord++", "e-lond"}, RuleSpec{}, true);
  REQUIRE(elond.ok());
  auto s = check_log_columns(*only_p, *elond);
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message.find("e-lond") != std::string::npos);
  CHECK(s.error().message.find("e_value") != std::string::npos);
  auto only_e = read_csv("id,e_value\na,3\n");
  REQUIRE(only_e.ok());
  auto lord = resolve_procedures({"lord++"}, RuleSpec{}, true);
  REQUIRE(lord.ok());
  s = check_log_columns(*only_e, *lord);
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message.find("lord++") != std::string::npos);
  CHECK(s.error().message.find("p_value") != std::string::npos);
}

TEST_CASE("Reader: bad e-values are refused with file:line and the field") {
  struct Case {
    const char* text;
    const char* expect;
  };
  const Case cases[] = {
      {"id,p_value,e_value\na,0.1,2\nb,0.2,-1\n", "e.csv:3: test 'b': e_value"},
      {"id,p_value,e_value\na,0.1,inf\n", "e.csv:2: test 'a': e_value"},
      {"id,p_value,e_value\na,0.1,nan\n", "e.csv:2: test 'a': e_value"},
      {"id,p_value,e_value\na,0.1,\n", "e.csv:2: test 'a': e_value is empty"},
      {"id,e_value\na,\n", "e.csv:2: test 'a': e_value is empty"},
      {"id,e_value\na,abc\n", "e.csv:2: test 'a': e_value"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.text);
    auto log = read_csv(c.text);
    REQUIRE_FALSE(log.ok());
    CHECK(log.error().message.rfind(c.expect, 0) == 0);
  }
  std::istringstream jsonl("{\"id\":\"a\",\"e_value\":2}\n{\"id\":\"b\",\"p_value\":0.1}\n");
  auto mixed = read_compact_log(jsonl, "e.jsonl", LogFormat::kJsonLines);
  REQUIRE_FALSE(mixed.ok());
  CHECK(mixed.error().message.find("e.jsonl:2: test 'b': no e_value, but line 1 has one") == 0);
}

TEST_CASE("Reader: a TestLog read from a log with launched_at says so (has_launch)") {
  // read_test_log used to drop has_launch when expanding the compact log, so replay(TestLog)
  // decided such a log as if every test were synchronous.
  std::istringstream in("id,launched_at,finished_at,p_value\nA,1,5,0.00001\nB,2,3,0.0002\n");
  auto log = read_test_log(in, "l.csv", LogFormat::kCsv);
  REQUIRE(log.ok());
  CHECK(log->has_launch);
}
