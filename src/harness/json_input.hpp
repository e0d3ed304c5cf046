// JSON input, project-internal (public headers carry no nlohmann types): the readers behind
// read_test_log's JSON Lines rows, pipe lines and HTTP bodies. alphaledger/test_log.hpp has the
// string-based entry point for library users (test_record_from_json_text).
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <string_view>

#include "alphaledger/test_log.hpp"

namespace alphaledger {

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

// Parses one JSON text that must be an object: the one JSON reader of every input. Errors
// (kInvalidArgument), none of which quotes more than excerpt() of the input: not valid JSON (with the
// byte offset), NaN or Infinity (not JSON numbers), a number too large for a double or not zero
// but too small to be held, a key given twice in one object (names the key), nested deeper than
// kMaxJsonDepth, not an object (names the type found). A UTF-8 byte-order mark at the start is
// skipped.
Result<nlohmann::json> parse_json_object(std::string_view text);

}  // namespace alphaledger
