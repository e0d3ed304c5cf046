// The coding of a Rule's state (docs/ledger-format.md "Rule state (inside the head)"): encode_state and its
// versions 1 and 2, the state with the running tests kept apart (version 3), and restoring any of
// them with every check. The rest of the rules is named in core/rules_internal.hpp.
#include <string>

#include "alphaledger/rules.hpp"
#include "core/bytes.hpp"
#include "core/rules_internal.hpp"

namespace alphaledger {
namespace {

// Stored on disk: bump when the layout changes. Version 1: counters and accumulators. Version 2:
// version 1's fields, then the running tests (count, then launch number, level, flags each) and
// alpha-investing's reserved payment. A state without running tests is always written as version
// 1, so synchronous streams keep the bytes they had before launch-time levels existed.
constexpr std::uint8_t kStateVersion = 2;
constexpr std::uint8_t kStateVersionSynchronous = 1;
// The running tests kept apart (encode_state_without_running): counts and flags only.
constexpr std::uint8_t kStateVersionApart = 3;

using rules_detail::is_deposit_rule;
using rules_detail::kMinLanes;

// Little-endian coding of the state (core/bytes.hpp).
using bytes::put_f64;
using bytes::put_u64;
using bytes::Reader;

}  // namespace

Status Rule::restore_running(std::string_view bytes) {
  Reader r{bytes};
  const std::uint64_t n = r.u64();
  if (!r.ok || n > r.in.size() / 17) return corruption("rule state is truncated (running tests)");
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  std::uint64_t previous = 0;
  for (std::uint64_t i = 0; i < n; ++i) {
    const std::uint64_t launch = r.u64();
    const double level = r.f64();
    const std::uint8_t flags = r.u8();
    if (!r.ok) return corruption("rule state is truncated (running tests)");
    if (launch <= previous || launch > step_) {
      return corruption("rule state is inconsistent: running test " + std::to_string(launch) +
                        " is out of order or beyond the " + std::to_string(step_) + " tests launched");
    }
    if (!(level >= 0.0 && level <= 1.0) || flags > 1 || (flags == 1 && !clocked) ||
        (clocked && flags == 0 && launch != step_)) {
      return corruption("rule state is inconsistent: running test " + std::to_string(launch) +
                        " has an impossible level or clock flag");
    }
    running_.emplace_hint(running_.end(), launch, Running{level, flags == 1});
    previous = launch;
  }
  investing_reserved_ = r.f64();
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes");
  const bool investing = config_.kind == RuleKind::kAlphaInvesting;
  if (!(investing_reserved_ >= 0.0 && investing_reserved_ < 1e300) ||
      (!investing && investing_reserved_ != 0.0) ||
      (investing && running_.empty() && investing_reserved_ != 0)) {
    return corruption("rule state is inconsistent: impossible reserved wealth");
  }
  return {};
}

void Rule::encode_counters(std::string& out, std::uint8_t version) const {
  out.push_back(static_cast<char>(version));
  out.push_back(static_cast<char>(config_.kind));
  out.push_back(static_cast<char>(config_.evaluation));
  put_u64(out, step_);
  put_u64(out, rejections_);
  put_f64(out, wealth_);
  put_u64(out, last_rejection_);
  put_u64(out, clock_);
  put_u64(out, deposit_clock_.size());
  for (auto c : deposit_clock_) put_u64(out, c);
  // The mixture's sizes: the slots that fill the last block are always +0 and not stored.
  const std::size_t nh = mixture_ != nullptr ? mixture_->head.size() : 0;
  const std::size_t na = mixture_ != nullptr ? mixture_->weight.size() : 0;
  put_u64(out, nh);
  for (std::size_t i = 0; i < nh; ++i) put_f64(out, head_at()[i]);
  put_u64(out, na);
  for (std::size_t k = 0; k < na; ++k) put_f64(out, acc_at()[k]);
}

std::string Rule::encode_state() const {
  std::string out;
  const bool synchronous = running_.empty() && investing_reserved_ == 0.0;
  encode_counters(out, synchronous ? kStateVersionSynchronous : kStateVersion);
  if (synchronous) return out;
  put_u64(out, running_.size());
  for (const auto& [launch, r] : running_) {
    put_u64(out, launch);
    put_f64(out, r.level);
    out.push_back(static_cast<char>(r.advanced ? 1 : 0));
  }
  put_f64(out, investing_reserved_);
  return out;
}

std::string Rule::encode_state_without_running() const {
  std::string out;
  encode_counters(out, kStateVersionApart);
  put_u64(out, running_.size());
  // Only the test launched last can be running without having advanced the clock (saffron,
  // addis: the next launch advances it), so one flag stands for every running test's flag.
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  const auto last = running_.find(step_);
  out.push_back(static_cast<char>(clocked && last != running_.end() && !last->second.advanced ? 1 : 0));
  put_f64(out, investing_reserved_);
  return out;
}

Status Rule::restore_state(std::string_view bytes) { return restore_any(bytes, nullptr); }

Status Rule::restore_state_without_running(std::string_view bytes, std::span<const RunningTest> running) {
  return restore_any(bytes, &running);
}

Status Rule::restore_apart(std::string_view bytes, std::span<const RunningTest> running) {
  Reader r{bytes};
  const std::uint64_t n = r.u64();
  const std::uint8_t last_pending = r.u8();
  investing_reserved_ = r.f64();
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes (running tests)");
  if (n != running.size()) {
    return corruption("rule state counts " + std::to_string(n) + " running tests but " +
                      std::to_string(running.size()) + " are stored");
  }
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  if (last_pending > 1 || (last_pending == 1 && !clocked)) {
    return corruption("rule state is inconsistent: impossible clock flag for the test launched last");
  }
  std::uint64_t previous = 0;
  for (const RunningTest& t : running) {
    if (t.launch <= previous || t.launch > step_) {
      return corruption("rule state is inconsistent: running test " + std::to_string(t.launch) +
                        " is out of order or beyond the " + std::to_string(step_) + " tests launched");
    }
    if (!(t.level >= 0.0 && t.level <= 1.0)) {
      return corruption("rule state is inconsistent: running test " + std::to_string(t.launch) +
                        " has an impossible level");
    }
    const bool advanced = clocked && !(last_pending == 1 && t.launch == step_);
    running_.emplace_hint(running_.end(), t.launch, Running{t.level, advanced});
    previous = t.launch;
  }
  if (last_pending == 1 && running_.find(step_) == running_.end()) {
    return corruption("rule state is inconsistent: the test launched last is flagged but not running");
  }
  const bool investing = config_.kind == RuleKind::kAlphaInvesting;
  if (!(investing_reserved_ >= 0.0 && investing_reserved_ < 1e300) ||
      (!investing && investing_reserved_ != 0.0) ||
      (investing && running_.empty() && investing_reserved_ != 0)) {
    return corruption("rule state is inconsistent: impossible reserved wealth");
  }
  return {};
}

Status Rule::restore_any(std::string_view bytes, const std::span<const RunningTest>* running) {
  Reader r{bytes};
  const auto version = r.u8();
  const auto kind = r.u8();
  const auto evaluation = r.u8();
  if (!r.ok || (version != kStateVersion && version != kStateVersionSynchronous &&
                version != kStateVersionApart)) {
    return corruption("rule state has format version " + std::to_string(version) +
                      ", this build reads versions 1, 2 and 3");
  }
  if ((version == kStateVersionApart) != (running != nullptr)) {
    return corruption(version == kStateVersionApart
                          ? "rule state of version 3 keeps its running tests apart, and none were given"
                          : "rule state of version " + std::to_string(version) +
                                " holds its running tests itself, yet a list was given apart");
  }
  if (kind != static_cast<std::uint8_t>(config_.kind) ||
      evaluation != static_cast<std::uint8_t>(config_.evaluation)) {
    return corruption("rule state belongs to another rule or evaluation mode");
  }
  Rule next = *this;
  next.step_ = r.u64();
  next.rejections_ = r.u64();
  next.wealth_ = r.f64();
  next.last_rejection_ = r.u64();
  next.clock_ = r.u64();
  const std::uint64_t nd = r.u64();
  if (!r.ok || nd > r.in.size() / 8) return corruption("rule state is truncated (deposits)");
  next.deposit_clock_.assign(nd, 0);
  for (auto& c : next.deposit_clock_) c = r.u64();
  // The mixture's sizes; the slots past them stay +0 (encode_state()).
  const std::uint64_t nh = r.u64();
  if (!r.ok || nh != (mixture_ != nullptr ? mixture_->head.size() : 0))
    return corruption("rule state has the wrong head size");
  for (std::size_t i = 0; i < nh; ++i) next.head_at()[i] = r.f64();
  const std::uint64_t na = r.u64();
  if (!r.ok || na != (mixture_ != nullptr ? mixture_->weight.size() : 0))
    return corruption("rule state has the wrong accumulator count");
  for (std::size_t k = 0; k < na; ++k) next.acc_at()[k] = r.f64();
  next.running_.clear();
  next.investing_reserved_ = 0;
  if (version == kStateVersion) {
    if (auto s = next.restore_running(r.in); !s) return s.error();
    r.in = {};
  } else if (version == kStateVersionApart) {
    if (auto s = next.restore_apart(r.in, *running); !s) return s.error();
    r.in = {};
  }
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes");
  const bool exact_deposits = is_deposit_rule(config_.kind) && mixture_ == nullptr;
  if (exact_deposits && (nd != next.rejections_ + 1)) {
    return corruption("rule state is inconsistent: deposit count does not match rejections");
  }
  if (next.mixture_ != nullptr) {
    next.fast_sum_ = next.mixture_sum();
    next.set_head_mask();
  }
  next.window_.clear();
  next.gamma_table_.reset();
  next.next_lanes_ = kMinLanes;
  *this = std::move(next);
  return {};
}

}  // namespace alphaledger
