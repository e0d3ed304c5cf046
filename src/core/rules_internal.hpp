// Internal to the online rules (src/core/rules*.cpp): what more than one of their files needs.
// rules.cpp holds the Rule's levels and record(), rules_config.cpp names and configurations,
// rules_deposit.cpp the deposit sums of lord++/saffron/addis, rules_state.cpp the state coding,
// rules_launch.cpp the launch-time events.
#pragma once

#include <cstddef>

#include "alphaledger/rules.hpp"

namespace alphaledger::rules_detail {

// The rules whose level is a sum over deposits (each rejection deposits wealth): lord++, saffron, addis.
inline bool is_deposit_rule(RuleKind k) {
  return k == RuleKind::kLordPlusPlus || k == RuleKind::kSaffron || k == RuleKind::kAddis;
}

// Exact mode sums for a window of future clocks at once. A window of n lanes costs n times one
// sum, so a Rule that decides one test (a ledger opened for one decision) starts small.
inline constexpr std::size_t kMinLanes = 8;
inline constexpr std::size_t kMaxLanes = 1024;

// Fast mode sums whole vectors of four terms (rules_deposit.cpp): n rounded up to them.
inline constexpr std::size_t whole_vectors(std::size_t n) { return (n + 3) / 4 * 4; }

// For tests: fast-mode Rules made while this is on, and fast-mode sums done while it is on, use
// the baseline kernels even where the processor has AVX2, so a test can compare their bits.
void use_baseline_kernels(bool on);

}  // namespace alphaledger::rules_detail
