// Reading logs of finished tests (docs/formats.md), and the one reading of each input value that
// every other input path (pipe, HTTP, decide --p) shares.
#include "alphaledger/test_log.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>
#include <vector>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_input.hpp"
#include "harness/test_log_internal.hpp"

namespace alphaledger {
namespace {

using detail::check_launch_column;
using detail::check_launch_order;
using detail::check_unique_ids;
using detail::json_fields;
using detail::make_record;
using detail::order_by_time;
using detail::split_csv;
using detail::where;

// Hands out the lines of a stream, each ending in LF, CRLF or a lone CR (the end is not kept),
// reading it in large blocks. A line is a view into the buffer, valid until the next call.
class LineReader {
 public:
  explicit LineReader(std::streambuf& in) : in_(in), buf_(1 << 16) {}

  // False at the end of input. A last line without an end is still a line.
  bool next(std::string_view& line) {
    std::size_t scanned = 0;  // bytes after begin_ known to hold no line end
    for (;;) {
      const char* from = buf_.data() + begin_ + scanned;
      const std::size_t avail = end_ - begin_ - scanned;
      const char* nl = static_cast<const char*>(std::memchr(from, '\n', avail));
      const std::size_t upto = nl != nullptr ? static_cast<std::size_t>(nl - from) : avail;
      const char* cr = static_cast<const char*>(std::memchr(from, '\r', upto));
      const char* eol = cr != nullptr ? cr : nl;
      if (eol != nullptr) {
        const std::size_t len = static_cast<std::size_t>(eol - (buf_.data() + begin_));
        const bool is_cr = *eol == '\r';
        // A CR at the end of the buffer: read on to see whether an LF follows (a CRLF counts once).
        // fill() may move the bytes: from here on only offsets from begin_ are used.
        if (is_cr && begin_ + len + 1 == end_) fill();
        line = std::string_view(buf_.data() + begin_, len);
        std::size_t after = begin_ + len + 1;
        if (is_cr && after < end_ && buf_[after] == '\n') ++after;
        begin_ = after;
        return true;
      }
      scanned = end_ - begin_;
      if (!fill()) {
        if (begin_ == end_) return false;
        line = std::string_view(buf_.data() + begin_, end_ - begin_);
        begin_ = end_;
        return true;
      }
    }
  }

 private:
  // Moves the unread bytes to the front and reads more. False when there is no more input.
  bool fill() {
    if (eof_) return false;
    if (begin_ > 0) {
      std::memmove(buf_.data(), buf_.data() + begin_, end_ - begin_);
      end_ -= begin_;
      begin_ = 0;
    }
    if (end_ == buf_.size()) buf_.resize(buf_.size() * 2);  // a line longer than the buffer
    const std::streamsize n = in_.sgetn(buf_.data() + end_, static_cast<std::streamsize>(buf_.size() - end_));
    if (n <= 0) {
      eof_ = true;
      return false;
    }
    end_ += static_cast<std::size_t>(n);
    return true;
  }

  std::streambuf& in_;
  std::vector<char> buf_;
  std::size_t begin_ = 0, end_ = 0;
  bool eof_ = false;
};

// Splits a CSV row into views. A row without quotes is cut at commas and each cell trimmed, as
// split_csv does; a row with a quote goes through split_csv (its cells are kept in `owned`).
bool split_csv_views(std::string_view line, std::vector<std::string>& owned,
                     std::vector<std::string_view>& out) {
  out.clear();
  if (line.find('"') != std::string_view::npos) {
    if (!split_csv(line, owned)) return false;
    for (const auto& c : owned) out.emplace_back(c);
    return true;
  }
  std::size_t start = 0;
  for (;;) {
    const std::size_t comma = line.find(',', start);
    if (comma == std::string_view::npos) {
      out.push_back(trim(line.substr(start)));
      return true;
    }
    out.push_back(trim(line.substr(start, comma - start)));
    start = comma + 1;
  }
}

// Appends one record to the compact log.
void append_record(CompactLog& log, const TestRecord& r) {
  CompactRecord c;
  c.id_offset = log.ids.size();
  c.id_size = static_cast<std::uint16_t>(r.id.size());
  log.ids.append(r.id);
  c.p_value = r.p_value;
  if (r.finished_at) {
    c.flags |= CompactRecord::kHasTime;
    c.finished_at = *r.finished_at;
  }
  if (r.launched_at) {
    c.flags |= CompactRecord::kHasLaunch;
    c.launched_at = *r.launched_at;
  }
  if (r.is_null) c.flags |= CompactRecord::kHasTruth | (*r.is_null ? CompactRecord::kIsNull : 0);
  if (r.e_value) {
    c.flags |= CompactRecord::kHasE;
    c.e_value = *r.e_value;
  }
  if (!r.has_p_value) c.flags |= CompactRecord::kNoP;
  c.line = r.line;
  log.records.push_back(c);
}

// Reads a CSV data row into `log` without building a map: the columns were found once in the
// header. Every check and message is make_record's; a row without a p_value (summary columns)
// goes through make_record itself.
struct CsvColumns {
  std::vector<std::string> header;
  std::ptrdiff_t id = -1, p_value = -1, finished_at = -1, launched_at = -1, is_null = -1, e_value = -1;
};

Status csv_row(CompactLog& log, const CsvColumns& cols, const std::vector<std::string_view>& cells,
               std::optional<Alternative> direction, std::size_t line_no) {
  const auto cell = [&](std::ptrdiff_t i) {
    return i < 0 ? std::string_view() : cells[static_cast<std::size_t>(i)];
  };
  const std::string_view p_text = cell(cols.p_value);
  if (cols.p_value < 0 || trim(p_text).empty()) {
    std::map<std::string, std::string> fields;
    for (std::size_t i = 0; i < cols.header.size(); ++i) {
      if (!cols.header[i].empty()) fields[cols.header[i]] = std::string(cells[i]);
    }
    auto rec = make_record(fields, direction, /*e_may_replace_p=*/true);
    if (!rec) return invalid_input(where(log.source, line_no) + rec.error().message);
    rec->line = line_no;
    append_record(log, *rec);
    return {};
  }
  const std::string_view id = cell(cols.id);
  if (auto s = validate_test_id(id); !s) return invalid_input(where(log.source, line_no) + s.error().message);
  CompactRecord c;
  auto p = parse_p_value_text(p_text);
  if (!p) {
    return invalid_input(where(log.source, line_no) + "test '" + std::string(id) + "': " + p.error().message);
  }
  c.p_value = *p;
  if (cols.e_value >= 0) {
    auto e = detail::parse_e_value_text(cell(cols.e_value));
    if (!e) {
      return invalid_input(where(log.source, line_no) + "test '" + std::string(id) +
                           "': " + e.error().message);
    }
    c.flags |= CompactRecord::kHasE;
    c.e_value = *e;
  }
  if (const std::string_view t = cell(cols.finished_at); !trim(t).empty()) {
    auto v = parse_time_text(t);
    if (!v) return invalid_input(where(log.source, line_no) + v.error().message);
    c.flags |= CompactRecord::kHasTime;
    c.finished_at = *v;
  }
  if (const std::string_view t = cell(cols.launched_at); !trim(t).empty()) {
    auto v = parse_time_text(t);
    if (!v) {
      return invalid_input(where(log.source, line_no) + "test '" + std::string(id) +
                           "': launched_at: " + v.error().message);
    }
    c.flags |= CompactRecord::kHasLaunch;
    c.launched_at = *v;
    if (auto s = check_launch_order(id, c.launched_at, (c.flags & CompactRecord::kHasTime) != 0,
                                    c.finished_at, t, cell(cols.finished_at));
        !s)
      return invalid_input(where(log.source, line_no) + s.error().message);
  }
  if (const std::string_view n = trim(cell(cols.is_null)); !n.empty()) {
    if (n == "1" || n == "true")
      c.flags |= CompactRecord::kHasTruth | CompactRecord::kIsNull;
    else if (n == "0" || n == "false")
      c.flags |= CompactRecord::kHasTruth;
    else
      return invalid_input(where(log.source, line_no) + "is_null must be 0 or 1 (or true or false), got '" +
                           excerpt(n) + "'");
  }
  c.id_offset = log.ids.size();
  c.id_size = static_cast<std::uint16_t>(id.size());
  log.ids.append(id);
  c.line = line_no;
  log.records.push_back(c);
  return {};
}

}  // namespace

TestRecord CompactLog::record(std::size_t i) const {
  const CompactRecord& c = records[i];
  TestRecord r;
  r.id = std::string(id(c));
  r.p_value = c.p_value;
  if (c.flags & CompactRecord::kHasTime) r.finished_at = c.finished_at;
  if (c.flags & CompactRecord::kHasLaunch) r.launched_at = c.launched_at;
  if (c.flags & CompactRecord::kHasTruth) r.is_null = (c.flags & CompactRecord::kIsNull) != 0;
  if (c.flags & CompactRecord::kHasE) r.e_value = c.e_value;
  r.has_p_value = (c.flags & CompactRecord::kNoP) == 0;
  r.line = c.line;
  return r;
}

namespace {

// The CSV header row: which column holds what; a repeated name or a missing id is an error.
Status read_csv_header(const std::vector<std::string_view>& cells, std::string_view source,
                       std::size_t line_no, CsvColumns& cols) {
  cols.header.assign(cells.begin(), cells.end());
  std::map<std::string_view, std::size_t> seen;
  for (std::size_t i = 0; i < cols.header.size(); ++i) {
    const std::string& name = cols.header[i];
    if (name.empty()) continue;  // an unnamed column is ignored
    auto [at, inserted] = seen.emplace(name, i + 1);
    if (!inserted) {
      return invalid_input(where(source, line_no) + "the header names column '" + excerpt(name) +
                           "' twice (columns " + std::to_string(at->second) + " and " +
                           std::to_string(i + 1) + "); each column may appear once");
    }
    const auto index = static_cast<std::ptrdiff_t>(i);
    if (name == "id") cols.id = index;
    if (name == "p_value") cols.p_value = index;
    if (name == "finished_at") cols.finished_at = index;
    if (name == "launched_at") cols.launched_at = index;
    if (name == "is_null") cols.is_null = index;
    if (name == "e_value") cols.e_value = index;
  }
  if (cols.id < 0) {
    return invalid_input(where(source, line_no) +
                         "the header has no 'id' column; required columns: id, p_value (or summary "
                         "columns, see docs/formats.md)");
  }
  return {};
}

}  // namespace

namespace {

// The line ends in a regular file, counted in blocks before it is parsed, so that the row table is
// sized once: a table grown by doubling holds the old and the new copy while it moves, 1.5 times
// the rows (84 MB instead of 56 at 10^6 rows). The stream is rewound; 0 when it cannot be.
std::size_t count_line_ends(std::istream& in) {
  std::streambuf* buf = in.rdbuf();
  if (buf == nullptr) return 0;
  std::vector<char> block(1 << 16);
  std::size_t ends = 0;
  for (std::streamsize got; (got = buf->sgetn(block.data(), static_cast<std::streamsize>(block.size()))) > 0;)
    ends += static_cast<std::size_t>(std::count(block.data(), block.data() + got, '\n'));
  if (buf->pubseekpos(0, std::ios::in) != std::streampos(0)) return 0;
  return ends;
}

// read_compact_log with room for `rows` rows made first (a hint: 0 or too many is harmless).
Result<CompactLog> read_compact(std::istream& in, std::string_view source, LogFormat format,
                                const ReadOptions& options, std::size_t rows) {
  CompactLog log;
  log.source = std::string(source);
  if (rows > 0) {
    try {
      log.records.reserve(rows + 1);  // + 1: a last line without a line end
    } catch (const std::exception&) {
      // more than the memory allows: grow as the rows come, as without a hint
    }
  }
  std::streambuf* buf = in.rdbuf();
  if (buf == nullptr) return invalid_input(std::string(source) + ": cannot read");
  LineReader reader(*buf);
  std::string_view line;
  std::size_t line_no = 0;
  CsvColumns cols;
  std::vector<std::string> owned;
  std::vector<std::string_view> cells;
  bool have_header = false;
  while (reader.next(line)) {
    ++line_no;
    if (line_no == 1 && line.substr(0, 3) == "\xEF\xBB\xBF")
      line.remove_prefix(3);  // a UTF-8 byte-order mark
    if (trim(line).empty()) continue;
    if (format == LogFormat::kCsv) {
      if (!split_csv_views(line, owned, cells))
        return invalid_input(where(source, line_no) + "unbalanced quote in CSV row");
      if (!have_header) {
        if (auto st = read_csv_header(cells, source, line_no, cols); !st) return st.error();
        have_header = true;
        continue;
      }
      if (cells.size() != cols.header.size()) {
        return invalid_input(where(source, line_no) + "expected " + std::to_string(cols.header.size()) +
                             " fields as in the header, got " + std::to_string(cells.size()));
      }
      if (auto s = csv_row(log, cols, cells, options.alternative, line_no); !s) return s.error();
    } else {
      auto parsed = parse_json_object(line);
      if (!parsed) return invalid_input(where(source, line_no) + parsed.error().message);
      auto f = json_fields(*parsed);
      if (!f) return invalid_input(where(source, line_no) + f.error().message);
      auto rec = make_record(*f, options.alternative, /*e_may_replace_p=*/true);
      if (!rec) return invalid_input(where(source, line_no) + rec.error().message);
      rec->line = line_no;
      append_record(log, *rec);
    }
  }
  if (in.bad()) return invalid_input(std::string(source) + ": read error");
  if (format == LogFormat::kCsv && !have_header)
    return invalid_input(std::string(source) + ": empty file; expected a header row with id and p_value");

  if (!options.allow_duplicate_ids) {
    const Status unique = log.records.size() < (std::size_t{1} << 31)
                              ? check_unique_ids<std::uint32_t>(log, source)
                              : check_unique_ids<std::uint64_t>(log, source);
    if (!unique) return unique.error();
  }
  log.has_truth =
      !log.records.empty() && std::all_of(log.records.begin(), log.records.end(), [](const CompactRecord& r) {
        return (r.flags & CompactRecord::kHasTruth) != 0;
      });
  if (auto s = check_launch_column(log, format == LogFormat::kCsv && cols.launched_at >= 0); !s)
    return s.error();
  if (auto s = detail::check_evidence_columns(log); !s) return s.error();
  if (options.order_by_finished_at) order_by_time(log);
  return log;
}

}  // namespace

Result<CompactLog> read_compact_log(std::istream& in, std::string_view source, LogFormat format,
                                    const ReadOptions& options) {
  return read_compact(in, source, format, options, 0);
}

Result<CompactLog> read_compact_log_file(const std::string& path,
                                         std::optional<std::string_view> forced_format,
                                         const ReadOptions& options) {
  auto format = log_format_for(path, forced_format);
  if (!format) return format.error();
  if (path == "-") return read_compact_log(std::cin, "stdin", *format, options);
  std::ifstream in(path, std::ios::binary);
  if (!in) return invalid_input(path + ": cannot open the file (does it exist, can it be read?)");
  // Only a regular file is read twice: a pipe or a device given by name is read once, as it comes.
  std::error_code ec;
  const bool regular = std::filesystem::is_regular_file(path, ec);
  return read_compact(in, path, *format, options, regular ? count_line_ends(in) : 0);
}

namespace {

TestLog expand(CompactLog&& compact) {
  TestLog log;
  log.source = std::move(compact.source);
  log.has_truth = compact.has_truth;
  log.has_launch = compact.has_launch;
  log.has_p_values = compact.has_p_values;
  log.has_e_values = compact.has_e_values;
  log.records.reserve(compact.size());
  for (std::size_t i = 0; i < compact.size(); ++i) log.records.push_back(compact.record(i));
  return log;
}

}  // namespace

Result<TestLog> read_test_log(std::istream& in, std::string_view source, LogFormat format,
                              const ReadOptions& options) {
  auto compact = read_compact_log(in, source, format, options);
  if (!compact) return compact.error();
  return expand(std::move(compact).value());
}

Result<TestLog> read_test_log_file(const std::string& path, std::optional<std::string_view> forced_format,
                                   const ReadOptions& options) {
  auto compact = read_compact_log_file(path, forced_format, options);
  if (!compact) return compact.error();
  return expand(std::move(compact).value());
}

}  // namespace alphaledger
