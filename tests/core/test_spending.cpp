// Spending sequences: normalising constants, closed forms, parsing, and the geometric mixtures of
// fast evaluation.
#include <doctest/doctest.h>

#include <boost/math/special_functions/zeta.hpp>
#include <cmath>

#include "alphaledger/spending.hpp"
#include "core/spending_fit.hpp"

using namespace alphaledger;

namespace {

// Independent summation of sum_j j^-s: Kahan sum to N-1 plus the Euler–Maclaurin tail
// N^(1-s)/(s-1) + N^-s/2 + s N^(-s-1)/12 (standard Euler–Maclaurin formula, any numerical
// analysis text).
double zeta_by_summation(double s) {
  const long n = 200000;
  double sum = 0, c = 0;
  for (long j = n - 1; j >= 1; --j) {  // smallest terms first
    const double y = std::pow(static_cast<double>(j), -s) - c;
    const double t = sum + y;
    c = (t - sum) - y;
    sum = t;
  }
  const double nd = static_cast<double>(n);
  return sum + std::pow(nd, 1 - s) / (s - 1) + std::pow(nd, -s) / 2 + s * std::pow(nd, -s - 1) / 12;
}

// Independent summation of the JM shape with a different cut-off (N = 10^7) than the library's
// (N = 10^5), plus the closed-form tail integral 2 e^-a (a^3 + 3a^2 + 6a + 6), a = sqrt(ln N)
// (docs/methods.md section 13).
double jm_sum_independent() {
  const long n = 10000000;
  long double sum = 0;
  for (long j = 1; j < n; ++j) {
    const long double x = j;
    sum += std::log(std::max(x, 2.0L)) / (x * std::exp(std::sqrt(std::log(x))));
  }
  const long double a = std::sqrt(std::log(static_cast<long double>(n)));
  const long double x = n;
  const long double f = std::log(x) / (x * std::exp(a));
  return static_cast<double>(sum + 2 * std::exp(-a) * (a * a * a + 3 * a * a + 6 * a + 6) + f / 2);
}

}  // namespace

TEST_CASE("SpendingSequence: zeta(1.6) normaliser agrees with Boost.Math and a direct summation") {
  // Boost.Math boost::math::zeta (1.74) and an independent Euler–Maclaurin summation.
  const double boost_zeta = boost::math::zeta(1.6);
  CHECK(std::abs(boost_zeta - zeta_by_summation(1.6)) < 1e-9);
  // docs/methods.md section 13 table: zeta(1.6) = 2.285765665680130, 1/zeta(1.6) = 0.437490165774.
  CHECK(std::abs(boost_zeta - 2.285765665680130) < 1e-12);
  auto power = SpendingSequence::parse("power:1.6");
  REQUIRE(power.ok());
  CHECK(std::abs(power->gamma(1) - 0.437490165774) < 1e-12);
  CHECK(std::abs(power->gamma(2) - 0.1443179337) < 1e-10);    // docs/methods.md 13, gamma_2
  CHECK(std::abs(power->gamma(3) - 0.07543524193) < 1e-11);   // docs/methods.md 13, gamma_3
  auto shift = SpendingSequence::parse("power-shift:1.6");
  REQUIRE(shift.ok());
  // docs/methods.md 13: (j+1)^-1.6/(zeta(1.6)-1), constant 0.777746697312.
  CHECK(std::abs(shift->normaliser() - 0.777746697312) < 1e-12);
  CHECK(std::abs(shift->gamma(1) - 0.2565607299) < 1e-10);
  CHECK(std::abs(shift->gamma(2) - 0.1341047522) < 1e-10);
  // Other exponents against Boost.Math directly.
  for (double s : {1.1, 1.5, 2.0, 3.0}) {
    auto seq = SpendingSequence::parse("power:" + std::to_string(s));
    REQUIRE(seq.ok());
    CHECK(std::abs(seq->gamma(1) * boost::math::zeta(s) - 1.0) < 1e-13);
    CHECK(std::abs(boost::math::zeta(s) - zeta_by_summation(s)) < 1e-8 * boost::math::zeta(s));
  }
}

TEST_CASE("SpendingSequence: the JM constant makes the sequence sum to 1") {
  // docs/methods.md section 13: shape sum 12.645107872872, C = 0.079081966722, gamma_1..3 listed.
  const double lib = jm_shape_sum();
  CHECK(std::abs(lib - 12.645107872872) < 1e-9);
  CHECK(std::abs(lib - jm_sum_independent()) < 1e-9);
  CHECK(kJmConstant * lib <= 1.0);
  CHECK(kJmConstant * lib > 1.0 - 1e-10);
  auto jm = SpendingSequence::parse("jm");
  REQUIRE(jm.ok());
  CHECK(std::abs(jm->gamma(1) - 0.05481544227) < 1e-11);
  CHECK(std::abs(jm->gamma(2) - 0.01192062575) < 1e-11);
  CHECK(std::abs(jm->gamma(3) - 0.01015304167) < 1e-11);
  // The constant 0.0722 often printed in published examples is valid (sum 0.913, docs/methods.md 13).
  auto common = SpendingSequence::parse("jm:0.0722");
  REQUIRE(common.ok());
  CHECK(std::abs(0.0722 * lib - 0.913) < 1e-3);
}

TEST_CASE("SpendingSequence: invalid specifications are refused with the condition named") {
  auto too_big = SpendingSequence::parse("jm:0.08");
  REQUIRE_FALSE(too_big.ok());
  CHECK(too_big.error().message.find("sum to at most 1") != std::string::npos);
  auto flat = SpendingSequence::parse("power:1");
  REQUIRE_FALSE(flat.ok());
  CHECK(flat.error().message.find("1 < S") != std::string::npos);
  CHECK_FALSE(SpendingSequence::parse("power:abc").ok());
  CHECK_FALSE(SpendingSequence::parse("power").ok());
  CHECK_FALSE(SpendingSequence::parse("geometric:0.5").ok());
  CHECK_FALSE(SpendingSequence::parse("jm:-1").ok());
  CHECK(SpendingSequence::parse("power:1.6")->spec() == "power:1.6");
}

TEST_CASE("SpendingSequence: every sequence is nonincreasing") {
  for (const char* spec : {"jm", "power:1.6", "power-shift:1.6", "power:1.05"}) {
    auto seq = SpendingSequence::parse(spec);
    REQUIRE(seq.ok());
    CAPTURE(spec);
    for (std::uint64_t j = 1; j < 20000; ++j) REQUIRE(seq->gamma(j + 1) <= seq->gamma(j));
    CHECK(seq->gamma(0) == 0.0);
  }
}

TEST_CASE("GeometricMixture: power-law fit matches docs/methods.md 15.4 and is a valid sequence") {
  // docs/methods.md 15.4(a) table: h = 0.5 on [-28, 4] gives K = 65 and max relative error 3.8e-6 on
  // [1, 1e9]. Validity (15.3): nonnegative, nonincreasing, mass <= 1 (we use 1 - 1e-9, 15.6).
  for (const char* spec : {"power:1.6", "power-shift:1.6"}) {
    CAPTURE(spec);
    auto seq = SpendingSequence::parse(spec);
    REQUIRE(seq.ok());
    const GeometricMixture& m = seq->mixture();
    CHECK(m.weight.size() == 65);
    CHECK(m.head.empty());
    CHECK(m.total_mass() <= 1.0 - 1e-9 + 1e-15);
    double max_rel = 0;
    for (double e = 0; e <= 9.0; e += 0.05) {
      const auto j = static_cast<std::uint64_t>(std::llround(std::pow(10.0, e)));
      max_rel = std::max(max_rel, std::abs(m.gamma(j) / seq->gamma(j) - 1));
    }
    CHECK(max_rel < 4e-6);
    double prev = m.gamma(1);
    for (std::uint64_t j = 2; j < 100000; ++j) {
      const double g = m.gamma(j);
      REQUIRE(g <= prev);
      REQUIRE(g >= 0);
      prev = g;
    }
    for (double w : m.weight) CHECK(w >= 0);
  }
}

TEST_CASE("GeometricMixture: JM hybrid keeps the published head and a valid tail") {
  // docs/methods.md 15.4(b): exact JM values for lags 1..16, NNLS tail; reported there: tail relative
  // error 7.7e-5 on (16, 1e9], nonincreasing across the seam, total mass 0.7136 <= 1. Our fit uses
  // the same timescales and grid; we require the same order of accuracy (< 2e-4) and validity.
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  const GeometricMixture& m = seq->mixture();
  REQUIRE(m.head.size() == 16);
  for (std::uint64_t j = 1; j <= 16; ++j) CHECK(m.gamma(j) == seq->gamma(j));
  CHECK(m.gamma(17) <= m.gamma(16));
  CHECK(m.total_mass() <= 1.0);
  CHECK(m.total_mass() > 0.68);  // at least the JM mass on [1, 1e9] (0.683, docs/methods.md 13)
  double max_rel = 0;
  for (double e = std::log10(17.0); e <= 9.0; e += 0.02) {
    const auto j = static_cast<std::uint64_t>(std::llround(std::pow(10.0, e)));
    max_rel = std::max(max_rel, std::abs(m.gamma(j) / seq->gamma(j) - 1));
  }
  CHECK(max_rel < 2e-4);
  double prev = m.gamma(1);
  for (std::uint64_t j = 2; j < 100000; ++j) {
    REQUIRE(m.gamma(j) <= prev);
    prev = m.gamma(j);
  }
}

TEST_CASE("NonnegativeLeastSquares: solves a small problem with a known answer") {
  // Lawson & Hanson (1974), Solving Least Squares Problems, ch. 23: the NNLS solution satisfies
  // the KKT conditions. Here A = I and b = (1, -2, 3): the answer is (1, 0, 3) by inspection.
  const std::vector<double> a = {1, 0, 0, 0, 1, 0, 0, 0, 1};
  const auto w = nonnegative_least_squares(a, 3, 3, {1, -2, 3});
  CHECK(w[0] == doctest::Approx(1.0));
  CHECK(w[1] == 0.0);
  CHECK(w[2] == doctest::Approx(3.0));
  // Over-determined with an exact nonnegative solution (2, 0.5): recovered.
  const std::vector<double> b2 = {1, 1, 2, 1, 1, 3};  // 3 x 2, rows (1,1), (2,1), (1,3)
  const auto w2 = nonnegative_least_squares(b2, 3, 2, {2.5, 4.5, 3.5});
  CHECK(w2[0] == doctest::Approx(2.0));
  CHECK(w2[1] == doctest::Approx(0.5));
}
