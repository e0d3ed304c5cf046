// The shared text rules of include/alphaledger/text.hpp.
#include "alphaledger/text.hpp"

#include <algorithm>
#include <charconv>
#include <chrono>
#include <cstdio>
#include <cmath>
#include <string>

namespace alphaledger {
namespace {

// A fixed-width run of ASCII digits (no sign, no spaces).
bool parse_digits(std::string_view s, int& v) {
  if (s.empty()) return false;
  v = 0;
  for (char c : s) {
    if (c < '0' || c > '9') return false;
    v = v * 10 + (c - '0');
  }
  return true;
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
  if (!parse_digits(s.substr(0, 4), y) || !parse_digits(s.substr(5, 2), mo) ||
      !parse_digits(s.substr(8, 2), d))
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
    if (rest.size() < 5 || rest[2] != ':' || !parse_digits(rest.substr(0, 2), hh) ||
        !parse_digits(rest.substr(3, 2), mm))
      return false;
    rest.remove_prefix(5);
    double frac = 0;
    if (!rest.empty() && rest[0] == ':') {
      if (rest.size() < 3 || !parse_digits(rest.substr(1, 2), ss)) return false;
      rest.remove_prefix(3);
      if (!rest.empty() && rest[0] == '.') {
        std::size_t n = 1;
        while (n < rest.size() && rest[n] >= '0' && rest[n] <= '9') ++n;
        if (n == 1) return false;
        // Digits past the 18th cannot change a double of seconds below 1; they are checked, not used.
        const std::string f = "0." + std::string(rest.substr(1, std::min<std::size_t>(n - 1, 18)));
        std::from_chars(f.data(), f.data() + f.size(), frac);
        rest.remove_prefix(n);
      }
    }
    if (hh > 23 || mm > 59 || ss > 60) return false;
    secs += hh * 3600.0 + mm * 60.0 + ss + frac;
    if (!rest.empty()) {
      if (rest == "Z") {
      } else if ((rest[0] == '+' || rest[0] == '-') && rest.size() == 6 && rest[3] == ':') {
        int oh, om;
        if (!parse_digits(rest.substr(1, 2), oh) || !parse_digits(rest.substr(4, 2), om)) return false;
        if (oh > 23 || om > 59) return false;
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

bool is_control(char32_t cp) { return cp < 0x20 || (cp >= 0x7F && cp <= 0x9F); }

enum class NumberText { kOk, kSyntax, kTooLarge, kTooSmall };

// The one reading of a number written as text (docs/formats.md, "Numbers").
NumberText read_number(std::string_view t, double& v) {
  if (t.empty()) return NumberText::kSyntax;
  // from_chars also reads "inf", "nan" and "infinity": only digits, '.', 'e'/'E' and '-' are allowed.
  for (char c : t) {
    if (!((c >= '0' && c <= '9') || c == '.' || c == 'e' || c == 'E' || c == '-')) return NumberText::kSyntax;
  }
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (p != t.data() + t.size()) return NumberText::kSyntax;
  if (ec == std::errc::result_out_of_range) {
    // Out of range both ways: tell which from the decimal magnitude of the text.
    std::size_t i = t[0] == '-' ? 1 : 0;
    long long lead = 0;  // power of ten of the first non-zero digit, before the exponent
    bool seen_point = false, seen_nonzero = false;
    long long int_digits = 0, zeros_after_point = 0;
    for (; i < t.size() && t[i] != 'e' && t[i] != 'E'; ++i) {
      if (t[i] == '.') {
        seen_point = true;
      } else if (!seen_nonzero) {
        if (t[i] != '0') {
          seen_nonzero = true;
        } else if (seen_point) {
          ++zeros_after_point;
        }
      } else if (!seen_point) {
        ++int_digits;
      }
    }
    lead = seen_point && int_digits == 0 ? -(zeros_after_point + 1) : int_digits;
    long long exponent = 0;
    if (i < t.size()) {
      std::size_t k = i + 1;
      const bool negative = k < t.size() && t[k] == '-';
      if (negative) ++k;
      for (; k < t.size(); ++k) exponent = std::min<long long>(exponent * 10 + (t[k] - '0'), 1LL << 40);
      if (negative) exponent = -exponent;
    }
    return lead + exponent < 0 ? NumberText::kTooSmall : NumberText::kTooLarge;
  }
  if (ec != std::errc()) return NumberText::kSyntax;
  if (v == 0) v = 0.0;  // -0 is 0
  return NumberText::kOk;
}

std::string number_error(NumberText kind, std::string_view field, std::string_view accepted,
                         std::string_view t) {
  const std::string f(field);
  switch (kind) {
    case NumberText::kTooSmall:
      return f + " " + excerpt(t) +
             " is not zero but too small to be held as a number (the smallest is about 4.9e-324); "
             "write 0 if zero is meant";
    case NumberText::kTooLarge:
      return f + " must be " + std::string(accepted) + ", got " + excerpt(t) +
             ", too large to be held as a number";
    default:
      return f + " must be " + std::string(accepted) + ", got '" + excerpt(t) +
             "' (write it like 0.01 or 1e-8)";
  }
}

}  // namespace

std::size_t utf8_length(std::string_view s, std::size_t i, char32_t& cp) {
  const auto b0 = static_cast<unsigned char>(s[i]);
  if (b0 < 0x80) {
    cp = b0;
    return 1;
  }
  std::size_t len;
  char32_t min;
  if ((b0 & 0xE0) == 0xC0) {
    len = 2, cp = b0 & 0x1F, min = 0x80;
  } else if ((b0 & 0xF0) == 0xE0) {
    len = 3, cp = b0 & 0x0F, min = 0x800;
  } else if ((b0 & 0xF8) == 0xF0) {
    len = 4, cp = b0 & 0x07, min = 0x10000;
  } else {
    return 0;
  }
  if (i + len > s.size()) return 0;
  for (std::size_t k = 1; k < len; ++k) {
    const auto b = static_cast<unsigned char>(s[i + k]);
    if ((b & 0xC0) != 0x80) return 0;
    cp = (cp << 6) | (b & 0x3F);
  }
  if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
  return len;
}

void append_number_text(std::string& out, double v) {
  if (std::isnan(v)) return;
  char buf[64];
  out.append(buf, std::to_chars(buf, buf + sizeof buf, v).ptr);
}

std::string format_number(double v) {
  std::string out;
  append_number_text(out, v);
  return out;
}

std::string format_rounded(double v, int digits) {
  if (std::isnan(v)) return "-";
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::general, digits);
  return std::string(buf, ptr);
}

std::string csv_field(std::string_view s) {
  if (s.find_first_of(",\"\n\r") == std::string_view::npos) return std::string(s);
  std::string out = "\"";
  for (char c : s) {
    if (c == '"')
      out += "\"\"";
    else
      out.push_back(c);
  }
  out += "\"";
  return out;
}

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

Result<double> parse_number_text(std::string_view text, std::string_view field) {
  const std::string_view t = trim(text);
  double v = 0;
  const NumberText kind = read_number(t, v);
  if (kind != NumberText::kOk) return invalid_input(number_error(kind, field, "a number", t));
  return v;
}

Result<double> parse_p_value_text(std::string_view text) {
  const std::string_view t = trim(text);
  double v = 0;
  const NumberText kind = read_number(t, v);
  if (kind != NumberText::kOk) return invalid_input(number_error(kind, "p_value", "a number in [0, 1]", t));
  if (!(v >= 0.0 && v <= 1.0)) return invalid_input("p_value must be a number in [0, 1], got " + excerpt(t));
  return v;
}

Result<double> parse_time_text(std::string_view text) {
  const std::string_view t = trim(text);
  double v = 0;
  const NumberText kind = read_number(t, v);
  if (kind == NumberText::kOk) return v;
  if (kind != NumberText::kSyntax) return invalid_input(number_error(kind, "finished_at", "a number", t));
  if (parse_iso(t, v)) return v;
  return invalid_input(
      "finished_at must be an ISO 8601 date (2025-03-14) or date-time "
      "(2025-03-14T09:30:00Z), or a number, got '" +
      excerpt(t) + "'");
}

std::optional<double> read_finite_number(std::string_view text) {
  double v = 0;
  const char* end = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(text.data(), end, v);
  if (text.empty() || ec != std::errc() || ptr != end || !std::isfinite(v)) return std::nullopt;
  return v;
}

std::optional<std::uint64_t> read_whole_number(std::string_view text) {
  std::uint64_t v = 0;
  const char* end = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(text.data(), end, v);
  if (text.empty() || ec != std::errc() || ptr != end) return std::nullopt;
  return v;
}

Status validate_test_id(std::string_view id) {
  if (id.empty()) return invalid_input("id must not be empty");
  if (id.size() > kMaxTestIdBytes)
    return invalid_input("id must be at most 256 bytes, got " + std::to_string(id.size()) + " bytes: '" +
                         excerpt(id) + "'");
  for (std::size_t i = 0; i < id.size();) {
    char32_t cp = 0;
    const std::size_t len = utf8_length(id, i, cp);
    if (len == 0)
      return invalid_input("id must be valid UTF-8 text, got '" + excerpt(id) + "' (bad byte at offset " +
                           std::to_string(i) + ")");
    if (is_control(cp))
      return invalid_input("id must not contain control characters, got '" + excerpt(id) + "'");
    i += len;
  }
  const auto space = [](char c) { return c == ' ' || c == '\t'; };
  if (space(id.front()) || space(id.back()))
    return invalid_input("id must not begin or end with white space, got '" + excerpt(id) + "'");
  return {};
}

Status validate_stream_name(std::string_view name) {
  const std::string shown(name.substr(0, 160));
  if (name.empty()) return invalid_input("stream name must not be empty");
  if (name.size() > kMaxStreamName) {
    return invalid_input("stream name must be at most 128 bytes, got " + std::to_string(name.size()));
  }
  for (std::size_t i = 0; i < name.size(); ++i) {
    const auto c = static_cast<unsigned char>(name[i]);
    const bool allowed = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
                         c == '-' || c == '_' || c == '.';
    if (!allowed) {
      // Built by append: GCC 12's -Wrestrict misfires on "'" + std::string(1, c) + "'" (GCC PR 105651).
      std::string what;
      if (c < 0x20 || c >= 0x7f) {
        what = "byte " + std::to_string(c);
      } else {
        what.push_back('\'');
        what.push_back(name[i]);
        what.push_back('\'');
      }
      std::string printable;
      for (char ch : shown)
        printable.push_back(
            static_cast<unsigned char>(ch) < 0x20 || static_cast<unsigned char>(ch) >= 0x7f ? '?' : ch);
      return invalid_input("stream name may contain only letters, digits, '-', '_' and '.', got '" +
                           printable + "' (" + what + " at position " + std::to_string(i + 1) + ")");
    }
  }
  if (name == "." || name == "..") return invalid_input("stream name must not be '.' or '..'");
  return {};
}

std::string excerpt(std::string_view value, std::size_t max_bytes) {
  std::string out;
  const std::size_t n = std::min(value.size(), max_bytes);
  std::size_t i = 0;
  while (i < n) {
    char32_t cp = 0;
    const std::size_t len = utf8_length(value, i, cp);
    if (len > 0 && i + len > n) break;  // a character cut by the limit is left out
    if (len == 0 || is_control(cp)) {
      // Not valid UTF-8, or a control character: each byte as \xHH.
      const std::size_t bytes = len == 0 ? 1 : len;
      for (std::size_t k = 0; k < bytes; ++k, ++i) {
        static const char* kHex = "0123456789abcdef";
        const auto c = static_cast<unsigned char>(value[i]);
        out += "\\x";
        out.push_back(kHex[c >> 4]);
        out.push_back(kHex[c & 0xF]);
      }
      continue;
    }
    out.append(value.substr(i, len));
    i += len;
  }
  if (value.size() > n) out += "...(" + std::to_string(value.size()) + " bytes)";
  return out;
}

std::string format_timestamp(std::int64_t ms) {
  using namespace std::chrono;
  const sys_time<milliseconds> tp{milliseconds{ms}};
  const auto day = floor<days>(tp);
  const year_month_day ymd{day};
  const hh_mm_ss<milliseconds> t{tp - day};
  const int year = static_cast<int>(ymd.year());
  if (year < 0 || year > 9999) {  // a minus sign or a fifth digit: printf's "%04d" says it
    char buf[48];
    std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02d:%02d:%02d.%03dZ", year,
                  static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()),
                  static_cast<int>(t.hours().count()), static_cast<int>(t.minutes().count()),
                  static_cast<int>(t.seconds().count()), static_cast<int>(t.subseconds().count()));
    return buf;
  }
  // Digit by digit (history prints two of these a row; printf cost ~3,700 instructions each).
  std::string out = "0000-00-00T00:00:00.000Z";
  const auto put = [&out](std::size_t end, unsigned value) {
    for (std::size_t i = end; value > 0; value /= 10) out[--i] = static_cast<char>('0' + value % 10);
  };
  put(4, static_cast<unsigned>(year));
  put(7, static_cast<unsigned>(ymd.month()));
  put(10, static_cast<unsigned>(ymd.day()));
  put(13, static_cast<unsigned>(t.hours().count()));
  put(16, static_cast<unsigned>(t.minutes().count()));
  put(19, static_cast<unsigned>(t.seconds().count()));
  put(23, static_cast<unsigned>(t.subseconds().count()));
  return out;
}

}  // namespace alphaledger
