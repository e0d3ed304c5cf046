// The default "jm" sequence takes its fast-mode mixture from stored values instead of fitting it in
// every process. No outside source: these are self-consistency checks; the stored values must be
// exactly what the fit gives (bit for bit), and test_levels_golden.cpp pins whole fast streams.
#include <doctest/doctest.h>

#include <bit>
#include <cstdint>
#include <string>
#include <vector>

#include "alphaledger/spending.hpp"
#include "core/spending_fit.hpp"

using namespace alphaledger;

namespace {

void check_same_bits(const std::vector<double>& got, const std::vector<double>& want, const char* what) {
  CAPTURE(what);
  REQUIRE(got.size() == want.size());
  for (std::size_t i = 0; i < got.size(); ++i) {
    CAPTURE(i);
    CHECK(std::bit_cast<std::uint64_t>(got[i]) == std::bit_cast<std::uint64_t>(want[i]));
  }
}

void check_same_mixture(const GeometricMixture& got, const GeometricMixture& want) {
  check_same_bits(got.head, want.head, "head");
  check_same_bits(got.weight, want.weight, "weight");
  check_same_bits(got.rate, want.rate, "rate");
  check_same_bits(got.one_minus_r, want.one_minus_r, "one_minus_r");
  check_same_bits(got.ratio, want.ratio, "ratio");
  check_same_bits(got.ratio_head, want.ratio_head, "ratio_head");
  check_same_bits(got.coefficient, want.coefficient, "coefficient");
}

}  // namespace

TEST_CASE("stored jm mixture: the same bits as a fresh fit of the default sequence") {
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  const GeometricMixture fitted = fit_hybrid_mixture(*seq);
  REQUIRE(!fitted.weight.empty());
  check_same_mixture(stored_jm_mixture(), fitted);
  check_same_mixture(seq->mixture(), fitted);
}

TEST_CASE("stored jm mixture: other jm:C are still fitted, not given the stored values") {
  auto seq = SpendingSequence::parse("jm:0.07");
  REQUIRE(seq.ok());
  const GeometricMixture fitted = fit_hybrid_mixture(*seq);
  check_same_mixture(seq->mixture(), fitted);
  // The head is C * shape(j), so a different C must give a different first value.
  CHECK(seq->mixture().head.front() != stored_jm_mixture().head.front());
}
