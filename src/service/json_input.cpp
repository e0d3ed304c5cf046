// Requests given as JSON: a test to decide and a stream to create (src/service/json_input.hpp).
#include "service/json_input.hpp"

#include <algorithm>
#include <iterator>

#include "alphaledger/stats.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"
#include "harness/test_log_internal.hpp"

namespace alphaledger {

namespace {

// {"id": ..., "e_value": E} (a test of an e-lond stream): an e-value and no p-value.
Result<TestInput> e_test_from_json(const nlohmann::json& object) {
  if (auto p = object.find("p_value"); p != object.end() && !p->is_null())
    return invalid_input("give p_value (p-value streams) or e_value (e-lond streams), not both");
  auto fields = detail::json_fields(object);
  if (!fields) return fields.error();
  auto r = detail::make_record(*fields, std::nullopt, /*e_may_replace_p=*/true);
  if (!r) return r.error();
  return TestInput{std::move(r->id), *r->e_value, true};
}

bool has_e_value(const nlohmann::json& object) {
  auto e = object.find("e_value");
  return object.is_object() && e != object.end() && !e->is_null();
}

}  // namespace

Result<TestInput> test_from_json(const nlohmann::json& object) {
  if (has_e_value(object)) return e_test_from_json(object);
  auto r = test_record_from_json(object, std::nullopt);
  if (!r) return r.error();
  return TestInput{std::move(r->id), r->p_value};
}

Result<TestInput> test_from_json(const nlohmann::json& object, Alternative summary_direction) {
  if (has_e_value(object)) return e_test_from_json(object);
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
    const std::string shown = excerpt(json_text(it.value()));
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

Result<TestInput> test_from_json_text(std::string_view text) {
  auto object = parse_json_object(text);
  if (!object) return object.error();
  return test_from_json(*object);
}

Result<StreamRequest> stream_request_from_json_text(std::string_view text) {
  auto object = parse_json_object(text);
  if (!object) return object.error();
  return stream_request_from_json(*object);
}

}  // namespace alphaledger
