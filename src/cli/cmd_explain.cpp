// alphaledger explain STREAM [--id ID]  |  alphaledger explain --log FILE --rule R [rule flags] [--id ID]
// The level of a test as its rule's display with the numbers filled in (alphaledger/explain.hpp).
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "alphaledger/explain.hpp"
#include "alphaledger/text.hpp"
#include "cli/cli_errors.hpp"
#include "cli/ledger_common.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

struct ExplainOptions {
  std::optional<std::string> stream;
  std::optional<std::string> id;
  std::optional<std::string> log;
  std::optional<std::string> rule;
  std::optional<std::string> format;
  RuleFlags flags;
};

// Walks decided tests through a Rule, stopping before the test `id` when one is asked for.
struct Walk {
  Rule rule;
  std::vector<std::uint64_t> rejected_tests;  // launch number of each rejection, in order
  bool found = false;
  std::optional<double> recorded_level;  // the level the asked-for test got, as stored or decided
  std::uint64_t launch = 0;              // streams: the asked-for test's launch number
  bool running = false;                  // streams: the asked-for test is still running

  explicit Walk(const RuleConfig& c) : rule(c) {}
  // Returns false once the asked-for test is reached (the walk stops there).
  bool step(std::string_view test_id, double x, const std::optional<std::string>& wanted,
            std::optional<double> stored_level) {
    if (wanted && test_id == *wanted) {
      found = true;
      recorded_level = stored_level ? *stored_level : rule.next_level();
      return false;
    }
    const Outcome o = rule_takes_e_values(rule.config().kind) ? rule.record_e(x) : rule.record(x);
    if (o.rejected) rejected_tests.push_back(o.step);
    return true;
  }
};

std::string term_label(const LevelTerm& t) {
  const std::string test = t.test ? " (test " + std::to_string(*t.test) + ")" : "";
  switch (t.kind) {
    case TermKind::kInitialWealth:
      return "initial wealth W0, spent at lag " + std::to_string(t.lag);
    case TermKind::kFirstDeposit:
      return "deposit alpha - W0 of the first rejection" + test + ", lag " + std::to_string(t.lag);
    case TermKind::kDeposit:
      return "deposit alpha of rejection " + std::to_string(t.rejection) + test + ", lag " +
             std::to_string(t.lag);
    case TermKind::kHeadDeposits:
      return "wealth deposited " + std::to_string(t.lag - 1) + " clock ticks ago (lag " + std::to_string(t.lag) +
             ")";
    case TermKind::kMixtureTail:
      return "older deposits, one geometric component (its weight x its accumulated wealth)";
    case TermKind::kSpending:
      return "alpha x gamma_t, t = " + std::to_string(t.lag);
    case TermKind::kRejectionsSoFar:
      return std::to_string(t.rejection) + " rejection(s) so far, each alpha x gamma_t";
    case TermKind::kWealthShare:
      return "alpha-wealth W spread over the tests since the last rejection";
  }
  return "";
}

void print_text(const LevelExplanation& e, std::string_view where, std::ostream& out) {
  out << where << ": rule " << rule_name(e.rule) << " (" << evaluation_name(e.evaluation) << "), test "
      << e.test << '\n';
  out << "display: " << level_display(e.rule) << '\n';
  for (const auto& t : e.terms) {
    out << "  " << term_label(t) << ": " << format_number(t.base) << " x " << format_number(t.weight);
    if (t.kind == TermKind::kRejectionsSoFar) out << " x " << t.rejection;
    if (t.scale != 1) out << " x " << format_number(t.scale);
    out << " = " << format_number(t.amount) << '\n';
  }
  out << "sum of terms: " << format_number(e.uncapped) << '\n';
  out << "cap: " << (e.cap ? e.cap->what + " = " + format_number(e.cap->value) : std::string("none")) << '\n';
  out << "level: " << format_number(e.level) << '\n';
}

void print_json(const LevelExplanation& e, const std::optional<std::string>& stream,
                const std::optional<std::string>& id, std::ostream& out) {
  nlohmann::ordered_json j;
  j["stream"] = stream ? nlohmann::ordered_json(*stream) : nlohmann::ordered_json(nullptr);
  j["id"] = id ? nlohmann::ordered_json(*id) : nlohmann::ordered_json(nullptr);
  j["rule"] = std::string(rule_name(e.rule));
  j["evaluation"] = std::string(evaluation_name(e.evaluation));
  j["test"] = e.test;
  j["display"] = std::string(level_display(e.rule));
  j["level"] = e.level;
  j["uncapped"] = e.uncapped;
  auto terms = nlohmann::ordered_json::array();
  for (const auto& t : e.terms) {
    nlohmann::ordered_json x;
    x["kind"] = std::string(term_kind_name(t.kind));
    x["rejection"] = t.rejection;
    x["test"] = t.test ? nlohmann::ordered_json(*t.test) : nlohmann::ordered_json(nullptr);
    x["lag"] = t.lag;
    x["weight"] = t.weight;
    x["base"] = t.base;
    x["scale"] = t.scale;
    x["amount"] = t.amount;
    terms.push_back(std::move(x));
  }
  j["terms"] = std::move(terms);
  if (e.cap) {
    j["cap"] = {{"what", e.cap->what}, {"value", e.cap->value}};
  } else {
    j["cap"] = nullptr;
  }
  out << json_text(j) << '\n';
}

// The stream's events replayed through its Rule in chain order, up to the launch of the asked-for
// test (or all of them, for the next level). The history lists each decided or abandoned test at
// the step of its last entry, with its launch number; the chain entries between those steps are
// launches of their own, in launch order (a test decided without a launch first is launched and
// decided at its one step). So the launches, finishes and abandons interleave as they happened,
// and a test's level is explained as it was reserved at its launch, whether it is decided or still
// running (docs/cli.md "Explain").
Result<Walk> walk_stream(const ExplainOptions& o, const GlobalOptions& g) {
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(*o.stream);
  if (!info) return info.error();
  auto history = (*ledger)->history(*o.stream);
  if (!history) return history.error();
  // The asked-for test: its launch number and the level stored for it.
  std::uint64_t wanted = 0;
  std::optional<double> stored;
  bool running_now = false;
  if (o.id) {
    for (const auto& r : *history) {
      if (r.id != *o.id) continue;
      if (r.abandoned) {
        return conflict("test '" + excerpt(*o.id) + "' of stream " + excerpt(*o.stream) +
                            " was abandoned: it was never decided and its level is no longer reserved",
                        "abandoned_test");
      }
      wanted = r.launch;
      stored = r.level;
    }
    if (wanted == 0) {
      auto running = (*ledger)->running_test(*o.stream, *o.id);
      if (running) {
        wanted = running->launch;
        stored = running->level;
        running_now = true;
      } else if (running.error().kind != ErrorKind::kNotFound) {
        return running.error();
      }
    }
  }
  Walk walk(info->config);
  walk.launch = wanted;
  walk.running = running_now;
  const auto mismatch = [&](const std::string& what) {
    return conflict("stream " + excerpt(*o.stream) + ": " + what + "; run 'alphaledger verify " +
                    excerpt(*o.stream) + "'");
  };
  const bool e_values = rule_takes_e_values(info->config.kind);
  // Launches the next test; false once the asked-for launch is reached (the walk stops before it).
  const auto launch_next = [&]() {
    if (wanted != 0 && walk.rule.tests() + 1 == wanted) {
      walk.found = true;
      walk.recorded_level = stored;
      return false;
    }
    walk.rule.launch();
    return true;
  };
  std::uint64_t step = 1;
  for (const auto& r : *history) {
    for (; step < r.step; ++step) {
      if (!launch_next()) return walk;
    }
    if (r.launch == walk.rule.tests() + 1 && !launch_next()) return walk;  // launched and decided at once
    if (r.abandoned) {
      if (auto s = walk.rule.abandon(r.launch); !s) return mismatch("the abandon at step " + std::to_string(r.step) + " does not replay: " + s.error().message);
    } else {
      auto out = e_values ? walk.rule.finish_e(r.launch, r.p_value) : walk.rule.finish(r.launch, r.p_value);
      if (!out) return mismatch("the decision at step " + std::to_string(r.step) + " does not replay: " + out.error().message);
      if (out->rejected) walk.rejected_tests.push_back(out->step);
    }
    step = r.step + 1;
  }
  while (walk.rule.tests() < info->tests) {  // tests still running
    if (!launch_next()) return walk;
  }
  if (!o.id && walk.rule.next_level() != info->next_level) {
    return mismatch("its history replayed gives the next level " + format_number(walk.rule.next_level()) +
                    ", the ledger says " + format_number(info->next_level));
  }
  return walk;
}

Result<Walk> walk_log(const ExplainOptions& o) {
  auto procs = resolve_procedures({*o.rule}, o.flags.to_spec(), /*allow_offline=*/false);
  if (!procs) return procs.error();
  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  auto log = read_log_argument(*o.log, forced);
  if (!log) return log.error();
  Walk walk(std::get<RuleConfig>(procs->front().config));
  const bool e_values = rule_takes_e_values(walk.rule.config().kind);
  for (std::size_t i = 0; i < log->size(); ++i) {
    const CompactRecord& r = log->records[i];
    const double x = e_values ? r.e_value : r.p_value;
    if (!walk.step(log->id(r), x, o.id, std::nullopt)) break;
  }
  return walk;
}

Status run_explain(const ExplainOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.stream.has_value() == o.log.has_value()) {
    return invalid_input("explain needs either a STREAM in the ledger or --log FILE --rule R, not both");
  }
  if (o.log && !o.rule) return invalid_input("explain --log FILE needs --rule R (the rule to replay the log with)");
  if (o.stream && o.rule) return invalid_input("--rule goes with --log; a stream's rule is in the ledger");
  auto walk = o.stream ? walk_stream(o, g) : walk_log(o);
  if (!walk) return walk.error();
  if (o.id && !walk->found) {
    const std::string where = o.stream ? "stream " + excerpt(*o.stream) : "log " + excerpt(*o.log);
    return not_found("no decided or running test with id '" + excerpt(*o.id) + "' in " + where +
                         " (without --id, explain gives the next level)",
                     "unknown_test");
  }
  auto e = explain_next_level(walk->rule, walk->rejected_tests);
  if (!e) return e.error();
  if (walk->recorded_level && *walk->recorded_level != e->level) {
    return conflict("test '" + excerpt(*o.id) + "': the level replayed from the history, " +
                    format_number(e->level) + ", differs from the level it got, " +
                    format_number(*walk->recorded_level) + "; run 'alphaledger verify'");
  }
  if (g.json) {
    print_json(*e, o.stream, o.id, out);
  } else {
    const std::string where = (o.stream ? "stream " + *o.stream : "log " + *o.log) +
                              (o.id ? ", test '" + *o.id + "'" : std::string(", next test")) +
                              (walk->running ? " (running, reserved at launch " + std::to_string(walk->launch) + ")"
                                             : std::string());
    print_text(*e, where, out);
  }
  return {};
}

}  // namespace

void add_explain_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<ExplainOptions>();
  CLI::App* sub = app.add_subcommand(
      "explain", "why a test gets its level: the rule's formula with the numbers filled in, term by term");
  sub->add_option("stream", o->stream, "stream name in the ledger (or give --log and --rule)");
  sub->add_option("--id", o->id, "a decided test: the level it got (default: the next test's level)");
  sub->add_option("--log", o->log, "explain from a log of finished tests instead of a stream (docs/formats.md)")
      ->type_name("FILE");
  sub->add_option("--rule", o->rule, "with --log: the rule to replay the log with");
  sub->add_option("--format", o->format, "with --log: csv or jsonl; default from the file extension")
      ->check(CLI::IsMember({"csv", "jsonl"}));
  add_rule_flags(sub, o->flags);
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_explain(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
