// The one reading of each input value that every input path (log rows, pipe, HTTP, decide --p)
// shares: one row's fields (CSV cells or JSON keys) into a TestRecord.
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

#include "alphaledger/rules.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"
#include "harness/test_log_internal.hpp"

namespace alphaledger {
namespace detail {

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
}  // namespace detail

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
  // The command line adds the flag that gives the format (src/cli/cli_errors.cpp).
  if (path == "-") {
    return with_reason(invalid_input("reading standard input ('-'): its format (csv or jsonl) must be given"),
                       "log_format", "-");
  }
  auto ends = [&](std::string_view ext) {
    return path.size() >= ext.size() && path.substr(path.size() - ext.size()) == ext;
  };
  if (ends(".csv")) return LogFormat::kCsv;
  if (ends(".jsonl") || ends(".ndjson")) return LogFormat::kJsonLines;
  return with_reason(invalid_input(std::string(path) +
                                   ": cannot tell the format from the extension; use a .csv or .jsonl file, "
                                   "or give the format (csv or jsonl)"),
                     "log_format", std::string(path));
}

namespace detail {

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
Result<double> parse_e_value_text(std::string_view text) {
  if (trim(text).empty()) return invalid_input("e_value is empty; give a number >= 0 (an e-value)");
  auto v = parse_number_text(text, "e_value");
  if (!v) return v.error();
  if (auto s = validate_e_value(*v); !s) return s.error();
  return *v == 0 ? 0.0 : *v;  // -0 is 0
}

Result<TestRecord> make_record(const std::map<std::string, std::string>& f,
                               std::optional<Alternative> direction, bool e_may_replace_p) {
  TestRecord r;
  auto id = f.find("id");
  if (id == f.end()) return invalid_input("missing field 'id' (a text of 1 to 256 bytes)");
  if (auto s = validate_test_id(id->second); !s) return s.error();
  r.id = id->second;
  if (auto e = f.find("e_value"); e != f.end()) {
    auto v = parse_e_value_text(e->second);
    if (!v) return invalid_input("test '" + r.id + "': " + v.error().message);
    r.e_value = *v;
  }
  const auto p_given = f.find("p_value");
  const bool summary = std::any_of(f.begin(), f.end(), [](const auto& kv) {
    return is_summary_column(kv.first) && !trim(kv.second).empty();
  });
  if (e_may_replace_p && r.e_value && (p_given == f.end() || trim(p_given->second).empty()) && !summary) {
    r.has_p_value = false;
  } else {
    auto p = row_p_value(f, direction);
    if (!p) return invalid_input("test '" + r.id + "': " + p.error().message);
    r.p_value = *p;
  }
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
    } else if (key == "e_value") {
      if (v.is_null()) continue;
      if (!v.is_number()) return invalid_input("e_value must be a JSON number >= 0, got " + describe_json(v));
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

}  // namespace detail

Result<TestRecord> test_record_from_json(const nlohmann::json& object,
                                         std::optional<Alternative> summary_direction) {
  if (!object.is_object())
    return invalid_input("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got " +
                         describe_json(object));
  auto fields = detail::json_fields(object);
  if (!fields) return fields.error();
  return detail::make_record(*fields, summary_direction);
}

Result<TestRecord> test_record_from_json_text(std::string_view text,
                                              std::optional<Alternative> summary_direction) {
  auto object = parse_json_object(text);
  if (!object) return object.error();
  return test_record_from_json(*object, summary_direction);
}

}  // namespace alphaledger
