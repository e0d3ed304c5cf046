// Experiment statistics: from the summaries a product team holds (counts, means, standard
// deviations) to a p-value with an estimate and a confidence interval, and the sample size an
// experiment needs at the level a stream will grant it. Pure math: numbers in, numbers out; every
// distribution goes through Boost.Math with the library's one error policy (src/core/math_policy.hpp),
// and inputs are checked before Boost sees them. docs/statistics.md gives the formulas and choices.
//
// Conventions: differences are treatment minus control; Alternative::kGreater means the treatment
// is larger. One-sided p-values are computed from the upper tail directly (a complement, never
// 1 - cdf), so they stay accurate down to the smallest double (about 1e-308; below about 4.9e-324
// a double can only hold 0).
//
// Example (two proportions, pooled z-test, two-sided):
//   auto r = compare_proportions({.n = 1000, .conversions = 100}, {.n = 1000, .conversions = 130},
//                                ProportionMethod::kPooled, Alternative::kTwoSided, 0.95);
//   r->statistic;   // 2.10274...  (R: prop.test(c(130, 100), c(1000, 1000), correct = FALSE)
//   r->p_value;     // 0.0354884...  gives X-squared = 4.42152, the square of this z)
//   r->estimate;    // 0.03, with ci_low 0.00207, ci_high 0.05793 (Wald, as R's prop.test)
//
// Example (sample size, as R's power.t.test(delta = 1, sd = 1, power = 0.9) gives n = 22.02110):
//   auto plan = plan_means(1.0, {.level = 0.05, .min_effect = 1.0, .power = 0.9});
//   plan->n_per_arm;   // 23 (rounded up);  plan->n_exact == 22.0211...
//
// Every fallible function returns Result<T>: on bad input an Error of kind kInvalidArgument whose
// message names the field, the value and the accepted range; nothing else happens.
// Thread-safety: free functions and plain values, no shared state.
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <string_view>

#include "alphaledger/result.hpp"

namespace alphaledger {

// Which direction counts as evidence. Streams may store it with their configuration (the ledger
// persists it): do not change the numbers.
enum class Alternative : std::uint8_t {
  kTwoSided = 1,  // the treatment differs from the control
  kGreater = 2,   // the treatment is larger than the control
  kLess = 3,      // the treatment is smaller than the control
};

std::string_view alternative_name(Alternative a);              // "two-sided", "greater", "less"
Result<Alternative> parse_alternative(std::string_view name);  // refuses other names, listing these

// ---------------------------------------------------------------------------------------------
// p-values from summaries

// How two proportions are compared.
enum class ProportionMethod : std::uint8_t {
  kPooled = 1,    // z-test with the pooled proportion in the standard error (R's prop.test, no correction)
  kUnpooled = 2,  // z-test with each arm's own variance (the Wald test)
  kFisher = 3,    // Fisher's exact test, conditional on the total conversions; for small counts
};
std::string_view proportion_method_name(ProportionMethod m);  // "pooled", "unpooled", "fisher"
Result<ProportionMethod> parse_proportion_method(std::string_view name);

// One arm of a conversion experiment: `conversions` users out of `n` converted.
struct ProportionArm {
  std::uint64_t n = 0;            // REQUIRES (checked): 2 <= n <= 2^53
  std::uint64_t conversions = 0;  // REQUIRES (checked): conversions <= n
};

// One arm of an experiment on a numeric metric.
struct MeanArm {
  std::uint64_t n = 0;  // REQUIRES (checked): 2 <= n <= 2^53
  double mean = 0;      // REQUIRES (checked): finite
  double sd = 0;        // sample standard deviation (divisor n - 1). REQUIRES (checked): finite, > 0
};

// The answer of one test. Optional members are absent where they do not apply.
struct Comparison {
  double statistic = 0;            // z (proportions, z input), t (means, t input), or for Fisher's test the
                                   // treatment conversions (whose law given the margins is hypergeometric)
  double p_value = 1;              // in [0, 1]
  std::optional<double> df;        // degrees of freedom (t-tests only)
  std::optional<double> estimate;  // treatment minus control (not for a ready statistic)
  std::optional<double> relative_lift;  // estimate / control proportion (proportions, control > 0)
  std::optional<double> ci_low;         // confidence interval for `estimate`; one-sided
  std::optional<double> ci_high;        // alternatives give a one-sided interval, whose open end
                                        // is -1 / 1 for proportions and -inf / +inf for means
  double confidence = 0.95;
};

// Two proportions. Interval: Wald (each arm's own variance, clipped to [-1, 1], as R's prop.test)
// for kPooled and kUnpooled; Newcombe's hybrid score interval (Wilson interval per arm) for kFisher.
// When neither arm varies (no conversions anywhere, or all users converted) there is no evidence:
// statistic 0, p-value 1 for every alternative (Fisher's exact answer for such a table).
// Errors: conversions > n, n < 2 or n > 2^53, confidence outside (0, 1); kUnpooled when both arms
// are constant but different (its variance is 0); kFisher when n_control + n_treatment > 1e9.
Result<Comparison> compare_proportions(const ProportionArm& control, const ProportionArm& treatment,
                                       ProportionMethod method = ProportionMethod::kPooled,
                                       Alternative alternative = Alternative::kTwoSided,
                                       double confidence = 0.95);

// Two means: Welch's t-test (Default), or the pooled-variance t-test when pooled_variance is true.
// Interval: estimate +- t quantile * standard error of that test (as R's t.test).
Result<Comparison> compare_means(const MeanArm& control, const MeanArm& treatment,
                                 bool pooled_variance = false,
                                 Alternative alternative = Alternative::kTwoSided, double confidence = 0.95);

// A ready statistic: z against the standard normal, or t against Student's t with `df` degrees of
// freedom (any real df > 0). Errors: non-finite z or t, df <= 0 or non-finite.
Result<Comparison> test_from_z(double z, Alternative alternative = Alternative::kTwoSided);
Result<Comparison> test_from_t(double t, double df, Alternative alternative = Alternative::kTwoSided);

// The standard normal quantile: the x with P(Z <= x) = p. REQUIRES: 0 < p < 1 (NaN otherwise).
double normal_quantile(double p);

// ---------------------------------------------------------------------------------------------
// Summary columns of a log row (docs/formats.md "Summary columns")

// The column names, exactly as they appear in CSV headers and JSON Lines keys.
inline constexpr std::string_view kControlNColumn = "control_n";
inline constexpr std::string_view kControlConversionsColumn = "control_conversions";
inline constexpr std::string_view kTreatmentNColumn = "treatment_n";
inline constexpr std::string_view kTreatmentConversionsColumn = "treatment_conversions";
inline constexpr std::string_view kControlMeanColumn = "control_mean";
inline constexpr std::string_view kControlSdColumn = "control_sd";
inline constexpr std::string_view kTreatmentMeanColumn = "treatment_mean";
inline constexpr std::string_view kTreatmentSdColumn = "treatment_sd";

// Turns a row's summary columns (column -> text; empty text counts as absent) into a p-value:
// counts give the pooled z-test, means and standard deviations give Welch's t-test, in the given
// direction. The row must hold exactly one complete kind of summary.
// Errors (kInvalidArgument, naming the column, the value and what is accepted): no summary columns,
// a missing or unparsable column, both kinds in one row, and every check of compare_proportions /
// compare_means. The caller adds file:line.
Result<double> p_value_from_summary(const std::map<std::string, std::string>& fields,
                                    Alternative alternative = Alternative::kTwoSided);

// ---------------------------------------------------------------------------------------------
// Planning: sample size per arm, power, or the smallest detectable effect

// What a plan solves for, from which inputs are given:
//   min_effect, no n_per_arm      -> kSize      (power: Default 0.8)
//   min_effect and n_per_arm      -> kPower     (power must not be given)
//   n_per_arm, no min_effect      -> kMinEffect (power: Default 0.8)
enum class PlanTarget : std::uint8_t { kSize = 1, kPower = 2, kMinEffect = 3 };
std::string_view plan_target_name(PlanTarget t);  // "n_per_arm", "power", "min_effect"

struct PlanRequest {
  double level = 0.05;                               // the test's level. REQUIRES (checked): 0 < level < 1
  Alternative alternative = Alternative::kTwoSided;  // Default: two-sided
  std::optional<double> min_effect = {};             // treatment minus control; not 0; sign must match a
                                                     // one-sided alternative (> 0 greater, < 0 less)
  std::optional<double> power = {};                  // in (0, 1). Default: 0.8 where it is an input
  std::optional<std::uint64_t> n_per_arm = {};       // users per arm, >= 2
};

struct Plan {
  PlanTarget solved = PlanTarget::kSize;
  double level = 0;
  Alternative alternative = Alternative::kTwoSided;
  std::uint64_t n_per_arm = 0;  // kSize: the smallest whole n reaching the power; else the given n
  double n_exact = 0;           // kSize: the real-valued solution before rounding up; else n_per_arm
  double power = 0;             // kSize / kMinEffect: the requested power; kPower: the computed one
  double achieved_power = 0;    // the power at n_per_arm and min_effect (>= power for kSize)
  double min_effect = 0;        // kMinEffect: solved (> 0 for two-sided and greater, < 0 for less)
};

// Two proportions with baseline (control) proportion `baseline`, as R's power.prop.test computes
// it (normal approximation, pooled variance under the null and unpooled under the alternative;
// for two-sided tests the far tail is ignored, as R's default strict = FALSE):
//   power = Phi((sqrt(n) |d| - z_{level/s} sqrt(2 pbar (1 - pbar))) / sqrt(p0 q0 + p1 q1)),
// s = 2 for two-sided, else 1. REQUIRES (checked): 0 < baseline < 1, 0 < baseline + min_effect < 1.
// kMinEffect solves for an increase (a decrease for kLess).
Result<Plan> plan_proportions(double baseline, const PlanRequest& request);

// Two means with common standard deviation `sd`, as R's power.t.test computes it (exact power of
// the two-sample t-test through the noncentral t distribution, df = 2 (n - 1), noncentrality
// sqrt(n / 2) |d| / sd; far tail ignored for two-sided tests). REQUIRES (checked): sd > 0, finite.
Result<Plan> plan_means(double sd, const PlanRequest& request);

// The power formulas themselves, for a real-valued n >= 2 (REQUIRES, checked by the plan_* calls):
double proportions_power(double baseline, double min_effect, double n_per_arm, double level,
                         Alternative alternative);
double means_power(double sd, double min_effect, double n_per_arm, double level, Alternative alternative);

}  // namespace alphaledger
