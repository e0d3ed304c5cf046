// The report files of a replay and of a stream (alphaledger/report.hpp): what `replay --report`,
// `report STREAM -o FILE` and the Python package's report methods write, from one place so the
// pages are the same whoever asks. The stream writer reads through the Ledger interface, so a
// program calling it links the store as well (the CLI and the Python module do).
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <sstream>
#include <unordered_map>

#include "alphaledger/ledger.hpp"
#include "alphaledger/report.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

// Splits one CSV line (RFC 4180 quotes, as the log reader does; no line breaks inside a field).
std::vector<std::string> split_csv_line(std::string_view line) {
  std::vector<std::string> out;
  std::string cur;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
        cur += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        cur += c;
      }
    } else if (c == '"') {
      quoted = true;
    } else if (c == ',') {
      out.push_back(cur);
      cur.clear();
    } else if (c != '\r') {
      cur += c;
    }
  }
  out.push_back(cur);
  for (auto& cell : out) {  // unquoted cells are trimmed by the reader too
    while (!cell.empty() && (cell.back() == ' ' || cell.back() == '\t')) cell.pop_back();
    while (!cell.empty() && (cell.front() == ' ' || cell.front() == '\t')) cell.erase(0, 1);
  }
  return out;
}

constexpr std::size_t kMaxOtherColumns = 30;
constexpr std::size_t kMaxOtherCell = 200;

// The log's other columns (team, metric, summary counts...), read again from `in` because the log
// reader keeps only the columns it uses. Matched to the records by line number, and dropped whole
// if any matched line's id differs from the record's (a file that changed, or line breaks the two
// readers count differently).
void read_other_columns(std::istream& in, LogFormat format, const CompactLog& log, ReplayReportData& data) {
  std::unordered_map<std::uint64_t, std::size_t> row_of_line;
  for (std::size_t i = 0; i < log.size(); ++i) row_of_line[log.records[i].line] = i;
  const auto known = [](std::string_view name) {
    return name.empty() || name == "id" || name == "p_value" || name == "finished_at" || name == "is_null";
  };
  std::map<std::string, std::size_t> column_of;
  std::vector<std::ptrdiff_t> csv_target;  // CSV: header position -> other column, or -1
  auto column = [&](const std::string& name) -> std::ptrdiff_t {
    if (auto it = column_of.find(name); it != column_of.end()) return static_cast<std::ptrdiff_t>(it->second);
    if (column_of.size() >= kMaxOtherColumns) return -1;
    column_of[name] = data.input_column_names.size();
    data.input_column_names.push_back(name);
    data.input_columns.emplace_back(log.size());
    return static_cast<std::ptrdiff_t>(data.input_column_names.size() - 1);
  };
  std::ptrdiff_t id_position = -1;
  bool header = true;
  std::string line;
  std::uint64_t line_no = 0;
  bool ok = true;
  while (ok && std::getline(in, line)) {
    ++line_no;
    if (line_no == 1 && line.rfind("\xEF\xBB\xBF", 0) == 0) line.erase(0, 3);
    if (line.find_first_not_of(" \t\r") == std::string::npos) continue;
    if (format == LogFormat::kCsv) {
      const auto cells = split_csv_line(line);
      if (header) {
        header = false;
        for (std::size_t c = 0; c < cells.size(); ++c) {
          if (cells[c] == "id") id_position = static_cast<std::ptrdiff_t>(c);
          csv_target.push_back(known(cells[c]) ? -1 : column(cells[c]));
        }
        continue;
      }
      const auto at = row_of_line.find(line_no);
      if (at == row_of_line.end()) continue;
      if (id_position < 0 || static_cast<std::size_t>(id_position) >= cells.size() ||
          cells[static_cast<std::size_t>(id_position)] != log.id(at->second)) {
        ok = false;
        break;
      }
      for (std::size_t c = 0; c < cells.size() && c < csv_target.size(); ++c) {
        if (csv_target[c] >= 0)
          data.input_columns[static_cast<std::size_t>(csv_target[c])][at->second] =
              excerpt(cells[c], kMaxOtherCell);
      }
    } else {
      const auto at = row_of_line.find(line_no);
      if (at == row_of_line.end()) continue;
      auto object = parse_json_object(line);
      if (!object) {
        ok = false;
        break;
      }
      for (const auto& [key, value] : object->items()) {
        if (known(key)) continue;
        const std::ptrdiff_t c = column(key);
        if (c < 0) continue;
        const std::string text = value.is_string() ? value.get<std::string>() : json_text(value);
        data.input_columns[static_cast<std::size_t>(c)][at->second] = excerpt(text, kMaxOtherCell);
      }
    }
  }
  if (!ok) {
    data.input_column_names.clear();
    data.input_columns.clear();
  }
}

// Decides the log again with each procedure (plus bh when missing) and writes the page; `other`
// reads the log's other columns into the data, or does nothing.
template <typename ReadOther>
Status write_replay_page(const std::string& path, const CompactLog& log, const std::vector<Procedure>& procedures,
                         std::optional<double> alpha, std::string_view option, ReadOther&& other) {
  // Each procedure decides the log once more through replay_each, the function the CSV rows come
  // from (same inputs, same bits), and the summary rows come from the same summarize().
  ReplayResult result{procedures, {}};
  ReplayReportData data;
  bool has_bh = false;
  for (const auto& p : procedures) has_bh = has_bh || p.name == "bh";
  if (!has_bh) {  // the hindsight BH answer, at the same alpha, for the report only
    auto bh = resolve_procedures({"bh"}, RuleSpec{.alpha = alpha}, /*allow_offline=*/true);
    if (!bh) return bh.error();
    result.procedures.push_back((*bh)[0]);
    data.extra.push_back("bh");
  }
  for (const Procedure& p : result.procedures) {
    auto& decisions = result.decisions.emplace_back();
    decisions.reserve(log.size());
    replay_each(log, p, [&](std::size_t, const Decision& d) { decisions.push_back(d); });
  }
  const std::vector<ReplaySummary> summaries = summarize(log, result.procedures);
  other(data);
  data.log = &log;
  data.result = &result;
  data.summaries = &summaries;
  data.generated_at_ms = system_clock_ms();
  return write_file_atomically(path, render_replay_report(data), option);
}

}  // namespace

Status write_replay_report(const std::string& path, const CompactLog& log, const std::vector<Procedure>& procedures,
                           std::optional<double> alpha, const std::string& log_path,
                           std::optional<std::string_view> forced_format, std::string_view option) {
  return write_replay_page(path, log, procedures, alpha, option, [&](ReplayReportData& data) {
    if (log_path == "-") return;  // standard input cannot be read twice: no other columns then
    auto format = log_format_for(log_path, forced_format);
    if (!format) return;
    std::ifstream in(log_path, std::ios::binary);
    if (!in) return;
    read_other_columns(in, *format, log, data);
  });
}

Status write_replay_report_from_text(const std::string& path, const CompactLog& log,
                                     const std::vector<Procedure>& procedures, std::optional<double> alpha,
                                     std::string_view log_text, LogFormat format, std::string_view option) {
  return write_replay_page(path, log, procedures, alpha, option, [&](ReplayReportData& data) {
    std::istringstream in{std::string(log_text)};
    read_other_columns(in, format, log, data);
  });
}

Result<std::uint64_t> write_stream_report(Ledger& ledger, std::string_view stream, const std::string& path,
                                          std::string_view option) {
  if (auto s = check_output_path(path, option); !s) return s.error();
  auto info = ledger.status(stream);
  if (!info) return info.error();
  StreamReportData data;
  data.info = *info;
  data.configuration = describe_config(info->config);
  data.generated_at_ms = system_clock_ms();
  data.records.reserve(info->tests);
  if (auto s = ledger.for_each_decision(stream, 1,
                                        [&](const DecisionRecord& r) {
                                          data.records.push_back(r);
                                          return true;
                                        });
      !s) {
    return s.error();
  }
  if (auto s = write_file_atomically(path, render_stream_report(data), option); !s) return s.error();
  return static_cast<std::uint64_t>(data.records.size());
}

}  // namespace alphaledger
