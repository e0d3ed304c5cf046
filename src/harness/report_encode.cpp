// Compact, exact column forms for the reports' data block (report_encode.hpp).
#include "harness/report_encode.hpp"

#include <bit>
#include <cmath>
#include <cstring>
#include <map>

#include "harness/json_text.hpp"

namespace alphaledger::report_detail {
namespace {

constexpr char kBase64[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

// The smallest of the candidates, by the length of their JSON text.
Json smallest(std::vector<Json> candidates) {
  std::size_t best = 0, best_size = SIZE_MAX;
  for (std::size_t i = 0; i < candidates.size(); ++i) {
    const std::size_t size = json_text(candidates[i]).size();
    if (size < best_size) best = i, best_size = size;
  }
  return std::move(candidates[best]);
}

std::string f64_bytes(const std::vector<double>& values) {
  std::string bytes(values.size() * 8, '\0');
  for (std::size_t i = 0; i < values.size(); ++i) {
    std::uint64_t u = std::bit_cast<std::uint64_t>(values[i]);
    for (std::size_t b = 0; b < 8; ++b, u >>= 8) bytes[8 * i + b] = static_cast<char>(u & 0xFF);
  }
  return bytes;
}

// Run-length text of per-row letters: "x3rl2" = x x x r l l.
class Runs {
 public:
  void add(char code) {
    if (code == code_) {
      ++count_;
      return;
    }
    flush();
    code_ = code;
    count_ = 1;
  }
  std::string finish() {
    flush();
    return std::move(text_);
  }

 private:
  void flush() {
    if (count_ == 0) return;
    text_ += code_;
    if (count_ > 1) text_ += std::to_string(count_);
  }
  std::string text_;
  char code_ = 0;
  std::size_t count_ = 0;
};

Json coded_column(std::span<const double> values, std::span<const double> ref, double before,
                  double divisor) {
  std::vector<double> written;
  Runs runs;
  double prev = before;
  for (std::size_t i = 0; i < values.size(); ++i) {
    const double v = values[i];
    if (same_bits(v, prev)) {
      runs.add('r');
    } else if (!ref.empty() && same_bits(v, prev - ref[i] / divisor)) {
      runs.add('l');
    } else {
      runs.add('x');
      written.push_back(v);
    }
    prev = v;
  }
  Json j = {{"count", values.size()},
            {"f64", base64(f64_bytes(written))},
            {"codes", runs.finish()},
            {"before", before}};
  if (!ref.empty()) j["divisor"] = divisor;
  return j;
}

Json plain_numbers(std::span<const double> values) {
  Json a = Json::array();
  for (double v : values) a.push_back(std::isfinite(v) ? Json(v) : Json(nullptr));
  return a;
}

bool continuation(char c) { return (static_cast<unsigned char>(c) & 0xC0) == 0x80; }

// UTF-16 units of valid UTF-8 text.
std::size_t utf16_units(std::string_view s) {
  std::size_t units = 0;
  for (char c : s) {
    if (!continuation(c)) units += static_cast<unsigned char>(c) >= 0xF0 ? 2 : 1;
  }
  return units;
}

// Front coding writes a count of UTF-16 units as one character '0' + count.
constexpr std::size_t kMaxFrontUnits = 74;  // up to 'z'

// Bytes of `b`'s start shared with `a`, ending at a character boundary, at most kMaxFrontUnits
// UTF-16 units.
std::size_t shared_prefix(std::string_view a, std::string_view b) {
  std::size_t n = 0;
  while (n < a.size() && n < b.size() && a[n] == b[n]) ++n;
  while (n > 0 && n < b.size() && continuation(b[n])) --n;
  while (utf16_units(b.substr(0, n)) > kMaxFrontUnits) {
    do --n;
    while (n > 0 && continuation(b[n]));
  }
  return n;
}

}  // namespace

std::string base64(std::string_view bytes) {
  std::string out;
  out.reserve((bytes.size() + 2) / 3 * 4);
  for (std::size_t i = 0; i < bytes.size(); i += 3) {
    std::uint32_t v = static_cast<unsigned char>(bytes[i]) << 16;
    if (i + 1 < bytes.size()) v |= static_cast<unsigned char>(bytes[i + 1]) << 8;
    if (i + 2 < bytes.size()) v |= static_cast<unsigned char>(bytes[i + 2]);
    out += kBase64[(v >> 18) & 63];
    out += kBase64[(v >> 12) & 63];
    out += i + 1 < bytes.size() ? kBase64[(v >> 6) & 63] : '=';
    out += i + 2 < bytes.size() ? kBase64[v & 63] : '=';
  }
  return out;
}

Json number_column(std::span<const double> values) { return number_column(values, {}, 0.0, 1.0); }

Json number_column(std::span<const double> values, std::span<const double> ref, double before,
                   double divisor) {
  for (double v : values) {
    if (!std::isfinite(v)) return plain_numbers(values);
  }
  if (!std::isfinite(before) || !std::isfinite(divisor) || divisor == 0) before = 0, divisor = 1;
  std::vector<Json> forms;
  forms.push_back(plain_numbers(values));
  bool same = !values.empty();
  for (double v : values) same = same && same_bits(v, values[0]);
  if (same) forms.push_back({{"count", values.size()}, {"same", values[0]}});
  std::vector<double> all(values.begin(), values.end());
  forms.push_back({{"count", values.size()}, {"f64", base64(f64_bytes(all))}});
  forms.push_back(
      coded_column(values, ref.size() == values.size() ? ref : std::span<const double>{}, before, divisor));
  return smallest(std::move(forms));
}

Json integer_column(std::span<const std::int64_t> values) {
  std::vector<Json> forms;
  forms.push_back(Json(std::vector<std::int64_t>(values.begin(), values.end())));
  if (!values.empty()) {
    Json diffs = Json::array();
    bool every = true;
    for (std::size_t i = 1; i < values.size(); ++i) {
      diffs.push_back(values[i] - values[i - 1]);
      every = every && values[i] - values[i - 1] == values[1] - values[0];
    }
    if (every) {
      forms.push_back({{"count", values.size()},
                       {"first", values[0]},
                       {"every", values.size() > 1 ? values[1] - values[0] : 0}});
    }
    // Differences in [0, 62] as one base64 digit each; '/' (63): the next one of "large".
    std::string digits;
    Json large = Json::array();
    for (std::size_t i = 1; i < values.size(); ++i) {
      const std::int64_t diff = values[i] - values[i - 1];
      if (diff >= 0 && diff < 63) {
        digits += kBase64[diff];
      } else {
        digits += '/';
        large.push_back(diff);
      }
    }
    forms.push_back({{"count", values.size()},
                     {"first", values[0]},
                     {"small_diffs", std::move(digits)},
                     {"large", std::move(large)}});
    forms.push_back({{"count", values.size()}, {"first", values[0]}, {"diffs", std::move(diffs)}});
  }
  return smallest(std::move(forms));
}

Json flag_column(const std::vector<bool>& values) {
  Json plain = Json::array(), set = Json::array();
  for (std::size_t i = 0; i < values.size(); ++i) {
    plain.push_back(values[i] ? 1 : 0);
    if (values[i]) set.push_back(i);
  }
  return smallest({std::move(plain), {{"count", values.size()}, {"set", std::move(set)}}});
}

Json text_column(const std::vector<std::string>& values) {
  std::vector<Json> forms;
  forms.push_back(Json(values));
  std::map<std::string, std::size_t> distinct;
  for (const auto& v : values) {
    if (distinct.size() <= 64) distinct.emplace(v, distinct.size());
  }
  // Front coding: per text the shared and the new UTF-16 units as one character each ('0' + k).
  std::string front;
  bool fits = true;
  std::string_view prev;
  for (const auto& v : values) {
    const std::size_t bytes = shared_prefix(prev, v);
    const std::size_t shared = utf16_units(std::string_view(v).substr(0, bytes));
    const std::size_t rest = utf16_units(std::string_view(v).substr(bytes));
    if (rest > kMaxFrontUnits) {
      fits = false;
      break;
    }
    front += static_cast<char>('0' + shared);
    front += static_cast<char>('0' + rest);
    front.append(v, bytes, std::string::npos);
    prev = v;
  }
  if (fits) forms.push_back({{"count", values.size()}, {"front", std::move(front)}});
  if (distinct.size() <= 64) {
    // Indices in first-met order.
    std::vector<std::string> names(distinct.size());
    std::map<std::string, std::size_t> order;
    std::string index;
    for (const auto& v : values) {
      auto [it, added] = order.emplace(v, order.size());
      if (added) names[it->second] = v;
      index += kBase64[it->second];
    }
    forms.push_back({{"count", values.size()}, {"values", names}, {"index", std::move(index)}});
  }
  return smallest(std::move(forms));
}

}  // namespace alphaledger::report_detail
