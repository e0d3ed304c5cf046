// alphaledger explain STREAM [--id ID]  |  alphaledger explain --log FILE --rule R [rule flags] [--id ID]
// The level of a test as its rule's display with the numbers filled in (alphaledger/explain.hpp).
#include <algorithm>
#include <iostream>
#include <map>
#include <nlohmann/json.hpp>
#include <sstream>

#include "alphaledger/explain.hpp"
#include "alphaledger/replay.hpp"
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
  std::uint64_t launch = 0;              // the asked-for test's launch number (streams, logs with launches)
  bool running = false;                  // streams: the asked-for test is still running
  std::map<std::uint64_t, std::string> ids;  // launch number -> test id, for the running tests shown

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

std::string running_text(const LevelExplanation& e, const Walk& w) {
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

// "running": whether the explained test is still running, and the tests running when its level
// was set (docs/cli.md "Explain").
nlohmann::ordered_json running_json(const LevelExplanation& e, const Walk& w) {
  auto tests = nlohmann::ordered_json::array();
  double reserved = 0;
  for (const RunningTest& t : e.running) {
    reserved += t.level;
    const auto id = w.ids.find(t.launch);
    tests.push_back({{"id", id != w.ids.end() ? nlohmann::ordered_json(id->second) : nlohmann::ordered_json(nullptr)},
                     {"launch", t.launch},
                     {"level", t.level}});
  }
  return {{"explained_test_running", w.running}, {"reserved", reserved}, {"tests", std::move(tests)}};
}

void print_json(const LevelExplanation& e, const Walk& w, const std::optional<std::string>& stream,
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
  j["running"] = running_json(e, w);
  out << json_text(j) << '\n';
}

// The stream's events replayed through its Rule in chain order, up to the launch of the asked-for
// test (or all of them, for the next level). The history lists each decided or abandoned test at
// the step of its last entry, with its launch number; the chain entries between those steps are
// launches of their own, in launch order (a test decided without a launch first is launched and
// decided at its one step). So the launches, finishes and abandons interleave as they happened,
// and a test's level is explained as it was reserved at its launch, whether it is decided or still
// running (docs/cli.md "Explain").
// The asked-for test of a stream: its launch number, the level stored for it, and whether it is
// still running. Launch 0 when the stream has no such test.
struct Wanted {
  std::uint64_t launch = 0;
  std::optional<double> level;
  bool running = false;
};

Result<Wanted> find_wanted(Ledger& ledger, const ExplainOptions& o, const std::vector<DecisionRecord>& history) {
  Wanted w;
  if (!o.id) return w;
  for (const auto& r : history) {
    if (r.id != *o.id) continue;
    if (r.abandoned) {
      return conflict("test '" + excerpt(*o.id) + "' of stream " + excerpt(*o.stream) +
                          " was abandoned: it was never decided and its level is no longer reserved",
                      "abandoned_test");
    }
    w.launch = r.launch;
    w.level = r.level;
  }
  if (w.launch != 0) return w;
  auto running = ledger.running_test(*o.stream, *o.id);
  if (running) {
    w.launch = running->launch;
    w.level = running->level;
    w.running = true;
  } else if (running.error().kind != ErrorKind::kNotFound) {
    return running.error();
  }
  return w;
}

Result<Walk> walk_stream(const ExplainOptions& o, const GlobalOptions& g) {
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(*o.stream);
  if (!info) return info.error();
  auto history = (*ledger)->history(*o.stream);
  if (!history) return history.error();
  auto found = find_wanted(**ledger, o, *history);
  if (!found) return found.error();
  const std::uint64_t wanted = found->launch;
  const std::optional<double> stored = found->level;
  Walk walk(info->config);
  walk.launch = wanted;
  walk.running = found->running;
  for (const auto& r : *history) walk.ids[r.launch] = r.id;
  if (auto running = (*ledger)->running(*o.stream); running) {
    for (const auto& e : *running) walk.ids[e.launch] = e.id;
  }
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

// A log with launched_at: the rule's launch and finish events in the order replay makes them
// (alphaledger/replay.hpp: launches in order of (launched_at, line), finishes in log order, each
// after every launch strictly earlier and after its own), up to the launch of the asked-for test
// (the first launched with that id), whose level is reserved there. The level replay gave that
// test is kept in `recorded_level`, so that run_explain refuses a walk that went another way.
void walk_launches(const CompactLog& log, const Procedure& procedure, const std::optional<std::string>& wanted,
                   Walk& walk) {
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

Result<Walk> walk_log(const ExplainOptions& o) {
  auto procs = resolve_procedures({*o.rule}, o.flags.to_spec(), /*allow_offline=*/false);
  if (!procs) return procs.error();
  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  auto log = read_log_argument(*o.log, forced);
  if (!log) return log.error();
  Walk walk(std::get<RuleConfig>(procs->front().config));
  if (log->has_launch) {
    walk_launches(*log, procs->front(), o.id, walk);
    return walk;
  }
  const bool e_values = rule_takes_e_values(walk.rule.config().kind);
  for (std::size_t i = 0; i < log->size(); ++i) {
    const CompactRecord& r = log->records[i];
    const double x = e_values ? r.e_value : r.p_value;
    walk.ids[i + 1] = std::string(log->id(r));
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
    print_json(*e, *walk, o.stream, o.id, out);
  } else {
    const std::string where = (o.stream ? "stream " + *o.stream : "log " + *o.log) +
                              (o.id ? ", test '" + *o.id + "'" : std::string(", next test")) +
                              (walk->running ? " (running, reserved at launch " + std::to_string(walk->launch) + ")"
                                             : std::string());
    print_text(*e, where, out);
    out << running_text(*e, *walk);
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
