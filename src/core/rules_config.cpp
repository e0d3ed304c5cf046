// Rule names, configurations and the checks of p-values and e-values (docs/methods.md sections 1,
// 2, 4, 5.2, 6, 7 and 15; docs/rules.md). The Rule itself is in rules.cpp; the other parts are
// named in core/rules_internal.hpp.
#include <array>
#include <charconv>
#include <cmath>

#include "alphaledger/rules.hpp"
#include "core/rules_internal.hpp"

namespace alphaledger {
namespace {

using rules_detail::is_deposit_rule;

struct RuleNameEntry {
  RuleKind kind;
  std::string_view name;
};
constexpr std::array<RuleNameEntry, 7> kRuleNames = {{
    {RuleKind::kAlphaSpending, "alpha-spending"},
    {RuleKind::kAlphaInvesting, "alpha-investing"},
    {RuleKind::kLond, "lond"},
    {RuleKind::kLordPlusPlus, "lord++"},
    {RuleKind::kSaffron, "saffron"},
    {RuleKind::kAddis, "addis"},
    {RuleKind::kELond, "e-lond"},
}};

std::string num(double v) {
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v);
  return std::string(buf, ptr);
}

}  // namespace

std::string_view rule_name(RuleKind kind) {
  for (const auto& e : kRuleNames)
    if (e.kind == kind) return e.name;
  return "unknown";
}

Result<RuleKind> parse_rule_name(std::string_view name) {
  for (const auto& e : kRuleNames)
    if (e.name == name) return e.kind;
  return invalid_input("unknown rule '" + std::string(name) +
                       "'; accepted: alpha-spending, alpha-investing, lond, lord++, saffron, addis, e-lond");
}

std::string_view evaluation_name(Evaluation e) { return e == Evaluation::kFast ? "fast" : "exact"; }

Result<Evaluation> parse_evaluation(std::string_view name) {
  if (name == "exact") return Evaluation::kExact;
  if (name == "fast") return Evaluation::kFast;
  return invalid_input("evaluation must be exact or fast, got '" + std::string(name) + "'");
}

std::string default_spending(RuleKind kind) {
  switch (kind) {
    case RuleKind::kAlphaSpending:
      return "power:1.6";
    case RuleKind::kLond:
    case RuleKind::kELond:
      return "jm";
    case RuleKind::kLordPlusPlus:
      return "jm";
    case RuleKind::kSaffron:
      return "power:1.6";
    case RuleKind::kAddis:
      return "power-shift:1.6";
    case RuleKind::kAlphaInvesting:
      return "";
  }
  return "";
}

bool rule_takes(RuleKind kind, std::string_view parameter) {
  if (parameter == "alpha") return true;
  if (parameter == "initial_wealth") return is_deposit_rule(kind) || kind == RuleKind::kAlphaInvesting;
  if (parameter == "candidate_threshold") return kind == RuleKind::kSaffron || kind == RuleKind::kAddis;
  if (parameter == "discard_threshold") return kind == RuleKind::kAddis;
  if (parameter == "payout") return kind == RuleKind::kAlphaInvesting;
  if (parameter == "spending") return kind != RuleKind::kAlphaInvesting;
  if (parameter == "evaluation") return is_deposit_rule(kind);
  return false;
}

Result<RuleConfig> resolve_config(const RuleSpec& spec) {
  auto kind = parse_rule_name(spec.rule);
  if (!kind) return kind.error();
  RuleConfig c;
  c.kind = *kind;
  const std::string rn(spec.rule);
  auto refuse_unused = [&](bool given, std::string_view param) -> Status {
    if (given && !rule_takes(c.kind, param)) {
      return invalid_input(std::string(param) + " does not apply to " + rn);
    }
    return {};
  };
  for (auto [given, param] : std::array<std::pair<bool, std::string_view>, 6>{
           {{spec.initial_wealth.has_value(), "initial_wealth"},
            {spec.candidate_threshold.has_value(), "candidate_threshold"},
            {spec.discard_threshold.has_value(), "discard_threshold"},
            {spec.payout.has_value(), "payout"},
            {spec.spending.has_value(), "spending"},
            {spec.evaluation.has_value(), "evaluation"}}}) {
    if (auto s = refuse_unused(given, param); !s) return s.error();
  }

  c.alpha = spec.alpha.value_or(0.05);
  if (!(c.alpha > 0 && c.alpha < 1)) {
    return invalid_input("alpha must satisfy 0 < alpha < 1, got " + num(c.alpha));
  }
  if (c.kind == RuleKind::kAlphaInvesting) {
    c.initial_wealth = spec.initial_wealth.value_or(c.alpha * (1 - c.alpha));
    c.payout = spec.payout.value_or(c.alpha);
    if (!(c.initial_wealth > 0 && c.initial_wealth <= c.alpha)) {
      return invalid_input("initial_wealth must satisfy 0 < W0 <= alpha = " + num(c.alpha) +
                           " for alpha-investing, got " + num(c.initial_wealth));
    }
    if (!(c.payout >= 0 && c.payout <= c.alpha)) {
      return invalid_input("payout must satisfy 0 <= payout <= alpha = " + num(c.alpha) +
                           " for alpha-investing, got " + num(c.payout));
    }
  }
  if (is_deposit_rule(c.kind)) {
    c.initial_wealth = spec.initial_wealth.value_or(c.alpha / 2);
    if (!(c.initial_wealth >= 0 && c.initial_wealth <= c.alpha)) {
      return invalid_input("initial_wealth must satisfy 0 <= W0 <= alpha = " + num(c.alpha) + " for " + rn +
                           ", got " + num(c.initial_wealth));
    }
    auto e = parse_evaluation(spec.evaluation.value_or("exact"));
    if (!e) return e.error();
    c.evaluation = *e;
  }
  if (c.kind == RuleKind::kSaffron) {
    c.candidate_threshold = spec.candidate_threshold.value_or(0.5);
    if (!(c.candidate_threshold > 0 && c.candidate_threshold < 1)) {
      return invalid_input("candidate_threshold must satisfy 0 < lambda < 1 for saffron, got " +
                           num(c.candidate_threshold));
    }
  }
  if (c.kind == RuleKind::kAddis) {
    c.candidate_threshold = spec.candidate_threshold.value_or(0.25);
    c.discard_threshold = spec.discard_threshold.value_or(0.5);
    if (!(c.discard_threshold > 0 && c.discard_threshold <= 1)) {
      return invalid_input("discard_threshold must satisfy 0 < tau <= 1 for addis, got " +
                           num(c.discard_threshold));
    }
    if (!(c.candidate_threshold > 0 && c.candidate_threshold < c.discard_threshold)) {
      return invalid_input("candidate_threshold must satisfy 0 < lambda < tau = " + num(c.discard_threshold) +
                           " for addis, got " + num(c.candidate_threshold));
    }
  }
  if (c.kind != RuleKind::kAlphaInvesting) {
    auto seq = SpendingSequence::parse(spec.spending.value_or(default_spending(c.kind)));
    if (!seq) return seq.error();
    c.spending = seq->spec();
  }
  return c;
}

bool rule_takes_e_values(RuleKind kind) { return kind == RuleKind::kELond; }

Status validate_e_value(double e) {
  if (!(e >= 0.0) || !std::isfinite(e)) {
    return invalid_input("e_value must be a finite number >= 0, got " + num(e));
  }
  return {};
}

Status validate_p_value(double p) {
  if (!(p >= 0.0 && p <= 1.0)) {
    return invalid_input("p_value must be a number in [0, 1], got " + num(p));
  }
  return {};
}

}  // namespace alphaledger
