// Replay with launch times (docs/formats.md "Launch times"): tests that overlap are decided through
// the rules' launch/finish events of docs/methods.md section 9.1.
#include <doctest/doctest.h>

#include <sstream>

#include "alphaledger/replay.hpp"
#include "alphaledger/test_log.hpp"

using namespace alphaledger;

namespace {
Result<CompactLog> read_csv(const std::string& text) {
  std::istringstream in(text);
  return read_compact_log(in, "launch.csv", LogFormat::kCsv);
}
Result<CompactLog> read_jsonl(const std::string& text) {
  std::istringstream in(text);
  return read_compact_log(in, "launch.jsonl", LogFormat::kJsonLines);
}

std::vector<Decision> decide(const CompactLog& log, const std::string& rule) {
  auto procs = resolve_procedures({rule}, RuleSpec{}, true);
  REQUIRE(procs.ok());
  std::vector<Decision> out;
  replay_each(log, procs->front(), [&](std::size_t, const Decision& d) { out.push_back(d); });
  return out;
}

Rule make_rule(const std::string& name) {
  auto procs = resolve_procedures({name}, RuleSpec{}, true);
  REQUIRE(procs.ok());
  return Rule(std::get<RuleConfig>(procs->front().config));
}

// Four overlapping tests (times are plain numbers): A 1..5, B 2..3, C 4..9, D 5..6.
// Events in time order: launch A(1), launch B(2), finish B(3), launch C(4), finish A(5) then
// launch D(5) (finish first at equal times), finish D(6), finish C(9).
// Output rows follow finished_at: B, A, D, C.
const char* kOverlap =
    "id,launched_at,finished_at,p_value\n"
    "A,1,5,0.00001\n"
    "B,2,3,0.0002\n"
    "C,4,9,0.3\n"
    "D,5,6,0.0001\n";
}  // namespace

TEST_CASE("Replay with launched_at: LORD++ levels equal the core's launch/finish sequence by hand") {
  // Source: docs/methods.md section 9.1 (events launch/finish; level fixed at launch).
  auto log = read_csv(kOverlap);
  REQUIRE(log.ok());
  CHECK(log->has_launch);
  for (const std::string name : {"lord++", "saffron", "addis", "lond", "alpha-investing", "alpha-spending"}) {
    CAPTURE(name);
    Rule rule = make_rule(name);
    const auto a = rule.launch();
    const auto b = rule.launch();
    const auto ob = rule.finish(b.launch, 0.0002);
    const auto c = rule.launch();
    const auto oa = rule.finish(a.launch, 0.00001);
    const auto d = rule.launch();
    const auto od = rule.finish(d.launch, 0.0001);
    const auto oc = rule.finish(c.launch, 0.3);
    REQUIRE((ob.ok() && oa.ok() && od.ok() && oc.ok()));
    const auto got = decide(*log, name);
    REQUIRE(got.size() == 4);
    // Rows B, A, D, C with launch numbers 2, 1, 4, 3.
    CHECK(got[0].launch == 2);
    CHECK(got[1].launch == 1);
    CHECK(got[2].launch == 4);
    CHECK(got[3].launch == 3);
    CHECK(got[0].step == 1);
    CHECK(got[3].step == 4);
    CHECK(got[0].level == b.level);
    CHECK(got[1].level == a.level);
    CHECK(got[2].level == d.level);
    CHECK(got[3].level == c.level);
    CHECK(got[0].rejected == ob->rejected);
    CHECK(got[1].rejected == oa->rejected);
    CHECK(got[2].rejected == od->rejected);
    CHECK(got[3].rejected == oc->rejected);
    CHECK(*got[3].wealth == oc->wealth);
  }
}

TEST_CASE("Replay with launched_at: a rejection funds only tests launched after it finished") {
  // Source: docs/methods.md section 9.1 (LORD++ and SAFFRON: a deposit is stamped with the clock at
  // the finish, so tests already running are not funded by it).
  auto log = read_csv(kOverlap);
  REQUIRE(log.ok());
  for (const std::string name : {"lord++", "saffron"}) {
    CAPTURE(name);
    const auto got = decide(*log, name);
    // B (launch 2) rejected at time 3 with only the initial wealth; C launched at 4 sees B's
    // deposit; A's rejection at 5 is known to D launched at 5, not to C (launched at 4).
    REQUIRE(got[0].rejected);
    Rule without_b = make_rule(name);  // C's level if B's rejection were not known
    without_b.launch();
    without_b.launch();
    const double c_unfunded = without_b.launch().level;
    CHECK(got[3].level > c_unfunded);
  }
}

TEST_CASE("Replay with launched_at: at equal times the finish comes before the launch") {
  // Source: docs/formats.md "Launch times" (our rule: a result finished at 10:00 is known to a test
  // launched at 10:00). D launches at 5, the moment A finishes rejected: with the finish first, D's
  // level is the level after A's deposit; moving D's launch to 5 - 1e-9 must give a smaller level.
  auto same = read_csv(kOverlap);
  auto before = read_csv(
      "id,launched_at,finished_at,p_value\nA,1,5,0.00001\nB,2,3,0.0002\nC,4,9,0.3\nD,4.999999,6,0.0001\n");
  REQUIRE((same.ok() && before.ok()));
  const auto s = decide(*same, "lord++");
  const auto b = decide(*before, "lord++");
  REQUIRE(s[1].rejected);
  CHECK(s[2].level > b[2].level);
  // A test launched and finished at the same moment is launched first, then finished.
  auto zero = read_csv("id,launched_at,finished_at,p_value\nx,1,1,0.001\ny,1,2,0.5\n");
  REQUIRE(zero.ok());
  const auto z = decide(*zero, "lord++");
  CHECK(z[0].launch == 1);
  CHECK(z[1].launch == 2);
}

TEST_CASE("Replay with launched_at: launches at equal times keep file order; JSON Lines too") {
  auto log = read_jsonl(
      "{\"id\": \"p\", \"launched_at\": \"2025-03-01\", \"finished_at\": \"2025-03-09\", \"p_value\": 0.2}\n"
      "{\"id\": \"q\", \"launched_at\": \"2025-03-01\", \"finished_at\": \"2025-03-05\", \"p_value\": 0.2}\n");
  REQUIRE(log.ok());
  CHECK(log->has_launch);
  const auto got = decide(*log, "lord++");
  CHECK(got[0].launch == 2);  // q finishes first and was launched second
  CHECK(got[1].launch == 1);
}

TEST_CASE("Replay with launched_at: bad input names file:line and both values") {
  auto early = read_csv("id,launched_at,finished_at,p_value\na,1,2,0.1\nb,2025-03-05,2025-03-04,0.1\n");
  REQUIRE_FALSE(early.ok());
  CHECK(early.error().kind == ErrorKind::kInvalidArgument);
  CHECK(early.error().message.find("launch.csv:3:") == 0);
  CHECK(early.error().message.find("2025-03-04") != std::string::npos);
  CHECK(early.error().message.find("2025-03-05") != std::string::npos);

  auto empty = read_csv("id,launched_at,finished_at,p_value\na,1,2,0.1\nb,,3,0.1\n");
  REQUIRE_FALSE(empty.ok());
  CHECK(empty.error().message.find("launch.csv:3:") == 0);
  CHECK(empty.error().message.find("launched_at is empty") != std::string::npos);

  auto no_finish = read_csv("id,launched_at,finished_at,p_value\na,1,,0.1\n");
  REQUIRE_FALSE(no_finish.ok());
  CHECK(no_finish.error().message.find("launch.csv:2:") == 0);
  CHECK(no_finish.error().message.find("finished_at is missing") != std::string::npos);

  auto json_missing = read_jsonl("{\"id\": \"a\", \"finished_at\": 2, \"p_value\": 0.1}\n"
                                 "{\"id\": \"b\", \"launched_at\": 1, \"finished_at\": 2, \"p_value\": 0.1}\n");
  REQUIRE_FALSE(json_missing.ok());
  CHECK(json_missing.error().message.find("launch.jsonl:1:") == 0);

  auto bad_time = read_csv("id,launched_at,finished_at,p_value\na,soon,2,0.1\n");
  REQUIRE_FALSE(bad_time.ok());
  CHECK(bad_time.error().message.find("launch.csv:2:") == 0);
  CHECK(bad_time.error().message.find("launched_at") != std::string::npos);
}

TEST_CASE("Replay without launched_at: no launch numbers, record() decisions") {
  // Source: docs/rules.md (record(p) is launch then finish): the synchronous path is unchanged.
  auto log = read_csv("id,finished_at,p_value\na,1,0.001\nb,2,0.3\n");
  REQUIRE(log.ok());
  CHECK_FALSE(log->has_launch);
  const auto got = decide(*log, "lord++");
  Rule rule = make_rule("lord++");
  const auto o1 = rule.record(0.001);
  const auto o2 = rule.record(0.3);
  CHECK(got[0].launch == 0);
  CHECK(got[0].level == o1.level);
  CHECK(got[1].level == o2.level);
}
