// Number formatting shared by every output: the shortest text that reads back to the identical
// double (std::to_chars), as docs/cli.md requires for CSV and JSON.
#pragma once

#include <charconv>
#include <cmath>
#include <string>

namespace alphaledger {

inline std::string format_number(double v) {
  if (std::isnan(v)) return "";
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v);
  return std::string(buf, ptr);
}

// For people: 4 significant digits.
inline std::string format_rounded(double v, int digits = 4) {
  if (std::isnan(v)) return "-";
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::general, digits);
  return std::string(buf, ptr);
}

}  // namespace alphaledger

namespace alphaledger {

// A CSV field, quoted when it holds a comma, quote or line break (RFC 4180).
inline std::string csv_field(const std::string& s) {
  if (s.find_first_of(",\"\n\r") == std::string::npos) return s;
  std::string out = "\"";
  for (char c : s) {
    if (c == '"') out += "\"\"";
    else out.push_back(c);
  }
  out += "\"";
  return out;
}

}  // namespace alphaledger
