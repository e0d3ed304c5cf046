// alphaledger simulate [--rules R1,R2,...] [rule flags] --tests T --runs N [model flags] [--table]
// (docs/cli.md "Simulate"; docs/simulate.md).
#include <spdlog/spdlog.h>
#include <unistd.h>

#include <algorithm>
#include <charconv>
#include <cmath>
#include <iostream>
#include <memory>
#include <thread>

#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/report.hpp"
#include "alphaledger/simulate.hpp"
#include "alphaledger/test_log.hpp"
#include "alphaledger/text.hpp"
#include "cli/command.hpp"
#include "harness/simulate_report.hpp"

namespace alphaledger::cli {
namespace {

constexpr const char* kAllProcedures =
    "alpha-spending,alpha-investing,lond,lord++,saffron,addis,bh,storey-bh";

struct SimulateOptions {
  std::string rules = kAllProcedures;
  std::string tests, runs, seed = "1", threads;
  std::string nonnull_fraction = "0.1";  // one value, or a comma-separated list (a sweep)
  std::string effect = "3";
  std::string mean_duration = "0";  // one value, or a list (a sweep)
  std::string peeking = "0";
  double mixture_sd = 0;
  double effect_sd = 0;
  double null_mean = 0;
  std::string pattern = "constant";
  std::string correlation = "none";
  bool table = false;
  std::optional<std::string> report;  // --report FILE.html (docs/reports.md)
  RuleFlags flags;
};

inline constexpr std::size_t kMaxSweepValues = 100;

// "0.1" or "0.05,0.1,0.2": the values of one model parameter, in the order given. The usage check
// (src/cli/usage_errors.cpp) has already refused words that are not numbers; this refuses empty
// items, repeats and lists longer than kMaxSweepValues, naming the flag and the item.
Result<std::vector<double>> parse_sweep(const std::string& text, const char* flag) {
  std::vector<double> out;
  std::size_t start = 0;
  for (std::size_t k = 1;; ++k) {
    const std::size_t comma = text.find(',', start);
    std::string_view item =
        std::string_view(text).substr(start, comma == std::string::npos ? comma : comma - start);
    if (!item.empty() && item.front() == '+') item.remove_prefix(1);
    double v = 0;
    const auto [end, ec] = std::from_chars(item.data(), item.data() + item.size(), v);
    if (item.empty() || ec != std::errc() || end != item.data() + item.size() || !std::isfinite(v)) {
      return invalid_input(
          std::string(flag) + ": value " + std::to_string(k) + " of '" + excerpt(text) +
          "' is not a finite number (accepted: a number, or a comma-separated list of numbers "
          "for a sweep, e.g. 0.05,0.1,0.2)");
    }
    if (std::find(out.begin(), out.end(), v) != out.end()) {
      return invalid_input(std::string(flag) + ": value " + std::to_string(k) + " of '" + excerpt(text) +
                           "' repeats an earlier value (each value of a sweep is listed once)");
    }
    out.push_back(v);
    if (out.size() > kMaxSweepValues) {
      return invalid_input(std::string(flag) + ": a sweep takes at most " + std::to_string(kMaxSweepValues) +
                           " values, got more in '" + excerpt(text) + "'");
    }
    if (comma == std::string::npos) return out;
    start = comma + 1;
  }
}

Result<std::uint64_t> parse_whole(const std::string& text, const char* flag, std::uint64_t lo,
                                  std::uint64_t hi) {
  const auto whole = read_whole_number(text);
  const std::uint64_t v = whole.value_or(0);
  if (!whole || v < lo || v > hi) {
    return invalid_input(std::string(flag) + " must be a whole number in [" + std::to_string(lo) + ", " +
                         std::to_string(hi) + "], got '" + excerpt(text) + "'");
  }
  return v;
}

// Shows "simulate: 412/1000 runs" on stderr, only when stderr is a terminal.
class Progress {
 public:
  explicit Progress(std::uint64_t total) : total_(total), enabled_(isatty(STDERR_FILENO) == 1) {}
  void update(std::uint64_t done) {
    if (!enabled_) return;
    const std::uint64_t percent = done * 100 / total_;
    if (percent == last_percent_ && done != total_) return;
    last_percent_ = percent;
    std::cerr << "\rsimulate: " << done << "/" << total_ << " runs (" << percent << "%)" << std::flush;
  }
  // Clears the line and, on a terminal, says which evaluation mode ran (the CSV has no column for it).
  void finish(const std::string& evaluation) {
    if (!enabled_) return;
    std::cerr << "\r" << std::string(48, ' ') << "\r";
    if (!evaluation.empty()) std::cerr << "simulate: evaluation " << evaluation << "\n";
    std::cerr << std::flush;
  }

 private:
  std::uint64_t total_;
  bool enabled_;
  std::uint64_t last_percent_ = 101;
};

// Everything a run needs, read and checked from the flags before anything runs.
struct SimulateSetup {
  std::vector<Procedure> procedures;
  PeekingSpec peeking;
  std::string parameter;                // the swept parameter's CSV column name, or empty for one setting
  std::vector<double> values;           // its values (one value when nothing is swept)
  std::vector<SimulationModel> models;  // one per value, each validated
  SimulationOptions run;
};

// The swept parameter (at most one flag may list several values) and its values.
Status read_sweep(const SimulateOptions& o, SimulateSetup& s, SimulationModel& model) {
  auto fractions = parse_sweep(o.nonnull_fraction, "--nonnull-fraction");
  if (!fractions) return fractions.error();
  auto effects = parse_sweep(o.effect, "--effect");
  if (!effects) return effects.error();
  auto durations = parse_sweep(o.mean_duration, "--mean-duration");
  if (!durations) return durations.error();
  if ((fractions->size() > 1) + (effects->size() > 1) + (durations->size() > 1) > 1) {
    return invalid_input(
        "more than one of --nonnull-fraction, --effect and --mean-duration list several values; a sweep "
        "varies one parameter at a time (give the others a single value)");
  }
  s.parameter = fractions->size() > 1   ? "nonnull_fraction"
                : effects->size() > 1   ? "effect"
                : durations->size() > 1 ? "mean_duration"
                                        : "";
  s.values = effects->size() > 1 ? *effects : durations->size() > 1 ? *durations : *fractions;
  model.nonnull_fraction = fractions->front();
  model.effect = effects->front();
  model.mean_duration = durations->front();
  return {};
}

// The stream model at each value of the sweep; every value is checked before anything runs.
Status read_models(const SimulateOptions& o, SimulateSetup& s) {
  SimulationModel model;
  if (auto st = read_sweep(o, s, model); !st) return st;
  auto tests = parse_whole(o.tests, "--tests", 1, 100'000'000);
  if (!tests) return tests.error();
  model.tests = *tests;
  model.effect_sd = o.effect_sd;
  model.null_mean = o.null_mean;
  auto pattern = parse_nonnull_pattern(o.pattern);
  if (!pattern) return pattern.error();
  model.pattern = *pattern;
  auto correlation = parse_correlation(o.correlation);
  if (!correlation) return correlation.error();
  model.correlation = *correlation;
  for (double v : s.values) {
    SimulationModel m = model;
    if (s.parameter == "effect") m.effect = v;
    if (s.parameter == "nonnull_fraction") m.nonnull_fraction = v;
    if (s.parameter == "mean_duration") m.mean_duration = v;
    if (auto st = validate_model(m); !st) return st.error();
    s.models.push_back(m);
  }
  return {};
}

// Runs, seed and threads.
Status read_run_options(const SimulateOptions& o, SimulationOptions& run) {
  auto runs = parse_whole(o.runs, "--runs", 1, 100'000'000);
  if (!runs) return runs.error();
  run.runs = *runs;
  auto seed = parse_whole(o.seed, "--seed", 0, UINT64_MAX);
  if (!seed) return seed.error();
  run.seed = *seed;
  if (o.threads.empty()) {
    run.threads = std::max(1u, std::thread::hardware_concurrency());
  } else {
    auto threads = parse_whole(o.threads, "--threads", 1, 1024);
    if (!threads) return threads.error();
    run.threads = static_cast<unsigned>(*threads);
  }
  return {};
}

Result<SimulateSetup> read_setup(const SimulateOptions& o) {
  SimulateSetup s;
  auto names = split_rule_list(o.rules);
  if (!names) return names.error();
  RuleSpec flags = o.flags.to_spec();
  // Fast evaluation by default for the rules that have it (docs/simulate.md), unless asked otherwise.
  if (!flags.evaluation) {
    for (const auto& n : *names) {
      if (n == "lord++" || n == "saffron" || n == "addis") flags.evaluation = "fast";
    }
  }
  auto procs = resolve_procedures(*names, flags, /*allow_offline=*/true);
  if (!procs) return procs.error();
  s.procedures = std::move(*procs);
  if (o.report) {
    if (auto st = check_output_path(*o.report, "--report"); !st) return st.error();
  }
  if (auto st = read_models(o, s); !st) return st.error();
  auto looks = parse_whole(o.peeking, "--peeking", 0, 100'000);
  if (!looks) return looks.error();
  s.peeking.looks = *looks;
  s.peeking.mixture_sd = o.mixture_sd;
  if (o.mixture_sd != 0 && s.peeking.looks == 0) {
    return invalid_input("--mixture-sd is used only with --peeking K (K >= 1 looks per test)");
  }
  if (auto st = validate_peeking(s.peeking); !st) return st.error();
  if (auto st = read_run_options(o, s.run); !st) return st.error();
  return s;
}

// Runs every value of the sweep with the same seed, so the settings differ only in the swept
// parameter; one list of summaries per value.
Result<std::vector<std::vector<ProcedureSummary>>> run_sweep(SimulateSetup& s, bool say_evaluation) {
  const SimulationModel& model = s.models.front();
  spdlog::info(
      "simulate: {} runs x {} tests, seed {}, {} threads, non-null share {} ({}), effect {} (sd {}), "
      "null mean {}, correlation {}, mean duration {}, looks {}",
      s.run.runs, model.tests, s.run.seed, s.run.threads, model.nonnull_fraction, pattern_text(model.pattern),
      model.effect, model.effect_sd, model.null_mean, correlation_text(model.correlation),
      model.mean_duration, s.peeking.looks);
  const SimulationPlan plan(std::move(s.procedures), s.peeking);
  Progress progress(s.run.runs * s.models.size());
  std::vector<std::vector<ProcedureSummary>> summaries;
  for (std::size_t v = 0; v < s.models.size(); ++v) {
    const std::uint64_t before = s.run.runs * v;
    s.run.progress = [&progress, before](std::uint64_t done) { progress.update(before + done); };
    auto result = run_simulation(plan, s.models[v], s.run);
    if (!result) {
      progress.finish("");
      return result.error();
    }
    summaries.push_back(std::move(result->summaries));
  }
  const std::string eval = evaluation_note(summaries.front());
  progress.finish(say_evaluation ? eval : "");
  if (!eval.empty()) spdlog::info("simulate: evaluation {}", eval);
  return summaries;
}

void write_simulation_output(const SimulateOptions& o, const GlobalOptions& g, const SimulateSetup& s,
                             const std::vector<std::vector<ProcedureSummary>>& summaries, std::ostream& out) {
  if (g.json) {
    for (std::size_t v = 0; v < s.models.size(); ++v)
      write_simulation_json(out, summaries[v], s.parameter, s.values[v]);
  } else if (o.table) {
    for (std::size_t v = 0; v < s.models.size(); ++v) {
      if (!s.parameter.empty())
        out << (v == 0 ? "" : "\n") << "== " << s.parameter << " = " << format_number(s.values[v]) << "\n";
      write_simulation_table(out, summaries[v],
                             {s.models[v], s.run.runs, s.run.seed, s.run.threads, s.peeking.looks});
    }
  } else if (s.parameter.empty()) {
    write_simulation_csv(out, summaries.front());
  } else {
    write_simulation_sweep_csv(out, s.parameter, s.values, summaries);
  }
}

Status run_simulate(const SimulateOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.table && g.json) return invalid_input("--table and --json cannot be used together; choose one");
  auto setup = read_setup(o);
  if (!setup) return setup.error();
  // The table and the JSON say which evaluation ran themselves; the CSV has no column for it.
  auto summaries = run_sweep(*setup, /*say_evaluation=*/!g.json && !o.table);
  if (!summaries) return summaries.error();
  write_simulation_output(o, g, *setup, *summaries, out);
  if (!o.report) return {};
  SimulationReportData data;
  data.parameter = setup->parameter;
  data.values = setup->values;  // a single setting: its non-null fraction (or effect), one point per rule
  data.summaries = std::move(*summaries);
  data.model = setup->models.front();
  data.runs = setup->run.runs;
  data.seed = setup->run.seed;
  data.peeking_looks = setup->peeking.looks;
  data.generated_at_ms = system_clock_ms();
  out.flush();
  return write_file_atomically(*o.report, render_simulation_report(data), "--report");
}

}  // namespace

void add_simulate_command(CLI::App& app, CommandContext& ctx) {
  auto opts = std::make_shared<SimulateOptions>();
  CLI::App* sub = app.add_subcommand("simulate",
                                     "decide many simulated streams of one-sided z-tests with each rule: "
                                     "realized FDR, mFDR, FWER and power");
  sub->add_option(
      "--rules", opts->rules,
      "comma-separated rules; default all: alpha-spending, alpha-investing, lond, lord++, saffron, "
      "addis, bh, storey-bh; also e-lond and e-bh (on likelihood-ratio e-values)");
  sub->add_option("--tests", opts->tests, "tests per stream, 1 to 100000000")->required()->type_name("INT");
  sub->add_option("--runs", opts->runs, "number of simulated streams, 1 to 100000000")
      ->required()
      ->type_name("INT");
  sub->add_option("--nonnull-fraction", opts->nonnull_fraction,
                  "average chance that a test is non-null, in [0, 1]; default 0.1; a comma-separated list "
                  "runs a sweep")
      ->type_name("FLOAT[,FLOAT...]");
  sub->add_option("--effect", opts->effect,
                  "mean z of a non-null test; default 3; a comma-separated list runs a sweep")
      ->type_name("FLOAT[,FLOAT...]");
  sub->add_option("--mean-duration", opts->mean_duration,
                  "tests overlap: each runs while a random number of later tests launch (geometric, this "
                  "mean); levels are fixed at launch; default 0 (one test after another); a comma-separated "
                  "list runs a sweep")
      ->type_name("FLOAT[,FLOAT...]");
  sub->add_option("--peeking", opts->peeking,
                  "look at each test K times as its data arrive and add rows per rule: stop at the first "
                  "fixed-horizon p <= level (:peek-fixed, not valid), the always-valid p-value "
                  "(:peek-anytime), e-lond on mixture e-values (:peek-mixture); default 0 (no peeking)")
      ->type_name("INT");
  sub->add_option("--mixture-sd", opts->mixture_sd,
                  "with --peeking: mixing scale of the always-valid evidence, on the scale of --effect; "
                  "default the effect");
  sub->add_option("--effect-sd", opts->effect_sd, "spread of that mean between non-null tests; default 0");
  sub->add_option("--null-mean", opts->null_mean,
                  "mean z of a null test; negative means conservative nulls; default 0");
  sub->add_option(
      "--nonnull-pattern", opts->pattern,
      "how the non-null share changes along the stream: constant, bursts[:LENGTH[:SHARE]], rising, "
      "falling; default constant");
  sub->add_option(
      "--correlation", opts->correlation,
      "positive correlation between neighbouring tests: none, ar1:RHO, blocks:SIZE:RHO; default none");
  sub->add_option("--seed", opts->seed, "random seed, a whole number; default 1")->type_name("INT");
  sub->add_option("--threads", opts->threads,
                  "worker threads; default all cores (the output does not depend on it)")
      ->type_name("INT");
  sub->add_flag("--table", opts->table, "a table for people with standard errors and flags, instead of CSV");
  sub->add_option("--report", opts->report,
                  "also write one self-contained HTML page with FDR and power per rule (docs/reports.md)")
      ->type_name("FILE");
  add_rule_flags(sub, opts->flags);
  sub->footer(
      "--evaluation defaults to fast here for lord++, saffron and addis (docs/simulate.md).\n"
      "With --table, a rule is flagged when its realized error rate is above its target by more than 3\n"
      "standard errors. docs/simulate.md explains the model and the output.\n");
  sub->callback(
      [&ctx, opts] { ctx.run = [&ctx, opts] { return run_simulate(*opts, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
