// Reading logs of finished tests (the replay format of docs/formats.md): CSV with a header row, or
// JSON Lines. Used by replay, decide --file, pipe and the HTTP routes: every input of a test, in
// any of these forms, goes through the functions of this header, so a value has one meaning
// everywhere (docs/formats.md, "One meaning for each input").
//
// Columns / keys: id (required), p_value (required unless summary columns are given, see
// docs/formats.md), finished_at (optional: ISO 8601 date or date-time, or a number), launched_at
// (optional, same forms; when the log has it, every row needs launched_at and finished_at, and
// finished_at must not be earlier), is_null (optional 0/1), e_value (optional: a number >= 0 for
// rules that take e-values; when the log has it every row needs it, and then p_value may be left
// out of the whole log). Other columns are ignored.
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
  std::optional<double> launched_at;  // the same scale; only in logs with the launched_at column
  std::optional<bool> is_null;
  // The test's e-value (column e_value), for rules that take e-values (e-lond) and e-bh. A log row
  // may give an e-value without a p-value; then has_p_value is false and p_value is 0.
  std::optional<double> e_value;
  bool has_p_value = true;
  std::size_t line = 0;  // 1-based line in the source (the header is line 1 in CSV)
};

struct TestLog {
  std::string source;               // file name used in messages
  std::vector<TestRecord> records;  // in decision order (see order_by_finished_at)
  bool has_truth = false;           // every row had is_null
  bool has_launch = false;          // the log has launched_at (then every row has both times)
  bool has_p_values = true;         // every row has a p-value (given, or from summary columns)
  bool has_e_values = false;        // every row has an e-value
};

struct ReadOptions {
  bool allow_duplicate_ids = false;  // decide --file: duplicates are retries, judged by the ledger
  bool order_by_finished_at = true;
  // Direction of the test computed from summary columns (docs/formats.md). Default: two-sided.
  Alternative alternative = Alternative::kTwoSided;
};

// ---- A log held compactly -------------------------------------------------------------------
// What replay and decide --file read: one fixed-size row per test (48 bytes) and every id in one
// text arena, with no per-row strings or maps, so 10^6 rows cost about 60 MB. read_test_log()
// reads through the same path and expands the rows into a TestLog.
struct CompactRecord {
  static constexpr std::uint8_t kHasTime = 1, kHasTruth = 2, kIsNull = 4, kHasLaunch = 8, kHasE = 16,
                                kNoP = 32;
  // Packed into 8 bytes, so that a row is 48 bytes: an arena of up to 2^48 bytes (more than any
  // memory holds), an id of at most 256 bytes (validate_test_id), six flags.
  std::uint64_t id_offset : 48 = 0;  // into CompactLog::ids
  std::uint64_t id_size : 9 = 0;
  std::uint64_t flags : 7 = 0;
  double p_value = 0;
  double finished_at = 0;  // meaningful only with kHasTime
  double launched_at = 0;  // meaningful only with kHasLaunch
  double e_value = 0;      // meaningful only with kHasE
  std::uint64_t line = 0;  // 1-based line in the source
};
static_assert(sizeof(CompactRecord) == 48, "a compact row is 48 bytes");

struct CompactLog {
  std::string source;                  // file name used in messages
  std::string ids;                     // every id, back to back
  std::vector<CompactRecord> records;  // in decision order (see ReadOptions::order_by_finished_at)
  bool has_truth = false;              // every row had is_null
  bool has_launch = false;             // the log has launched_at (then every row has both times)
  bool has_p_values = true;            // every row has a p-value (no row has kNoP)
  bool has_e_values = false;           // every row has an e-value (kHasE)

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

// One test given as JSON text holding one object (a JSON Lines row, a pipe line, an HTTP body),
// read by the rules of read_test_log's JSON Lines rows (docs/formats.md): the text is checked as
// parse_json_object() of src/harness/json_input.hpp does (depth, duplicate keys, numbers a double
// cannot hold), then id (a JSON string, or an integer taken as its decimal text), p_value (a JSON
// number in [0, 1]; null or absent: summary columns), finished_at, is_null and summary columns are
// read. Summary columns are read only when `summary_direction` is given; without it a row without
// p_value is refused. Errors are kInvalidArgument; the record's `line` is 0, the caller adds where.
Result<TestRecord> test_record_from_json_text(std::string_view text,
                                              std::optional<Alternative> summary_direction);

// The deepest nesting of arrays and objects accepted in any JSON input (request bodies, pipe lines,
// JSON Lines rows). Deeper text is refused before it is parsed, so no input can exhaust the stack.
// (The JSON readers themselves, which hand out nlohmann values, are project-internal:
// src/harness/json_input.hpp.)
inline constexpr int kMaxJsonDepth = 32;


// Turns a row's fields (column -> text) into a p-value. The default converter reads p_value;
// summary columns (docs/formats.md) are converted by the statistics layer when present.
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields);
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields, Alternative alternative);

}  // namespace alphaledger
