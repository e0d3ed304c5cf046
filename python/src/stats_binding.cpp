// The statistics in Python: p-values (fixed-horizon and always-valid) from experiment summaries,
// and sample sizes at a level.
#include <pybind11/stl.h>

#include <optional>
#include <string>

#include "alphaledger/anytime.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "binding.hpp"

namespace alphaledger::python {

namespace {

py::dict comparison_dict(const Comparison& c) {
  py::dict d;
  d["statistic"] = c.statistic;
  d["p_value"] = c.p_value;
  d["df"] = nullable(c.df);
  d["estimate"] = nullable(c.estimate);
  d["relative_lift"] = nullable(c.relative_lift);
  d["ci_low"] = nullable(c.ci_low);
  d["ci_high"] = nullable(c.ci_high);
  d["confidence"] = c.confidence;
  return d;
}

void add_anytime(py::dict& d, bool anytime, const std::optional<double>& mixture_sd,
                 const Result<EffectEstimate>& effect, Alternative alternative, double confidence) {
  if (!anytime) {
    if (mixture_sd) raise(invalid_input("mixture_sd is used only with anytime=True"));
    return;
  }
  if (!mixture_sd)
    raise(invalid_input(
        "anytime=True needs mixture_sd: the effect you hope to detect, on the scale of the "
        "estimate (e.g. 0.005 for half a percentage point); it sets the power, never the validity"));
  const auto& look = take(Result<EffectEstimate>(effect));
  MixtureSettings settings{.mixture_sd = *mixture_sd, .alpha = 1.0 - confidence, .alternative = alternative};
  auto e = take(anytime_evidence(look, settings));
  d["mixture_sd"] = *mixture_sd;
  d["anytime_p_value"] = e.p_value;
  d["e_value"] = e.e_value;
  d["cs_low"] = e.cs_low;
  d["cs_high"] = e.cs_high;
}

py::dict pvalue_proportions(std::uint64_t cn, std::uint64_t cx, std::uint64_t tn, std::uint64_t tx,
                            const std::string& method, const std::string& alternative, double confidence,
                            bool anytime, const std::optional<double>& mixture_sd) {
  const ProportionArm control{cn, cx}, treatment{tn, tx};
  const auto alt = take(parse_alternative(alternative));
  auto c =
      take(compare_proportions(control, treatment, take(parse_proportion_method(method)), alt, confidence));
  py::dict d = comparison_dict(c);
  add_anytime(d, anytime, mixture_sd, effect_of_proportions(control, treatment), alt, confidence);
  return d;
}

py::dict pvalue_means(std::uint64_t cn, double cm, double cs, std::uint64_t tn, double tm, double ts,
                      bool pooled_variance, const std::string& alternative, double confidence, bool anytime,
                      const std::optional<double>& mixture_sd) {
  const MeanArm control{cn, cm, cs}, treatment{tn, tm, ts};
  const auto alt = take(parse_alternative(alternative));
  auto c = take(compare_means(control, treatment, pooled_variance, alt, confidence));
  py::dict d = comparison_dict(c);
  add_anytime(d, anytime, mixture_sd, effect_of_means(control, treatment), alt, confidence);
  return d;
}

py::dict plan_dict(const Plan& p) {
  py::dict d;
  d["solved"] = std::string(plan_target_name(p.solved));
  d["level"] = p.level;
  d["alternative"] = std::string(alternative_name(p.alternative));
  d["n_per_arm"] = p.n_per_arm;
  d["n_exact"] = p.n_exact;
  d["power"] = p.power;
  d["achieved_power"] = p.achieved_power;
  d["min_effect"] = p.min_effect;
  return d;
}

PlanRequest plan_request(double level, const std::string& alternative,
                         const std::optional<double>& min_effect, const std::optional<double>& power,
                         const std::optional<std::uint64_t>& n_per_arm) {
  PlanRequest r;
  r.level = level;
  r.alternative = take(parse_alternative(alternative));
  r.min_effect = min_effect;
  r.power = power;
  r.n_per_arm = n_per_arm;
  return r;
}

}  // namespace

void bind_stats(py::module_& m) {
  m.def("pvalue_proportions", &pvalue_proportions);
  m.def("pvalue_means", &pvalue_means);
  m.def("plan_proportions", [](double baseline, double level, const std::string& alternative,
                               const std::optional<double>& min_effect, const std::optional<double>& power,
                               const std::optional<std::uint64_t>& n_per_arm) {
    return plan_dict(
        take(plan_proportions(baseline, plan_request(level, alternative, min_effect, power, n_per_arm))));
  });
  m.def("plan_means", [](double sd, double level, const std::string& alternative,
                         const std::optional<double>& min_effect, const std::optional<double>& power,
                         const std::optional<std::uint64_t>& n_per_arm) {
    return plan_dict(take(plan_means(sd, plan_request(level, alternative, min_effect, power, n_per_arm))));
  });
  m.def("format_number", [](double v) { return format_number(v); });
}

}  // namespace alphaledger::python
