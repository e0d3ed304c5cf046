// The normal-mixture likelihood ratio, the always-valid p-value and the confidence sequence
// (anytime.hpp; docs/methods.md section 10.1).
#include "alphaledger/anytime.hpp"

#include "alphaledger/text.hpp"

#include <cmath>
#include <limits>
#include <string>

namespace alphaledger {
namespace {

Status check_settings(const MixtureSettings& s) {
  if (!std::isfinite(s.mixture_sd) || !(s.mixture_sd > 0)) {
    return invalid_input("mixture_sd must be a finite number > 0 on the scale of the estimate (e.g. the "
                         "smallest effect worth finding), got " + format_number(s.mixture_sd));
  }
  if (!std::isfinite(s.null_value)) {
    return invalid_input("null_value must be a finite number, got " + format_number(s.null_value));
  }
  if (!(s.alpha > 0 && s.alpha < 1)) {
    return invalid_input("alpha must be in (0, 1), e.g. 0.05, got " + format_number(s.alpha));
  }
  return {};
}

Status check_look(const EffectEstimate& look) {
  if (!std::isfinite(look.estimate)) {
    return invalid_input("estimate must be a finite number, got " + format_number(look.estimate));
  }
  if (!std::isfinite(look.variance) || look.variance < 0) {
    return invalid_input("variance must be a finite number >= 0, got " + format_number(look.variance));
  }
  return {};
}

// log(Phi(x)) for the standard normal CDF, accurate in both tails: erfc keeps the lower tail's
// relative accuracy; below about -37 it underflows and the asymptotic series takes over.
double log_normal_cdf(double x) {
  if (x > -37.0) return std::log(0.5 * std::erfc(-x / std::sqrt(2.0)));
  // Phi(x) ~ phi(x)/|x| * (1 - 1/x^2 + 3/x^4) for x -> -infinity (Abramowitz & Stegun 26.2.12).
  const double x2 = x * x;
  return -0.5 * x2 - std::log(-x) - 0.5 * std::log(2.0 * M_PI) + std::log1p(-1.0 / x2 + 3.0 / (x2 * x2));
}

}  // namespace

Result<double> log_mixture_likelihood_ratio(const EffectEstimate& look, const MixtureSettings& settings) {
  if (auto s = check_look(look); !s) return s.error();
  if (auto s = check_settings(settings); !s) return s.error();
  if (look.variance == 0) return 0.0;  // no spread, no evidence either way
  const double s2 = look.variance;
  const double t2 = settings.mixture_sd * settings.mixture_sd;
  const double d = look.estimate - settings.null_value;
  const double two_sided = 0.5 * std::log(s2 / (s2 + t2)) + t2 * d * d / (2.0 * s2 * (s2 + t2));
  if (settings.alternative == Alternative::kTwoSided) return two_sided;
  const double sign = settings.alternative == Alternative::kGreater ? 1.0 : -1.0;
  const double x = sign * d * settings.mixture_sd / (std::sqrt(s2) * std::sqrt(s2 + t2));
  return std::log(2.0) + two_sided + log_normal_cdf(x);
}

Result<double> confidence_sequence_radius(double variance, const MixtureSettings& settings) {
  if (auto s = check_look({0.0, variance}); !s) return s.error();
  if (auto s = check_settings(settings); !s) return s.error();
  if (variance == 0) return std::numeric_limits<double>::infinity();
  const double s2 = variance;
  const double t2 = settings.mixture_sd * settings.mixture_sd;
  return std::sqrt(2.0 * s2 * (s2 + t2) / t2 * (std::log(1.0 / settings.alpha) + 0.5 * std::log((s2 + t2) / s2)));
}

Result<AnytimeEvidence> anytime_evidence(const EffectEstimate& look, const MixtureSettings& settings,
                                         double previous_p) {
  if (!(previous_p >= 0 && previous_p <= 1)) {
    return invalid_input("the previous always-valid p-value must be in [0, 1], got " + format_number(previous_p));
  }
  auto log_ratio = log_mixture_likelihood_ratio(look, settings);
  if (!log_ratio) return log_ratio.error();
  auto radius = confidence_sequence_radius(look.variance, settings);
  if (!radius) return radius.error();
  AnytimeEvidence out;
  out.estimate = look.estimate;
  out.variance = look.variance;
  out.e_value = std::exp(*log_ratio);  // may be +inf for overwhelming evidence; then p is 0
  out.p_value = std::min(previous_p, std::min(1.0, std::exp(-*log_ratio)));
  out.cs_low = look.estimate - *radius;
  out.cs_high = look.estimate + *radius;
  return out;
}

Result<EffectEstimate> effect_of_proportions(const ProportionArm& control, const ProportionArm& treatment) {
  // The same checks (and messages) as the fixed-horizon test.
  if (auto c = compare_proportions(control, treatment, ProportionMethod::kPooled); !c) return c.error();
  const double pc = static_cast<double>(control.conversions) / static_cast<double>(control.n);
  const double pt = static_cast<double>(treatment.conversions) / static_cast<double>(treatment.n);
  return EffectEstimate{pt - pc, pt * (1 - pt) / static_cast<double>(treatment.n) +
                                     pc * (1 - pc) / static_cast<double>(control.n)};
}

Result<EffectEstimate> effect_of_means(const MeanArm& control, const MeanArm& treatment) {
  if (auto c = compare_means(control, treatment); !c) return c.error();
  const double v = treatment.sd * treatment.sd / static_cast<double>(treatment.n) +
                   control.sd * control.sd / static_cast<double>(control.n);
  return EffectEstimate{treatment.mean - control.mean, v};
}

}  // namespace alphaledger
