// The log's other columns, read again from the file (report_columns.hpp).
#include "harness/report_columns.hpp"

#include <algorithm>
#include <fstream>
#include <map>
#include <unordered_map>

#include "alphaledger/text.hpp"
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

}  // namespace

InputColumns read_input_columns(const std::string& path, std::optional<std::string_view> forced,
                                const CompactLog& log, std::span<const std::string_view> skip) {
  if (path == "-") return {};
  auto format = log_format_for(path, forced);
  if (!format) return {};
  std::ifstream in(path, std::ios::binary);
  if (!in) return {};
  return read_input_columns(in, *format, log, skip);
}

InputColumns read_input_columns(std::istream& in, LogFormat format, const CompactLog& log,
                                std::span<const std::string_view> skip) {
  InputColumns data;
  std::unordered_map<std::uint64_t, std::size_t> row_of_line;
  for (std::size_t i = 0; i < log.size(); ++i) row_of_line[log.records[i].line] = i;
  const auto known = [&](std::string_view name) {
    return name.empty() || std::find(skip.begin(), skip.end(), name) != skip.end();
  };
  std::map<std::string, std::size_t> column_of;
  std::vector<std::ptrdiff_t> csv_target;  // CSV: header position -> other column, or -1
  auto column = [&](const std::string& name) -> std::ptrdiff_t {
    if (auto it = column_of.find(name); it != column_of.end()) return static_cast<std::ptrdiff_t>(it->second);
    if (column_of.size() >= kMaxInputColumns) return -1;
    column_of[name] = data.names.size();
    data.names.push_back(name);
    data.columns.emplace_back(log.size());
    return static_cast<std::ptrdiff_t>(data.names.size() - 1);
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
          data.columns[static_cast<std::size_t>(csv_target[c])][at->second] =
              excerpt(cells[c], kMaxInputCell);
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
        const std::string text = value.is_string()
                                     ? value.get<std::string>()
                                     : json_text(value);
        data.columns[static_cast<std::size_t>(c)][at->second] = excerpt(text, kMaxInputCell);
      }
    }
  }
  if (!ok) return {};
  return data;
}

}  // namespace alphaledger
