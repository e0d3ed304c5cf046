// Hindsight baselines that need the whole list of p-values (or e-values) at once: Benjamini–Hochberg
// (1995), Storey-BH (Storey, Taylor & Siegmund 2004) and e-BH (Wang & Ramdas 2022). Used by replay and simulate to show what an offline
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

// e-BH on e-values (Wang & Ramdas 2022): with e_(1) >= ... >= e_(m),
// k = max{k : e_(k) >= m / (alpha k)}; reject the k largest, i.e. every e >= m / (alpha k).
// `threshold` is that e-value threshold (+infinity when nothing is rejected); FDR <= alpha under any
// dependence. REQUIRES: every e >= 0 (may be +infinity); 0 < alpha < 1.
OfflineDecisions e_benjamini_hochberg(const std::vector<double>& e, double alpha);

}  // namespace alphaledger
