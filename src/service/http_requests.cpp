// Reading HTTP requests: bearer tokens, JSON bodies and query strings (service/http_requests.hpp).
#include "service/http_requests.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>

#include "harness/json_input.hpp"
#include "harness/json_text.hpp"

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

namespace {

// A whole number >= 0 (at most 2^53) from a JSON number.
Result<std::uint64_t> whole_field(const nlohmann::json& arm, const std::string& where, const char* key) {
  auto it = arm.find(key);
  if (it == arm.end()) return invalid_input(where + " needs '" + key + "' (a whole number >= 0)");
  const double v = it->is_number() ? it->get<double>() : -1.0;
  if (v < 0 || v != std::floor(v) || v > 9007199254740992.0)
    return invalid_input(where + "." + key + " must be a whole number >= 0, got " + excerpt(json_text(*it)));
  return static_cast<std::uint64_t>(v);
}

Result<double> real_field(const nlohmann::json& arm, const std::string& where, const char* key) {
  auto it = arm.find(key);
  if (it == arm.end() || !it->is_number())
    return invalid_input(where + " needs '" + key + "' as a JSON number");
  return it->get<double>();
}

// One arm into `data`; `proportions` says which kind the look is.
Status arm_from_json(const nlohmann::json& object, const std::string& where, bool proportions, bool control,
                     LookData& data) {
  auto it = object.find(where);
  if (it == object.end() || !it->is_object()) {
    return invalid_input("missing field '" + where +
                         "': an object {\"n\", \"conversions\"} (proportions) or {\"n\", \"mean\", \"sd\"} (means)");
  }
  for (auto k = it->begin(); k != it->end(); ++k) {
    const std::string& key = k.key();
    if (key != "n" && key != (proportions ? "conversions" : "mean") && (proportions || key != "sd"))
      return invalid_input(where + ": unknown field '" + excerpt(key) + "'");
  }
  auto n = whole_field(*it, where, "n");
  if (!n) return n.error();
  if (proportions) {
    auto x = whole_field(*it, where, "conversions");
    if (!x) return x.error();
    (control ? data.control_proportions : data.treatment_proportions) = ProportionArm{*n, *x};
    return {};
  }
  auto mean = real_field(*it, where, "mean");
  if (!mean) return mean.error();
  auto sd = real_field(*it, where, "sd");
  if (!sd) return sd.error();
  (control ? data.control_means : data.treatment_means) = MeanArm{*n, *mean, *sd};
  return {};
}

}  // namespace

Result<LookData> look_from_json(const nlohmann::json& object, const std::vector<std::string_view>& also) {
  if (!object.is_object()) return invalid_input("expected a JSON object such as " + std::string(kLookExample));
  for (auto it = object.begin(); it != object.end(); ++it) {
    const std::string& key = it.key();
    const bool known = key == "control" || key == "treatment" || key == "mixture_sd" ||
                       std::find(also.begin(), also.end(), key) != also.end();
    if (!known) {
      return invalid_input("unknown field '" + excerpt(key) +
                           "'; a look takes control, treatment and mixture_sd, e.g. " + std::string(kLookExample));
    }
  }
  LookData data;
  auto control = object.find("control");
  const bool proportions = control == object.end() || !control->is_object() || control->contains("conversions");
  data.summary = proportions ? LookSummary::kProportions : LookSummary::kMeans;
  if (auto s = arm_from_json(object, "control", proportions, true, data); !s) return s.error();
  if (auto s = arm_from_json(object, "treatment", proportions, false, data); !s) return s.error();
  if (auto it = object.find("mixture_sd"); it != object.end() && !it->is_null()) {
    if (!it->is_number() || !(it->get<double>() > 0))
      return invalid_input("mixture_sd must be a JSON number > 0, got " + excerpt(json_text(*it)));
    data.mixture_sd = it->get<double>();
  }
  return data;
}

}  // namespace alphaledger::routes
