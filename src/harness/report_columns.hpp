// The columns of a log that the log reader does not keep (team, metric, summary counts...), read
// again from the file, for the pages and tables that show a log's rows as the user wrote them:
// the replay report's per-test view and `replay --wide`. One implementation for both.
#pragma once

#include <cstddef>
#include <istream>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/test_log.hpp"

namespace alphaledger {

struct InputColumns {
  std::vector<std::string> names;                 // in the order first met (CSV: header order)
  std::vector<std::vector<std::string>> columns;  // per name, one text per record in log order
};

// At most this many other columns are kept, each cell cut to an excerpt of this many bytes.
inline constexpr std::size_t kMaxInputColumns = 30;
inline constexpr std::size_t kMaxInputCell = 200;

// Columns the replay report shows from the log reader itself (so not read again).
inline constexpr std::string_view kReportKeepsNames[] = {"id", "p_value", "finished_at", "is_null"};
inline constexpr std::span<const std::string_view> kReportKeeps{kReportKeepsNames};

// Reads `path` again (format as the log reader chose it) and returns every column not named in
// `skip`, matched to `log`'s records by line number. Empty (no columns) for standard input ("-"),
// which cannot be read twice, and when any matched line's id differs from the record's (the file
// changed since it was read). Never fails: the columns are an addition to output that stands
// without them. Cells are excerpt()s; JSON Lines values that are not strings are their JSON text.
InputColumns read_input_columns(const std::string& path, std::optional<std::string_view> forced,
                                const CompactLog& log, std::span<const std::string_view> skip);
// The same from a log already open as `in`, read from its start in `format` (a log held in memory).
InputColumns read_input_columns(std::istream& in, LogFormat format, const CompactLog& log,
                                std::span<const std::string_view> skip);

}  // namespace alphaledger
