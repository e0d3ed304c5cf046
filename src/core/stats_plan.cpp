// Planning an experiment: sample size per arm, power, or smallest detectable effect
// (docs/statistics.md, "Planning").
#include <algorithm>
#include <boost/math/tools/toms748_solve.hpp>
#include <charconv>
#include <cmath>
#include <functional>
#include <string>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "core/math_policy.hpp"

namespace alphaledger {
namespace {

constexpr double kMaxPlanSize = 1e12;  // users per arm; beyond this a plan is not a plan

std::string number_text(double v) { return std::isnan(v) ? "nan" : format_number(v); }

// The critical value of a level-`level` test: two-sided tests put level/2 in the far tail (R's
// power.*.test with strict = FALSE ignore the opposite tail).
double tail_level(double level, Alternative alternative) {
  return alternative == Alternative::kTwoSided ? level / 2.0 : level;
}

// A root of f on [a, b] where f(a) < 0 <= f(b), to about 15 digits (Alefeld, Potra & Shi's
// TOMS 748, Boost.Math).
double solve_increasing(const std::function<double(double)>& f, double a, double b) {
  boost::uintmax_t max_iter = 300;
  const auto r = boost::math::tools::toms748_solve(
      f, a, b, f(a), f(b), boost::math::tools::eps_tolerance<double>(50), max_iter, detail::MathPolicy());
  return r.first + (r.second - r.first) / 2.0;
}

// Checks the request and works out what to solve.
struct Checked {
  PlanTarget target;
  double power;  // the requested power (kSize, kMinEffect)
};

Result<Checked> check_request(const PlanRequest& r) {
  if (!(r.level > 0.0 && r.level < 1.0))
    return invalid_input("level must be in (0, 1), got " + number_text(r.level));
  if (r.power && !(*r.power > 0.0 && *r.power < 1.0)) {
    return invalid_input("power must be in (0, 1), e.g. 0.8, got " + number_text(*r.power));
  }
  if (r.n_per_arm && (*r.n_per_arm < 2 || static_cast<double>(*r.n_per_arm) > kMaxPlanSize)) {
    return invalid_input("n_per_arm must be a whole number in [2, 1e12], got " +
                         std::to_string(*r.n_per_arm));
  }
  if (r.min_effect) {
    const double d = *r.min_effect;
    if (!std::isfinite(d)) return invalid_input("min_effect must be a finite number, got " + number_text(d));
    if (d == 0.0) return invalid_input("min_effect must not be 0: no sample size detects no effect");
    if (r.alternative == Alternative::kGreater && d < 0) {
      return invalid_input(
          "min_effect must be > 0 with alternative greater (the treatment is expected larger), got " +
          number_text(d));
    }
    if (r.alternative == Alternative::kLess && d > 0) {
      return invalid_input(
          "min_effect must be < 0 with alternative less (the treatment is expected smaller), got " +
          number_text(d));
    }
  }
  Checked c{PlanTarget::kSize, r.power.value_or(0.8)};
  if (r.min_effect && !r.n_per_arm) {
    c.target = PlanTarget::kSize;
  } else if (r.min_effect && r.n_per_arm) {
    if (r.power) {
      return invalid_input(
          "give at most two of min_effect, n_per_arm and power: with min_effect and n_per_arm the power "
          "is computed");
    }
    c.target = PlanTarget::kPower;
  } else if (r.n_per_arm) {
    c.target = PlanTarget::kMinEffect;
  } else {
    return invalid_input(
        "give min_effect (to get n_per_arm or, with n_per_arm, the power), or n_per_arm alone (to get "
        "the smallest detectable effect)");
  }
  const double floor_power = tail_level(r.level, r.alternative);
  if (c.target != PlanTarget::kPower && c.power <= floor_power) {
    return invalid_input("power must be above " + number_text(floor_power) +
                         " (the chance of rejecting when there is no effect at this level), got " +
                         number_text(c.power));
  }
  return c;
}

// The smallest whole n >= 2 with power(n) >= target, starting near the real solution.
std::uint64_t round_up_size(double n_exact, double target, const std::function<double(double)>& power_at) {
  double n = std::max(2.0, std::ceil(n_exact));
  for (int i = 0; i < 8 && n > 2.0 && power_at(n - 1.0) >= target; ++i) n -= 1.0;
  for (int i = 0; i < 8 && power_at(n) < target; ++i) n += 1.0;
  return static_cast<std::uint64_t>(n);
}

Result<Plan> finish_size(Plan p, double n_exact, double target,
                         const std::function<double(double)>& power_at) {
  if (!(n_exact <= kMaxPlanSize)) {
    return invalid_input("this plan needs more than 1e12 users per arm (about " + number_text(n_exact) +
                         "); a larger min_effect or level, or a lower power, is needed");
  }
  p.n_exact = n_exact;
  p.n_per_arm = round_up_size(n_exact, target, power_at);
  p.power = target;
  p.achieved_power = power_at(static_cast<double>(p.n_per_arm));
  return p;
}

}  // namespace

std::string_view plan_target_name(PlanTarget t) {
  switch (t) {
    case PlanTarget::kSize:
      return "n_per_arm";
    case PlanTarget::kPower:
      return "power";
    case PlanTarget::kMinEffect:
      return "min_effect";
  }
  return "n_per_arm";
}

double proportions_power(double baseline, double min_effect, double n_per_arm, double level,
                         Alternative alternative) {
  const double p0 = baseline, p1 = baseline + min_effect;
  const double pbar = (p0 + p1) / 2.0;
  const double z = detail::normal_upper_quantile(tail_level(level, alternative));
  const double x = (std::sqrt(n_per_arm) * std::fabs(min_effect) - z * std::sqrt(2.0 * pbar * (1.0 - pbar))) /
                   std::sqrt(p0 * (1.0 - p0) + p1 * (1.0 - p1));
  return detail::normal_upper(-x);
}

double means_power(double sd, double min_effect, double n_per_arm, double level, Alternative alternative) {
  const double df = 2.0 * (n_per_arm - 1.0);
  const double critical = detail::t_upper_quantile(tail_level(level, alternative), df);
  const double ncp = std::sqrt(n_per_arm / 2.0) * std::fabs(min_effect) / sd;
  return detail::noncentral_t_upper(critical, df, ncp);
}

Result<Plan> plan_proportions(double baseline, const PlanRequest& request) {
  if (!(baseline > 0.0 && baseline < 1.0)) {
    return invalid_input("baseline must be a proportion in (0, 1), got " + number_text(baseline));
  }
  auto checked = check_request(request);
  if (!checked) return checked.error();
  if (request.min_effect) {
    const double p1 = baseline + *request.min_effect;
    if (!(p1 > 0.0 && p1 < 1.0)) {
      return invalid_input("baseline + min_effect (the treatment proportion) must be in (0, 1), got " +
                           number_text(p1));
    }
  }
  const double level = request.level;
  const Alternative alt = request.alternative;
  Plan p;
  p.solved = checked->target;
  p.level = level;
  p.alternative = alt;
  switch (checked->target) {
    case PlanTarget::kSize: {
      const double d = *request.min_effect, p0 = baseline, p1 = baseline + d;
      const double pbar = (p0 + p1) / 2.0;
      // Power is increasing in n, so the power equation solves in closed form.
      const double za = detail::normal_upper_quantile(tail_level(level, alt));
      const double zb = normal_quantile(checked->power);
      const double root_n =
          (za * std::sqrt(2.0 * pbar * (1.0 - pbar)) + zb * std::sqrt(p0 * (1.0 - p0) + p1 * (1.0 - p1))) /
          std::fabs(d);
      const double n_exact = root_n > 0.0 ? root_n * root_n : 0.0;
      p.min_effect = d;
      return finish_size(p, n_exact, checked->power,
                         [&](double n) { return proportions_power(baseline, d, n, level, alt); });
    }
    case PlanTarget::kPower: {
      p.min_effect = *request.min_effect;
      p.n_per_arm = *request.n_per_arm;
      p.n_exact = static_cast<double>(p.n_per_arm);
      p.power = p.achieved_power = proportions_power(baseline, p.min_effect, p.n_exact, level, alt);
      return p;
    }
    case PlanTarget::kMinEffect: {
      p.n_per_arm = *request.n_per_arm;
      p.n_exact = static_cast<double>(p.n_per_arm);
      p.power = checked->power;
      // Solve for an increase over `from` (a decrease for kLess, by the symmetry p -> 1 - p).
      const double from = alt == Alternative::kLess ? 1.0 - baseline : baseline;
      const auto f = [&](double p1) {
        return proportions_power(from, p1 - from, p.n_exact, level, alt) - p.power;
      };
      // The smallest effect: scan upward for the first grid point reaching the power, then refine
      // (the power need not be monotone close to 1).
      constexpr int kGrid = 1000;
      double a = from, b = 1.0;
      bool found = false;
      for (int i = 1; i <= kGrid; ++i) {
        const double x = from + (1.0 - from) * i / kGrid;
        if (f(x) >= 0.0) {
          b = x;
          found = true;
          break;
        }
        a = x;
      }
      if (!found) {
        return invalid_input("with " + std::to_string(p.n_per_arm) + " per arm no change of the baseline " +
                             number_text(baseline) + " reaches power " + number_text(p.power) + " at level " +
                             number_text(level) + "; more users, a higher level or a lower power is needed");
      }
      const double p1 = solve_increasing(f, a, b);
      p.min_effect = alt == Alternative::kLess ? -(p1 - from) : p1 - from;
      p.achieved_power = proportions_power(baseline, p.min_effect, p.n_exact, level, alt);
      return p;
    }
  }
  return p;
}

Result<Plan> plan_means(double sd, const PlanRequest& request) {
  if (!(sd > 0.0 && std::isfinite(sd)))
    return invalid_input("sd must be a finite number > 0, got " + number_text(sd));
  auto checked = check_request(request);
  if (!checked) return checked.error();
  const double level = request.level;
  const Alternative alt = request.alternative;
  Plan p;
  p.solved = checked->target;
  p.level = level;
  p.alternative = alt;
  const double za = detail::normal_upper_quantile(tail_level(level, alt));
  switch (checked->target) {
    case PlanTarget::kSize: {
      const double d = *request.min_effect;
      p.min_effect = d;
      const double target = checked->power;
      const auto power_at = [&](double n) { return means_power(sd, d, n, level, alt); };
      const auto f = [&](double n) { return power_at(n) - target; };
      double n_exact = 2.0;
      if (f(2.0) < 0.0) {
        // Bracket from the normal approximation 2 ((za + zb) sd / d)^2, then solve exactly.
        const double zb = normal_quantile(target);
        const double guess = 2.0 * std::pow(std::max(za + zb, 0.5) * sd / d, 2.0);
        double lo = 2.0, hi = std::max(4.0, 1.5 * guess + 2.0);
        while (f(hi) < 0.0) {
          if (hi > kMaxPlanSize) return finish_size(p, hi, target, power_at);  // reports "more than 1e12"
          lo = hi;
          hi *= 2.0;
        }
        n_exact = solve_increasing(f, lo, hi);
      }
      return finish_size(p, n_exact, target, power_at);
    }
    case PlanTarget::kPower: {
      p.min_effect = *request.min_effect;
      p.n_per_arm = *request.n_per_arm;
      p.n_exact = static_cast<double>(p.n_per_arm);
      p.power = p.achieved_power = means_power(sd, p.min_effect, p.n_exact, level, alt);
      return p;
    }
    case PlanTarget::kMinEffect: {
      p.n_per_arm = *request.n_per_arm;
      p.n_exact = static_cast<double>(p.n_per_arm);
      p.power = checked->power;
      const auto f = [&](double d) { return means_power(sd, d, p.n_exact, level, alt) - p.power; };
      // Power rises with the effect from the level (at 0) towards 1: bracket, then solve.
      double hi = std::max(za + normal_quantile(p.power), 0.5) * sd * std::sqrt(2.0 / p.n_exact) * 1.5;
      for (int i = 0; i < 200 && f(hi) < 0.0; ++i) hi *= 2.0;
      const double d = solve_increasing(f, 0.0, hi);
      p.min_effect = alt == Alternative::kLess ? -d : d;
      p.achieved_power = means_power(sd, p.min_effect, p.n_exact, level, alt);
      return p;
    }
  }
  return p;
}

}  // namespace alphaledger
