// Pieces shared by the files that read test logs (test_log*.cpp), project-internal: one row's
// fields into a record (test_log_fields.cpp), and the checks and ordering of a whole log
// (test_log_order.cpp).
#pragma once

#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/test_log.hpp"

namespace alphaledger::detail {

// Splits one CSV record (RFC 4180 quoting, no embedded newlines). Returns false on a bad quote.
bool split_csv(std::string_view line, std::vector<std::string>& out);

// "source:line: ", the start of a message about one line of a log.
std::string where(std::string_view source, std::size_t line);

// A row with launched_at needs finished_at, and may not finish before it launched. The texts are
// the cells as written, quoted in the message (as excerpt()).
Status check_launch_order(std::string_view id, double launched_at, bool has_finished, double finished_at,
                          std::string_view launched_text, std::string_view finished_text);

// Turns one row's fields into a record (line 0, no location in messages): common to CSV, JSON
// Lines, pipe and HTTP. `e_may_replace_p`: a row with e_value may leave out p_value (log rows only).
Result<TestRecord> make_record(const std::map<std::string, std::string>& f,
                               std::optional<Alternative> direction, bool e_may_replace_p = false);

// An e-value written as text: a finite number >= 0; an empty cell is refused.
Result<double> parse_e_value_text(std::string_view text);

// The JSON types each known key accepts, turned into the text a CSV cell would hold, so that CSV
// and JSON rows then go through the same make_record.
Result<std::map<std::string, std::string>> json_fields(const nlohmann::json& object);

// Refuses the first row (in file order) whose id an earlier row has, naming both lines. Slot is
// std::uint32_t or std::uint64_t (row numbers in the table).
template <typename Slot>
Status check_unique_ids(const CompactLog& log, std::string_view source);

// A log with launched_at needs it on every row. Sets log.has_launch.
Status check_launch_column(CompactLog& log, bool csv_column);

// A log with e_value (or p_value) on any row needs it on every row. Sets log.has_e_values and
// log.has_p_values.
Status check_evidence_columns(CompactLog& log);

// Orders the rows by finished_at; a row without it keeps its place after the row before it.
void order_by_time(CompactLog& log);

}  // namespace alphaledger::detail
