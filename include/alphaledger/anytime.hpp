// Evidence that stays valid however often a running test is looked at: the normal-mixture
// likelihood ratio (an e-value at any stopping time), the always-valid p-value and the confidence
// sequence built from it. Pure math: numbers in, numbers out. docs/methods.md section 10.1 gives
// the derivation; the sources are Robbins (1970) for the normal mixture and Johari, Koomen,
// Pekelis and Walsh (2022) for its use on A/B tests.
//
// At each look the test has an estimate of the effect (treatment minus control) and its variance.
// Under the null (effect = null_value) the estimate is approximately normal around the null along
// the whole path. Mixing the normal likelihood ratio over effects drawn from N(0, mixture_sd^2)
// gives a nonnegative martingale, so by Ville's inequality the chance that it ever reaches 1/alpha
// is at most alpha: its reciprocal, minimised over the looks, is a p-value valid at any stopping
// time, and its value when the test stops is an e-value.
//
// Example (20,000 users per arm, 1,000 and 1,180 conversions, mixing scale 0.005):
//   auto look = effect_of_proportions({.n = 20000, .conversions = 1000}, {.n = 20000, .conversions = 1180});
//   // look->estimate == 0.009, look->variance == 5.15095e-06
//   auto e = anytime_evidence(*look, {.mixture_sd = 0.005});
//   // e->e_value ~ 280.3, e->p_value ~ 0.003568 (= 1 / e_value),
//   // e->cs_low ~ 0.00206, e->cs_high ~ 0.01594 (the 95% confidence sequence at this look)
//
// Thread-safety: free functions and plain values, no shared state.
#pragma once

#include "alphaledger/result.hpp"
#include "alphaledger/stats.hpp"

namespace alphaledger {

// What is known at one look at a running test.
struct EffectEstimate {
  double estimate = 0;  // treatment minus control. REQUIRES (checked): finite
  double variance = 0;  // variance of `estimate`. REQUIRES (checked): finite, >= 0
};

// How the evidence is measured.
struct MixtureSettings {
  double mixture_sd = 0;   // tau, on the scale of the estimate. REQUIRES (checked): finite, > 0
  double null_value = 0;   // the effect under the null. REQUIRES (checked): finite
  double alpha = 0.05;     // the confidence sequence has coverage 1 - alpha. REQUIRES: 0 < alpha < 1
  Alternative alternative = Alternative::kTwoSided;  // one-sided: a half-normal mixture
};

struct AnytimeEvidence {
  double estimate = 0;
  double variance = 0;
  double e_value = 1;   // the mixture likelihood ratio at this look (1 when variance is 0)
  double p_value = 1;   // min(previous_p, 1 / e_value), in [0, 1]
  double cs_low = 0;    // two-sided confidence sequence at this look: estimate -/+ radius
  double cs_high = 0;   // (+-infinity when variance is 0: one look with no spread says nothing)
};

// The natural log of the mixture likelihood ratio at one look. Two-sided, with s2 = variance,
// t2 = mixture_sd^2 and d = estimate - null_value:
//   log L = 0.5 * log(s2 / (s2 + t2)) + t2 * d^2 / (2 * s2 * (s2 + t2)).
// One-sided (mixing over the half-normal on the hoped-for side), L is the two-sided value times
// 2 * Phi(+-d * tau / (sqrt(s2) * sqrt(s2 + t2))). variance == 0 gives 0 (no evidence).
// Errors: non-finite inputs, negative variance, mixture_sd <= 0.
Result<double> log_mixture_likelihood_ratio(const EffectEstimate& look, const MixtureSettings& settings);

// The radius r of the two-sided confidence sequence at coverage 1 - alpha: every effect value
// theta0 with |estimate - theta0| < r keeps the two-sided likelihood ratio below 1/alpha:
//   r = sqrt(2 * s2 * (s2 + t2) / t2 * (log(1/alpha) + 0.5 * log((s2 + t2) / s2))).
// variance == 0 gives +infinity. Errors as above, and alpha outside (0, 1).
Result<double> confidence_sequence_radius(double variance, const MixtureSettings& settings);

// Everything at one look. `previous_p` is the always-valid p-value after the earlier looks (1 for
// the first look); the result never exceeds it. Errors as above, and previous_p outside [0, 1].
Result<AnytimeEvidence> anytime_evidence(const EffectEstimate& look, const MixtureSettings& settings,
                                         double previous_p = 1.0);

// The estimate and its variance from cumulative summaries: the difference of conversion rates with
// each arm's own variance p(1 - p)/n, or the difference of means with the Welch variance
// sd_t^2/n_t + sd_c^2/n_c. Errors: the checks of compare_proportions / compare_means.
Result<EffectEstimate> effect_of_proportions(const ProportionArm& control, const ProportionArm& treatment);
Result<EffectEstimate> effect_of_means(const MeanArm& control, const MeanArm& treatment);

}  // namespace alphaledger
