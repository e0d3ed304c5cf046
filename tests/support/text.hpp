// Small text and file helpers shared by the tests.
#pragma once

#include <fstream>
#include <sstream>
#include <string>
#include <string_view>
#include <vector>

namespace alphaledger::test_support {

// prefix followed by n, e.g. tag("t", 7) == "t7". Built by append: GCC 12's -Wrestrict misfires
// on "t" + std::to_string(n) (GCC PR 105651).
inline std::string tag(std::string_view prefix, long long n) {
  std::string out(prefix);
  out.append(std::to_string(n));
  return out;
}

// The pieces one after another, built by append: GCC 12's -Wrestrict misfires on "literal" +
// std::string (GCC PR 105651).
template <typename... Parts>
std::string concat(const Parts&... parts) {
  std::string out;
  (out.append(std::string_view(parts)), ...);
  return out;
}

// The whole file as bytes ("" if it cannot be read).
inline std::string read_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

inline void write_file(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
}

// Every line of `text`, the last one even without a newline.
inline std::vector<std::string> split_lines(const std::string& text) {
  std::vector<std::string> lines;
  std::string line;
  std::istringstream in(text);
  while (std::getline(in, line)) lines.push_back(line);
  return lines;
}

// The complete lines of `text` (a trailing partial line, cut by a kill, is dropped).
inline std::vector<std::string> complete_lines(const std::string& text) {
  std::vector<std::string> lines;
  std::size_t start = 0;
  for (std::size_t nl = text.find('\n'); nl != std::string::npos; nl = text.find('\n', start)) {
    lines.push_back(text.substr(start, nl - start));
    start = nl + 1;
  }
  return lines;
}

// The fields of one CSV line without quoted fields.
inline std::vector<std::string> split_csv_simple(const std::string& line) {
  std::vector<std::string> out;
  std::stringstream ss(line);
  std::string f;
  while (std::getline(ss, f, ',')) out.push_back(f);
  if (!line.empty() && line.back() == ',') out.emplace_back();
  return out;
}

}  // namespace alphaledger::test_support
