// Launch-time events of the online rules: launch, finish, abandon (docs/methods.md section 9.1;
// docs/rules.md, "Launch-time levels"). record() in rules.cpp is launch-then-finish fused.
#include <algorithm>
#include <string>

#include "alphaledger/rules.hpp"

namespace alphaledger {
namespace {

bool advances_clock_on_outcome(RuleKind kind) {
  return kind == RuleKind::kSaffron || kind == RuleKind::kAddis;
}

}  // namespace

double Rule::wealth() const {
  if (config_.kind == RuleKind::kAlphaInvesting) return wealth_ - investing_reserved_;
  return wealth_;
}

void Rule::clock_advance_for(double level) {
  const double lambda = config_.candidate_threshold;
  const double scale = config_.kind == RuleKind::kSaffron ? 1 - lambda : config_.discard_threshold - lambda;
  wealth_ -= level / scale;
  advance(true, false);
}

Reservation Rule::launch() {
  if (advances_clock_on_outcome(config_.kind)) {
    // The previous launch is still running and has not advanced the clock: it might turn out
    // clock-advancing, so it advances the clock now, before this level is computed.
    const auto last = running_.find(step_);
    if (last != running_.end() && !last->second.advanced) {
      last->second.advanced = true;
      clock_advance_for(last->second.level);
    }
  }
  ensure_window();
  Reservation r;
  r.level = level_now();
  r.launch = ++step_;
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      wealth_ -= config_.alpha * sequence_->gamma(r.launch);
      break;
    case RuleKind::kAlphaInvesting:
      // Paid at launch; a rejection refunds it at finish (together: the synchronous update).
      investing_reserved_ += r.level / (1 - r.level);
      break;
    case RuleKind::kLordPlusPlus:
      wealth_ -= r.level;
      advance(true, false);
      break;
    case RuleKind::kSaffron:
    case RuleKind::kAddis:
      break;
  }
  running_.emplace_hint(running_.end(), r.launch, Running{r.level, false});
  r.wealth = wealth();
  return r;
}

Status Rule::check_running(std::uint64_t launch, std::string_view event) const {
  if (launch == 0 || launch > step_) {
    return invalid_input("cannot " + std::string(event) + " launch number " + std::to_string(launch) +
                         ": no test was launched with it (launch numbers so far: 1.." +
                         std::to_string(step_) + ")");
  }
  if (running_.find(launch) == running_.end()) {
    return conflict("cannot " + std::string(event) + " launch number " + std::to_string(launch) +
                   ": that test is no longer running (it was already finished or abandoned)");
  }
  return {};
}

Result<Outcome> Rule::finish(std::uint64_t launch, double p) {
  if (rule_takes_e_values(config_.kind)) {
    return invalid_input(std::string(rule_name(config_.kind)) + " takes e-values, not p-values");
  }
  if (auto s = validate_p_value(p); !s) return s.error();
  if (auto s = check_running(launch, "finish"); !s) return s.error();
  return finish_running(launch, p);
}

Result<Outcome> Rule::finish_e(std::uint64_t launch, double e) {
  if (!rule_takes_e_values(config_.kind)) {
    return invalid_input(std::string(rule_name(config_.kind)) + " takes p-values, not e-values");
  }
  if (auto s = validate_e_value(e); !s) return s.error();
  if (auto s = check_running(launch, "finish"); !s) return s.error();
  return finish_running(launch, e);
}

Outcome Rule::finish_running(std::uint64_t launch, double p) {
  const auto it = running_.find(launch);
  const Running run = it->second;
  running_.erase(it);
  Outcome o;
  o.step = launch;
  o.level = run.level;
  o.rejected = rejects(p, run.level);
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      break;
    case RuleKind::kAlphaInvesting: {
      const double paid = run.level / (1 - run.level);
      if (o.rejected) {
        wealth_ += config_.payout;
        last_rejection_ = std::max(last_rejection_, launch);
      } else {
        wealth_ = std::max(0.0, wealth_ - paid);
      }
      investing_reserved_ = running_.empty() ? 0.0 : std::max(0.0, investing_reserved_ - paid);
      break;
    }
    case RuleKind::kLordPlusPlus:
      if (o.rejected) advance(false, true);
      break;
    case RuleKind::kSaffron:
    case RuleKind::kAddis: {
      const double lambda = config_.candidate_threshold;
      const bool advancing =
          config_.kind == RuleKind::kSaffron ? p > lambda : (p > lambda && p <= config_.discard_threshold);
      if (advancing && !run.advanced) clock_advance_for(run.level);
      // A rejection is a candidate (p <= level <= lambda), so it never advanced the clock above.
      if (o.rejected) advance(false, true);
      break;
    }
  }
  if (o.rejected) ++rejections_;
  o.wealth = wealth();
  return o;
}

Status Rule::abandon(std::uint64_t launch) {
  if (auto s = check_running(launch, "abandon"); !s) return s;
  const auto it = running_.find(launch);
  const Running run = it->second;
  running_.erase(it);
  if (config_.kind == RuleKind::kAlphaInvesting) {
    // The payment made at launch stays spent, as for a test that did not reject.
    const double paid = run.level / (1 - run.level);
    wealth_ = std::max(0.0, wealth_ - paid);
    investing_reserved_ = running_.empty() ? 0.0 : std::max(0.0, investing_reserved_ - paid);
  }
  if (advances_clock_on_outcome(config_.kind) && !run.advanced) clock_advance_for(run.level);
  return {};
}

std::vector<RunningTest> Rule::running() const {
  std::vector<RunningTest> out;
  out.reserve(running_.size());
  for (const auto& [launch, run] : running_) out.push_back({launch, run.level});
  return out;
}

double Rule::reserved() const {
  double sum = 0;
  for (const auto& [launch, run] : running_) sum += run.level;
  return sum;
}

}  // namespace alphaledger
