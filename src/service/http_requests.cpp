// Reading HTTP requests: bearer tokens, JSON bodies and query strings (service/http_requests.hpp).
#include "service/http_requests.hpp"

#include <charconv>

#include "harness/json_input.hpp"

namespace alphaledger::routes {

bool same_secret(std::string_view a, std::string_view b) {
  // Compares every byte whatever the first difference, so timing does not reveal the prefix.
  unsigned diff = a.size() == b.size() ? 0U : 1U;
  for (std::size_t i = 0; i < a.size(); ++i) {
    diff |= static_cast<unsigned>(static_cast<unsigned char>(a[i]) ^
                                  static_cast<unsigned char>(i < b.size() ? b[i] : 0));
  }
  return diff == 0;
}

bool iequals(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i) {
    char x = a[i], y = b[i];
    if (x >= 'A' && x <= 'Z') x = static_cast<char>(x - 'A' + 'a');
    if (y >= 'A' && y <= 'Z') y = static_cast<char>(y - 'A' + 'a');
    if (x != y) return false;
  }
  return true;
}

// Parses a request body that must be a JSON object (parse_json_object bounds the depth and never
// echoes more than an excerpt). On failure, the error answer.
Result<nlohmann::json> json_body(const http::Request& req, std::string_view example, http::Response& error) {
  auto j = parse_json_object(req.body);
  if (!j) {
    // Valid JSON that is not an object is invalid input; text that is not JSON is invalid JSON.
    const bool not_object = j.error().message.rfind("expected a JSON object", 0) == 0;
    error = error_response(
        400, not_object ? "invalid_input" : "invalid_json",
        "the request body: " + j.error().message + " (for this route: " + std::string(example) + ")");
    return j.error();
  }
  return std::move(j).value();
}

// `from=STEP&limit=N` (either, both or none, each at most once). Errors name the parameter, an
// excerpt of the value and the accepted range.
Result<PageQuery> page_query(std::string_view query) {
  PageQuery out;
  bool seen_from = false, seen_limit = false;
  while (!query.empty()) {
    const std::size_t amp = query.find('&');
    const std::string_view pair = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view() : query.substr(amp + 1);
    if (pair.empty()) continue;
    const std::size_t eq = pair.find('=');
    const std::string_view key = pair.substr(0, eq);
    const std::string_view value = eq == std::string_view::npos ? std::string_view() : pair.substr(eq + 1);
    const bool is_from = key == "from", is_limit = key == "limit";
    if (!is_from && !is_limit) {
      return invalid_input("unknown query parameter '" + excerpt(key) +
                           "'; accepted: from=STEP (a step, 1 or more) and limit=N (1 to " +
                           std::to_string(kMaxPage) + ")");
    }
    if ((is_from && seen_from) || (is_limit && seen_limit))
      return invalid_input("query parameter '" + std::string(key) + "' is given twice; give it once");
    (is_from ? seen_from : seen_limit) = true;
    const std::string range = is_from ? "a whole number from 1 to " + std::to_string(kMaxStep)
                                      : "a whole number from 1 to " + std::to_string(kMaxPage);
    std::uint64_t v = 0;
    const auto [end, ec] = std::from_chars(value.data(), value.data() + value.size(), v);
    if (value.empty() || ec != std::errc() || end != value.data() + value.size() || v == 0 ||
        v > (is_from ? kMaxStep : kMaxPage)) {
      return invalid_input(std::string(key) + "=" + excerpt(value) + " is not accepted; " + std::string(key) +
                           " must be " + range);
    }
    (is_from ? out.from : out.limit) = v;
  }
  return out;
}

// "%41" -> "A". nullopt for a bad escape.
std::optional<std::string> percent_decode(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (std::size_t i = 0; i < s.size(); ++i) {
    if (s[i] != '%') {
      out.push_back(s[i]);
      continue;
    }
    if (i + 2 >= s.size()) return std::nullopt;
    int v = 0;
    for (int k = 1; k <= 2; ++k) {
      const int d = http::hex_digit(s[i + static_cast<std::size_t>(k)]);
      if (d < 0) return std::nullopt;
      v = v * 16 + d;
    }
    out.push_back(static_cast<char>(v));
    i += 2;
  }
  return out;
}

Result<std::vector<Anchor>> anchor_query(std::string_view query) {
  std::vector<Anchor> out;
  while (!query.empty()) {
    const std::size_t amp = query.find('&');
    const std::string_view pair = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view() : query.substr(amp + 1);
    if (pair.empty()) continue;
    const std::size_t eq = pair.find('=');
    const std::string_view key = pair.substr(0, eq);
    if (key != "expect") {
      return invalid_input("unknown query parameter '" + excerpt(key) +
                           "'; accepted: expect=STEP:HASH or expect=closed:HASH, repeatable");
    }
    if (out.size() == kMaxAnchors)
      return invalid_input("more than " + std::to_string(kMaxAnchors) +
                           " expect= anchors; give at most that many");
    auto decoded = percent_decode(eq == std::string_view::npos ? std::string_view() : pair.substr(eq + 1));
    if (!decoded) return invalid_input("expect= has a bad %-escape");
    auto a = parse_anchor(*decoded);
    if (!a) return invalid_input("expect=: " + a.error().message);
    out.push_back(*a);
  }
  return out;
}

}  // namespace alphaledger::routes
