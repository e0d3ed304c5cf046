// Hindsight baselines that need the whole list of p-values at once: Benjamini–Hochberg (1995) and
// Storey-BH (Storey, Taylor & Siegmund 2004). Used by replay and simulate to show what an offline
// analysis would have found. Pure math.
//
// Example (step-up: the second smallest p-value is above its bound, the third is within its own):
//   auto bh = benjamini_hochberg({0.01, 0.035, 0.03, 0.5}, 0.05);
//   bh.threshold;    // 0.0375 = 3 * 0.05 / 4 (k = 3 of m = 4), as a double 0.037500000000000006
//   bh.rejections;   // 3: every p-value <= threshold, here {true, true, true, false}
#pragma once

#include <vector>

namespace alphaledger {

struct OfflineDecisions {
  double threshold = 0;        // reject p <= threshold; k*alpha/m (or alpha/m when k = 0)
  std::vector<bool> rejected;  // in input order
  std::size_t rejections = 0;
  double null_proportion = 1;  // Storey's pi0 estimate (1 for BH)
};

// BH step-up: k = max{i : p_(i) <= i alpha / m}; reject p_(1..k).
// REQUIRES: every p in [0, 1]; 0 < alpha < 1.
OfflineDecisions benjamini_hochberg(const std::vector<double>& p, double alpha);

// Storey-BH with the finite-sample "+1" estimator pi0 = (1 + #{p > lambda}) / (m (1 - lambda)),
// capped at 1; BH at alpha / pi0, rejecting only p <= lambda.
// REQUIRES: every p in [0, 1]; 0 < alpha < 1; 0 < lambda < 1.
OfflineDecisions storey_bh(const std::vector<double>& p, double alpha, double lambda);

}  // namespace alphaledger
