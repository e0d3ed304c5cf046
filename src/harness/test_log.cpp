// Reading logs of finished tests (docs/formats.md), and the one reading of each input value that
// every other input path (pipe, HTTP, decide --p) shares.
#include "alphaledger/test_log.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstring>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

// Splits one CSV record (RFC 4180 quoting, no embedded newlines). Returns false on a bad quote.
bool split_csv(std::string_view line, std::vector<std::string>& out) {
  out.clear();
  std::string cur;
  bool quoted = false, was_quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"') {
        if (i + 1 < line.size() && line[i + 1] == '"') {
          cur.push_back('"');
          ++i;
        } else
          quoted = false;
      } else {
        cur.push_back(c);
      }
    } else if (c == '"' && trim(cur).empty()) {
      quoted = true;
      was_quoted = true;
      cur.clear();
    } else if (c == ',') {
      out.push_back(was_quoted ? cur : std::string(trim(cur)));
      cur.clear();
      was_quoted = false;
    } else {
      cur.push_back(c);
    }
  }
  if (quoted) return false;
  out.push_back(was_quoted ? cur : std::string(trim(cur)));
  return true;
}

std::string where(std::string_view source, std::size_t line) {
  return std::string(source) + ":" + std::to_string(line) + ": ";
}

}  // namespace

namespace {

// A JSON value as it may appear in a message: its type, and an excerpt of its text.
std::string describe_json(const nlohmann::json& v) {
  return excerpt(json_text(v));
}

}  // namespace

Result<double> p_value_from_json(const nlohmann::json& value) {
  if (!value.is_number())
    return invalid_input("p_value must be a JSON number in [0, 1], got " + describe_json(value));
  double v = value.get<double>();
  if (!(v >= 0.0 && v <= 1.0))
    return invalid_input("p_value must be a JSON number in [0, 1], got " + describe_json(value));
  if (v == 0) v = 0.0;  // -0 is 0
  return v;
}

namespace {

bool is_summary_column(std::string_view name) {
  return name == kControlNColumn || name == kControlConversionsColumn || name == kTreatmentNColumn ||
         name == kTreatmentConversionsColumn || name == kControlMeanColumn || name == kControlSdColumn ||
         name == kTreatmentMeanColumn || name == kTreatmentSdColumn;
}

// The p-value of a row: a non-empty p_value as given; otherwise, when `direction` is given, the
// summary columns (docs/formats.md, "Summary columns"; alphaledger/stats.hpp). Summary cells are
// read by parse_number_text first, so the statistics layer sees only canonical number text (and
// never a megabyte cell to quote).
Result<double> row_p_value(const std::map<std::string, std::string>& fields,
                           std::optional<Alternative> direction) {
  auto it = fields.find("p_value");
  if (it != fields.end() && !trim(it->second).empty()) return parse_p_value_text(it->second);
  bool any_summary = false;
  std::map<std::string, std::string> summary;
  for (const auto& [name, text] : fields) {
    if (!is_summary_column(name) || trim(text).empty()) continue;
    any_summary = true;
    auto v = parse_number_text(text, name);
    if (!v) return v.error();
    summary[name] = format_number(*v);
  }
  if (!direction) {
    return invalid_input(
        any_summary ? "missing field 'p_value' (a number in [0, 1]); summary columns are not read here"
                    : "missing field 'p_value' (a number in [0, 1])");
  }
  auto p = p_value_from_summary(summary, *direction);
  // Extreme summaries (a standard deviation of 8e131, say) overflow the test's arithmetic; the
  // statistics layer can then return NaN. Refuse rather than decide on it.
  if (p && !(*p >= 0.0 && *p <= 1.0)) {
    return invalid_input(
        "the summary columns give no p-value: their values are too large to compute with "
        "(a standard deviation or mean near the limits of a double?)");
  }
  return p;
}

}  // namespace

Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields,
                                   Alternative alternative) {
  return row_p_value(fields, alternative);
}

Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields) {
  return p_value_from_fields(fields, Alternative::kTwoSided);
}

Result<LogFormat> log_format_for(std::string_view path, std::optional<std::string_view> forced) {
  if (forced) {
    if (*forced == "csv") return LogFormat::kCsv;
    if (*forced == "jsonl") return LogFormat::kJsonLines;
    return invalid_input("format must be csv or jsonl, got '" + excerpt(*forced) + "'");
  }
  if (path == "-")
    return invalid_input("reading standard input ('-'): give its format with --format csv or --format jsonl");
  auto ends = [&](std::string_view ext) {
    return path.size() >= ext.size() && path.substr(path.size() - ext.size()) == ext;
  };
  if (ends(".csv")) return LogFormat::kCsv;
  if (ends(".jsonl") || ends(".ndjson")) return LogFormat::kJsonLines;
  return invalid_input(std::string(path) +
                       ": cannot tell the format from the extension; use a "
                       ".csv or .jsonl file, or --format csv|jsonl");
}

namespace {

// A row with launched_at needs finished_at, and may not finish before it launched. The texts are
// the cells as written, quoted in the message (as excerpt()).
Status check_launch_order(std::string_view id, double launched_at, bool has_finished, double finished_at,
                          std::string_view launched_text, std::string_view finished_text) {
  if (!has_finished) {
    return invalid_input("test '" + std::string(id) +
                         "': launched_at is given but finished_at is missing; a test with a launch time "
                         "needs the time it finished");
  }
  if (finished_at < launched_at) {
    return invalid_input("test '" + std::string(id) + "': finished_at '" + excerpt(trim(finished_text)) +
                         "' is earlier than launched_at '" + excerpt(trim(launched_text)) +
                         "'; a test cannot finish before it was launched");
  }
  return {};
}

// Turns one row's fields into a record (line 0, no location in messages): common to CSV, JSON
// Lines, pipe and HTTP.
Result<TestRecord> make_record(const std::map<std::string, std::string>& f,
                               std::optional<Alternative> direction) {
  TestRecord r;
  auto id = f.find("id");
  if (id == f.end()) return invalid_input("missing field 'id' (a text of 1 to 256 bytes)");
  if (auto s = validate_test_id(id->second); !s) return s.error();
  r.id = id->second;
  auto p = row_p_value(f, direction);
  if (!p) return invalid_input("test '" + r.id + "': " + p.error().message);
  r.p_value = *p;
  if (auto t = f.find("finished_at"); t != f.end() && !trim(t->second).empty()) {
    auto v = parse_time_text(t->second);
    if (!v) return v.error();
    r.finished_at = *v;
  }
  if (auto t = f.find("launched_at"); t != f.end() && !trim(t->second).empty()) {
    auto v = parse_time_text(t->second);
    if (!v) return invalid_input("test '" + r.id + "': launched_at: " + v.error().message);
    r.launched_at = *v;
    if (auto s = check_launch_order(r.id, *v, r.finished_at.has_value(), r.finished_at.value_or(0), t->second,
                                    r.finished_at ? f.at("finished_at") : std::string());
        !s)
      return s.error();
  }
  if (auto n = f.find("is_null"); n != f.end() && !trim(n->second).empty()) {
    const std::string v(trim(n->second));
    if (v == "1" || v == "true")
      r.is_null = true;
    else if (v == "0" || v == "false")
      r.is_null = false;
    else
      return invalid_input("is_null must be 0 or 1 (or true or false), got '" + excerpt(v) + "'");
  }
  return r;
}

// The JSON types each known key accepts, turned into the text a CSV cell would hold, so that CSV
// and JSON rows then go through the same make_record.
Result<std::map<std::string, std::string>> json_fields(const nlohmann::json& object) {
  std::map<std::string, std::string> f;
  for (auto it = object.begin(); it != object.end(); ++it) {
    const std::string& key = it.key();
    const nlohmann::json& v = it.value();
    if (key == "id") {
      if (v.is_string())
        f[key] = v.get<std::string>();
      else if (v.is_number_integer() || v.is_number_unsigned())
        f[key] = json_text(v);
      else
        return invalid_input("id must be a JSON string (or an integer), got " + describe_json(v));
    } else if (key == "p_value") {
      if (v.is_null()) continue;  // absent: summary columns
      if (!v.is_number())
        return invalid_input("p_value must be a JSON number in [0, 1], got " + describe_json(v));
      f[key] = format_number(v.get<double>());
    } else if (key == "finished_at" || key == "launched_at") {
      if (v.is_null()) continue;
      if (v.is_string())
        f[key] = v.get<std::string>();
      else if (v.is_number())
        f[key] = format_number(v.get<double>());
      else
        return invalid_input(key + " must be a JSON string (ISO 8601) or a number, got " + describe_json(v));
    } else if (key == "is_null") {
      if (v.is_null()) continue;
      if (v.is_boolean())
        f[key] = v.get<bool>() ? "1" : "0";
      else if (v.is_number())
        f[key] = format_number(v.get<double>());
      else
        return invalid_input("is_null must be true, false, 0 or 1, got " + describe_json(v));
    } else if (is_summary_column(key)) {
      if (v.is_null()) continue;
      if (v.is_string())
        f[key] = v.get<std::string>();
      else if (v.is_number())
        f[key] = format_number(v.get<double>());
      else
        return invalid_input(key + " must be a JSON number (or a string holding one), got " +
                             describe_json(v));
    }
    // Other keys are ignored, whatever their type.
  }
  return f;
}

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
  c.line = r.line;
  log.records.push_back(c);
}

// Refuses the first row (in file order) whose id an earlier row has, naming both lines. One
// open-addressing table of row numbers (0 = empty), at most half full; ids compare in the arena.
template <typename Slot>
Status check_unique_ids(const CompactLog& log, std::string_view source) {
  std::size_t cap = 16;
  while (cap < 2 * log.records.size()) cap *= 2;
  std::vector<Slot> table(cap, 0);
  const std::hash<std::string_view> hash;
  for (std::size_t i = 0; i < log.records.size(); ++i) {
    const std::string_view id = log.id(i);
    std::size_t at = hash(id) & (cap - 1);
    for (;; at = (at + 1) & (cap - 1)) {
      if (table[at] == 0) {
        table[at] = static_cast<Slot>(i + 1);
        break;
      }
      const CompactRecord& first = log.records[table[at] - 1];
      if (log.id(first) == id) {
        return invalid_input(where(source, log.records[i].line) + "duplicate id '" + std::string(id) +
                             "' (first at line " + std::to_string(first.line) +
                             "); ids must be unique in a log");
      }
    }
  }
  return {};
}

// A log with launched_at (a CSV column, or a key of any JSON Lines row) needs it on every row: the
// first row without it (in file order) is refused. Sets log.has_launch.
Status check_launch_column(CompactLog& log, bool csv_column) {
  const auto has = [](const CompactRecord& r) { return (r.flags & CompactRecord::kHasLaunch) != 0; };
  const auto first_with = std::find_if(log.records.begin(), log.records.end(), has);
  if (!csv_column && first_with == log.records.end()) return {};
  log.has_launch = true;
  const auto first_without = std::find_if_not(log.records.begin(), log.records.end(), has);
  if (first_without == log.records.end()) return {};
  const std::string id(log.id(*first_without));
  if (csv_column) {
    return invalid_input(where(log.source, first_without->line) + "test '" + id +
                         "': launched_at is empty; when the log has a launched_at column every row needs "
                         "a launch time (ISO 8601 date or date-time, or a number), or leave the column out");
  }
  return invalid_input(where(log.source, first_without->line) + "test '" + id +
                       "': no launched_at, but line " + std::to_string(first_with->line) +
                       " has one; when any row has launched_at every row needs it (ISO 8601 date or "
                       "date-time, or a number)");
}

// A row without finished_at keeps its place right after the row before it (docs/formats.md). A
// log whose times already ascend keeps its order without sorting (a stable sort would too).
void order_by_time(CompactLog& log) {
  double last = -INFINITY;
  bool ascending = true;
  for (const auto& r : log.records) {
    if ((r.flags & CompactRecord::kHasTime) == 0) continue;
    if (r.finished_at < last) {
      ascending = false;
      break;
    }
    last = r.finished_at;
  }
  if (ascending) return;
  std::vector<std::pair<double, std::size_t>> keys;
  keys.reserve(log.records.size());
  last = -INFINITY;
  for (std::size_t i = 0; i < log.records.size(); ++i) {
    if (log.records[i].flags & CompactRecord::kHasTime) last = log.records[i].finished_at;
    keys.emplace_back(last, i);
  }
  std::stable_sort(keys.begin(), keys.end(), [](const auto& a, const auto& b) { return a.first < b.first; });
  // Moves the records into place along the permutation's cycles: no second copy of the log.
  constexpr std::size_t kDone = static_cast<std::size_t>(-1);
  for (std::size_t i = 0; i < keys.size(); ++i) {
    if (keys[i].second == kDone) continue;
    const CompactRecord first = log.records[i];
    for (std::size_t j = i;;) {
      const std::size_t from = keys[j].second;
      keys[j].second = kDone;
      if (from == i) {
        log.records[j] = first;
        break;
      }
      log.records[j] = log.records[from];
      j = from;
    }
  }
}

// Reads a CSV data row into `log` without building a map: the columns were found once in the
// header. Every check and message is make_record's; a row without a p_value (summary columns)
// goes through make_record itself.
struct CsvColumns {
  std::vector<std::string> header;
  std::ptrdiff_t id = -1, p_value = -1, finished_at = -1, launched_at = -1, is_null = -1;
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
    auto rec = make_record(fields, direction);
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
    if (auto s = check_launch_order(id, c.launched_at, (c.flags & CompactRecord::kHasTime) != 0, c.finished_at,
                                    t, cell(cols.finished_at));
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
  r.line = c.line;
  return r;
}

Result<TestRecord> test_record_from_json(const nlohmann::json& object,
                                         std::optional<Alternative> summary_direction) {
  if (!object.is_object())
    return invalid_input("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got " +
                         describe_json(object));
  auto fields = json_fields(object);
  if (!fields) return fields.error();
  return make_record(*fields, summary_direction);
}

Result<TestRecord> test_record_from_json_text(std::string_view text,
                                              std::optional<Alternative> summary_direction) {
  auto object = parse_json_object(text);
  if (!object) return object.error();
  return test_record_from_json(*object, summary_direction);
}

Result<CompactLog> read_compact_log(std::istream& in, std::string_view source, LogFormat format,
                                    const ReadOptions& options) {
  CompactLog log;
  log.source = std::string(source);
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
        cols.header.assign(cells.begin(), cells.end());
        have_header = true;
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
        }
        if (cols.id < 0) {
          return invalid_input(where(source, line_no) +
                               "the header has no 'id' column; required columns: id, p_value (or summary "
                               "columns, see docs/formats.md)");
        }
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
      auto rec = make_record(*f, options.alternative);
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
  if (options.order_by_finished_at) order_by_time(log);
  return log;
}

Result<CompactLog> read_compact_log_file(const std::string& path,
                                         std::optional<std::string_view> forced_format,
                                         const ReadOptions& options) {
  auto format = log_format_for(path, forced_format);
  if (!format) return format.error();
  if (path == "-") return read_compact_log(std::cin, "stdin", *format, options);
  std::ifstream in(path, std::ios::binary);
  if (!in) return invalid_input(path + ": cannot open the file (does it exist, can it be read?)");
  return read_compact_log(in, path, *format, options);
}

namespace {

TestLog expand(CompactLog&& compact) {
  TestLog log;
  log.source = std::move(compact.source);
  log.has_truth = compact.has_truth;
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

namespace {

// Builds the document of parse_json_object, refusing what a plain parse would accept or answer
// with library text: keys given twice, nesting deeper than kMaxJsonDepth, numbers that underflow
// to 0. Containers are built in place, as nlohmann's own DOM builder does: a pointer to an open
// container stays valid because its parent grows only after the container is closed.
class StrictBuilder {
 public:
  using Json = nlohmann::json;
  explicit StrictBuilder(std::string_view text) : text_(text) {}

  bool null() { return put(nullptr) != nullptr; }
  bool boolean(bool v) { return put(v) != nullptr; }
  bool number_integer(Json::number_integer_t v) { return put(v) != nullptr; }
  bool number_unsigned(Json::number_unsigned_t v) { return put(v) != nullptr; }
  bool number_float(Json::number_float_t v, const Json::string_t& text) {
    if (v == 0 && nonzero_mantissa(text)) {
      error_ = "the number " + excerpt(text) +
               " is not zero but too small to be held as a number (the smallest is about 4.9e-324); write 0 "
               "if zero is meant";
      return false;
    }
    return put(v) != nullptr;
  }
  bool string(Json::string_t& v) { return put(std::move(v)) != nullptr; }
  bool binary(Json::binary_t&) {
    error_ = "not valid JSON (binary values are not JSON text)";
    return false;
  }
  bool start_object(std::size_t) { return open(Json::object()); }
  bool key(Json::string_t& k) {
    Json* object = stack_.back();
    if (object->contains(k)) {
      error_ = "the key '" + excerpt(k) + "' appears twice in one object; give each key once";
      return false;
    }
    slot_ = &(*object)[k];
    return true;
  }
  bool end_object() {
    stack_.pop_back();
    return true;
  }
  bool start_array(std::size_t) { return open(Json::array()); }
  bool end_array() {
    stack_.pop_back();
    return true;
  }
  bool parse_error(std::size_t position, const std::string&, const nlohmann::json::exception& ex) {
    const std::size_t at = std::min(position, text_.size());
    const std::string word = word_near(at);
    if (ex.id == 406) {
      error_ = "the number " + excerpt(word) + " near byte " + std::to_string(at) +
               " is too large to be held as a number";
    } else if (is_non_number(word)) {
      error_ = "not valid JSON near byte " + std::to_string(at) + ": " + excerpt(word) +
               " is not a JSON number (JSON has no NaN or Infinity); give a number such as 0.01";
    } else {
      error_ = "not valid JSON (at byte " + std::to_string(at) + ")";
    }
    return false;
  }

  std::string error_;
  Json root_;

 private:
  static bool nonzero_mantissa(std::string_view text) {
    for (char c : text) {
      if (c == 'e' || c == 'E') break;
      if (c >= '1' && c <= '9') return true;
    }
    return false;
  }
  static bool is_non_number(std::string word) {
    if (!word.empty() && (word[0] == '-' || word[0] == '+')) word.erase(0, 1);
    std::transform(word.begin(), word.end(), word.begin(),
                   [](char c) { return static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c); });
    return word.rfind("nan", 0) == 0 || word.rfind("inf", 0) == 0;
  }
  // The run of letters, digits, signs and dots around byte `at` (the token the error is in).
  std::string word_near(std::size_t at) const {
    const auto part = [](char c) {
      return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-' ||
             c == '+' || c == '.';
    };
    std::size_t b = at, e = at;
    if (b > 0 && b == text_.size()) --b, --e;
    while (b > 0 && part(text_[b - 1])) --b;
    while (e < text_.size() && part(text_[e])) ++e;
    return std::string(text_.substr(b, e - b));
  }
  Json* put(Json v) {
    if (stack_.empty()) {
      root_ = std::move(v);
      return &root_;
    }
    Json* parent = stack_.back();
    if (parent->is_array()) {
      parent->push_back(std::move(v));
      return &parent->back();
    }
    *slot_ = std::move(v);
    return slot_;
  }
  bool open(Json container) {
    if (stack_.size() >= static_cast<std::size_t>(kMaxJsonDepth)) {
      error_ = "JSON nested deeper than " + std::to_string(kMaxJsonDepth) +
               " levels; expected one flat object such as {\"id\": \"t1\", \"p_value\": 0.01}";
      return false;
    }
    stack_.push_back(put(std::move(container)));
    return true;
  }

  std::string_view text_;
  std::vector<Json*> stack_;
  Json* slot_ = nullptr;
};

}  // namespace

Result<nlohmann::json> parse_json_object(std::string_view text) {
  StrictBuilder builder(text);
  bool ok = false;
  try {
    ok = nlohmann::json::sax_parse(text, &builder, nlohmann::json::input_format_t::json, /*strict=*/true,
                                   /*ignore_comments=*/false);
  } catch (const std::exception&) {
    ok = false;
  }
  if (!ok) {
    if (builder.error_.empty()) builder.error_ = "not valid JSON";
    if (builder.error_.rfind("not valid JSON", 0) == 0)
      builder.error_ += "; expected one object such as {\"id\": \"t1\", \"p_value\": 0.01}";
    return invalid_input(builder.error_);
  }
  const nlohmann::json& j = builder.root_;
  if (!j.is_object()) {
    return invalid_input(
        std::string("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got ") +
        (j.is_array()     ? "an array"
         : j.is_string()  ? "a string"
         : j.is_number()  ? "a number"
         : j.is_boolean() ? "a boolean"
                          : "null"));
  }
  return std::move(builder.root_);
}

}  // namespace alphaledger
