// alphaledger plan proportions|means (docs/cli.md "Experiment statistics"; docs/statistics.md).
// The math is in the core (alphaledger/stats.hpp); this file parses flags, reads a stream's next
// level (or a running test's reserved level) from the ledger for plan --stream, and prints.
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

Result<Alternative> alternative_from(const std::string& s) { return parse_alternative(s); }

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
    return invalid_input(
        "--test ID names a running test of a stream: give the stream too (--stream S --test ID)");
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
    return invalid_input("stream '" + *o.stream + "' would give its next test (step " +
                         std::to_string(s->step) +
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
                     (reserved ? "  (reserved for running test " + *o.test + " of stream " + *o.stream +
                                     ", launch " + std::to_string(from_stream->step) + ")"
                      : from_stream ? "  (next level of stream " + *o.stream + ")"
                      : o.level     ? std::string("  (given)")
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

void add_plan_commands(CLI::App& app, CommandContext& ctx) {
  CLI::App* plan = app.add_subcommand(
      "plan",
      "users per arm for an experiment at a given level or at a stream's next level; or its power, or the "
      "smallest detectable effect");
  plan->require_subcommand(1);
  add_plan_command(plan, ctx, /*proportions=*/true);
  add_plan_command(plan, ctx, /*proportions=*/false);
}

}  // namespace alphaledger::cli
