// Why a test gets the level it gets: the level of a rule written as its display (docs/methods.md,
// docs/rules.md) with the numbers filled in. Pure math: numbers in, numbers out.
//
// The terms' `amount` fields add up to the level before any cap (to rounding: the rule itself may
// sum in another order); `level` is the rule's own level (Rule::next_level()), bit for bit.
//
// Example (LORD++ with the defaults, after two rejections):
//   Rule rule(*resolve_config(RuleSpec{.rule = "lord++"}));
//   rule.record(0.0004);
//   rule.record(0.0012);
//   auto e = explain_next_level(rule);
//   e->terms.size();   // 3: the initial wealth and the deposits of the two rejections
//   e->level;          // 0.003292613799... (docs/methods.md section 14.3, t = 3)
#pragma once

#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger {

enum class TermKind {
  kInitialWealth,   // W0, deposited before the first test (lord++, saffron, addis)
  kFirstDeposit,    // alpha - W0, deposited at the first rejection
  kDeposit,         // alpha, deposited at each later rejection
  kHeadDeposits,    // fast evaluation: the wealth deposited a given number of clock ticks ago
  kMixtureTail,     // fast evaluation: older deposits, one component of the geometric mixture
  kSpending,        // alpha * gamma_t (alpha-spending, lond, e-lond)
  kRejectionsSoFar, // lond, e-lond: alpha * gamma_t for each rejection so far
  kWealthShare,     // alpha-investing: the available wealth spread over the tests since the last rejection
};

std::string_view term_kind_name(TermKind kind);  // "initial_wealth", "deposit", ... (JSON key values)

struct LevelTerm {
  TermKind kind = TermKind::kSpending;
  // Deposits (exact evaluation): which rejection made it, 1-based in the order rejections were
  // decided (0 for the initial wealth). kRejectionsSoFar: the number of rejections.
  std::uint64_t rejection = 0;
  // The test (launch number) that made the deposit, when the caller told which tests rejected.
  std::optional<std::uint64_t> test;
  // Deposits: clock ticks since the deposit plus one (the j of gamma_j); head deposits likewise;
  // spending terms: the test number t. 0 where it has no meaning (mixture tail, wealth share).
  std::uint64_t lag = 0;
  double weight = 0;  // gamma_j; for a mixture component its coefficient w_k (1 - r_k); for the wealth share 1/(1+t-k*)
  double base = 0;    // what the weight multiplies: the deposit, alpha, the accumulator A_k or the wealth
  double scale = 1;   // the rule's factor: 1, (1 - lambda) for saffron, (tau - lambda) for addis
  double amount = 0;  // scale * weight * base (times the count for kRejectionsSoFar)
};

struct LevelCap {
  std::string what;  // "lambda", "w/(1+w)"
  double value = 0;
};

struct LevelExplanation {
  RuleKind rule = RuleKind::kLordPlusPlus;
  Evaluation evaluation = Evaluation::kExact;
  std::uint64_t test = 0;  // the test number this level is for (tests so far + 1)
  double level = 0;        // Rule::next_level()
  double uncapped = 0;     // the sum of the amounts, in term order
  std::vector<LevelTerm> terms;
  std::optional<LevelCap> cap;  // the cap that bound (level = cap < uncapped), if any
  // The tests launched and not yet finished or abandoned when this level is set (Rule::running(),
  // launch order, each with the level it reserved). Their levels are reserved, not spent: they do
  // not enter the terms, except through alpha-investing's W (the wealth not reserved).
  std::vector<RunningTest> running;
};

// The rule's display in words, e.g. "alpha_t = W0 gamma_t + (alpha - W0) gamma_(t - tau_1) + ...".
std::string_view level_display(RuleKind kind);

// Explains the level the next launched test would get. `rejected_tests[i]`, when given, is the
// test (launch number) of the (i+1)-th rejection, in the order rejections were decided; it fills
// LevelTerm::test. Errors: kCorruption if the rule's state cannot be read (a programming error).
Result<LevelExplanation> explain_next_level(const Rule& rule,
                                            std::span<const std::uint64_t> rejected_tests = {});

}  // namespace alphaledger
