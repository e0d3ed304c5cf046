// alphaledger explain STREAM [--id ID]  |  alphaledger explain --log FILE --rule R [rule flags] [--id ID]
// The level of a test as its rule's display with the numbers filled in (alphaledger/explain.hpp).
#include <algorithm>
#include <iostream>
#include <map>
#include <sstream>

#include "alphaledger/explain.hpp"
#include "alphaledger/explain_stream.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/text.hpp"
#include "cli/cli_errors.hpp"
#include "cli/ledger_common.hpp"

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

// Steps a log's test through the walk's Rule; false once the asked-for test is reached (the walk
// stops there, its level being the next).
bool step_log_test(ExplainWalk& walk, std::string_view test_id, double x, const std::optional<std::string>& wanted) {
  if (wanted && test_id == *wanted) {
    walk.found = true;
    walk.recorded_level = walk.rule.next_level();
    return false;
  }
  const Outcome o = rule_takes_e_values(walk.rule.config().kind) ? walk.rule.record_e(x) : walk.rule.record(x);
  if (o.rejected) walk.rejected_tests.push_back(o.step);
  return true;
}

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

std::string running_text(const LevelExplanation& e, const ExplainedTest& w) {
  if (e.running.empty()) return "running when it was set: none\n";
  double reserved = 0;
  std::string list;
  for (std::size_t i = 0; i < e.running.size(); ++i) {
    reserved += e.running[i].level;
    if (i == 10) list += ", ...";
    if (i >= 10) continue;
    const auto id = w.ids.find(e.running[i].launch);
    list += (i == 0 ? "" : ", ") + (id != w.ids.end() ? excerpt(id->second) : "launch " + std::to_string(e.running[i].launch)) +
            " (" + format_number(e.running[i].level) + ")";
  }
  return "running when it was set: " + std::to_string(e.running.size()) + " test" + (e.running.size() == 1 ? "" : "s") +
         " reserving " + format_number(reserved) + ": " + list + "\n";
}

// A log with launched_at: the rule's launch and finish events in the order replay makes them
// (alphaledger/replay.hpp: launches in order of (launched_at, line), finishes in log order, each
// after every launch strictly earlier and after its own), up to the launch of the asked-for test
// (the first launched with that id), whose level is reserved there. The level replay gave that
// test is kept in `recorded_level`, so that run_explain refuses a walk that went another way.
void walk_launches(const CompactLog& log, const Procedure& procedure, const std::optional<std::string>& wanted,
                   ExplainWalk& walk) {
  const auto& rs = log.records;
  const std::size_t n = rs.size();
  std::vector<std::size_t> order(n);
  for (std::size_t i = 0; i < n; ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    return rs[a].launched_at != rs[b].launched_at ? rs[a].launched_at < rs[b].launched_at : rs[a].line < rs[b].line;
  });
  const bool e_values = rule_takes_e_values(walk.rule.config().kind);
  std::vector<std::uint64_t> launch_of(n, 0);
  std::size_t next = 0;
  for (std::size_t k = 0; k < n && !walk.found; ++k) {
    while (next < n && (rs[order[next]].launched_at < rs[k].finished_at || launch_of[k] == 0)) {
      const std::size_t i = order[next];
      if (wanted && log.id(rs[i]) == *wanted) {
        walk.found = true;
        walk.launch = walk.rule.tests() + 1;
        break;
      }
      launch_of[i] = walk.rule.launch().launch;
      walk.ids[launch_of[i]] = std::string(log.id(rs[i]));
      ++next;
    }
    if (walk.found) break;
    const auto out = e_values ? walk.rule.finish_e(launch_of[k], rs[k].e_value)
                              : walk.rule.finish(launch_of[k], rs[k].p_value);
    if (out && out->rejected) walk.rejected_tests.push_back(out->step);
  }
  if (!walk.found) return;
  replay_each(log, procedure, [&](std::size_t, const Decision& d) {
    if (d.launch == walk.launch) walk.recorded_level = d.level;
  });
}

Result<ExplainWalk> walk_log(const ExplainOptions& o) {
  auto procs = resolve_procedures({*o.rule}, o.flags.to_spec(), /*allow_offline=*/false);
  if (!procs) return procs.error();
  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  auto log = read_log_argument(*o.log, forced);
  if (!log) return log.error();
  ExplainWalk walk(std::get<RuleConfig>(procs->front().config));
  if (log->has_launch) {
    walk_launches(*log, procs->front(), o.id, walk);
    return walk;
  }
  const bool e_values = rule_takes_e_values(walk.rule.config().kind);
  for (std::size_t i = 0; i < log->size(); ++i) {
    const CompactRecord& r = log->records[i];
    const double x = e_values ? r.e_value : r.p_value;
    walk.ids[i + 1] = std::string(log->id(r));
    if (!step_log_test(walk, log->id(r), x, o.id)) break;
  }
  return walk;
}

Status run_explain(const ExplainOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.stream.has_value() == o.log.has_value()) {
    return invalid_input("explain needs either a STREAM in the ledger or --log FILE --rule R, not both");
  }
  if (o.log && !o.rule) return invalid_input("explain --log FILE needs --rule R (the rule to replay the log with)");
  if (o.stream && o.rule) return invalid_input("--rule goes with --log; a stream's rule is in the ledger");
  Result<ExplainedTest> e = invalid_input("not explained");
  if (o.stream) {
    auto ledger = open_for_reading(g);
    if (!ledger) return ledger.error();
    e = explain_stream_test(**ledger, *o.stream, o.id, "--id");
  } else {
    auto walk = walk_log(o);
    if (!walk) return walk.error();
    e = explain_walk(*walk, o.id, "log " + excerpt(*o.log), "--id");
  }
  if (!e) return e.error();
  if (g.json) {
    out << explanation_json(*e, o.stream, o.id) << '\n';
  } else {
    const std::string where = (o.stream ? "stream " + *o.stream : "log " + *o.log) +
                              (o.id ? ", test '" + *o.id + "'" : std::string(", next test")) +
                              (e->running ? " (running, reserved at launch " + std::to_string(e->launch) + ")"
                                             : std::string());
    print_text(e->explanation, where, out);
    out << running_text(e->explanation, *e);
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
