// e-BH (offline.hpp) against its definition and against BH on the reciprocals.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <random>
#include <vector>

#include "alphaledger/offline.hpp"

using namespace alphaledger;

namespace {

// The definition, literally (Wang & Ramdas, "False discovery rate control with e-values", JRSS-B
// 84(3), 2022, section 3): the largest k such that at least k e-values are >= m / (alpha k).
std::size_t ebh_count_by_definition(const std::vector<double>& e, double alpha) {
  const double m = static_cast<double>(e.size());
  std::size_t best = 0;
  for (std::size_t k = 1; k <= e.size(); ++k) {
    const auto big = static_cast<std::size_t>(
        std::count_if(e.begin(), e.end(), [&](double x) { return x >= m / (alpha * static_cast<double>(k)); }));
    if (big >= k) best = k;
  }
  return best;
}

}  // namespace

TEST_CASE("e-BH rejects as many as its definition says, and the largest ones") {
  std::mt19937_64 gen(7);
  std::exponential_distribution<double> null_e(1.0);  // mean 1: a valid e-value under the null
  std::lognormal_distribution<double> signal_e(3.0, 1.5);
  for (int round = 0; round < 500; ++round) {
    const std::size_t m = 1 + gen() % 60;
    std::vector<double> e(m);
    for (auto& x : e) x = (gen() % 4 == 0) ? signal_e(gen) : null_e(gen);
    for (double alpha : {0.05, 0.2}) {
      const auto out = e_benjamini_hochberg(e, alpha);
      const std::size_t k = ebh_count_by_definition(e, alpha);
      REQUIRE(out.rejections == k);
      for (std::size_t i = 0; i < m; ++i) {
        // Everything rejected is at least as large as everything kept.
        if (!out.rejected[i]) continue;
        for (std::size_t j = 0; j < m; ++j) CHECK((out.rejected[j] || e[j] <= e[i]));
      }
    }
  }
}

TEST_CASE("e-BH equals BH on the reciprocals of the e-values") {
  // Source: Wang & Ramdas (2022), e-BH is BH applied to the p-values 1/e (their section 3 remark).
  std::mt19937_64 gen(11);
  std::lognormal_distribution<double> e_dist(0.5, 2.0);
  for (int round = 0; round < 300; ++round) {
    const std::size_t m = 1 + gen() % 40;
    std::vector<double> e(m), p(m);
    for (std::size_t i = 0; i < m; ++i) {
      e[i] = e_dist(gen);
      p[i] = std::min(1.0, 1.0 / e[i]);
    }
    const auto by_e = e_benjamini_hochberg(e, 0.1);
    const auto by_p = benjamini_hochberg(p, 0.1);
    CHECK(by_e.rejections == by_p.rejections);
  }
}

TEST_CASE("e-BH on a worked example") {
  // m = 4, alpha = 0.5: thresholds m/(alpha k) = 8, 4, 2.67, 2. Sorted e: 10, 5, 3, 0.5.
  // k = 3 (3 >= 2.67; k = 4 fails as 0.5 < 2), so 10, 5 and 3 are rejected. Worked by hand.
  const auto out = e_benjamini_hochberg({3, 0.5, 10, 5}, 0.5);
  CHECK(out.rejections == 3);
  CHECK(out.rejected == std::vector<bool>{true, false, true, true});
  CHECK(out.threshold == doctest::Approx(8.0 / 3.0));
  const auto none = e_benjamini_hochberg({1, 1, 1}, 0.05);
  CHECK(none.rejections == 0);
  CHECK(std::isinf(none.threshold));
}
