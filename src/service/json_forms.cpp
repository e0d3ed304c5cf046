// The JSON objects shared by `decide --json`, `pipe` and the HTTP routes (docs/http.md).
#include <algorithm>
#include <cmath>
#include <iterator>

#include "alphaledger/service.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::ordered_json;

// Numbers: nlohmann prints doubles so that they read back to the identical double (as replay's
// JSON output does). A non-finite value, which no valid state holds, is null.
Json number(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }

}  // namespace

nlohmann::ordered_json history_row_to_json(const DecisionRecord& r, std::string_view rule) {
  Json j;
  j["rule"] = std::string(rule);
  j["step"] = r.step;
  j["id"] = r.id;
  j["p_value"] = number(r.p_value);
  j["level"] = number(r.level);
  j["rejected"] = r.rejected ? 1 : 0;
  j["wealth"] = number(r.wealth);
  j["decided_at"] = format_timestamp(r.decided_at_ms);
  return j;
}

nlohmann::ordered_json stream_to_json(const StreamInfo& s) {
  const RuleConfig& c = s.config;
  Json j;
  j["stream"] = s.name;
  j["rule"] = std::string(rule_name(c.kind));
  j["alpha"] = number(c.alpha);
  if (rule_takes(c.kind, "initial_wealth")) j["initial_wealth"] = number(c.initial_wealth);
  if (rule_takes(c.kind, "candidate_threshold")) j["candidate_threshold"] = number(c.candidate_threshold);
  if (rule_takes(c.kind, "discard_threshold")) j["discard_threshold"] = number(c.discard_threshold);
  if (rule_takes(c.kind, "payout")) j["payout"] = number(c.payout);
  if (rule_takes(c.kind, "spending")) j["spending"] = c.spending;
  if (rule_takes(c.kind, "evaluation")) j["evaluation"] = std::string(evaluation_name(c.evaluation));
  // As `status --json`: the direction of summary rows, shown only when it is not two-sided.
  if (s.alternative != Alternative::kTwoSided)
    j["alternative"] = std::string(alternative_name(s.alternative));
  j["created_at"] = format_timestamp(s.created_at_ms);
  j["tests"] = s.tests;
  j["rejections"] = s.rejections;
  j["wealth"] = number(s.wealth);
  j["next_level"] = number(s.next_level);
  // As `status --json`: shown only for a closed stream, after next_level.
  if (s.closed_at_ms) j["closed_at"] = format_timestamp(*s.closed_at_ms);
  return j;
}

std::string dump_json(const nlohmann::ordered_json& j) {
  return j.dump(-1, ' ', false, nlohmann::ordered_json::error_handler_t::replace);
}

Result<TestInput> test_from_json(const nlohmann::json& object) {
  auto r = test_record_from_json(object, std::nullopt);
  if (!r) return r.error();
  return TestInput{std::move(r->id), r->p_value};
}

Result<TestInput> test_from_json(const nlohmann::json& object, Alternative summary_direction) {
  auto r = test_record_from_json(object, summary_direction);
  if (!r) return r.error();
  return TestInput{std::move(r->id), r->p_value};
}

Result<StreamRequest> stream_request_from_json(const nlohmann::json& j) {
  static constexpr std::string_view kNumbers[] = {"alpha", "initial_wealth", "candidate_threshold",
                                                  "discard_threshold", "payout"};
  static constexpr std::string_view kTexts[] = {"name", "rule", "spending", "evaluation", "alternative"};
  if (!j.is_object())
    return invalid_input("expected a JSON object such as " + std::string(kStreamRequestExample));
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& key = it.key();
    const bool numeric = std::find(std::begin(kNumbers), std::end(kNumbers), key) != std::end(kNumbers);
    const bool text = std::find(std::begin(kTexts), std::end(kTexts), key) != std::end(kTexts);
    if (!numeric && !text) {
      return invalid_input("unknown field '" + excerpt(key) +
                           "'; accepted: name, rule, alpha, initial_wealth, "
                           "candidate_threshold, discard_threshold, payout, spending, evaluation, "
                           "alternative");
    }
    if (it.value().is_null()) continue;
    const std::string shown =
        excerpt(it.value().dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
    if (numeric && !it.value().is_number())
      return invalid_input(key + " must be a JSON number, got " + shown);
    if (text && !it.value().is_string()) return invalid_input(key + " must be a JSON string, got " + shown);
  }
  auto text = [&](const char* key) -> std::optional<std::string> {
    auto it = j.find(key);
    if (it == j.end() || it->is_null()) return std::nullopt;
    return it->get<std::string>();
  };
  auto num = [&](const char* key) -> std::optional<double> {
    auto it = j.find(key);
    if (it == j.end() || it->is_null()) return std::nullopt;
    const double v = it->get<double>();
    return v == 0 ? 0.0 : v;  // -0 is 0, as everywhere
  };
  StreamRequest r;
  auto name = text("name");
  if (!name) return invalid_input("missing field 'name' (1 to 128 letters, digits, '-', '_' or '.')");
  auto rule = text("rule");
  if (!rule)
    return invalid_input(
        "missing field 'rule' (alpha-spending, alpha-investing, lond, lord++, saffron or addis)");
  r.name = *name;
  r.spec.rule = *rule;
  r.spec.alpha = num("alpha");
  r.spec.initial_wealth = num("initial_wealth");
  r.spec.candidate_threshold = num("candidate_threshold");
  r.spec.discard_threshold = num("discard_threshold");
  r.spec.payout = num("payout");
  r.spec.spending = text("spending");
  r.spec.evaluation = text("evaluation");
  if (auto a = text("alternative")) {
    auto parsed = parse_alternative(*a);
    if (!parsed) return invalid_input("alternative: " + parsed.error().message);
    r.alternative = *parsed;
  }
  return r;
}

}  // namespace alphaledger
