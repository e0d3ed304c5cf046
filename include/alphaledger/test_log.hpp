// Reading logs of finished tests (the replay format of docs/formats.md): CSV with a header row, or
// JSON Lines. Used by replay, decide --file, pipe and the HTTP routes: every input of a test, in
// any of these forms, goes through the functions of this header, so a value has one meaning
// everywhere (docs/formats.md, "One meaning for each input").
//
// Columns / keys: id (required), p_value (required unless summary columns are given, see
// docs/formats.md), finished_at (optional: ISO 8601 date or date-time, or a number), is_null
// (optional 0/1). Other columns are ignored.
//
// Every error is kInvalidArgument and names the file, line, field, value (as excerpt()) and what is
// accepted, e.g.
//   "demo.csv:17: test 'LO-0017': p_value must be a number in [0, 1], got 1.3"
// Thread-safety: free functions, no shared state.
#pragma once

#include <cstddef>
#include <cstdint>
#include <istream>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {

enum class LogFormat { kCsv, kJsonLines };

// One row of a log. `fields` keeps every column as text (for summary columns and extensions).
struct TestRecord {
  std::string id;
  double p_value = 0;
  std::optional<double> finished_at;  // seconds since 1970-01-01T00:00:00Z, or the plain number
  std::optional<bool> is_null;
  std::size_t line = 0;  // 1-based line in the source (the header is line 1 in CSV)
};

struct TestLog {
  std::string source;               // file name used in messages
  std::vector<TestRecord> records;  // in decision order (see order_by_finished_at)
  bool has_truth = false;           // every row had is_null
};

struct ReadOptions {
  bool allow_duplicate_ids = false;  // decide --file: duplicates are retries, judged by the ledger
  bool order_by_finished_at = true;
  // Direction of the test computed from summary columns (docs/formats.md). Default: two-sided.
  Alternative alternative = Alternative::kTwoSided;
};

// ---- A log held compactly -------------------------------------------------------------------
// What replay and decide --file read: one fixed-size row per test (40 bytes) and every id in one
// text arena, with no per-row strings or maps, so 10^6 rows cost about 50 MB. read_test_log()
// reads through the same path and expands the rows into a TestLog.
struct CompactRecord {
  static constexpr std::uint8_t kHasTime = 1, kHasTruth = 2, kIsNull = 4;
  std::uint64_t id_offset = 0;  // into CompactLog::ids
  std::uint16_t id_size = 0;    // an id is at most 256 bytes (validate_test_id)
  std::uint8_t flags = 0;
  double p_value = 0;
  double finished_at = 0;  // meaningful only with kHasTime
  std::uint64_t line = 0;  // 1-based line in the source
};

struct CompactLog {
  std::string source;                  // file name used in messages
  std::string ids;                     // every id, back to back
  std::vector<CompactRecord> records;  // in decision order (see ReadOptions::order_by_finished_at)
  bool has_truth = false;              // every row had is_null

  std::size_t size() const { return records.size(); }
  std::string_view id(const CompactRecord& r) const {
    return std::string_view(ids).substr(r.id_offset, r.id_size);
  }
  std::string_view id(std::size_t i) const { return id(records[i]); }
  TestRecord record(std::size_t i) const;  // the row as a TestRecord
};

// The readers behind read_test_log / read_test_log_file: same rules, same messages, same order.
// A log already in time order (or without finished_at) is not sorted; duplicate ids are found
// with one hash table of row numbers.
Result<CompactLog> read_compact_log(std::istream& in, std::string_view source, LogFormat format,
                                    const ReadOptions& options = {});
Result<CompactLog> read_compact_log_file(const std::string& path,
                                         std::optional<std::string_view> forced_format,
                                         const ReadOptions& options = {});

// Chooses the format from the extension (.csv / .jsonl / .ndjson); `forced` overrides. The path
// "-" (standard input) has no extension: it needs `forced`.
Result<LogFormat> log_format_for(std::string_view path, std::optional<std::string_view> forced);

// Parses a whole log. On error returns kInvalidArgument with file:line; nothing is partially returned.
// Lines end with LF, CRLF or a lone CR (all three may appear in one file).
Result<TestLog> read_test_log(std::istream& in, std::string_view source, LogFormat format,
                              const ReadOptions& options = {});
// `path` "-" reads standard input (its name in messages is "stdin").
Result<TestLog> read_test_log_file(const std::string& path, std::optional<std::string_view> forced_format,
                                   const ReadOptions& options = {});

// ---- One meaning for each input (docs/formats.md) --------------------------------------------
// Every form of input (CSV cell, JSON Lines row, pipe line, HTTP body, `decide --p`) goes through
// these. Errors name the field and the accepted form and quote at most excerpt() of the value.

// Numbers, times and test ids written as text are read by alphaledger/text.hpp
// (parse_number_text, parse_p_value_text, parse_time_text, validate_test_id, excerpt).

// A p-value given as a JSON value: a JSON number in [0, 1] (not a string, not null); negative
// zero is read as 0. parse_json_object() has already refused numbers a double cannot hold.
Result<double> p_value_from_json(const nlohmann::json& value);

// One test given as a JSON object (a JSON Lines row, a pipe line, an HTTP body): id (a JSON
// string, or an integer taken as its decimal text), p_value (a JSON number in [0, 1]; null or
// absent: summary columns), finished_at (string or number), is_null (true, false, 0 or 1),
// summary columns (numbers, or strings holding numbers). Other keys are ignored. Summary columns
// are read only when `summary_direction` is given (the stream's frozen direction, or a replay's);
// without it a row without p_value is refused. The record's `line` is 0; the caller adds where.
Result<TestRecord> test_record_from_json(const nlohmann::json& object,
                                         std::optional<Alternative> summary_direction);

// The deepest nesting of arrays and objects accepted in any JSON input (request bodies, pipe lines,
// JSON Lines rows). Deeper text is refused before it is parsed, so no input can exhaust the stack.
inline constexpr int kMaxJsonDepth = 32;

// Parses one JSON text that must be an object: the one JSON reader of every input. Errors
// (kInvalidArgument), none of which quotes more than excerpt() of the input: not valid JSON (with the
// byte offset), NaN or Infinity (not JSON numbers), a number too large for a double or not zero
// but too small to be held, a key given twice in one object (names the key), nested deeper than
// kMaxJsonDepth, not an object (names the type found). A UTF-8 byte-order mark at the start is
// skipped.
Result<nlohmann::json> parse_json_object(std::string_view text);

// Turns a row's fields (column -> text) into a p-value. The default converter reads p_value;
// summary columns (docs/formats.md) are converted by the statistics layer when present.
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields);
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields, Alternative alternative);

}  // namespace alphaledger
