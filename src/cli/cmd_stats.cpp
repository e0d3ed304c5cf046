// alphaledger pvalue proportions|means|statistic and alphaledger plan proportions|means
// (docs/cli.md "Experiment statistics"; docs/statistics.md). The math is in the core
// (alphaledger/stats.hpp); this file parses flags, reads a stream's next level from the ledger for
// plan --stream, and prints.
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
#include "cli/command.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

using Json = nlohmann::ordered_json;

// A JSON number, or null for a missing or infinite value (JSON has no infinity).
Json json_number(std::optional<double> v) {
  if (!v || !std::isfinite(*v)) return nullptr;
  return *v;
}

// Text for people: 4 significant digits, "-inf"/"inf" for open interval ends, "-" when missing.
std::string text_number(std::optional<double> v, int digits = 4) {
  if (!v) return "-";
  if (std::isinf(*v)) return *v > 0 ? "inf" : "-inf";
  return format_rounded(*v, digits);
}

// Aligned "label  value" lines; labels are the JSON keys (docs/cli.md).
class TextBlock {
 public:
  void add(std::string label, std::string value) { lines_.emplace_back(std::move(label), std::move(value)); }
  void print(std::ostream& out) const {
    std::size_t width = 0;
    for (const auto& [label, value] : lines_) width = std::max(width, label.size());
    for (const auto& [label, value] : lines_)
      out << label << std::string(width + 2 - label.size(), ' ') << value << '\n';
  }

 private:
  std::vector<std::pair<std::string, std::string>> lines_;
};

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

bool parse_real(const std::string& t, double& v) {
  const auto r = read_finite_number(t);
  if (r) v = *r;
  return r.has_value();
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
  sub->add_option("--mixture-sd", a.mixture_sd,
                  "with --anytime (required there): the mixing scale, about the effect you hope to detect, on "
                  "the scale of the estimate (e.g. 0.005 = half a percentage point)");
}

// The always-valid evidence for one look, or nothing without --anytime.
Result<std::optional<AnytimeEvidence>> anytime_of(const AnytimeOptions& a, const Result<EffectEstimate>& effect,
                                                  Alternative alternative, double confidence) {
  if (!a.on) {
    if (a.mixture_sd) return invalid_input("--mixture-sd is used only with --anytime; add --anytime or drop it");
    return std::optional<AnytimeEvidence>{};
  }
  if (!a.mixture_sd) {
    return invalid_input(
        "--anytime needs --mixture-sd: the effect you hope to detect, on the scale of the estimate (e.g. "
        "--mixture-sd 0.005 for half a percentage point); it sets the power, never the validity");
  }
  if (!effect) return effect.error();
  MixtureSettings settings{.mixture_sd = *a.mixture_sd, .alpha = 1.0 - confidence, .alternative = alternative};
  auto e = anytime_evidence(*effect, settings);
  if (!e) {
    Error err = e.error();
    if (err.message.rfind("mixture_sd", 0) == 0) err.message = "--" + err.message.replace(0, 10, "mixture-sd");
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
  t.add("cs_low", text_number(e->cs_low, digits) + "  (" + percent_text(confidence) + " confidence sequence)");
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

// ---- plan ---------------------------------------------------------------------------------

struct PlanOptions {
  bool proportions = true;  // else means
  double baseline_or_sd = 0;
  std::optional<double> min_effect, level, power;
  std::optional<std::string> n_per_arm;  // parsed here, so "-5" is not wrapped to a huge unsigned
  std::optional<std::string> stream;
  std::optional<std::string> test;  // a running test of the stream: plan at its reserved level
  std::string alternative = "two-sided";
};

// The level the stream's next test would get now, and that test's step; or, with a test id, the
// level reserved for that running test and its launch number (in `step`).
struct StreamLevel {
  double level = 0;
  std::uint64_t step = 0;
  bool reserved = false;
};

Result<StreamLevel> stream_level(const GlobalOptions& g, const std::string& stream,
                                 const std::optional<std::string>& test) {
  auto ledger = Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = false});
  if (!ledger) return ledger.error();
  if (test) {
    auto running = (*ledger)->running_test(stream, *test);
    if (!running) return running.error();
    return StreamLevel{running->level, running->launch, true};
  }
  auto info = (*ledger)->status(stream);
  if (!info) return info.error();
  return StreamLevel{info->next_level, info->tests + 1, false};
}

// The level of a plan given neither --level nor --stream: the usual level of a single test. Said
// on stderr (text) or in "level_source" (JSON), since a stream's tests get much smaller levels.
constexpr double kDefaultPlanLevel = 0.05;

// What a plan is asked: the request and, with --stream, where its level came from.
struct PlanSetup {
  PlanRequest request;
  std::optional<StreamLevel> from_stream;
};

Result<PlanSetup> plan_setup(const PlanOptions& o, const GlobalOptions& g) {
  auto alt = alternative_from(o.alternative);
  if (!alt) return alt.error();
  if (o.level && o.stream) {
    return invalid_input(
        "give at most one of --level L (a level in (0, 1)) and --stream S (plan at the level the "
        "stream's next test would get); without either, the plan uses level " +
        format_number(kDefaultPlanLevel));
  }
  if (o.test && !o.stream) {
    return invalid_input("--test ID names a running test of a stream: give the stream too (--stream S --test ID)");
  }
  PlanSetup setup;
  PlanRequest& request = setup.request;
  request.alternative = *alt;
  request.min_effect = o.min_effect;
  request.power = o.power;
  if (o.n_per_arm) {
    double n = 0;
    if (!parse_real(*o.n_per_arm, n) || n < 2 || n != std::floor(n) || n > 1e12) {
      return invalid_input("--n-per-arm must be a whole number of users in [2, 1e12], got '" +
                           excerpt(*o.n_per_arm) + "'");
    }
    request.n_per_arm = static_cast<std::uint64_t>(n);
  }
  if (!o.stream) {
    request.level = o.level.value_or(kDefaultPlanLevel);
    return setup;
  }
  auto s = stream_level(g, *o.stream, o.test);
  if (!s) return s.error();
  if (!(s->level > 0.0) && s->reserved) {
    return invalid_input("test '" + excerpt(*o.test) + "' of stream '" + *o.stream +
                         "' has level 0 reserved: no sample size reaches any power");
  }
  if (!(s->level > 0.0)) {
    return invalid_input("stream '" + *o.stream + "' would give its next test (step " + std::to_string(s->step) +
                         ") level 0: its alpha-wealth is spent, and no sample size reaches any power");
  }
  setup.from_stream = *s;
  request.level = s->level;
  return setup;
}

void print_plan_json(std::ostream& out, const PlanOptions& o, const Plan& plan,
                     const std::optional<StreamLevel>& from_stream, const char* level_source,
                     const std::string& note) {
  Json j;
  j["design"] = o.proportions ? "proportions" : "means";
  j["solved"] = std::string(plan_target_name(plan.solved));
  j["n_per_arm"] = plan.n_per_arm;
  if (plan.solved == PlanTarget::kSize) j["n_per_arm_exact"] = plan.n_exact;
  j["level"] = plan.level;
  j["level_source"] = level_source;
  j["power"] = plan.power;
  j["achieved_power"] = plan.achieved_power;
  j["min_effect"] = plan.min_effect;
  j[o.proportions ? "baseline" : "sd"] = o.baseline_or_sd;
  j["alternative"] = std::string(alternative_name(plan.alternative));
  if (from_stream && from_stream->reserved) {
    j["stream"] = *o.stream;
    j["test"] = *o.test;
    j["launch"] = from_stream->step;
  } else if (from_stream) {
    j["stream"] = *o.stream;
    j["step"] = from_stream->step;
    j["note"] = note;
  }
  out << json_text(j) << '\n';
}

void print_plan_text(std::ostream& out, const PlanOptions& o, const Plan& plan,
                     const std::optional<StreamLevel>& from_stream, const std::string& note) {
  const bool reserved = from_stream && from_stream->reserved;
  TextBlock t;
  t.add("design", o.proportions ? "two proportions (normal approximation)" : "two means (two-sample t-test)");
  const bool size = plan.solved == PlanTarget::kSize;
  t.add("n_per_arm", std::to_string(plan.n_per_arm) +
                         (size ? "  (rounded up from " + text_number(plan.n_exact, 7) + "; " +
                                     std::to_string(2 * plan.n_per_arm) + " users in both arms)"
                               : "  (given)"));
  t.add("level", format_rounded(plan.level, 6) +
                     (reserved      ? "  (reserved for running test " + *o.test + " of stream " + *o.stream +
                                     ", launch " + std::to_string(from_stream->step) + ")"
                      : from_stream ? "  (next level of stream " + *o.stream + ")"
                      : o.level   ? std::string("  (given)")
                                  : std::string("  (default: no --level or --stream given)")));
  if (plan.solved == PlanTarget::kPower) {
    t.add("power", format_rounded(plan.power, 6) + "  (computed)");
  } else {
    t.add("power", format_rounded(plan.power, 6) + "  (requested; " + format_rounded(plan.achieved_power, 6) +
                       " at " + std::to_string(plan.n_per_arm) + " per arm)");
  }
  t.add("min_effect",
        format_rounded(plan.min_effect, 6) +
            (plan.solved == PlanTarget::kMinEffect ? "  (computed: the smallest detectable effect)"
                                                   : "  (given)") +
            (o.proportions ? ", from " + format_rounded(o.baseline_or_sd, 6) + " to " +
                                 format_rounded(o.baseline_or_sd + plan.min_effect, 6)
                           : std::string()));
  t.add(o.proportions ? "baseline" : "sd", format_rounded(o.baseline_or_sd, 6));
  t.add("alternative", std::string(alternative_name(plan.alternative)));
  if (!note.empty()) t.add("note", note);
  t.print(out);
}

Status run_plan(const PlanOptions& o, const GlobalOptions& g, std::ostream& out, std::ostream& note_out) {
  auto setup = plan_setup(o, g);
  if (!setup) return setup.error();
  const std::optional<StreamLevel>& from_stream = setup->from_stream;
  const bool reserved = from_stream && from_stream->reserved;
  const char* level_source = reserved ? "reserved" : from_stream ? "stream" : o.level ? "given" : "default";
  auto plan = o.proportions ? plan_proportions(o.baseline_or_sd, setup->request)
                            : plan_means(o.baseline_or_sd, setup->request);
  if (!plan) return plan.error();

  std::string note;  // none for a reserved level: the decision uses exactly it
  if (from_stream && !reserved) {
    note =
        "this is the level the next test of stream '" + *o.stream + "' (step " +
        std::to_string(from_stream->step) +
        ") would get now; the level granted when this test finishes can differ if other tests of the stream "
        "finish first";
  }
  if (!o.level && !from_stream && !g.json) {
    note_out
        << "alphaledger: note: no --level or --stream given, so the plan uses level "
        << format_number(kDefaultPlanLevel)
        << "; a test decided in a stream usually gets a much smaller level (plan at it with --stream S)\n";
    note_out.flush();
  }
  if (g.json) {
    print_plan_json(out, o, *plan, from_stream, level_source, note);
  } else {
    print_plan_text(out, o, *plan, from_stream, note);
  }
  return {};
}

// Options shared by pvalue subcommands.
void add_alternative(CLI::App* sub, std::string& alternative) {
  sub->add_option("--alternative", alternative,
                  "two-sided, greater (the treatment is larger) or less; default two-sided")
      ->check(CLI::IsMember({"two-sided", "greater", "less"}));
}

void add_plan_command(CLI::App* plan, CommandContext& ctx, bool proportions) {
  auto o = std::make_shared<PlanOptions>();
  o->proportions = proportions;
  CLI::App* sub = plan->add_subcommand(
      proportions ? "proportions" : "means",
      proportions
          ? "users per arm to compare two conversion rates (as R's power.prop.test computes it)"
          : "users per arm to compare two means (the exact two-sample t-test power, as R's power.t.test)");
  if (proportions) {
    sub->add_option("--baseline", o->baseline_or_sd, "the control's conversion rate, in (0, 1)")->required();
  } else {
    sub->add_option("--sd", o->baseline_or_sd, "the standard deviation of the metric in each arm, > 0")
        ->required();
  }
  sub->add_option(
      "--min-effect", o->min_effect,
      "the smallest difference worth detecting, treatment minus control (not 0); without it, give "
      "--n-per-arm to get the smallest detectable effect");
  sub->add_option("--level", o->level,
                  "the test's level, in (0, 1); default 0.05 when --stream is not given either");
  sub->add_option("--stream", o->stream, "plan at the level the next test of this ledger stream would get");
  sub->add_option("--test", o->test,
                  "with --stream: plan at the level reserved for this running test (alphaledger launch)");
  sub->add_option("--power", o->power, "the chance of detecting min_effect, in (0, 1); default 0.8");
  sub->add_option(
      "--n-per-arm", o->n_per_arm,
      "users per arm: with --min-effect, compute the power; alone, the smallest detectable effect");
  add_alternative(sub, o->alternative);
  sub->callback(
      [&ctx, o] { ctx.run = [&ctx, o] { return run_plan(*o, ctx.global, std::cout, std::cerr); }; });
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

  CLI::App* plan = app.add_subcommand(
      "plan",
      "users per arm for an experiment at a given level or at a stream's next level; or its power, or the "
      "smallest detectable effect");
  plan->require_subcommand(1);
  add_plan_command(plan, ctx, /*proportions=*/true);
  add_plan_command(plan, ctx, /*proportions=*/false);
}

}  // namespace alphaledger::cli
