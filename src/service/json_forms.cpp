// The JSON objects shared by `decide --json`, `pipe` and the HTTP routes (docs/http.md).
#include <cmath>

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
  if (!object.is_object()) {
    return invalid_input("expected a JSON object such as {\"id\": \"t1\", \"p_value\": 0.01}, got " +
                         nlohmann::json(object.type_name()).get<std::string>());
  }
  TestInput t;
  auto id = object.find("id");
  if (id == object.end()) return invalid_input("missing field 'id' (a text of 1 to 256 bytes)");
  if (id->is_string()) {
    t.id = id->get<std::string>();
  } else if (id->is_number_integer() || id->is_number_unsigned()) {
    t.id = id->dump();
  } else {
    return invalid_input("id must be a JSON string (or an integer), got " +
                         id->dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
  }
  if (auto s = validate_test_id(t.id); !s) return s.error();
  auto p = object.find("p_value");
  if (p == object.end())
    return invalid_input("test '" + t.id + "': missing field 'p_value' (a JSON number in [0, 1])");
  if (!p->is_number()) {
    return invalid_input("test '" + t.id + "': p_value must be a JSON number in [0, 1], got " +
                         p->dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
  }
  t.p_value = p->get<double>();
  if (!(t.p_value >= 0.0 && t.p_value <= 1.0)) {
    return invalid_input("test '" + t.id + "': p_value must be a JSON number in [0, 1], got " + p->dump());
  }
  return t;
}

}  // namespace alphaledger
