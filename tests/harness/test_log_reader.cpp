// The log reader (docs/formats.md): CSV quoting, ordering by finished_at, ISO 8601 dates.
#include <doctest/doctest.h>

#include <sstream>

#include "alphaledger/test_log.hpp"

using namespace alphaledger;

namespace {
Result<TestLog> read_csv(const std::string& text, ReadOptions options = {}) {
  std::istringstream in(text);
  return read_test_log(in, "t.csv", LogFormat::kCsv, options);
}
}  // namespace

TEST_CASE("TestLog: a row without finished_at stays right after the row before it") {
  auto log = read_csv("id,finished_at,p_value\nc,3,0.3\nd,,0.4\na,1,0.1\nb,2,0.2\n");
  REQUIRE(log.ok());
  std::string order;
  for (const auto& r : log->records) order += r.id;
  CHECK(order == "abcd");
  auto top = read_csv("id,finished_at,p_value\nx,,0.5\nb,2,0.2\na,1,0.1\n");
  REQUIRE(top.ok());
  CHECK(top->records.front().id == "x");
}

TEST_CASE("TestLog: ISO 8601 dates convert to UTC seconds") {
  // 2000-03-01 is day 11017 since 1970-01-01 (POSIX time 951868800; `date -u -d 2000-03-01 +%s`).
  auto t = parse_time_text("2000-03-01");
  REQUIRE(t.ok());
  CHECK(*t == 951868800.0);
  CHECK(*parse_time_text("2000-03-01T01:30:00+01:30") == 951868800.0);
  CHECK(*parse_time_text("2000-03-01 00:00:00.5Z") == 951868800.5);
  CHECK(*parse_time_text("1712345678") == 1712345678.0);
  CHECK_FALSE(parse_time_text("2001-02-29").ok());  // not a leap year
  CHECK_FALSE(parse_time_text("2000-03-01T25:00").ok());
  CHECK_FALSE(parse_time_text("yesterday").ok());
}

TEST_CASE("TestLog: quoted CSV fields, ids and duplicates") {
  auto log = read_csv("id,note,p_value\n\"a,1\",\"said \"\"hi\"\"\",0.5\n");
  REQUIRE(log.ok());
  CHECK(log->records[0].id == "a,1");
  CHECK_FALSE(read_csv("id,p_value\n\"open,0.5\n").ok());
  auto dup = read_csv("id,p_value\na,0.1\na,0.1\n");
  CHECK_FALSE(dup.ok());
  auto dup_ok = read_csv("id,p_value\na,0.1\na,0.1\n", {.allow_duplicate_ids = true});
  CHECK(dup_ok.ok());
  CHECK_FALSE(validate_test_id(std::string(257, 'x')).ok());
  CHECK_FALSE(validate_test_id("tab\there").ok());
  CHECK(validate_test_id(std::string(256, 'x')).ok());
}

TEST_CASE("TestLog: is_null marks the truth only when every row has it") {
  auto full = read_csv("id,p_value,is_null\na,0.1,1\nb,0.2,0\n");
  REQUIRE(full.ok());
  CHECK(full->has_truth);
  auto partial = read_csv("id,p_value,is_null\na,0.1,1\nb,0.2,\n");
  REQUIRE(partial.ok());
  CHECK_FALSE(partial->has_truth);
  CHECK_FALSE(read_csv("id,p_value,is_null\na,0.1,maybe\n").ok());
}
