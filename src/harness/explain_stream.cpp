// Explain in its place (alphaledger/explain_stream.hpp): the walk of a stream in the ledger and the
// JSON form the CLI and the Python module share.
#include "alphaledger/explain_stream.hpp"

#include <nlohmann/json.hpp>

#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

// The asked-for test of a stream: its launch number, the level stored for it, and whether it is
// still running. Launch 0 when the stream has no such test.
struct Wanted {
  std::uint64_t launch = 0;
  std::optional<double> level;
  bool running = false;
};

Result<Wanted> find_wanted(Ledger& ledger, std::string_view stream, const std::optional<std::string>& id,
                           const std::vector<DecisionRecord>& history) {
  Wanted w;
  if (!id) return w;
  for (const auto& r : history) {
    if (r.id != *id) continue;
    if (r.abandoned) {
      return conflict("test '" + excerpt(*id) + "' of stream " + excerpt(stream) +
                          " was abandoned: it was never decided and its level is no longer reserved",
                      "abandoned_test");
    }
    w.launch = r.launch;
    w.level = r.level;
  }
  if (w.launch != 0) return w;
  auto running = ledger.running_test(stream, *id);
  if (running) {
    w.launch = running->launch;
    w.level = running->level;
    w.running = true;
  } else if (running.error().kind != ErrorKind::kNotFound) {
    return running.error();
  }
  return w;
}

}  // namespace

// The history lists each decided or abandoned test at the step of its last entry, with its launch
// number; the chain entries between those steps are launches of their own, in launch order (a test
// decided without a launch first is launched and decided at its one step). So the launches,
// finishes and abandons interleave as they happened, and a test's level is explained as it was
// reserved at its launch, whether it is decided or still running.
Result<ExplainWalk> walk_stream_for_explain(Ledger& ledger, std::string_view stream,
                                            const std::optional<std::string>& id) {
  auto info = ledger.status(stream);
  if (!info) return info.error();
  auto history = ledger.history(stream);
  if (!history) return history.error();
  auto found = find_wanted(ledger, stream, id, *history);
  if (!found) return found.error();
  const std::uint64_t wanted = found->launch;
  const std::optional<double> stored = found->level;
  ExplainWalk walk(info->config);
  walk.launch = wanted;
  walk.running = found->running;
  for (const auto& r : *history) walk.ids[r.launch] = r.id;
  if (auto running = ledger.running(stream); running) {
    for (const auto& e : *running) walk.ids[e.launch] = e.id;
  }
  const auto mismatch = [&](const std::string& what) {
    return conflict("stream " + excerpt(stream) + ": " + what + "; run 'alphaledger verify " +
                    excerpt(stream) + "'");
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
      if (auto s = walk.rule.abandon(r.launch); !s) {
        return mismatch("the abandon at step " + std::to_string(r.step) +
                        " does not replay: " + s.error().message);
      }
    } else {
      auto out = e_values ? walk.rule.finish_e(r.launch, r.p_value) : walk.rule.finish(r.launch, r.p_value);
      if (!out) {
        return mismatch("the decision at step " + std::to_string(r.step) +
                        " does not replay: " + out.error().message);
      }
      if (out->rejected) walk.rejected_tests.push_back(out->step);
    }
    step = r.step + 1;
  }
  while (walk.rule.tests() < info->tests) {  // tests still running
    if (!launch_next()) return walk;
  }
  if (!id && walk.rule.next_level() != info->next_level) {
    return mismatch("its history replayed gives the next level " + format_number(walk.rule.next_level()) +
                    ", the ledger says " + format_number(info->next_level));
  }
  return walk;
}

Result<ExplainedTest> explain_walk(const ExplainWalk& walk, const std::optional<std::string>& id,
                                   std::string_view where, std::string_view id_hint) {
  if (id && !walk.found) {
    return not_found("no decided or running test with id '" + excerpt(*id) + "' in " + std::string(where) +
                         " (without " + std::string(id_hint) + ", explain gives the next level)",
                     "unknown_test");
  }
  auto e = explain_next_level(walk.rule, walk.rejected_tests);
  if (!e) return e.error();
  if (walk.recorded_level && *walk.recorded_level != e->level) {
    return conflict("test '" + excerpt(id ? *id : std::string()) +
                    "': the level replayed from the history, " + format_number(e->level) +
                    ", differs from the level it got, " + format_number(*walk.recorded_level) +
                    "; run 'alphaledger verify'");
  }
  ExplainedTest out;
  out.explanation = std::move(*e);
  out.running = walk.running;
  out.launch = walk.launch;
  out.ids = walk.ids;
  return out;
}

Result<ExplainedTest> explain_stream_test(Ledger& ledger, std::string_view stream,
                                          const std::optional<std::string>& id, std::string_view id_hint) {
  auto walk = walk_stream_for_explain(ledger, stream, id);
  if (!walk) return walk.error();
  return explain_walk(*walk, id, "stream " + excerpt(stream), id_hint);
}

std::string explanation_json(const ExplainedTest& x, const std::optional<std::string>& stream,
                             const std::optional<std::string>& id) {
  const LevelExplanation& e = x.explanation;
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
    nlohmann::ordered_json term;
    term["kind"] = std::string(term_kind_name(t.kind));
    term["rejection"] = t.rejection;
    term["test"] = t.test ? nlohmann::ordered_json(*t.test) : nlohmann::ordered_json(nullptr);
    term["lag"] = t.lag;
    term["weight"] = t.weight;
    term["base"] = t.base;
    term["scale"] = t.scale;
    term["amount"] = t.amount;
    terms.push_back(std::move(term));
  }
  j["terms"] = std::move(terms);
  if (e.cap) {
    j["cap"] = {{"what", e.cap->what}, {"value", e.cap->value}};
  } else {
    j["cap"] = nullptr;
  }
  // "running": whether the explained test is still running, and the tests running when its level
  // was set, each with the level it reserved.
  auto tests = nlohmann::ordered_json::array();
  double reserved = 0;
  for (const RunningTest& t : e.running) {
    reserved += t.level;
    const auto found = x.ids.find(t.launch);
    tests.push_back({{"id", found != x.ids.end() ? nlohmann::ordered_json(found->second)
                                                 : nlohmann::ordered_json(nullptr)},
                     {"launch", t.launch},
                     {"level", t.level}});
  }
  j["running"] = {{"explained_test_running", x.running}, {"reserved", reserved}, {"tests", std::move(tests)}};
  return json_text(j);
}

}  // namespace alphaledger
