// p-values, estimates and confidence intervals from experiment summaries (docs/statistics.md).
#include <algorithm>
#include <charconv>
#include <cmath>
#include <limits>
#include <string>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "core/math_policy.hpp"

namespace alphaledger {
namespace {

// Shortest text that reads back to the same double, for messages.
std::string number_text(double v) { return std::isnan(v) ? "nan" : format_number(v); }

constexpr std::uint64_t kMaxArmSize = std::uint64_t{1} << 53;  // counts stay exact as doubles
constexpr double kMaxFisherTotal = 1e9;  // Boost's hypergeometric works in 32-bit counts
constexpr double kInf = std::numeric_limits<double>::infinity();

// P-value of a statistic whose null law is symmetric, given its upper tail function.
template <typename Upper>
double p_value_symmetric(double stat, Alternative alternative, Upper upper) {
  switch (alternative) {
    case Alternative::kGreater:
      return upper(stat);
    case Alternative::kLess:
      return upper(-stat);
    case Alternative::kTwoSided:
      break;
  }
  return std::min(1.0, 2.0 * upper(std::fabs(stat)));
}

Status check_confidence(double confidence) {
  if (!(confidence > 0.0 && confidence < 1.0)) {
    return invalid_input("confidence must be in (0, 1), e.g. 0.95, got " + number_text(confidence));
  }
  return {};
}

Status check_arm_size(std::uint64_t n, std::string_view field) {
  if (n < 2 || n > kMaxArmSize) {
    return invalid_input(std::string(field) + " must be a whole number in [2, 2^53], got " +
                         std::to_string(n));
  }
  return {};
}

// The normal quantile for an interval at `confidence`: two-sided intervals leave (1 - c)/2 in each
// tail, one-sided ones 1 - c in the one tail.
double interval_z(double confidence, Alternative alternative) {
  const double tail = alternative == Alternative::kTwoSided ? (1.0 - confidence) / 2.0 : 1.0 - confidence;
  return detail::normal_upper_quantile(tail);
}

// Wilson score interval of x out of n at normal quantile z (Wilson 1927), clipped to [0, 1].
struct Interval {
  double low, high;
};
Interval wilson(double x, double n, double z) {
  const double z2 = z * z;
  const double center = (x + z2 / 2.0) / (n + z2);
  const double half = z * std::sqrt(x * (n - x) / n + z2 / 4.0) / (n + z2);
  return {std::clamp(center - half, 0.0, 1.0), std::clamp(center + half, 0.0, 1.0)};
}

// Fisher's exact test for the 2x2 table (treatment, control) x (converted, not), conditional on
// all margins: X = treatment conversions ~ Hypergeometric(r = all conversions, n = treatment size,
// N = everyone). Two-sided: the probability of every table no more likely than the observed one,
// with the relative tolerance 1e-7 R's fisher.test uses for ties.
double fisher_p_value(unsigned x, unsigned r, unsigned n, unsigned total, Alternative alternative) {
  const detail::Hypergeometric dist(r, n, total);
  const unsigned lo = n + r > total ? n + r - total : 0;
  const unsigned hi = std::min(r, n);
  namespace bm = boost::math;
  const auto upper_from = [&](unsigned k) {  // P(X >= k)
    return k <= lo ? 1.0 : bm::cdf(bm::complement(dist, k - 1));
  };
  switch (alternative) {
    case Alternative::kGreater:
      return upper_from(x);
    case Alternative::kLess:
      return x >= hi ? 1.0 : bm::cdf(dist, x);
    case Alternative::kTwoSided:
      break;
  }
  const double threshold = bm::pdf(dist, x) * (1.0 + 1e-7);
  // The law is unimodal: the tables at most as likely as the observed one are two tails.
  const auto mode =
      static_cast<unsigned>(std::floor((double(r) + 1.0) * (double(n) + 1.0) / (double(total) + 2.0)));
  const unsigned m = std::clamp(mode, lo, hi);
  if (bm::pdf(dist, m) <= threshold) return 1.0;
  double p = 0;
  if (bm::pdf(dist, lo) <= threshold) {  // left tail [lo, a]: the largest a < m with pdf <= threshold
    unsigned a = lo, b = m;              // pdf(a) <= threshold < pdf(b)
    while (b - a > 1) {
      const unsigned mid = a + (b - a) / 2;
      (bm::pdf(dist, mid) <= threshold ? a : b) = mid;
    }
    p += bm::cdf(dist, a);
  }
  if (bm::pdf(dist, hi) <= threshold) {  // right tail [c, hi]: the smallest c > m with pdf <= threshold
    unsigned a = m, c = hi;              // pdf(a) > threshold >= pdf(c)
    while (c - a > 1) {
      const unsigned mid = a + (c - a) / 2;
      (bm::pdf(dist, mid) <= threshold ? c : a) = mid;
    }
    p += upper_from(c);
  }
  return std::min(1.0, p);
}

}  // namespace

std::string_view alternative_name(Alternative a) {
  switch (a) {
    case Alternative::kTwoSided:
      return "two-sided";
    case Alternative::kGreater:
      return "greater";
    case Alternative::kLess:
      return "less";
  }
  return "two-sided";
}

Result<Alternative> parse_alternative(std::string_view name) {
  if (name == "two-sided") return Alternative::kTwoSided;
  if (name == "greater") return Alternative::kGreater;
  if (name == "less") return Alternative::kLess;
  return invalid_input("alternative must be two-sided, greater or less, got '" + std::string(name) + "'");
}

std::string_view proportion_method_name(ProportionMethod m) {
  switch (m) {
    case ProportionMethod::kPooled:
      return "pooled";
    case ProportionMethod::kUnpooled:
      return "unpooled";
    case ProportionMethod::kFisher:
      return "fisher";
  }
  return "pooled";
}

Result<ProportionMethod> parse_proportion_method(std::string_view name) {
  if (name == "pooled") return ProportionMethod::kPooled;
  if (name == "unpooled") return ProportionMethod::kUnpooled;
  if (name == "fisher") return ProportionMethod::kFisher;
  return invalid_input("method must be pooled, unpooled or fisher, got '" + std::string(name) + "'");
}

double normal_quantile(double p) {
  if (!(p > 0.0 && p < 1.0)) return std::numeric_limits<double>::quiet_NaN();
  // Each tail from its own side, so quantiles of tiny tail probabilities stay accurate.
  return p < 0.5 ? -detail::normal_upper_quantile(p) : detail::normal_quantile(p);
}

namespace {

// The arms' sizes and counts, the confidence, and Fisher's size limit.
Status check_proportion_arms(const ProportionArm& control, const ProportionArm& treatment,
                             ProportionMethod method, double confidence) {
  if (auto s = check_arm_size(control.n, "control_n"); !s) return s.error();
  if (auto s = check_arm_size(treatment.n, "treatment_n"); !s) return s.error();
  if (control.conversions > control.n) {
    return invalid_input("control_conversions must be a whole number in [0, control_n = " +
                         std::to_string(control.n) + "], got " + std::to_string(control.conversions));
  }
  if (treatment.conversions > treatment.n) {
    return invalid_input("treatment_conversions must be a whole number in [0, treatment_n = " +
                         std::to_string(treatment.n) + "], got " + std::to_string(treatment.conversions));
  }
  if (auto s = check_confidence(confidence); !s) return s.error();
  const double total = static_cast<double>(control.n) + static_cast<double>(treatment.n);
  if (method == ProportionMethod::kFisher && total > kMaxFisherTotal) {
    return invalid_input("Fisher's exact test takes at most 1e9 users in total, got " + number_text(total) +
                         "; with this many users use --method pooled");
  }
  return {};
}

// The two-sided interval for p1 - p0 at critical value z, before clipping to [-1, 1]: Newcombe's
// hybrid score interval with Fisher's test, the Wald interval otherwise.
Interval difference_interval(double x0, double n0, double x1, double n1, ProportionMethod method, double z) {
  const double p0 = x0 / n0, p1 = x1 / n1, diff = p1 - p0;
  if (method == ProportionMethod::kFisher) {
    // Newcombe (1998) hybrid score interval, method 10: combines the arms' Wilson intervals.
    const Interval w0 = wilson(x0, n0, z), w1 = wilson(x1, n1, z);
    return {diff - std::sqrt((p1 - w1.low) * (p1 - w1.low) + (w0.high - p0) * (w0.high - p0)),
            diff + std::sqrt((w1.high - p1) * (w1.high - p1) + (p0 - w0.low) * (p0 - w0.low))};
  }
  const double width = z * std::sqrt(p0 * (1.0 - p0) / n0 + p1 * (1.0 - p1) / n1);
  return {diff - width, diff + width};
}

}  // namespace

Result<Comparison> compare_proportions(const ProportionArm& control, const ProportionArm& treatment,
                                       ProportionMethod method, Alternative alternative, double confidence) {
  if (auto s = check_proportion_arms(control, treatment, method, confidence); !s) return s.error();
  const double n0 = static_cast<double>(control.n), x0 = static_cast<double>(control.conversions);
  const double n1 = static_cast<double>(treatment.n), x1 = static_cast<double>(treatment.conversions);
  const double p0 = x0 / n0, p1 = x1 / n1;
  Comparison c;
  c.confidence = confidence;
  c.estimate = p1 - p0;
  if (control.conversions > 0) c.relative_lift = (p1 - p0) / p0;
  const double diff = p1 - p0;
  // Variance of the difference with each arm's own proportion: the Wald interval's, and the
  // unpooled test's.
  const double se_unpooled = std::sqrt(p0 * (1.0 - p0) / n0 + p1 * (1.0 - p1) / n1);

  switch (method) {
    case ProportionMethod::kPooled: {
      const double pooled = (x0 + x1) / (n0 + n1);
      const double se = std::sqrt(pooled * (1.0 - pooled) * (1.0 / n0 + 1.0 / n1));
      if (se == 0.0) {  // neither arm varies, so the difference is 0 too: no evidence
        c.statistic = 0.0;
        c.p_value = 1.0;
      } else {
        c.statistic = diff / se;
        c.p_value = p_value_symmetric(c.statistic, alternative, detail::normal_upper);
      }
      break;
    }
    case ProportionMethod::kUnpooled: {
      if (se_unpooled == 0.0) {
        if (diff != 0.0) {
          return invalid_input(
              "the unpooled test has zero variance when each arm is all conversions or none and the "
              "arms differ (control " +
              std::to_string(control.conversions) + "/" + std::to_string(control.n) + ", treatment " +
              std::to_string(treatment.conversions) + "/" + std::to_string(treatment.n) +
              "); use method pooled or fisher");
        }
        c.statistic = 0.0;
        c.p_value = 1.0;
      } else {
        c.statistic = diff / se_unpooled;
        c.p_value = p_value_symmetric(c.statistic, alternative, detail::normal_upper);
      }
      break;
    }
    case ProportionMethod::kFisher: {
      const auto x = static_cast<unsigned>(treatment.conversions);
      const auto r = static_cast<unsigned>(control.conversions + treatment.conversions);
      c.statistic = x1;
      c.p_value = fisher_p_value(x, r, static_cast<unsigned>(treatment.n),
                                 static_cast<unsigned>(control.n + treatment.n), alternative);
      break;
    }
  }

  const auto [low, high] = difference_interval(x0, n0, x1, n1, method, interval_z(confidence, alternative));
  c.ci_low = alternative == Alternative::kLess ? -1.0 : std::max(low, -1.0);
  c.ci_high = alternative == Alternative::kGreater ? 1.0 : std::min(high, 1.0);
  return c;
}

Result<Comparison> compare_means(const MeanArm& control, const MeanArm& treatment, bool pooled_variance,
                                 Alternative alternative, double confidence) {
  if (auto s = check_arm_size(control.n, "control_n"); !s) return s.error();
  if (auto s = check_arm_size(treatment.n, "treatment_n"); !s) return s.error();
  if (!std::isfinite(control.mean))
    return invalid_input("control_mean must be a finite number, got " + number_text(control.mean));
  if (!std::isfinite(treatment.mean))
    return invalid_input("treatment_mean must be a finite number, got " + number_text(treatment.mean));
  if (!(control.sd > 0.0 && std::isfinite(control.sd))) {
    return invalid_input("control_sd must be a finite number > 0, got " + number_text(control.sd));
  }
  if (!(treatment.sd > 0.0 && std::isfinite(treatment.sd))) {
    return invalid_input("treatment_sd must be a finite number > 0, got " + number_text(treatment.sd));
  }
  if (auto s = check_confidence(confidence); !s) return s.error();
  const double n0 = static_cast<double>(control.n), n1 = static_cast<double>(treatment.n);
  const double v0 = control.sd * control.sd / n0, v1 = treatment.sd * treatment.sd / n1;
  double se = 0, df = 0;
  if (pooled_variance) {
    df = n0 + n1 - 2.0;
    const double var = ((n0 - 1.0) * control.sd * control.sd + (n1 - 1.0) * treatment.sd * treatment.sd) / df;
    se = std::sqrt(var * (1.0 / n0 + 1.0 / n1));
  } else {
    se = std::sqrt(v0 + v1);
    // Welch–Satterthwaite degrees of freedom.
    df = (v0 + v1) * (v0 + v1) / (v0 * v0 / (n0 - 1.0) + v1 * v1 / (n1 - 1.0));
  }
  const double diff = treatment.mean - control.mean;
  // df overflows (v0 * v0 past the largest double) before se does: refuse that too, never a NaN.
  if (!std::isfinite(diff) || !(se > 0.0) || !std::isfinite(se) || !std::isfinite(df) || !(df > 0.0)) {
    return invalid_input("the means and standard deviations are too large to combine in double precision");
  }
  Comparison c;
  c.confidence = confidence;
  c.estimate = diff;
  c.df = df;
  c.statistic = diff / se;
  c.p_value = p_value_symmetric(c.statistic, alternative, [df](double t) { return detail::t_upper(t, df); });
  const double tail = alternative == Alternative::kTwoSided ? (1.0 - confidence) / 2.0 : 1.0 - confidence;
  const double width = detail::t_upper_quantile(tail, df) * se;
  c.ci_low = alternative == Alternative::kLess ? -kInf : diff - width;
  c.ci_high = alternative == Alternative::kGreater ? kInf : diff + width;
  return c;
}

Result<Comparison> test_from_z(double z, Alternative alternative) {
  if (!std::isfinite(z)) return invalid_input("z must be a finite number, got " + number_text(z));
  Comparison c;
  c.statistic = z;
  c.p_value = p_value_symmetric(z, alternative, detail::normal_upper);
  return c;
}

Result<Comparison> test_from_t(double t, double df, Alternative alternative) {
  if (!std::isfinite(t)) return invalid_input("t must be a finite number, got " + number_text(t));
  if (!(df > 0.0 && std::isfinite(df)))
    return invalid_input("df must be a finite number > 0, got " + number_text(df));
  Comparison c;
  c.statistic = t;
  c.df = df;
  c.p_value = p_value_symmetric(t, alternative, [df](double x) { return detail::t_upper(x, df); });
  return c;
}

}  // namespace alphaledger
