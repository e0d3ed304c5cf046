// alphaledger pvalue proportions|means|statistic (docs/cli.md "Experiment statistics";
// docs/statistics.md); registers plan too (src/cli/cmd_plan.cpp). The math is in the core
// (alphaledger/stats.hpp and anytime.hpp); this file parses flags and prints.
#include <charconv>
#include <cmath>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "alphaledger/anytime.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/store.hpp"
#include "alphaledger/test_log.hpp"
#include "alphaledger/text.hpp"
#include "cli/command.hpp"
#include "cli/stats_text.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

std::vector<std::string> split_colon(const std::string& s) {
  std::vector<std::string> parts;
  std::size_t start = 0;
  while (true) {
    const std::size_t colon = s.find(':', start);
    parts.push_back(s.substr(start, colon == std::string::npos ? std::string::npos : colon - start));
    if (colon == std::string::npos) return parts;
    start = colon + 1;
  }
}

Result<std::uint64_t> parse_whole(const std::string& text, const std::string& flag, const std::string& what) {
  double v = 0;
  if (!parse_real(text, v) || v < 0 || v != std::floor(v) || v > 9007199254740992.0) {
    return invalid_input(flag + ": " + what + " must be a whole number >= 0, got '" + excerpt(text) + "'");
  }
  return static_cast<std::uint64_t>(v);
}

// --control / --treatment N:X
Result<ProportionArm> parse_proportion_arm(const std::string& text, const std::string& flag) {
  const auto parts = split_colon(text);
  if (parts.size() != 2) {
    return invalid_input(flag + " must be USERS:CONVERSIONS, e.g. 1000:120, got '" + excerpt(text) + "'");
  }
  auto n = parse_whole(parts[0], flag, "the number of users");
  if (!n) return n.error();
  auto x = parse_whole(parts[1], flag, "the number of conversions");
  if (!x) return x.error();
  return ProportionArm{*n, *x};
}

// --control / --treatment N:MEAN:SD
Result<MeanArm> parse_mean_arm(const std::string& text, const std::string& flag) {
  const auto parts = split_colon(text);
  if (parts.size() != 3) {
    return invalid_input(flag + " must be USERS:MEAN:SD, e.g. 500:12.5:4.2, got '" + excerpt(text) + "'");
  }
  auto n = parse_whole(parts[0], flag, "the number of users");
  if (!n) return n.error();
  double mean = 0, sd = 0;
  if (!parse_real(parts[1], mean))
    return invalid_input(flag + ": the mean must be a finite number, got '" + excerpt(parts[1]) + "'");
  if (!parse_real(parts[2], sd)) {
    return invalid_input(flag + ": the standard deviation must be a finite number > 0, got '" +
                         excerpt(parts[2]) + "'");
  }
  return MeanArm{*n, mean, sd};
}

Result<Alternative> alternative_from(const std::string& s) { return parse_alternative(s); }

// Core messages name the summary field (control_sd, treatment_conversions, ...); say which flag
// and value it came from.
Error with_flag(Error e, const std::string& control, const std::string& treatment) {
  if (e.message.rfind("control_", 0) == 0) e.message = "--control " + excerpt(control) + ": " + e.message;
  if (e.message.rfind("treatment_", 0) == 0)
    e.message = "--treatment " + excerpt(treatment) + ": " + e.message;
  return e;
}

std::string percent_text(double confidence) { return format_rounded(confidence * 100.0, 6) + "%"; }

// Common tail of the pvalue outputs.
void add_result_json(Json& j, const Comparison& c, bool with_interval, bool with_lift = false) {
  j["statistic"] = c.statistic;
  j["p_value"] = c.p_value;
  if (c.df) j["df"] = *c.df;
  if (with_interval) {
    j["estimate"] = json_number(c.estimate);
    if (with_lift) j["relative_lift"] = json_number(c.relative_lift);
    j["ci_low"] = json_number(c.ci_low);
    j["ci_high"] = json_number(c.ci_high);
    j["confidence"] = c.confidence;
  }
}

// ---- --anytime: the always-valid numbers beside the fixed-horizon ones ----------------------

struct AnytimeOptions {
  bool on = false;
  std::optional<double> mixture_sd;
};

void add_anytime_options(CLI::App* sub, AnytimeOptions& a) {
  sub->add_flag("--anytime", a.on,
                "also give the always-valid p-value, the e-value and the confidence sequence: valid however "
                "often the running test is looked at (normal mixture; docs/statistics.md)");
  sub->add_option(
      "--mixture-sd", a.mixture_sd,
      "with --anytime (required there): the mixing scale, about the effect you hope to detect, on "
      "the scale of the estimate (e.g. 0.005 = half a percentage point)");
}

// The always-valid evidence for one look, or nothing without --anytime.
Result<std::optional<AnytimeEvidence>> anytime_of(const AnytimeOptions& a,
                                                  const Result<EffectEstimate>& effect,
                                                  Alternative alternative, double confidence) {
  if (!a.on) {
    if (a.mixture_sd)
      return invalid_input("--mixture-sd is used only with --anytime; add --anytime or drop it");
    return std::optional<AnytimeEvidence>{};
  }
  if (!a.mixture_sd) {
    return invalid_input(
        "--anytime needs --mixture-sd: the effect you hope to detect, on the scale of the estimate (e.g. "
        "--mixture-sd 0.005 for half a percentage point); it sets the power, never the validity");
  }
  if (!effect) return effect.error();
  MixtureSettings settings{
      .mixture_sd = *a.mixture_sd, .alpha = 1.0 - confidence, .alternative = alternative};
  auto e = anytime_evidence(*effect, settings);
  if (!e) {
    Error err = e.error();
    if (err.message.rfind("mixture_sd", 0) == 0)
      err.message = "--" + err.message.replace(0, 10, "mixture-sd");
    return err;
  }
  return std::optional<AnytimeEvidence>(*e);
}

void add_anytime_json(Json& j, const std::optional<AnytimeEvidence>& e, const AnytimeOptions& a) {
  if (!e) return;
  j["mixture_sd"] = *a.mixture_sd;
  j["anytime_p_value"] = e->p_value;
  j["e_value"] = json_number(e->e_value);  // null only if it overflows a double
  j["cs_low"] = json_number(e->cs_low);
  j["cs_high"] = json_number(e->cs_high);
}

void add_anytime_text(TextBlock& t, const std::optional<AnytimeEvidence>& e, double confidence, int digits) {
  if (!e) return;
  t.add("anytime_p_value", format_number(e->p_value) + "  (always valid: whenever you look and stop)");
  t.add("e_value", text_number(e->e_value) + "  (mixture likelihood ratio at this look)");
  t.add("cs_low",
        text_number(e->cs_low, digits) + "  (" + percent_text(confidence) + " confidence sequence)");
  t.add("cs_high", text_number(e->cs_high, digits));
}

// ---- pvalue proportions -------------------------------------------------------------------

struct ProportionsOptions {
  std::string control, treatment;
  std::string alternative = "two-sided";
  std::string method = "pooled";
  double confidence = 0.95;
  AnytimeOptions anytime;
};

Status run_pvalue_proportions(const ProportionsOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto control = parse_proportion_arm(o.control, "--control");
  if (!control) return control.error();
  auto treatment = parse_proportion_arm(o.treatment, "--treatment");
  if (!treatment) return treatment.error();
  auto alt = alternative_from(o.alternative);
  if (!alt) return alt.error();
  auto method = parse_proportion_method(o.method);
  if (!method) return method.error();
  auto c = compare_proportions(*control, *treatment, *method, *alt, o.confidence);
  if (!c) return with_flag(c.error(), o.control, o.treatment);
  auto anytime = anytime_of(o.anytime, effect_of_proportions(*control, *treatment), *alt, o.confidence);
  if (!anytime) return with_flag(anytime.error(), o.control, o.treatment);

  // Cochran's rule of thumb for the normal approximation: every expected count at least 5.
  std::string note;
  if (*method != ProportionMethod::kFisher) {
    const double n0 = static_cast<double>(control->n), n1 = static_cast<double>(treatment->n);
    const double pooled = static_cast<double>(control->conversions + treatment->conversions) / (n0 + n1);
    const double smallest = std::min(n0, n1) * std::min(pooled, 1.0 - pooled);
    if (smallest < 5.0) {
      note =
          "some expected counts are below 5, so the normal approximation may be poor; consider --method "
          "fisher";
    }
  }
  const double p0 = static_cast<double>(control->conversions) / static_cast<double>(control->n);
  const double p1 = static_cast<double>(treatment->conversions) / static_cast<double>(treatment->n);
  if (g.json) {
    Json j;
    j["test"] = "proportions";
    j["method"] = std::string(proportion_method_name(*method));
    j["alternative"] = std::string(alternative_name(*alt));
    j["control_n"] = control->n;
    j["control_conversions"] = control->conversions;
    j["treatment_n"] = treatment->n;
    j["treatment_conversions"] = treatment->conversions;
    j["control_rate"] = p0;
    j["treatment_rate"] = p1;
    add_result_json(j, *c, true, /*with_lift=*/true);
    add_anytime_json(j, *anytime, o.anytime);
    if (!note.empty()) j["note"] = note;
    out << json_text(j) << '\n';
    return {};
  }
  static constexpr const char* kMethodText[] = {"", "pooled z-test", "unpooled z-test",
                                                "Fisher's exact test"};
  static constexpr const char* kIntervalText[] = {"", "Wald", "Wald", "Newcombe score"};
  const int m = static_cast<int>(*method);
  TextBlock t;
  t.add("test",
        std::string("two proportions, ") + kMethodText[m] + ", " + std::string(alternative_name(*alt)));
  t.add("control", std::to_string(control->conversions) + " of " + std::to_string(control->n) + " (" +
                       text_number(p0) + ")");
  t.add("treatment", std::to_string(treatment->conversions) + " of " + std::to_string(treatment->n) + " (" +
                         text_number(p1) + ")");
  t.add("statistic", text_number(c->statistic) +
                         (*method == ProportionMethod::kFisher ? "  (treatment conversions)" : "  (z)"));
  t.add("p_value", format_number(c->p_value));
  t.add("estimate", text_number(c->estimate) + "  (treatment minus control)");
  t.add("relative_lift",
        c->relative_lift ? text_number(c->relative_lift) : "-  (the control has no conversions)");
  t.add("ci_low",
        text_number(c->ci_low) + "  (" + percent_text(c->confidence) + " " + kIntervalText[m] + " interval)");
  t.add("ci_high", text_number(c->ci_high));
  add_anytime_text(t, *anytime, c->confidence, 4);
  if (!note.empty()) t.add("note", note);
  t.print(out);
  return {};
}

// ---- pvalue means -------------------------------------------------------------------------

struct MeansOptions {
  std::string control, treatment;
  std::string alternative = "two-sided";
  bool pooled_variance = false;
  double confidence = 0.95;
  AnytimeOptions anytime;
};

Status run_pvalue_means(const MeansOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto control = parse_mean_arm(o.control, "--control");
  if (!control) return control.error();
  auto treatment = parse_mean_arm(o.treatment, "--treatment");
  if (!treatment) return treatment.error();
  auto alt = alternative_from(o.alternative);
  if (!alt) return alt.error();
  auto c = compare_means(*control, *treatment, o.pooled_variance, *alt, o.confidence);
  if (!c) return with_flag(c.error(), o.control, o.treatment);
  auto anytime = anytime_of(o.anytime, effect_of_means(*control, *treatment), *alt, o.confidence);
  if (!anytime) return with_flag(anytime.error(), o.control, o.treatment);
  if (g.json) {
    Json j;
    j["test"] = "means";
    j["method"] = o.pooled_variance ? "pooled-variance" : "welch";
    j["alternative"] = std::string(alternative_name(*alt));
    j["control_n"] = control->n;
    j["control_mean"] = control->mean;
    j["control_sd"] = control->sd;
    j["treatment_n"] = treatment->n;
    j["treatment_mean"] = treatment->mean;
    j["treatment_sd"] = treatment->sd;
    add_result_json(j, *c, true);
    add_anytime_json(j, *anytime, o.anytime);
    out << json_text(j) << '\n';
    return {};
  }
  auto arm_text = [](const MeanArm& a) {
    return "mean " + text_number(a.mean, 6) + ", sd " + text_number(a.sd, 6) + ", " + std::to_string(a.n) +
           " users";
  };
  TextBlock t;
  t.add("test", std::string("two means, ") +
                    (o.pooled_variance ? "pooled-variance t-test" : "Welch's t-test") + ", " +
                    std::string(alternative_name(*alt)));
  t.add("control", arm_text(*control));
  t.add("treatment", arm_text(*treatment));
  t.add("statistic", text_number(c->statistic) + "  (t)");
  t.add("df", text_number(c->df, 6));
  t.add("p_value", format_number(c->p_value));
  t.add("estimate", text_number(c->estimate, 6) + "  (treatment minus control)");
  t.add("ci_low", text_number(c->ci_low, 6) + "  (" + percent_text(c->confidence) + " interval)");
  t.add("ci_high", text_number(c->ci_high, 6));
  add_anytime_text(t, *anytime, c->confidence, 6);
  t.print(out);
  return {};
}

// ---- pvalue statistic ---------------------------------------------------------------------

struct StatisticOptions {
  std::optional<double> z, t, df;
  std::string alternative = "two-sided";
};

Status run_pvalue_statistic(const StatisticOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto alt = alternative_from(o.alternative);
  if (!alt) return alt.error();
  if (o.z.has_value() == o.t.has_value())
    return invalid_input("give exactly one of --z Z and --t T (with --df DF)");
  if (o.t && !o.df) return invalid_input("--t needs --df DF, the degrees of freedom (> 0)");
  if (o.z && o.df) return invalid_input("--df goes with --t only; a z statistic has no degrees of freedom");
  auto c = o.z ? test_from_z(*o.z, *alt) : test_from_t(*o.t, *o.df, *alt);
  if (!c) return c.error();
  if (g.json) {
    Json j;
    j["test"] = o.z ? "z" : "t";
    j["alternative"] = std::string(alternative_name(*alt));
    add_result_json(j, *c, false);
    out << json_text(j) << '\n';
    return {};
  }
  TextBlock t;
  t.add("test", std::string(o.z ? "z against the standard normal" : "t against Student's t") + ", " +
                    std::string(alternative_name(*alt)));
  t.add("statistic", format_number(c->statistic));
  if (c->df) t.add("df", format_number(*c->df));
  t.add("p_value", format_number(c->p_value));
  t.print(out);
  return {};
}

}  // namespace

void add_stats_commands(CLI::App& app, CommandContext& ctx) {
  CLI::App* pvalue =
      app.add_subcommand("pvalue", "a p-value, estimate and confidence interval from experiment summaries");
  pvalue->require_subcommand(1);
  {
    auto o = std::make_shared<ProportionsOptions>();
    CLI::App* sub = pvalue->add_subcommand("proportions", "compare two conversion rates");
    sub->add_option("--control", o->control, "the control arm as USERS:CONVERSIONS, e.g. 1000:120")
        ->required();
    sub->add_option("--treatment", o->treatment, "the treatment arm as USERS:CONVERSIONS")->required();
    add_alternative(sub, o->alternative);
    sub->add_option(
           "--method", o->method,
           "pooled (z-test, pooled standard error), unpooled (z-test, each arm's own variance) or fisher "
           "(exact, for small counts); default pooled")
        ->check(CLI::IsMember({"pooled", "unpooled", "fisher"}));
    sub->add_option("--confidence", o->confidence, "confidence of the interval, in (0, 1); default 0.95");
    add_anytime_options(sub, o->anytime);
    sub->callback(
        [&ctx, o] { ctx.run = [&ctx, o] { return run_pvalue_proportions(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<MeansOptions>();
    CLI::App* sub = pvalue->add_subcommand("means", "compare two means (Welch's t-test)");
    sub->add_option("--control", o->control, "the control arm as USERS:MEAN:SD (sample standard deviation)")
        ->required();
    sub->add_option("--treatment", o->treatment, "the treatment arm as USERS:MEAN:SD")->required();
    add_alternative(sub, o->alternative);
    sub->add_flag("--pooled-variance", o->pooled_variance,
                  "assume equal variances (the pooled t-test) instead of Welch's test");
    sub->add_option("--confidence", o->confidence, "confidence of the interval, in (0, 1); default 0.95");
    add_anytime_options(sub, o->anytime);
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_pvalue_means(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<StatisticOptions>();
    CLI::App* sub = pvalue->add_subcommand("statistic", "a p-value from a ready z or t statistic");
    sub->add_option("--z", o->z, "a z statistic (standard normal under the null)");
    sub->add_option("--t", o->t, "a t statistic; needs --df");
    sub->add_option("--df", o->df, "degrees of freedom of the t statistic, > 0");
    add_alternative(sub, o->alternative);
    sub->callback(
        [&ctx, o] { ctx.run = [&ctx, o] { return run_pvalue_statistic(*o, ctx.global, std::cout); }; });
  }

  add_plan_commands(app, ctx);  // src/cli/cmd_plan.cpp
}

}  // namespace alphaledger::cli
