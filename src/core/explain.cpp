// The level of a rule as its display with the numbers filled in (alphaledger/explain.hpp). The
// terms are read from the rule's encoded state (Rule::encode_state(), docs/ledger-format.md), the
// one complete, versioned description of where a rule stands, so the rule keeps no second
// bookkeeping for explanations.
#include "alphaledger/explain.hpp"

#include <algorithm>
#include <bit>
#include <cstring>

#include "core/bytes.hpp"

namespace alphaledger {
namespace {

// The fields of an encoded rule state (format versions 1 and 2, rules_state.cpp).
struct State {
  std::uint64_t step = 0;
  std::uint64_t rejections = 0;
  double wealth = 0;
  std::uint64_t last_rejection = 0;
  std::uint64_t clock = 0;
  std::vector<std::uint64_t> deposit_clock;
  std::vector<double> head;
  std::vector<double> accumulator;
  struct Running {
    std::uint64_t launch = 0;
    bool advanced = false;
  };
  std::vector<Running> running;
  double investing_reserved = 0;
};

using Bytes = bytes::Reader;

Result<State> decode(const Rule& rule) {
  const std::string bytes = rule.encode_state();
  Bytes b{bytes};
  State s;
  const std::uint8_t version = b.u8();
  b.u8();  // kind
  b.u8();  // evaluation
  s.step = b.u64();
  s.rejections = b.u64();
  s.wealth = b.f64();
  s.last_rejection = b.u64();
  s.clock = b.u64();
  std::uint64_t n = b.u64();
  if (!b.room_for(n, 8)) return corruption("explain: rule state is truncated (deposits)");
  for (std::uint64_t i = 0; i < n; ++i) s.deposit_clock.push_back(b.u64());
  n = b.u64();
  if (!b.room_for(n, 8)) return corruption("explain: rule state is truncated (head)");
  for (std::uint64_t i = 0; i < n; ++i) s.head.push_back(b.f64());
  n = b.u64();
  if (!b.room_for(n, 8)) return corruption("explain: rule state is truncated (accumulators)");
  for (std::uint64_t i = 0; i < n; ++i) s.accumulator.push_back(b.f64());
  if (version == 2) {
    n = b.u64();
    if (!b.room_for(n, 17)) return corruption("explain: rule state is truncated (running tests)");
    for (std::uint64_t i = 0; i < n; ++i) {
      State::Running r;
      r.launch = b.u64();
      b.f64();
      r.advanced = b.u8() == 1;
      s.running.push_back(r);
    }
    s.investing_reserved = b.f64();
  }
  if (!b.ok || !b.in.empty() || (version != 1 && version != 2)) {
    return corruption("explain: the rule state has a layout this build does not know");
  }
  return s;
}

LevelTerm make_term(TermKind kind, std::uint64_t lag, double weight, double base, double scale, double amount) {
  LevelTerm t;
  t.kind = kind;
  t.lag = lag;
  t.weight = weight;
  t.base = base;
  t.scale = scale;
  t.amount = amount;
  return t;
}

// Deposit terms of lord++, saffron and addis, scaled by the rule's factor.
void deposit_terms(const Rule& rule, const State& s, double scale, std::span<const std::uint64_t> rejected,
                   std::vector<LevelTerm>& out) {
  const RuleConfig& c = rule.config();
  if (c.evaluation == Evaluation::kFast) {
    const GeometricMixture& m = rule.sequence()->mixture();
    for (std::size_t i = 0; i < s.head.size(); ++i) {
      if (s.head[i] == 0.0) continue;
      out.push_back(make_term(TermKind::kHeadDeposits, i + 1, m.head[i], s.head[i], scale,
                              scale * (s.head[i] * m.head[i])));
    }
    for (std::size_t k = 0; k < s.accumulator.size(); ++k) {
      if (s.accumulator[k] == 0.0) continue;
      out.push_back(make_term(TermKind::kMixtureTail, 0, m.coefficient[k], s.accumulator[k], scale,
                              scale * (m.coefficient[k] * s.accumulator[k])));
    }
    return;
  }
  for (std::size_t d = 0; d < s.deposit_clock.size(); ++d) {
    LevelTerm t;
    t.kind = d == 0 ? TermKind::kInitialWealth : (d == 1 ? TermKind::kFirstDeposit : TermKind::kDeposit);
    t.rejection = d;
    if (d > 0 && d <= rejected.size()) t.test = rejected[d - 1];
    t.lag = 1 + s.clock - s.deposit_clock[d];
    t.weight = rule.sequence()->gamma(t.lag);
    t.base = d == 0 ? c.initial_wealth : (d == 1 ? c.alpha - c.initial_wealth : c.alpha);
    t.scale = scale;
    t.amount = scale * (t.base * t.weight);
    out.push_back(t);
  }
}

}  // namespace

std::string_view term_kind_name(TermKind kind) {
  switch (kind) {
    case TermKind::kInitialWealth:
      return "initial_wealth";
    case TermKind::kFirstDeposit:
      return "first_rejection_deposit";
    case TermKind::kDeposit:
      return "rejection_deposit";
    case TermKind::kHeadDeposits:
      return "recent_deposits";
    case TermKind::kMixtureTail:
      return "older_deposits";
    case TermKind::kSpending:
      return "spending";
    case TermKind::kRejectionsSoFar:
      return "rejections_so_far";
    case TermKind::kWealthShare:
      return "wealth_share";
  }
  return "term";
}

std::string_view level_display(RuleKind kind) {
  switch (kind) {
    case RuleKind::kAlphaSpending:
      return "alpha_t = alpha * gamma_t";
    case RuleKind::kAlphaInvesting:
      return "alpha_t = min(W / (1 + t - k*), W / (1 + W)), W the alpha-wealth not reserved, k* the last "
             "rejection";
    case RuleKind::kLond:
      return "alpha_t = alpha * gamma_t * (R + 1), R the rejections so far";
    case RuleKind::kELond:
      return "alpha_t = alpha * gamma_t * (R + 1), R the rejections so far; reject iff e >= 1 / alpha_t";
    case RuleKind::kLordPlusPlus:
      return "alpha_t = W0 gamma_(t) + (alpha - W0) gamma_(t - tau_1) + alpha sum_(j >= 2) gamma_(t - tau_j)";
    case RuleKind::kSaffron:
      return "alpha_t = min(lambda, (1 - lambda) (W0 gamma_(t - C_0) + (alpha - W0) gamma_(t - tau_1 - C_1) + "
             "alpha sum_(j >= 2) gamma_(t - tau_j - C_j))), lags counted on the clock of p-values > lambda";
    case RuleKind::kAddis:
      return "alpha_t = min(lambda, (tau - lambda) (W0 gamma_(S_t - C_0) + (alpha - W0) gamma_(S_t - kappa_1 - "
             "C_1) + alpha sum_(j >= 2) gamma_(S_t - kappa_j - C_j))), lags counted on the clock of p-values "
             "in (lambda, tau]";
  }
  return "";
}

Result<LevelExplanation> explain_next_level(const Rule& rule, std::span<const std::uint64_t> rejected_tests) {
  const RuleConfig& c = rule.config();
  auto state = decode(rule);
  if (!state) return state.error();
  // saffron/addis: a last launch still running advances the clock before the next level (as
  // Rule::next_level() does); abandoning it in a copy advances the clock the same way.
  if ((c.kind == RuleKind::kSaffron || c.kind == RuleKind::kAddis) && !state->running.empty() &&
      state->running.back().launch == state->step && !state->running.back().advanced) {
    Rule preview = rule;
    if (auto s = preview.abandon(state->step); !s) return s.error();
    auto advanced = decode(preview);
    if (!advanced) return advanced.error();
    advanced->step = state->step;
    state = std::move(advanced);
  }
  const State& s = *state;
  LevelExplanation e;
  e.rule = c.kind;
  e.evaluation = c.evaluation;
  e.test = s.step + 1;
  e.level = rule.next_level();
  e.running = rule.running();
  const double a = c.alpha;
  switch (c.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond: {
      const double g = rule.sequence()->gamma(e.test);
      e.terms.push_back(make_term(TermKind::kSpending, e.test, g, a, 1.0, a * g));
      if (c.kind != RuleKind::kAlphaSpending && s.rejections > 0) {
        LevelTerm t = make_term(TermKind::kRejectionsSoFar, e.test, g, a, 1.0,
                                a * g * static_cast<double>(s.rejections));
        t.rejection = s.rejections;
        e.terms.push_back(t);
      }
      break;
    }
    case RuleKind::kAlphaInvesting: {
      const double w = std::max(s.wealth - s.investing_reserved, 0.0);
      const double spread = static_cast<double>(1 + e.test - s.last_rejection);
      e.terms.push_back(make_term(TermKind::kWealthShare, e.test, 1 / spread, w, 1.0, w / spread));
      const double cap = w / (1 + w);
      if (cap < w / spread) e.cap = LevelCap{"w/(1+w)", cap};
      break;
    }
    case RuleKind::kLordPlusPlus:
      deposit_terms(rule, s, 1.0, rejected_tests, e.terms);
      break;
    case RuleKind::kSaffron:
    case RuleKind::kAddis: {
      const double lambda = c.candidate_threshold;
      const double scale = c.kind == RuleKind::kSaffron ? 1 - lambda : c.discard_threshold - lambda;
      deposit_terms(rule, s, scale, rejected_tests, e.terms);
      break;
    }
  }
  for (const auto& t : e.terms) e.uncapped += t.amount;
  if ((c.kind == RuleKind::kSaffron || c.kind == RuleKind::kAddis) && c.candidate_threshold < e.uncapped) {
    e.cap = LevelCap{"lambda", c.candidate_threshold};
  }
  return e;
}

}  // namespace alphaledger
