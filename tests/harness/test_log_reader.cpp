// The log reader (docs/formats.md): CSV quoting, ordering by finished_at, ISO 8601 dates.
#include <doctest/doctest.h>
#include <sys/stat.h>

#include <cmath>
#include <fstream>
#include <iostream>
#include <sstream>
#include <thread>

#include "alphaledger/test_log.hpp"
#include "harness/json_input.hpp"
#include "support/temp_dir.hpp"

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

// ---- one meaning for each input (docs/formats.md, "One meaning for each input") ---------------
// The rules checked here are our own choices (the strict reading), so none has an outside source.

namespace {
Result<TestLog> read_jsonl(const std::string& text, ReadOptions options = {}) {
  std::istringstream in(text);
  return read_test_log(in, "t.jsonl", LogFormat::kJsonLines, options);
}
std::string message_of(const Result<TestLog>& r) {
  return r.ok() ? std::string("(no error)") : r.error().message;
}
bool has(const std::string& text, std::string_view part) { return text.find(part) != std::string::npos; }
}  // namespace

TEST_CASE(
    "TestLog: a JSON Lines row nested 200,000 deep, even in an ignored field, is refused without a crash") {
  const std::string deep = std::string(200000, '[') + std::string(200000, ']');
  auto log = read_jsonl("{\"id\": \"a\", \"p_value\": 0.1, \"note\": " + deep + "}\n");
  REQUIRE_FALSE(log.ok());
  CHECK(has(log.error().message, "t.jsonl:1: JSON nested deeper than 32 levels"));
  CHECK(log.error().message.size() < 300);
  // Exactly kMaxJsonDepth levels are still read; one more is not.
  const std::string ok_depth = std::string(31, '[') + std::string(31, ']');  // 31 + the row's object
  CHECK(parse_json_object("{\"x\": " + ok_depth + "}").ok());
  CHECK_FALSE(parse_json_object("{\"x\": [" + ok_depth + "]}").ok());
  std::string objects_text;
  for (int k = 0; k < 100000; ++k) objects_text += "{\"a\":";
  auto objects = parse_json_object(objects_text);
  REQUIRE_FALSE(objects.ok());
  CHECK(has(objects.error().message, "nested deeper"));
}

TEST_CASE("TestLog: a megabyte cell is quoted as an excerpt in every message") {
  const std::string big(1 << 20, '7');
  const std::string bad = "x" + big;
  for (const std::string& header :
       {std::string("p_value"), std::string("finished_at"), std::string("is_null")}) {
    INFO(header);
    std::string text = "id,p_value" + (header == "p_value" ? std::string() : "," + header) + "\n";
    text += "a," + (header == "p_value" ? bad : "0.5" + std::string(",") + bad) + "\n";
    auto log = read_csv(text);
    REQUIRE_FALSE(log.ok());
    CHECK(log.error().message.size() < 400);
    CHECK(has(log.error().message, "(1048577 bytes)"));
  }
  auto summary = read_csv("id,control_n,control_conversions,treatment_n,treatment_conversions\na,1" + big +
                          "x,1,100,2\n");
  REQUIRE_FALSE(summary.ok());
  CHECK(has(summary.error().message, "control_n"));
  CHECK(summary.error().message.size() < 400);
  auto id = read_csv("id,p_value\n" + std::string(100000, 'i') + ",0.5\n");
  REQUIRE_FALSE(id.ok());
  CHECK(id.error().message.size() < 400);
  CHECK(excerpt(std::string(100, 'a'), 10) == "aaaaaaaaaa...(100 bytes)");
  CHECK(excerpt("a\nb\xff") == "a\\x0ab\\xff");
  CHECK(excerpt("\xc3\xa9t\xc3\xa9", 2) == "\xc3\xa9...(5 bytes)");  // never cuts a character in two
}

TEST_CASE("TestLog: 1e-400 is refused as a p-value by every reader, not rounded to 0") {
  for (const std::string& text : {std::string("1e-400"), std::string("0.") + std::string(400, '0') + "1"}) {
    auto p = parse_p_value_text(text);
    REQUIRE_FALSE(p.ok());
    CHECK(has(p.error().message, "too small to be held"));
  }
  CHECK(has(message_of(read_csv("id,p_value\na,1e-400\n")), "too small"));
  CHECK(has(message_of(read_jsonl("{\"id\": \"a\", \"p_value\": 1e-400}\n")), "too small"));
  CHECK(test_record_from_json(nlohmann::json::parse("{\"id\": \"a\", \"p_value\": 1e-300}"), std::nullopt)
            .ok());
  // The smallest positive double (4.9e-324, IEEE 754 binary64) is held, and accepted everywhere.
  CHECK(*parse_p_value_text("4.9e-324") > 0);
  auto tiny = read_jsonl("{\"id\": \"a\", \"p_value\": 4.9e-324}\n");
  REQUIRE(tiny.ok());
  CHECK(tiny->records[0].p_value > 0);
  // Too large: refused with its own reason.
  auto big = parse_p_value_text("1e400");
  REQUIRE_FALSE(big.ok());
  CHECK(has(big.error().message, "too large"));
  CHECK_FALSE(parse_p_value_text("inf").ok());
  CHECK_FALSE(parse_p_value_text("nan").ok());
  CHECK_FALSE(parse_p_value_text("+0.5").ok());
  CHECK_FALSE(parse_p_value_text("0x1p-3").ok());
  CHECK(*parse_p_value_text(" .5 ") == 0.5);
}

TEST_CASE("TestLog: negative zero is read as 0 everywhere") {
  auto p = parse_p_value_text("-0");
  REQUIRE(p.ok());
  CHECK_FALSE(std::signbit(*p));
  CHECK_FALSE(std::signbit(*parse_p_value_text("-0.0e5")));
  auto csv = read_csv("id,p_value\na,-0\n");
  REQUIRE(csv.ok());
  CHECK_FALSE(std::signbit(csv->records[0].p_value));
  auto jsonl = read_jsonl("{\"id\": \"a\", \"p_value\": -0.0}\n");
  REQUIRE(jsonl.ok());
  CHECK_FALSE(std::signbit(jsonl->records[0].p_value));
  auto j = p_value_from_json(nlohmann::json(-0.0));
  REQUIRE(j.ok());
  CHECK_FALSE(std::signbit(*j));
  CHECK_FALSE(std::signbit(*parse_time_text("-0")));
}

TEST_CASE("TestLog: NaN, Infinity and 1e400 in JSON get a message that says what is wrong") {
  for (const std::string& v :
       {std::string("NaN"), std::string("Infinity"), std::string("-Infinity"), std::string("nan")}) {
    auto r = parse_json_object("{\"id\": \"a\", \"p_value\": " + v + "}");
    REQUIRE_FALSE(r.ok());
    INFO(r.error().message);
    CHECK(has(r.error().message, "is not a JSON number"));
    CHECK_FALSE(has(r.error().message, "expected a JSON object"));
  }
  auto big = parse_json_object("{\"id\": \"a\", \"p_value\": 1e400}");
  REQUIRE_FALSE(big.ok());
  CHECK(has(big.error().message, "1e400"));
  CHECK(has(big.error().message, "too large"));
  CHECK_FALSE(has(big.error().message, "expected a JSON object"));
  // No library text in any message.
  for (const std::string& text :
       {std::string("{\"a\": 1e400}"), std::string("{\"a\": tru}"), std::string("{"),
        std::string("{\"a\": \"\\udc00\"}"), std::string("[1]")}) {
    auto r = parse_json_object(text);
    REQUIRE_FALSE(r.ok());
    CHECK_FALSE(has(r.error().message, "json.exception"));
    CHECK_FALSE(has(r.error().message, "parse_error"));
    CHECK_FALSE(has(r.error().message, "last read"));
  }
}

TEST_CASE("TestLog: CSV with CR, LF or CRLF line ends reads every row") {
  for (const std::string& end : {std::string("\r"), std::string("\n"), std::string("\r\n")}) {
    auto log = read_csv("id,p_value" + end + "a,0.1" + end + "b,0.2" + end + "c,0.3" + end);
    REQUIRE(log.ok());
    CHECK(log->records.size() == 3);
  }
  auto mixed = read_csv("id,p_value\ra,0.1\nb,0.2\r\nc,0.3");
  REQUIRE(mixed.ok());
  CHECK(mixed->records.size() == 3);
  // Line numbers count CR-only line ends too.
  auto bad = read_csv("id,p_value\ra,0.1\rb,2\r");
  REQUIRE_FALSE(bad.ok());
  CHECK(has(bad.error().message, "t.csv:3:"));
  auto jsonl = read_jsonl("{\"id\": \"a\", \"p_value\": 0.1}\r{\"id\": \"b\", \"p_value\": 0.2}\r");
  REQUIRE(jsonl.ok());
  CHECK(jsonl->records.size() == 2);
}

TEST_CASE("TestLog: a column named twice in the header, or a JSON key given twice, is refused by name") {
  auto csv = read_csv("id,p_value,p_value\na,0.1,0.9\n");
  REQUIRE_FALSE(csv.ok());
  CHECK(has(csv.error().message, "'p_value' twice (columns 2 and 3)"));
  CHECK(read_csv("id,,p_value,\na,x,0.1,y\n").ok());  // unnamed columns are ignored, not duplicates
  auto jsonl = read_jsonl("{\"id\": \"a\", \"p_value\": 0.1, \"p_value\": 0.9}\n");
  REQUIRE_FALSE(jsonl.ok());
  CHECK(has(jsonl.error().message, "the key 'p_value' appears twice"));
  auto nested = parse_json_object("{\"meta\": {\"k\": 1, \"k\": 2}}");
  REQUIRE_FALSE(nested.ok());
  CHECK(has(nested.error().message, "'k' appears twice"));
  CHECK(parse_json_object("{\"a\": {\"k\": 1}, \"b\": {\"k\": 2}}").ok());  // same key in two objects
}

TEST_CASE("TestLog: one id rule in CSV, JSON Lines and JSON objects") {
  // Ids JSON Lines used to turn into text: floats, booleans, null, arrays, objects.
  for (const std::string& id : {std::string("1.5"), std::string("true"), std::string("null"),
                                std::string("[1]"), std::string("{\"x\": 1}")}) {
    INFO(id);
    CHECK_FALSE(read_jsonl("{\"id\": " + id + ", \"p_value\": 0.1}\n").ok());
    CHECK_FALSE(
        test_record_from_json(nlohmann::json::parse("{\"id\": " + id + ", \"p_value\": 0.1}"), std::nullopt)
            .ok());
  }
  auto integer = read_jsonl("{\"id\": 42, \"p_value\": 0.1}\n");
  REQUIRE(integer.ok());
  CHECK(integer->records[0].id == "42");
  // Invalid UTF-8 (a lone continuation byte, an overlong form, a surrogate) and C1 controls.
  for (const std::string& id : {std::string("a\x80"), std::string("\xc0\xaf"), std::string("\xed\xa0\x80"),
                                std::string("a\xc2\x85"), std::string(" lead"), std::string("trail\t")}) {
    INFO(excerpt(id));
    CHECK_FALSE(validate_test_id(id).ok());
    CHECK_FALSE(read_csv("id,p_value\n\"" + id + "\",0.1\n").ok());
  }
  CHECK(validate_test_id("caf\xc3\xa9-\xe2\x82\xac-\xf0\x9f\x98\x80").ok());  // é, €, an emoji
  CHECK(validate_test_id("inner space").ok());
}

TEST_CASE("TestLog: JSON keys take one type each") {
  CHECK_FALSE(read_jsonl("{\"id\": \"a\", \"p_value\": \"0.1\"}\n").ok());
  CHECK_FALSE(read_jsonl("{\"id\": \"a\", \"p_value\": 0.1, \"is_null\": \"1\"}\n").ok());
  CHECK_FALSE(read_jsonl("{\"id\": \"a\", \"p_value\": 0.1, \"finished_at\": [1]}\n").ok());
  CHECK_FALSE(read_jsonl("{\"id\": \"a\", \"control_n\": [100]}\n").ok());
  auto ok =
      read_jsonl("{\"id\": \"a\", \"p_value\": 0.1, \"is_null\": true, \"finished_at\": 5, \"x\": [1]}\n");
  REQUIRE(ok.ok());
  CHECK(ok->records[0].is_null == true);
  // Without a direction (the single-argument test_from_json), summary columns are not read.
  auto no_direction = test_record_from_json(
      nlohmann::json::parse(
          R"({"id": "a", "control_n": 100, "control_conversions": 5, "treatment_n": 100, "treatment_conversions": 9})"),
      std::nullopt);
  REQUIRE_FALSE(no_direction.ok());
  CHECK(has(no_direction.error().message, "missing field 'p_value'"));
}

TEST_CASE("TestLog: dates take digits only, and a long fraction is read without library text") {
  CHECK_FALSE(parse_time_text("2000-01-01T-1:00").ok());
  CHECK_FALSE(parse_time_text("2000-01-01T+1:00").ok());
  CHECK_FALSE(parse_time_text("2000-01-01T00:00+24:00").ok());
  // 500 zeros then a 1: used to throw std::out_of_range("stod").
  auto t = parse_time_text("2000-03-01T00:00:00." + std::string(500, '0') + "1Z");
  REQUIRE(t.ok());
  CHECK(*t == 951868800.0);  // POSIX time of 2000-03-01 (`date -u -d 2000-03-01 +%s`)
  auto too_small = parse_time_text("1e-400");
  REQUIRE_FALSE(too_small.ok());
  CHECK(has(too_small.error().message, "too small"));
}

TEST_CASE("TestLog: '-' reads standard input, and needs its format given") {
  auto no_format = read_test_log_file("-", std::nullopt);
  REQUIRE_FALSE(no_format.ok());
  CHECK(has(no_format.error().message, "its format (csv or jsonl) must be given"));
  // The harness names no flag; the reason lets the command line add --format.
  CHECK_FALSE(has(no_format.error().message, "--format"));
  CHECK(no_format.error().reason == "log_format");
  std::istringstream fake("id,p_value\na,0.1\n");
  std::streambuf* saved = std::cin.rdbuf(fake.rdbuf());
  auto log = read_test_log_file("-", "csv");
  std::cin.rdbuf(saved);
  REQUIRE(log.ok());
  CHECK(log->source == "stdin");
  REQUIRE(log->records.size() == 1);
  CHECK(log->records[0].id == "a");
}

TEST_CASE(
    "TestLog: a summary whose arithmetic overflows is refused, not decided as NaN (fuzz_summary finding)") {
  // Found by fuzz_summary (docs/fuzzing.md): Welch's test with sd 8e131 squares past the largest
  // double, and the p-value came back NaN (outside [0, 1]) instead of an error.
  auto log = read_csv(
      "id,control_n,control_mean,control_sd,treatment_n,treatment_mean,treatment_sd\n"
      "a,500,13.4,8e131,5000,.9,8\n",
      {.alternative = Alternative::kGreater});
  REQUIRE_FALSE(log.ok());
  // The statistics layer now refuses it itself; either way the row is refused at its line.
  CHECK(has(log.error().message, "t.csv:2: "));
  CHECK((has(log.error().message, "the summary columns give no p-value") ||
         has(log.error().message, "too large to combine")));
}

// ---- The compact reader (replay, decide --file) -------------------------------------------------

namespace {
Result<CompactLog> read_compact_csv(const std::string& text, ReadOptions options = {}) {
  std::istringstream in(text);
  return read_compact_log(in, "t.csv", LogFormat::kCsv, options);
}
}  // namespace

TEST_CASE("CompactLog: line ends that straddle the reader's 64 KiB blocks are read once each") {
  // Rows padded so that CRs, LFs and CRLFs land on every offset around the block edges (65536,
  // 131072, ...): each row must come out once, with its own line number. Expected values are the
  // rows as written (common practice, no source).
  const char* ends[] = {"\n", "\r\n", "\r"};
  std::string text = "id,p_value,note\n";
  std::vector<std::pair<std::string, std::size_t>> want;
  for (std::size_t i = 0; text.size() < 300000; ++i) {
    std::string id = "r";
    id += std::to_string(i);
    text += id;
    text += ",0.5,";
    text.append(i % 97, 'x');
    text += ends[i % 3];
    want.emplace_back(id, i + 2);
  }
  auto log = read_compact_csv(text, {.order_by_finished_at = false});
  REQUIRE(log.ok());
  REQUIRE(log->size() == want.size());
  for (std::size_t i = 0; i < want.size(); ++i) {
    CAPTURE(i);
    CHECK(log->id(i) == want[i].first);
    CHECK(log->records[i].line == want[i].second);
  }
}

TEST_CASE("CompactLog: a CR as the very last byte of a block, then an LF, is one line end") {
  // The header ends with CRLF whose CR is byte 65535 (the last of the first block).
  std::string header = "id,p_value,";
  header += std::string(65535 - header.size(), 'n');
  const std::string text = header + "\r\na,0.1,\r\nb,0.2,";
  auto log = read_compact_csv(text);
  REQUIRE(log.ok());
  REQUIRE(log->size() == 2);
  CHECK(log->records[0].line == 2);  // a CRLF split across blocks counts once (no blank line 2)
  CHECK(log->records[1].line == 3);
  CHECK(log->id(1) == "b");
}

TEST_CASE("CompactLog: holds the same rows as the TestLog reader") {
  const std::string text =
      "id,finished_at,p_value,is_null,control_n,control_conversions,treatment_n,treatment_conversions\n"
      "\"q,1\",3,0.25,1,,,,\n"
      "b,1,,0,1000,100,1000,150\n"
      "c,,0.0001,true,,,,\n"
      " d ,2,1e-8,false,,,,\n";
  auto compact = read_compact_csv(text);
  auto full = read_csv(text);
  REQUIRE(compact.ok());
  REQUIRE(full.ok());
  REQUIRE(compact->size() == full->records.size());
  CHECK(compact->has_truth == full->has_truth);
  for (std::size_t i = 0; i < compact->size(); ++i) {
    const TestRecord a = compact->record(i), &b = full->records[i];
    CHECK(a.id == b.id);
    CHECK(a.p_value == b.p_value);
    CHECK(a.finished_at == b.finished_at);
    CHECK(a.is_null == b.is_null);
    CHECK(a.line == b.line);
  }
  // Order by finished_at: b (1), then c (no time: right after b, docs/formats.md), d (2), q,1 (3).
  CHECK(compact->id(0) == "b");
  CHECK(compact->id(1) == "c");
  CHECK(compact->id(2) == "d");  // unquoted cells are trimmed
  CHECK(compact->id(3) == "q,1");
}

TEST_CASE("CompactLog: a duplicate far from its first row is named with both lines") {
  std::string text = "id,p_value\n";
  for (int i = 0; i < 50000; ++i) {
    text += 't';
    text += std::to_string(i);
    text += ",0.5\n";
  }
  text += "t123,0.5\n";  // line 50002 repeats line 125
  auto log = read_compact_csv(text);
  REQUIRE_FALSE(log.ok());
  CHECK(log.error().message ==
        "t.csv:50002: duplicate id 't123' (first at line 125); ids must be unique in a log");
  auto retries = read_compact_csv(text, {.allow_duplicate_ids = true});
  REQUIRE(retries.ok());
  CHECK(retries->size() == 50001);
}

TEST_CASE("CompactLog: a log already in time order keeps its order; ties keep file order") {
  auto log = read_compact_csv("id,finished_at,p_value\na,1,0.1\nb,,0.2\nc,1,0.3\nd,5,0.4\n");
  REQUIRE(log.ok());
  std::string order;
  for (std::size_t i = 0; i < log->size(); ++i) order += log->id(i);
  CHECK(order == "abcd");
  auto back = read_compact_csv("id,finished_at,p_value\na,5,0.1\nb,,0.2\nc,1,0.3\nd,1,0.4\n");
  REQUIRE(back.ok());
  order.clear();
  for (std::size_t i = 0; i < back->size(); ++i) order += back->id(i);
  CHECK(order == "cdab");  // c and d (time 1) in file order, then a with b carried at time 5
}

// read_compact_log_file counts a regular file's line ends before it parses, to size its row table
// once; the rows must be the same whether the last line has a line end or not, and a named pipe
// (which cannot be read twice) must be read once, as it comes.
TEST_CASE("CompactLog: a file is read the same with or without a last line end, and a pipe is read once") {
  test_support::TempDir dir;
  const std::string rows = "id,p_value\na,0.1\nb,0.2\nc,0.3";
  for (const std::string& text :
       {rows, rows + "\n", rows + "\r\n", std::string("id,p_value\ra,0.1\rb,0.2\rc,0.3\r")}) {
    const std::string path = dir.write("log.csv", text);
    auto log = read_compact_log_file(path, std::nullopt, ReadOptions{});
    REQUIRE(log.ok());
    REQUIRE(log->size() == 3);
    CHECK(log->id(0) == "a");
    CHECK(log->id(2) == "c");
    CHECK(log->records[2].p_value == 0.3);
    CHECK(log->records[2].line == 4);
  }
  const std::string fifo = dir.sub("pipe.csv");
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  std::thread writer([&] {
    std::ofstream out(fifo, std::ios::binary);
    out << rows << "\n";
  });
  auto piped = read_compact_log_file(fifo, std::nullopt, ReadOptions{});
  writer.join();
  REQUIRE(piped.ok());
  CHECK(piped->size() == 3);
  CHECK(piped->id(1) == "b");
}
