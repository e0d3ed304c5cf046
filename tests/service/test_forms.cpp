// The output forms (alphaledger/forms.hpp) and the one JSON writer (harness/json_text.hpp): key
// order, the rule for non-finite numbers, and text that is not UTF-8.
#include <doctest/doctest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "alphaledger/forms.hpp"
#include "alphaledger/service.hpp"
#include "alphaledger/test_log.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::ordered_json;

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

std::vector<std::string> keys_of(const Json& j) {
  std::vector<std::string> keys;
  for (auto it = j.begin(); it != j.end(); ++it) keys.push_back(it.key());
  return keys;
}

DecideResult sample_decision() {
  // Field by field, with the id appended: GCC 12's -Wrestrict misfires on a string built in an
  // aggregate here (GCC PR 105651).
  DecideResult d;
  d.stream.append("s");
  d.record.step = 1;
  d.record.id.append("exp \"1\"");
  d.record.p_value = 0.0004;
  d.record.level = 0.0013703860574149387;
  d.record.rejected = true;
  d.record.wealth = 0.07466975969353125;
  d.record.decided_at_ms = 1700000000001;
  d.record.launch = 1;
  d.record.launched_at_ms = 1700000000001;
  return d;
}

StreamInfo sample_stream(Alternative alternative) {
  StreamInfo s;
  s.name = "checkout-team";
  s.config = *resolve_config({.rule = "lord++"});
  s.alternative = alternative;
  s.created_at_ms = 1700000000000;
  s.tests = 3;
  s.rejections = 1;
  s.wealth = 0.05;
  s.next_level = 0.001;
  return s;
}

}  // namespace

// decide --json, pipe and HTTP answer (docs/formats.md "Output forms"): keys in this order;
// numbers read back to the identical double (nlohmann::json 3.11 parser as the reader; common
// practice, no source).
TEST_CASE("forms: decision_json has the documented keys and round-trips numbers") {
  const DecideResult d = sample_decision();
  const Json j = Json::parse(decision_json(d));
  CHECK(keys_of(j) == std::vector<std::string>{"step", "id", "p_value", "level", "rejected", "wealth",
                                               "stream", "decided_at", "launch", "launched_at", "repeat"});
  CHECK(j["id"] == "exp \"1\"");
  CHECK(same_bits(j["level"].get<double>(), d.record.level));
  CHECK(same_bits(j["wealth"].get<double>(), d.record.wealth));
  CHECK(j["rejected"] == 1);
  CHECK(j["repeat"] == false);
  CHECK(j["decided_at"] == "2023-11-14T22:13:20.001Z");
  CHECK(Json::parse(decision_json(d, "lord++")).begin().key() == "rule");
  // The CSV row of decide --file: replay's columns, the id quoted as RFC 4180 asks.
  CHECK(decision_csv(d.record, "lord++") ==
        "lord++,1,\"exp \"\"1\"\"\",4e-04,0.0013703860574149386,1,0.07466975969353125");
}

// One rule for numbers that are not finite (docs/formats.md): null in JSON, an empty cell in CSV
// (chosen here; common practice, no source). Before, the CSV forms printed "inf".
TEST_CASE("forms: non-finite numbers are null in JSON and empty in CSV") {
  DecisionRecord r = sample_decision().record;
  r.level = std::numeric_limits<double>::infinity();
  r.wealth = std::numeric_limits<double>::quiet_NaN();
  const Json row = Json::parse(history_row_json(r, "lord++"));
  CHECK(row["level"].is_null());
  CHECK(row["wealth"].is_null());
  CHECK(row["p_value"] == 0.0004);
  CHECK(history_row_csv(r, "lord++") ==
        "lord++,1,\"exp \"\"1\"\"\",4e-04,,1,,2023-11-14T22:13:20.001Z,1,2023-11-14T22:13:20.001Z,0");
  DecideResult d = sample_decision();
  d.record = r;
  CHECK(Json::parse(decision_json(d))["level"].is_null());
  StreamInfo s = sample_stream(Alternative::kTwoSided);
  s.next_level = -std::numeric_limits<double>::infinity();
  CHECK(Json::parse(stream_json(s))["next_level"].is_null());
  CHECK(Json::parse(next_level_json("s", 4, std::nan("")))["level"].is_null());
}

// The stream object of status --json, streams --json and every HTTP stream answer: one shape.
TEST_CASE("forms: stream_json shows alternative and closed_at only when they apply") {
  const Json plain = Json::parse(stream_json(sample_stream(Alternative::kTwoSided)));
  const auto keys = keys_of(plain);
  REQUIRE(keys.size() >= 8);
  CHECK(std::vector<std::string>(keys.begin(), keys.begin() + 3) ==
        std::vector<std::string>{"stream", "rule", "alpha"});
  CHECK(std::vector<std::string>(keys.end() - 7, keys.end()) ==
        std::vector<std::string>{"created_at", "tests", "rejections", "wealth", "next_level", "running",
                                 "reserved"});
  CHECK_FALSE(plain.contains("alternative"));
  CHECK_FALSE(plain.contains("closed_at"));
  StreamInfo closed = sample_stream(Alternative::kGreater);
  closed.closed_at_ms = 1700000001000;
  const Json j = Json::parse(stream_json(closed));
  CHECK(j["alternative"] == "greater");
  CHECK(j["closed_at"] == "2023-11-14T22:13:21.000Z");
  CHECK(keys_of(j).back() == "closed_at");
  const Json created = Json::parse(stream_created_json(closed, false));
  CHECK(created["created"] == false);
  const Json closing = Json::parse(stream_closed_json(closed, true, "ab12"));
  CHECK(closing["closed_now"] == true);
  CHECK(closing["closing_hash"] == "ab12");
  const Json list = Json::parse(stream_list_json({sample_stream(Alternative::kLess), closed}));
  REQUIRE(list["streams"].size() == 2);
  CHECK(list["streams"][0]["alternative"] == "less");
}

// The launch-time forms (docs/formats.md "Output forms"): keys in this order; numbers read back
// to the identical double (nlohmann::json 3.11 parser as the reader; common practice, no source).
TEST_CASE("forms: launch, abandon and running forms have the documented keys") {
  LaunchResult l;
  l.stream.append("s");
  l.id.append("exp-0150");
  l.launch = 3;
  l.level = 0.0009301234567891234;
  l.wealth = 0.021;
  l.launched_at_ms = 1700000000000;
  l.step = 4;
  const Json lj = Json::parse(launch_json(l));
  CHECK(keys_of(lj) ==
        std::vector<std::string>{"stream", "id", "launch", "level", "wealth", "launched_at", "step", "repeat"});
  CHECK(same_bits(lj["level"].get<double>(), l.level));
  CHECK(lj["launched_at"] == "2023-11-14T22:13:20.000Z");
  AbandonResult a;
  a.stream.append("s");
  a.id.append("x");
  a.abandoned_at_ms = 1700000001000;
  CHECK(keys_of(Json::parse(abandon_json(a))) ==
        std::vector<std::string>{"stream", "id", "launch", "level", "wealth", "launched_at", "abandoned_at",
                                 "step", "repeat"});
  RunningEntry r;  // field by field: GCC 12's -Wrestrict misfires on the aggregate (GCC PR 105651)
  r.id.append("exp \"2\"");
  r.launch = 5;
  r.level = 0.25;
  r.launched_at_ms = 1700000000000;
  CHECK(running_csv(r) == "\"exp \"\"2\"\"\",5,0.25,2023-11-14T22:13:20.000Z");
  const Json list = Json::parse(running_list_json("s", {r}));
  REQUIRE(list["running"].size() == 1);
  CHECK(keys_of(list["running"][0]) == std::vector<std::string>{"stream", "id", "launch", "level", "launched_at"});
}

TEST_CASE("forms: verify_json has one shape for ok and failed reports") {
  VerifyReport ok;
  ok.steps = 5;
  ok.chain_hash = "aa";
  const Json a = Json::parse(verify_json("s", ok, ChainHashAt{2, "bb"}));
  CHECK(a["first_bad_step"].is_null());
  CHECK(a["problem"].is_null());
  CHECK(a["chain_hash"] == "aa");
  CHECK(a["at_step"] == 2);
  CHECK(a["chain_hash_at_step"] == "bb");
  VerifyReport bad;
  bad.ok = false;
  bad.steps = 5;
  bad.first_bad_step = 3;
  bad.problem = "level differs";
  const Json b = Json::parse(verify_json("s", bad));
  CHECK(b["first_bad_step"] == 3);
  CHECK(b["chain_hash"].is_null());
  CHECK_FALSE(b.contains("at_step"));
}

// nlohmann's dump() throws type_error 316 on such bytes (the first CHECK_THROWS shows it); the one
// writer writes each bad byte as \xHH instead and leaves valid UTF-8 alone. Sequences from
// RFC 3629 section 3 (overlong forms and surrogates are not UTF-8).
TEST_CASE("json_text: bytes that are not UTF-8 are written as \\xHH, never thrown") {
  const Json bad = {{"id", "ab\xff"}};
  CHECK_THROWS(bad.dump());
  std::string text;
  REQUIRE_NOTHROW(text = json_text(bad));
  CHECK(text == R"({"id":"ab\\xff"})");
  CHECK(Json::parse(text)["id"] == "ab\\xff");
  CHECK(json_text(Json("\xc0\xaf")) == R"("\\xc0\\xaf")");           // overlong '/'
  CHECK(json_text(Json("\xed\xa0\x80")) == R"("\\xed\\xa0\\x80")");  // a surrogate
  CHECK(json_text(Json("caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x98\x80")) ==
        "\"caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x98\x80\"");     // valid 2-, 3- and 4-byte sequences unchanged
  CHECK(json_text(Json("x\xe2\x82")) == R"("x\\xe2\\x82")");  // a sequence cut short
  const Json nested = {{"k\xfe", {1, "\x80"}}};
  CHECK(json_text(nested) == R"({"k\\xfe":[1,"\\x80"]})");
  CHECK(json_text(nlohmann::json{{"a", "\xff"}}) == R"({"a":"\\xff"})");
  // The error form: a path with such a byte (paths are not checked) still gives valid JSON.
  const Json e = Json::parse(error_json("invalid_input", "/tmp/d\xff/x.csv: cannot open"));
  CHECK(e["error"]["message"] == "/tmp/d\\xff/x.csv: cannot open");
  CHECK(Json::parse(line_error_json(7, "\xff"))["error"] == "\\xff");
}

TEST_CASE("forms: error_json names the kind's code when no finer code is given") {
  CHECK(Json::parse(error_json(invalid_input("bad")))["error"]["code"] == "invalid_input");
  CHECK(Json::parse(error_json(io_error("disk")))["error"]["code"] == "storage");
  const Json h = Json::parse(health_json(std::string("the last write failed")));
  CHECK(h["status"] == "failing");
  CHECK(h["error"]["code"] == "storage");
  CHECK(Json::parse(health_json(std::nullopt)) == Json{{"status", "ok"}});
}

// The string-based readers a library user calls: the same rules as the JSON Lines reader.
TEST_CASE("forms: requests read from JSON text") {
  auto t = test_from_json_text(R"({"id": "exp-0142", "p_value": 0.0004})");
  REQUIRE(t.ok());
  CHECK(t->id == "exp-0142");
  CHECK(t->p_value == 0.0004);
  CHECK_FALSE(test_from_json_text(R"({"id": "a", "p_value": 1.5})").ok());
  CHECK_FALSE(test_from_json_text(R"({"id": "a", "id": "b", "p_value": 0.1})").ok());  // key twice
  CHECK_FALSE(test_from_json_text("[1]").ok());
  auto rec = test_record_from_json_text(R"({"id": 17, "p_value": 0.5, "is_null": true})", std::nullopt);
  REQUIRE(rec.ok());
  CHECK(rec->id == "17");
  CHECK(rec->is_null == true);
  auto s = stream_request_from_json_text(R"({"name": "s1", "rule": "lond", "alternative": "less"})");
  REQUIRE(s.ok());
  CHECK(s->alternative == Alternative::kLess);
  CHECK_FALSE(stream_request_from_json_text(R"({"name": "s1", "rule": "lond", "alhpa": 0.1})").ok());
}

}  // namespace alphaledger
