// Reading logs of finished tests (the replay format of docs/formats.md): CSV with a header row, or
// JSON Lines. Used by replay, decide --file and pipe.
//
// Columns / keys: id (required), p_value (required unless summary columns are given, see
// docs/formats.md), finished_at (optional: ISO 8601 date or date-time, or a number), is_null
// (optional 0/1). Other columns are ignored.
//
// Every error is kInvalidInput and names the file, line, field, value and what is accepted, e.g.
//   "demo.csv:17: p_value must be a number in [0, 1], got 1.3"
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

// Chooses the format from the extension (.csv / .jsonl / .ndjson); `forced` overrides.
Result<LogFormat> log_format_for(std::string_view path, std::optional<std::string_view> forced);

// Parses a whole log. On error returns kInvalidInput with file:line; nothing is partially returned.
Result<TestLog> read_test_log(std::istream& in, std::string_view source, LogFormat format,
                              const ReadOptions& options = {});
Result<TestLog> read_test_log_file(const std::string& path, std::optional<std::string_view> forced_format,
                                   const ReadOptions& options = {});

// Parses one field as used in logs and requests. Errors name `field` and the accepted form.
Result<double> parse_p_value_text(std::string_view text);
Result<double> parse_time_text(std::string_view text);  // ISO 8601 date / date-time, or a number
Status validate_test_id(std::string_view id);           // 1..256 bytes, no control characters

// The deepest nesting of arrays and objects accepted in any JSON input (request bodies, pipe lines,
// JSON Lines rows). Deeper text is refused before it is parsed, so no input can exhaust the stack.
inline constexpr int kMaxJsonDepth = 32;

// Parses one JSON text that must be an object: the one JSON reader of every input. Errors
// (kInvalidInput), none of which quotes more than excerpt() of the input: not valid JSON (with the
// byte offset), nested deeper than kMaxJsonDepth, not an object (names the type found).
Result<nlohmann::json> parse_json_object(std::string_view text);

// A value as it may appear in a message: at most `max_bytes` of it (then "...(N bytes)"), with
// control characters and bytes that are not valid UTF-8 written as \xHH. Every message that
// echoes input goes through this, so a megabyte field never becomes a megabyte message.
std::string excerpt(std::string_view value, std::size_t max_bytes = 60);

// Turns a row's fields (column -> text) into a p-value. The default converter reads p_value;
// summary columns (docs/formats.md) are converted by the statistics layer when present.
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields);
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields, Alternative alternative);

}  // namespace alphaledger
