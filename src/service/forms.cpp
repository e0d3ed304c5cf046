// Every JSON and CSV form of the ledger's answers (alphaledger/forms.hpp; docs/formats.md).
#include "alphaledger/forms.hpp"

#include <charconv>
#include <cmath>
#include <nlohmann/json.hpp>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::ordered_json;

// The one rule for numbers: finite values as they are (json_text writes the shortest round-trip
// form), anything else null.
Json number(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }

// The same rule in CSV: shortest round-trip text, or an empty cell.
void append_csv_number(std::string& row, double v) {
  if (!std::isfinite(v)) return;
  char buf[64];
  row.append(buf, std::to_chars(buf, buf + sizeof buf, v).ptr);
}

Json stream_object(const StreamInfo& s) {
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
  // Like the rule parameters, shown only when it applies: a direction other than two-sided.
  if (s.alternative != Alternative::kTwoSided)
    j["alternative"] = std::string(alternative_name(s.alternative));
  j["created_at"] = format_timestamp(s.created_at_ms);
  j["tests"] = s.tests;
  j["rejections"] = s.rejections;
  j["wealth"] = number(s.wealth);
  j["next_level"] = number(s.next_level);
  j["running"] = s.running;
  j["reserved"] = number(s.reserved);
  // Shown only for a closed stream, after next_level.
  if (s.closed_at_ms) j["closed_at"] = format_timestamp(*s.closed_at_ms);
  return j;
}

// The key of a record's number: e_value for a rule that takes e-values (e-lond), else p_value.
const char* evidence_key(const DecisionRecord& r, std::string_view rule) {
  auto kind = parse_rule_name(rule);
  return r.e_value || (kind && rule_takes_e_values(*kind)) ? "e_value" : "p_value";
}

Json history_row_object(const DecisionRecord& r, std::string_view rule) {
  Json j;
  j["rule"] = std::string(rule);
  j["step"] = r.step;
  j["id"] = r.id;
  j[evidence_key(r, rule)] = number(r.p_value);
  j["level"] = number(r.level);
  j["rejected"] = r.rejected ? 1 : 0;
  j["wealth"] = number(r.wealth);
  j["decided_at"] = format_timestamp(r.decided_at_ms);
  j["launch"] = r.launch;
  j["reserved_at"] = format_timestamp(r.launched_at_ms);
  j["abandoned"] = r.abandoned;
  return j;
}

// rule,step,id,p_value,level,rejected,wealth: the columns a decision row and a history row share.
std::string csv_row(const DecisionRecord& r, std::string_view rule) {
  std::string row(rule);
  row += ',';
  row += std::to_string(r.step);
  row += ',';
  row += csv_field(r.id);
  row += ',';
  append_csv_number(row, r.p_value);
  row += ',';
  append_csv_number(row, r.level);
  row += r.rejected ? ",1," : ",0,";
  append_csv_number(row, r.wealth);
  return row;
}

}  // namespace

std::string decision_json(const DecideResult& d, std::string_view rule) {
  Json j;
  if (!rule.empty()) j["rule"] = std::string(rule);
  j["step"] = d.record.step;
  j["id"] = d.record.id;
  j[evidence_key(d.record, rule)] = number(d.record.p_value);
  j["level"] = number(d.record.level);
  j["rejected"] = d.record.rejected ? 1 : 0;
  j["wealth"] = number(d.record.wealth);
  j["stream"] = d.stream;
  j["decided_at"] = format_timestamp(d.record.decided_at_ms);
  j["launch"] = d.record.launch;
  j["launched_at"] = format_timestamp(d.record.launched_at_ms);
  j["repeat"] = d.repeat;
  return json_text(j);
}

std::string decision_csv(const DecisionRecord& r, std::string_view rule) { return csv_row(r, rule); }

std::string_view history_csv_header(std::string_view rule) {
  auto kind = parse_rule_name(rule);
  return kind && rule_takes_e_values(*kind) ? kHistoryCsvHeaderE : kHistoryCsvHeader;
}

namespace {

Json look_object(const LookResult& l) {
  Json j;
  j["stream"] = l.stream;
  j["id"] = l.id;
  j["look"] = l.look;
  j["launch"] = l.launch;
  j["step"] = l.step;
  j["summary"] = l.data.summary == LookSummary::kMeans ? "means" : "proportions";
  if (l.data.summary == LookSummary::kMeans) {
    for (auto [key, arm] : {std::pair{"control", &l.data.control_means}, {"treatment", &l.data.treatment_means}})
      j[key] = Json{{"n", arm->n}, {"mean", number(arm->mean)}, {"sd", number(arm->sd)}};
  } else {
    for (auto [key, arm] : {std::pair{"control", &l.data.control_proportions},
                            {"treatment", &l.data.treatment_proportions}})
      j[key] = Json{{"n", arm->n}, {"conversions", arm->conversions}};
  }
  j["mixture_sd"] = number(l.data.mixture_sd.value_or(0.0));
  j["estimate"] = number(l.estimate);
  j["anytime_p_value"] = number(l.anytime_p_value);
  j["running_min"] = number(l.running_min);
  j["e_value"] = number(l.e_value);
  j["cs_low"] = number(l.cs_low);
  j["cs_high"] = number(l.cs_high);
  j["level"] = number(l.level);
  j["verdict"] = l.stop ? "stop" : "continue";
  j["looked_at"] = format_timestamp(l.looked_at_ms);
  if (l.decision) {
    j["decision"] = Json::parse(decision_json(DecideResult{l.stream, *l.decision, l.repeat}));
  } else {
    j["decision"] = nullptr;
  }
  j["repeat"] = l.repeat;
  return j;
}

}  // namespace

std::string look_json(const LookResult& l) { return json_text(look_object(l)); }

std::string look_list_json(std::string_view stream, std::string_view id, const std::vector<LookResult>& looks) {
  Json j;
  j["stream"] = std::string(stream);
  j["id"] = std::string(id);
  j["looks"] = Json::array();
  for (const auto& l : looks) j["looks"].push_back(look_object(l));
  return json_text(j);
}

std::string stream_json(const StreamInfo& s) { return json_text(stream_object(s)); }

std::string stream_created_json(const StreamInfo& s, bool created) {
  Json j = stream_object(s);
  j["created"] = created;
  return json_text(j);
}

std::string stream_closed_json(const StreamInfo& s, bool closed_now, std::string_view closing_hash) {
  Json j = stream_object(s);
  j["closed_now"] = closed_now;
  j["closing_hash"] = std::string(closing_hash);
  return json_text(j);
}

std::string stream_list_json(const std::vector<StreamInfo>& streams) {
  Json j;
  j["streams"] = Json::array();
  for (const auto& s : streams) j["streams"].push_back(stream_object(s));
  return json_text(j);
}

std::string next_level_json(std::string_view stream, std::uint64_t step, double level) {
  Json j;
  j["stream"] = std::string(stream);
  j["step"] = step;
  j["level"] = number(level);
  return json_text(j);
}

std::string history_row_json(const DecisionRecord& r, std::string_view rule) {
  return json_text(history_row_object(r, rule));
}

std::string history_row_csv(const DecisionRecord& r, std::string_view rule) {
  return csv_row(r, rule) + ',' + format_timestamp(r.decided_at_ms) + ',' + std::to_string(r.launch) + ',' +
         format_timestamp(r.launched_at_ms) + (r.abandoned ? ",1" : ",0");
}

std::string launch_json(const LaunchResult& l) {
  Json j;
  j["stream"] = l.stream;
  j["id"] = l.id;
  j["launch"] = l.launch;
  j["level"] = number(l.level);
  j["wealth"] = number(l.wealth);
  j["launched_at"] = format_timestamp(l.launched_at_ms);
  j["step"] = l.step;
  j["repeat"] = l.repeat;
  return json_text(j);
}

std::string abandon_json(const AbandonResult& a) {
  Json j;
  j["stream"] = a.stream;
  j["id"] = a.id;
  j["launch"] = a.launch;
  j["level"] = number(a.level);
  j["wealth"] = number(a.wealth);
  j["launched_at"] = format_timestamp(a.launched_at_ms);
  j["abandoned_at"] = format_timestamp(a.abandoned_at_ms);
  j["step"] = a.step;
  j["repeat"] = a.repeat;
  return json_text(j);
}

namespace {
Json running_object(std::string_view stream, const RunningEntry& r) {
  Json j;
  j["stream"] = std::string(stream);
  j["id"] = r.id;
  j["launch"] = r.launch;
  j["level"] = number(r.level);
  j["launched_at"] = format_timestamp(r.launched_at_ms);
  return j;
}
}  // namespace

std::string running_json(std::string_view stream, const RunningEntry& r) {
  return json_text(running_object(stream, r));
}

std::string running_list_json(std::string_view stream, const std::vector<RunningEntry>& running) {
  Json j;
  j["stream"] = std::string(stream);
  j["running"] = Json::array();
  for (const auto& r : running) j["running"].push_back(running_object(stream, r));
  return json_text(j);
}

std::string running_csv(const RunningEntry& r) {
  std::string row = csv_field(r.id);
  row += ',';
  row += std::to_string(r.launch);
  row += ',';
  append_csv_number(row, r.level);
  row += ',';
  row += format_timestamp(r.launched_at_ms);
  return row;
}

std::string history_page_json(std::string_view stream, std::uint64_t from, std::uint64_t limit,
                              const HistoryPage& page, std::string_view rule) {
  Json j;
  j["stream"] = std::string(stream);
  j["from"] = from;
  j["limit"] = limit;
  j["total"] = page.total;
  j["next_step"] = page.next_step == 0 ? Json(nullptr) : Json(page.next_step);
  j["decisions"] = Json::array();
  for (const auto& r : page.records) j["decisions"].push_back(history_row_object(r, rule));
  return json_text(j);
}

std::string verify_json(std::string_view stream, const VerifyReport& v,
                        const std::optional<ChainHashAt>& at_step) {
  Json j;
  j["stream"] = std::string(stream);
  j["ok"] = v.ok;
  j["steps"] = v.steps;
  if (v.ok) {
    j["first_bad_step"] = nullptr;
    j["problem"] = nullptr;
    j["chain_hash"] = v.chain_hash;
    if (v.closed_at_ms) {
      j["closed_at"] = format_timestamp(*v.closed_at_ms);
      j["closing_hash"] = v.closing_hash;
    }
    j["anchors_checked"] = v.anchors_checked;
  } else {
    j["first_bad_step"] = v.first_bad_step;
    j["problem"] = v.problem;
    j["chain_hash"] = nullptr;
  }
  if (at_step) {
    j["at_step"] = at_step->step;
    j["chain_hash_at_step"] = at_step->chain_hash;
  }
  return json_text(j);
}

std::string error_json(std::string_view code, std::string_view message) {
  Json j;
  j["error"]["code"] = std::string(code);
  j["error"]["message"] = std::string(message);
  return json_text(j);
}

std::string error_json(const Error& e) { return error_json(code_word(e), e.message); }

std::string line_error_json(std::uint64_t line, std::string_view message) {
  Json j;
  j["line"] = line;
  j["error"] = std::string(message);
  return json_text(j);
}

std::string health_json(const std::optional<std::string>& storage_failure) {
  Json j;
  if (!storage_failure) {
    j["status"] = "ok";
    return json_text(j);
  }
  j["status"] = "failing";
  j["error"]["code"] = "storage";
  j["error"]["message"] = *storage_failure;
  return json_text(j);
}

}  // namespace alphaledger
