// The normal-mixture likelihood ratio, always-valid p-value and confidence sequence (anytime.hpp)
// against sources outside this code: numerical integration with Boost.Math, Ville's inequality in
// simulation, and the balanced-arm display of Robbins (1970) / Johari et al. (2022).
#include <doctest/doctest.h>

#include <boost/math/quadrature/gauss_kronrod.hpp>
#include <cmath>
#include <limits>
#include <random>
#include <vector>

#include "alphaledger/anytime.hpp"

using namespace alphaledger;

namespace {

constexpr double kPi = 3.14159265358979323846;

// The mixture of normal likelihood ratios computed by brute force: the ratio of the N(theta, s2)
// density of the estimate to its N(null, s2) density, integrated over theta ~ N(0, tau^2) (two-sided)
// or the half-normal on one side, with Boost.Math's adaptive Gauss-Kronrod rule. The integration
// variable is centred on the integrand's peak so that the rule sees a well-scaled bump; nothing of
// the closed form is used.
double integrated_ratio(double d, double s2, double tau, Alternative alternative) {
  const double t2 = tau * tau;
  auto integrand = [&](double theta) {
    const double log_lr = (theta * d - 0.5 * theta * theta) / s2;  // log N(d; theta, s2) - log N(d; 0, s2)
    const double log_prior = -0.5 * theta * theta / t2 - std::log(tau * std::sqrt(2 * kPi));
    return std::exp(log_lr + log_prior);
  };
  // Peak and width of the integrand: it is a Gaussian bump in theta.
  const double a = 1 / s2 + 1 / t2;
  const double centre = (d / s2) / a;
  const double width = 1 / std::sqrt(a);
  auto shifted = [&](double u) { return integrand(centre + u * width) * width; };
  double error = 0;
  using Rule = boost::math::quadrature::gauss_kronrod<double, 61>;
  const double inf = std::numeric_limits<double>::infinity();
  if (alternative == Alternative::kTwoSided) {
    return Rule::integrate(shifted, -inf, inf, 15, 1e-14, &error);
  }
  // Half-normal prior: twice the normal density on the hoped-for side.
  const double edge = (0 - centre) / width;  // theta = 0 in the shifted variable
  if (alternative == Alternative::kGreater) return 2 * Rule::integrate(shifted, edge, inf, 15, 1e-14, &error);
  return 2 * Rule::integrate(shifted, -inf, edge, 15, 1e-14, &error);
}

double ratio(double d, double s2, double tau, Alternative alternative = Alternative::kTwoSided) {
  auto r = log_mixture_likelihood_ratio({d, s2}, {.mixture_sd = tau, .alternative = alternative});
  REQUIRE(r.ok());
  return std::exp(*r);
}

}  // namespace

TEST_CASE("the closed-form mixture ratio equals the integral of the normal likelihood ratio") {
  // Source: the definition of the normal mixture (Robbins 1970), integrated numerically with
  // Boost.Math's gauss_kronrod<double, 61>; the closed form is not used by the integral.
  for (double s2 : {1e-6, 4.9e-6, 1e-3, 1.0}) {
    for (double tau_over_s : {0.1, 1.0, 3.0, 30.0}) {
      const double tau = tau_over_s * std::sqrt(s2);
      for (double z : {-6.0, -2.5, -0.3, 0.0, 0.7, 2.0, 4.5}) {
        const double d = z * std::sqrt(s2);
        for (Alternative alt : {Alternative::kTwoSided, Alternative::kGreater, Alternative::kLess}) {
          CAPTURE(s2);
          CAPTURE(tau);
          CAPTURE(d);
          CAPTURE(static_cast<int>(alt));
          const double closed = ratio(d, s2, tau, alt);
          const double integral = integrated_ratio(d, s2, tau, alt);
          CHECK(closed == doctest::Approx(integral).epsilon(1e-10));
        }
      }
    }
  }
}

TEST_CASE("with balanced arms the ratio is the display in n, V and tau") {
  // Source: the balanced-arm form Lambda_n = sqrt(V/(V + n tau^2)) exp(n^2 tau^2 D^2 / (2V(V + n tau^2)))
  // with s^2 = V/n (Johari, Koomen, Pekelis & Walsh 2022, mSPRT with a normal mixture; recalled from
  // memory in this parameterisation, and checked here against the general form).
  const double V = 0.5, tau = 0.05;
  for (double n : {10.0, 1000.0, 250000.0}) {
    for (double D : {-0.01, 0.002, 0.03}) {
      const double expected =
          std::sqrt(V / (V + n * tau * tau)) * std::exp(n * n * tau * tau * D * D / (2 * V * (V + n * tau * tau)));
      CHECK(ratio(D, V / n, tau) == doctest::Approx(expected).epsilon(1e-12));
    }
  }
}

TEST_CASE("under the null the ratio has expectation one at a fixed look") {
  // Source: a likelihood ratio integrates to one under the null density (a mixture of likelihood
  // ratios is one too); E[Lambda] = integral of Lambda(d) N(d; 0, s2) dd, computed with Boost.Math.
  for (double tau_over_s : {0.2, 1.0, 5.0}) {
    for (Alternative alt : {Alternative::kTwoSided, Alternative::kGreater}) {
      const double s2 = 0.01, s = 0.1;
      auto f = [&](double d) {
        // In logs: far in the tails the ratio overflows while the density underflows.
        auto lr = log_mixture_likelihood_ratio({d, s2}, {.mixture_sd = tau_over_s * s, .alternative = alt});
        return std::exp(*lr - 0.5 * d * d / s2 - std::log(s * std::sqrt(2 * kPi)));
      };
      const double mean = boost::math::quadrature::gauss_kronrod<double, 61>::integrate(
          f, -std::numeric_limits<double>::infinity(), std::numeric_limits<double>::infinity(), 15, 1e-13);
      CHECK(mean == doctest::Approx(1.0).epsilon(1e-9));
    }
  }
}

TEST_CASE("the confidence sequence ends are where the ratio reaches 1/alpha") {
  // Source: the radius inverts Lambda(theta0) = 1/alpha in theta0 (docs/methods.md section 10.1,
  // derived there from the closed form); here Lambda is evaluated at the ends with the null moved.
  for (double alpha : {0.01, 0.05, 0.2}) {
    for (double s2 : {1e-5, 0.3}) {
      const double tau = 2 * std::sqrt(s2);
      MixtureSettings settings{.mixture_sd = tau, .alpha = alpha};
      auto r = confidence_sequence_radius(s2, settings);
      REQUIRE(r.ok());
      const double est = 0.123;
      for (double end : {est - *r, est + *r}) {
        settings.null_value = end;
        auto lr = log_mixture_likelihood_ratio({est, s2}, settings);
        REQUIRE(lr.ok());
        CHECK(std::exp(*lr) == doctest::Approx(1 / alpha).epsilon(1e-10));
      }
    }
  }
}

TEST_CASE("Ville's inequality: looking at every observation keeps the always-valid p-value valid") {
  // Source: Ville's inequality, P(sup_n Lambda_n >= 1/alpha) <= alpha for a nonnegative martingale
  // with Lambda_0 = 1 (Ville 1939). With Gaussian data of known variance the mixture ratio is exactly
  // such a martingale. The fixed-horizon z-test checked at every look is the contrast: its error rate
  // grows without bound with the number of looks (the law of the iterated logarithm), so over 1,000
  // looks it is many times alpha.
  const double alpha = 0.05;
  const int streams = 2000, looks = 1000;
  std::mt19937_64 gen(20261202);
  std::normal_distribution<double> noise(0.0, 1.0);
  int anytime_false = 0, peeking_false = 0;
  const double z_crit = 1.959963984540054;  // qnorm(0.975), R 4.2
  for (int k = 0; k < streams; ++k) {
    double sum_t = 0, sum_c = 0, p = 1;
    bool anytime_hit = false, peeking_hit = false;
    for (int n = 1; n <= looks; ++n) {
      sum_t += noise(gen);
      sum_c += noise(gen);
      const double d = (sum_t - sum_c) / n, s2 = 2.0 / n;  // each arm has variance 1
      auto e = anytime_evidence({d, s2}, {.mixture_sd = 0.2, .alpha = alpha}, p);
      if (!e.ok()) FAIL(e.error().message);
      p = e->p_value;
      anytime_hit = anytime_hit || p <= alpha;
      peeking_hit = peeking_hit || std::abs(d) / std::sqrt(s2) >= z_crit;
    }
    anytime_false += anytime_hit;
    peeking_false += peeking_hit;
  }
  const double se = std::sqrt(alpha * (1 - alpha) / streams);
  CHECK(static_cast<double>(anytime_false) / streams <= alpha + 3 * se);
  CHECK(static_cast<double>(peeking_false) / streams >= 4 * alpha);
}

TEST_CASE("the always-valid p-value never rises and the e-value is the ratio") {
  auto first = anytime_evidence({0.02, 1e-4}, {.mixture_sd = 0.01}, 1.0);
  REQUIRE(first.ok());
  CHECK(first->e_value == doctest::Approx(ratio(0.02, 1e-4, 0.01)).epsilon(1e-15));
  CHECK(first->p_value == doctest::Approx(1 / first->e_value).epsilon(1e-15));
  // A later look with weaker evidence keeps the earlier minimum.
  auto later = anytime_evidence({0.0, 5e-5}, {.mixture_sd = 0.01}, first->p_value);
  REQUIRE(later.ok());
  CHECK(later->e_value < 1);
  CHECK(later->p_value == first->p_value);
  // No evidence: the p-value is 1, never more.
  auto none = anytime_evidence({0.0, 1e-4}, {.mixture_sd = 0.01});
  REQUIRE(none.ok());
  CHECK(none->p_value == 1.0);
}

TEST_CASE("summaries become an estimate and its variance") {
  // Proportions: 1180/20000 - 1000/20000 = 0.009; variance p(1-p)/n per arm (Wald form).
  auto p = effect_of_proportions({.n = 20000, .conversions = 1000}, {.n = 20000, .conversions = 1180});
  REQUIRE(p.ok());
  CHECK(p->estimate == doctest::Approx(0.009).epsilon(1e-12));
  CHECK(p->variance == doctest::Approx(0.059 * 0.941 / 20000 + 0.05 * 0.95 / 20000).epsilon(1e-12));
  // Means: Welch variance sd_t^2/n_t + sd_c^2/n_c.
  auto m = effect_of_means({.n = 100, .mean = 10, .sd = 2}, {.n = 400, .mean = 10.5, .sd = 3});
  REQUIRE(m.ok());
  CHECK(m->estimate == doctest::Approx(0.5));
  CHECK(m->variance == doctest::Approx(4.0 / 100 + 9.0 / 400).epsilon(1e-14));
}

TEST_CASE("bad settings and looks are refused with the field named") {
  auto tau0 = anytime_evidence({0.1, 0.01}, {.mixture_sd = 0});
  REQUIRE_FALSE(tau0.ok());
  CHECK(tau0.error().message.find("mixture_sd must be a finite number > 0") != std::string::npos);
  auto neg_var = anytime_evidence({0.1, -1}, {.mixture_sd = 0.1});
  REQUIRE_FALSE(neg_var.ok());
  CHECK(neg_var.error().message.find("variance must be") != std::string::npos);
  auto nan_est = anytime_evidence({std::nan(""), 1}, {.mixture_sd = 0.1});
  REQUIRE_FALSE(nan_est.ok());
  CHECK(nan_est.error().message.find("estimate must be") != std::string::npos);
  auto bad_alpha = anytime_evidence({0.1, 1}, {.mixture_sd = 0.1, .alpha = 1});
  REQUIRE_FALSE(bad_alpha.ok());
  CHECK(bad_alpha.error().message.find("alpha must be in (0, 1)") != std::string::npos);
  auto bad_prev = anytime_evidence({0.1, 1}, {.mixture_sd = 0.1}, 1.5);
  REQUIRE_FALSE(bad_prev.ok());
  auto bad_arm = effect_of_proportions({.n = 10, .conversions = 11}, {.n = 10, .conversions = 1});
  REQUIRE_FALSE(bad_arm.ok());
  CHECK(bad_arm.error().message.find("control_conversions") != std::string::npos);
}
