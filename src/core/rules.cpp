// The online rules (docs/methods.md sections 1, 2, 4, 5.2, 6, 7 and 15; docs/rules.md): a Rule's
// construction, its level and record(). Names and configurations are in rules_config.cpp, the
// deposit sums in rules_deposit.cpp, the state coding in rules_state.cpp, the launch-time events in
// rules_launch.cpp (core/rules_internal.hpp: what they share).
#include "alphaledger/rules.hpp"

#include <algorithm>

#include "core/rules_internal.hpp"

namespace alphaledger {

using rules_detail::is_deposit_rule;

Rule::Rule(const RuleConfig& config) : config_(config) {
  if (config_.kind != RuleKind::kAlphaInvesting) {
    // resolve_config() validated the spec; a failure here is a programming error.
    sequence_ = SpendingSequence::shared(config_.spending).value();
    if (is_deposit_rule(config_.kind) && config_.evaluation == Evaluation::kFast) {
      mixture_ = &sequence_->mixture();
    }
  }
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      wealth_ = config_.alpha;
      break;
    case RuleKind::kAlphaInvesting:
      wealth_ = config_.initial_wealth;
      break;
    default:
      wealth_ = config_.initial_wealth;
      if (mixture_ != nullptr) {
        init_fast();
        if (head_slots_ == 0) {
          std::fill_n(acc_at(), mixture_->weight.size(), config_.initial_wealth);
        } else {
          head_at()[0] = config_.initial_wealth;
          set_head_mask();
        }
        fast_sum_ = mixture_sum();
      } else {
        deposit_clock_.push_back(0);
      }
  }
}

double Rule::level_now() const {
  const std::uint64_t t = step_ + 1;
  const double a = config_.alpha;
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
      return a * sequence_->gamma(t);
    case RuleKind::kLond:
    case RuleKind::kELond:  // e-LOND's level is LOND's (Xu & Ramdas 2024)
      return a * sequence_->gamma(t) * static_cast<double>(rejections_ + 1);
    case RuleKind::kAlphaInvesting: {
      const double w = std::max(wealth_ - investing_reserved_, 0.0);
      const double policy = w / static_cast<double>(1 + t - last_rejection_);
      return std::min(policy, w / (1 + w));
    }
    case RuleKind::kLordPlusPlus:
      return deposit_sum();
    case RuleKind::kSaffron: {
      const double lambda = config_.candidate_threshold;
      return std::min(lambda, (1 - lambda) * deposit_sum());
    }
    case RuleKind::kAddis: {
      const double lambda = config_.candidate_threshold;
      return std::min(lambda, (config_.discard_threshold - lambda) * deposit_sum());
    }
  }
  return 0.0;
}

double Rule::next_level() const {
  const auto last = running_.find(step_);
  if (last != running_.end() && !last->second.advanced &&
      (config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis)) {
    // The last launched test is still running: the next launch advances the clock first.
    Rule preview = *this;
    return preview.launch().level;
  }
  return level_now();
}

Outcome Rule::record_e(double e) { return record(e); }  // rejects() reads e as an e-value

Outcome Rule::record_any(double p) {
  if (!running_.empty()) {
    // Tests are running: the general path (rules_launch.cpp). Without running tests the code
    // below is the same sequence of operations, fused; tests/core/test_launch.cpp compares bits.
    const Reservation r = launch();
    return finish_running(r.launch, p);
  }
  ensure_window();
  Outcome o;
  o.level = level_now();
  o.rejected = rejects(p, o.level);
  o.step = ++step_;
  const double a = config_.alpha;
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      wealth_ -= a * sequence_->gamma(o.step);
      break;
    case RuleKind::kAlphaInvesting:
      if (o.rejected) {
        wealth_ += config_.payout;
        last_rejection_ = o.step;
      } else {
        wealth_ = std::max(0.0, wealth_ - o.level / (1 - o.level));
      }
      break;
    case RuleKind::kLordPlusPlus:
      wealth_ -= o.level;
      advance(true, o.rejected);
      break;
    case RuleKind::kSaffron: {
      const double lambda = config_.candidate_threshold;
      const bool tick = p > lambda;
      if (tick) wealth_ -= o.level / (1 - lambda);
      advance(tick, o.rejected);
      break;
    }
    case RuleKind::kAddis: {
      const double lambda = config_.candidate_threshold;
      const double tau = config_.discard_threshold;
      const bool tick = p > lambda && p <= tau;
      if (tick) wealth_ -= o.level / (tau - lambda);
      advance(tick, o.rejected);
      break;
    }
  }
  if (o.rejected) ++rejections_;
  o.wealth = wealth_;
  return o;
}

}  // namespace alphaledger
