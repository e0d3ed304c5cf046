// Reading logs of finished tests (docs/formats.md).
#include "alphaledger/test_log.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "alphaledger/stats.hpp"
#include "harness/format.hpp"

namespace alphaledger {
namespace {

std::string trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return std::string(s);
}

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
      out.push_back(was_quoted ? cur : trim(cur));
      cur.clear();
      was_quoted = false;
    } else {
      cur.push_back(c);
    }
  }
  if (quoted) return false;
  out.push_back(was_quoted ? cur : trim(cur));
  return true;
}

bool parse_int(std::string_view s, int& v) {
  auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
  return ec == std::errc() && p == s.data() + s.size() && !s.empty();
}

// Days since 1970-01-01 of a proleptic Gregorian date (H. Hinnant's days_from_civil algorithm).
long long days_from_civil(int y, unsigned m, unsigned d) {
  y -= m <= 2;
  const long long era = (y >= 0 ? y : y - 399) / 400;
  const unsigned yoe = static_cast<unsigned>(y - era * 400);
  const unsigned doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  const unsigned doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + static_cast<long long>(doe) - 719468;
}

bool parse_iso(std::string_view s, double& out) {
  // YYYY-MM-DD[(T| )hh:mm[:ss[.fff]][Z|(+|-)hh:mm]]
  if (s.size() < 10 || s[4] != '-' || s[7] != '-') return false;
  int y, mo, d;
  if (!parse_int(s.substr(0, 4), y) || !parse_int(s.substr(5, 2), mo) || !parse_int(s.substr(8, 2), d))
    return false;
  static constexpr int kDays[] = {31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  if (mo < 1 || mo > 12 || d < 1 || d > kDays[mo - 1]) return false;
  const bool leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
  if (mo == 2 && d == 29 && !leap) return false;
  double secs =
      static_cast<double>(days_from_civil(y, static_cast<unsigned>(mo), static_cast<unsigned>(d))) * 86400.0;
  std::string_view rest = s.substr(10);
  if (!rest.empty()) {
    if (rest[0] != 'T' && rest[0] != ' ') return false;
    rest.remove_prefix(1);
    int hh, mm, ss = 0;
    if (rest.size() < 5 || rest[2] != ':' || !parse_int(rest.substr(0, 2), hh) ||
        !parse_int(rest.substr(3, 2), mm))
      return false;
    rest.remove_prefix(5);
    double frac = 0;
    if (!rest.empty() && rest[0] == ':') {
      if (rest.size() < 3 || !parse_int(rest.substr(1, 2), ss)) return false;
      rest.remove_prefix(3);
      if (!rest.empty() && rest[0] == '.') {
        std::size_t n = 1;
        while (n < rest.size() && rest[n] >= '0' && rest[n] <= '9') ++n;
        if (n == 1) return false;
        std::string f = "0" + std::string(rest.substr(0, n));
        frac = std::stod(f);
        rest.remove_prefix(n);
      }
    }
    if (hh > 23 || mm > 59 || ss > 60) return false;
    secs += hh * 3600.0 + mm * 60.0 + ss + frac;
    if (!rest.empty()) {
      if (rest == "Z") {
      } else if ((rest[0] == '+' || rest[0] == '-') && rest.size() == 6 && rest[3] == ':') {
        int oh, om;
        if (!parse_int(rest.substr(1, 2), oh) || !parse_int(rest.substr(4, 2), om)) return false;
        const double off = oh * 3600.0 + om * 60.0;
        secs += rest[0] == '+' ? -off : off;
      } else {
        return false;
      }
    }
  }
  out = secs;
  return true;
}

std::string where(std::string_view source, std::size_t line) {
  return std::string(source) + ":" + std::to_string(line) + ": ";
}

}  // namespace

Result<double> parse_p_value_text(std::string_view text) {
  const std::string t = trim(text);
  double v = 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (t.empty() || ec != std::errc() || p != t.data() + t.size()) {
    return invalid_input("p_value must be a number in [0, 1], got '" + t + "'");
  }
  if (!(v >= 0.0 && v <= 1.0)) return invalid_input("p_value must be a number in [0, 1], got " + t);
  return v;
}

Result<double> parse_time_text(std::string_view text) {
  const std::string t = trim(text);
  double v = 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (!t.empty() && ec == std::errc() && p == t.data() + t.size() && std::isfinite(v)) return v;
  if (parse_iso(t, v)) return v;
  return invalid_input(
      "finished_at must be an ISO 8601 date (2025-03-14) or date-time "
      "(2025-03-14T09:30:00Z), or a number, got '" +
      t + "'");
}

Status validate_test_id(std::string_view id) {
  if (id.empty()) return invalid_input("id must not be empty");
  if (id.size() > 256) return invalid_input("id must be at most 256 bytes, got " + std::to_string(id.size()));
  for (char c : id) {
    const auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u == 0x7f) return invalid_input("id must not contain control characters");
  }
  return {};
}

// A non-empty p_value is used as given; otherwise the row's summary columns are turned into a
// p-value in the given direction (docs/formats.md, "Summary columns"; alphaledger/stats.hpp).
Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields, Alternative alternative) {
  auto it = fields.find("p_value");
  if (it != fields.end() && !trim(it->second).empty()) return parse_p_value_text(it->second);
  return p_value_from_summary(fields, alternative);
}

Result<double> p_value_from_fields(const std::map<std::string, std::string>& fields) {
  return p_value_from_fields(fields, Alternative::kTwoSided);
}

Result<LogFormat> log_format_for(std::string_view path, std::optional<std::string_view> forced) {
  if (forced) {
    if (*forced == "csv") return LogFormat::kCsv;
    if (*forced == "jsonl") return LogFormat::kJsonLines;
    return invalid_input("format must be csv or jsonl, got '" + std::string(*forced) + "'");
  }
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

// Turns one row's fields into a record; common to CSV and JSON Lines.
Result<TestRecord> make_record(const std::map<std::string, std::string>& f, std::string_view source,
                               std::size_t line, Alternative alternative) {
  TestRecord r;
  r.line = line;
  auto id = f.find("id");
  if (id == f.end() || id->second.empty())
    return invalid_input(where(source, line) + "missing id (a non-empty text of at most 256 bytes)");
  if (auto s = validate_test_id(id->second); !s)
    return invalid_input(where(source, line) + s.error().message);
  r.id = id->second;
  auto p = p_value_from_fields(f, alternative);
  if (!p) return invalid_input(where(source, line) + "test '" + r.id + "': " + p.error().message);
  r.p_value = *p;
  if (auto t = f.find("finished_at"); t != f.end() && !trim(t->second).empty()) {
    auto v = parse_time_text(t->second);
    if (!v) return invalid_input(where(source, line) + v.error().message);
    r.finished_at = *v;
  }
  if (auto n = f.find("is_null"); n != f.end() && !trim(n->second).empty()) {
    const std::string v = trim(n->second);
    if (v == "1" || v == "true")
      r.is_null = true;
    else if (v == "0" || v == "false")
      r.is_null = false;
    else
      return invalid_input(where(source, line) + "is_null must be 0 or 1, got '" + v + "'");
  }
  return r;
}

std::string json_field_text(const nlohmann::json& v) {
  if (v.is_string()) return v.get<std::string>();
  if (v.is_boolean()) return v.get<bool>() ? "1" : "0";
  if (v.is_number_integer() || v.is_number_unsigned()) return v.dump();
  if (v.is_number_float()) return format_number(v.get<double>());
  if (v.is_null()) return "";
  return v.dump();
}

}  // namespace

Result<TestLog> read_test_log(std::istream& in, std::string_view source, LogFormat format,
                              const ReadOptions& options) {
  TestLog log;
  log.source = std::string(source);
  std::string line;
  std::size_t line_no = 0;
  std::vector<std::string> header, cells;
  bool have_header = false;
  while (std::getline(in, line)) {
    ++line_no;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (trim(line).empty()) continue;
    std::map<std::string, std::string> fields;
    if (format == LogFormat::kCsv) {
      if (!split_csv(line, cells))
        return invalid_input(where(source, line_no) + "unbalanced quote in CSV row");
      if (!have_header) {
        header = cells;
        if (!header.empty() && header[0].rfind("\xEF\xBB\xBF", 0) == 0) header[0] = header[0].substr(3);
        have_header = true;
        if (std::find(header.begin(), header.end(), "id") == header.end()) {
          return invalid_input(where(source, line_no) +
                               "the header has no 'id' column; required columns: id, p_value (or summary "
                               "columns, see docs/formats.md)");
        }
        continue;
      }
      if (cells.size() != header.size()) {
        return invalid_input(where(source, line_no) + "expected " + std::to_string(header.size()) +
                             " fields as in the header, got " + std::to_string(cells.size()));
      }
      for (std::size_t i = 0; i < header.size(); ++i) fields[header[i]] = cells[i];
    } else {
      auto parsed = parse_json_object(line);
      if (!parsed) return invalid_input(where(source, line_no) + parsed.error().message);
      const nlohmann::json& j = *parsed;
      for (auto it = j.begin(); it != j.end(); ++it) {
        if (it.key() == "p_value" && !it.value().is_number() && !it.value().is_null()) {
          return invalid_input(where(source, line_no) + "p_value must be a JSON number in [0, 1], got " +
                               excerpt(it.value().dump(-1, ' ', false, nlohmann::json::error_handler_t::replace)));
        }
        fields[it.key()] = json_field_text(it.value());
      }
    }
    auto rec = make_record(fields, source, line_no, options.alternative);
    if (!rec) return rec.error();
    log.records.push_back(std::move(rec).value());
  }
  if (in.bad()) return invalid_input(std::string(source) + ": read error");
  if (format == LogFormat::kCsv && !have_header)
    return invalid_input(std::string(source) + ": empty file; expected a header row with id and p_value");

  if (!options.allow_duplicate_ids) {
    std::map<std::string_view, std::size_t> seen;
    for (const auto& r : log.records) {
      auto [it, inserted] = seen.emplace(r.id, r.line);
      if (!inserted) {
        return invalid_input(where(source, r.line) + "duplicate id '" + r.id + "' (first at line " +
                             std::to_string(it->second) + "); ids must be unique in a log");
      }
    }
  }
  log.has_truth =
      !log.records.empty() && std::all_of(log.records.begin(), log.records.end(),
                                          [](const TestRecord& r) { return r.is_null.has_value(); });
  if (options.order_by_finished_at) {
    // A row without finished_at keeps its place right after the row before it (docs/formats.md).
    std::vector<std::pair<double, std::size_t>> keys;
    double last = -INFINITY;
    for (std::size_t i = 0; i < log.records.size(); ++i) {
      if (log.records[i].finished_at) last = *log.records[i].finished_at;
      keys.emplace_back(last, i);
    }
    std::stable_sort(keys.begin(), keys.end(),
                     [](const auto& a, const auto& b) { return a.first < b.first; });
    std::vector<TestRecord> sorted;
    sorted.reserve(log.records.size());
    for (const auto& k : keys) sorted.push_back(std::move(log.records[k.second]));
    log.records = std::move(sorted);
  }
  return log;
}

Result<TestLog> read_test_log_file(const std::string& path, std::optional<std::string_view> forced_format,
                                   const ReadOptions& options) {
  auto format = log_format_for(path, forced_format);
  if (!format) return format.error();
  std::ifstream in(path, std::ios::binary);
  if (!in) return invalid_input(path + ": cannot open the file (does it exist, can it be read?)");
  return read_test_log(in, path, *format, options);
}

}  // namespace alphaledger

namespace alphaledger {
namespace {

// Nesting depth of a JSON text, counting brackets outside strings; stops counting past `limit`.
int json_depth(std::string_view text, int limit) {
  int depth = 0, deepest = 0;
  bool in_string = false, escaped = false;
  for (char c : text) {
    if (in_string) {
      if (escaped) escaped = false;
      else if (c == '\\') escaped = true;
      else if (c == '"') in_string = false;
      continue;
    }
    if (c == '"') in_string = true;
    else if (c == '[' || c == '{') {
      deepest = std::max(deepest, ++depth);
      if (deepest > limit) return deepest;
    } else if (c == ']' || c == '}') {
      --depth;
    }
  }
  return deepest;
}

}  // namespace

std::string excerpt(std::string_view value, std::size_t max_bytes) {
  std::string out;
  const std::size_t n = std::min(value.size(), max_bytes);
  std::size_t i = 0;
  while (i < n) {
    const auto c = static_cast<unsigned char>(value[i]);
    std::size_t len = c < 0x80 ? 1 : (c >> 5) == 0x6 ? 2 : (c >> 4) == 0xE ? 3 : (c >> 3) == 0x1E ? 4 : 0;
    bool valid = len > 0 && i + len <= value.size();
    for (std::size_t k = 1; valid && k < len; ++k)
      valid = (static_cast<unsigned char>(value[i + k]) & 0xC0) == 0x80;
    if (valid && len == 1 && (c < 0x20 || c == 0x7F)) valid = false;
    if (!valid) {
      static const char* kHex = "0123456789abcdef";
      out += "\\x";
      out.push_back(kHex[c >> 4]);
      out.push_back(kHex[c & 0xF]);
      ++i;
      continue;
    }
    out.append(value.substr(i, len));
    i += len;
  }
  if (value.size() > n || i < value.size()) out += "...(" + std::to_string(value.size()) + " bytes)";
  return out;
}

Result<nlohmann::json> parse_json_object(std::string_view text) {
  if (json_depth(text, kMaxJsonDepth) > kMaxJsonDepth) {
    return invalid_input("JSON nested deeper than " + std::to_string(kMaxJsonDepth) +
                         " levels; expected one flat object such as {\"id\": \"t1\", \"p_value\": 0.01}");
  }
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(text);
  } catch (const nlohmann::json::parse_error& e) {
    return invalid_input("not valid JSON (at byte " + std::to_string(e.byte) +
                         "); expected one object such as {\"id\": \"t1\", \"p_value\": 0.01}");
  }
  if (!j.is_object()) {
    return invalid_input(std::string("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got ") +
                         (j.is_array() ? "an array" : j.is_string() ? "a string" : j.is_number() ? "a number" : j.is_boolean() ? "a boolean" : "null"));
  }
  return j;
}

}  // namespace alphaledger
