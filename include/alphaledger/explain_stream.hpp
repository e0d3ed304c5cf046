// Explain in its place: the level of one test of a stream in the ledger (or of a log the caller
// walked), with the tests running when it was set, and the one JSON form of it. The CLI's
// `explain --json` and the Python module's explain both use these, so they give the same object,
// key for key and in the same order (docs/cli.md "Explain").
//
// Example (compiled only: it opens a ledger folder):
//   auto ledger = Ledger::open("alphaledger.db");
//   const std::optional<std::string> id = "exp-0142";
//   auto e = explain_stream_test(**ledger, "checkout-team", id);
//   if (e) std::cout << explanation_json(*e, std::string("checkout-team"), id) << '\n';
//   // {"stream":"checkout-team","id":"exp-0142","rule":"lord++",...,"running":{...}}

#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/explain.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger {

// Decided tests walked through a Rule, stopped before the asked-for test when there is one.
struct ExplainWalk {
  Rule rule;
  std::vector<std::uint64_t> rejected_tests;  // launch number of each rejection, in the order decided
  bool found = false;                         // the asked-for test was reached
  std::optional<double> recorded_level;       // the level the asked-for test got, as stored or replayed
  std::uint64_t launch = 0;                   // the asked-for test's launch number (0: not known)
  bool running = false;                       // the asked-for test is still running
  std::map<std::uint64_t, std::string> ids;   // launch number -> test id, for the running tests shown

  explicit ExplainWalk(const RuleConfig& c) : rule(c) {}
};

// A level explained, with what the walk knew about its test.
struct ExplainedTest {
  LevelExplanation explanation;
  bool running = false;      // the explained test is still running (streams)
  std::uint64_t launch = 0;  // its launch number (0 for the next level, or a log without launches)
  std::map<std::uint64_t, std::string> ids;  // launch number -> test id
};

// The stream's launches, finishes and abandons replayed through its Rule in chain order, up to the
// launch of test `id` (decided or still running), or all of them for the next level. Errors:
// unknown stream (kNotFound), `id` abandoned (kConflict, code abandoned_test), a history that does
// not replay to what the ledger says (kConflict, asks to run verify), storage errors.
Result<ExplainWalk> walk_stream_for_explain(Ledger& ledger, std::string_view stream,
                                            const std::optional<std::string>& id);

// The explanation of a walk. `where` names the stream or log in messages ("stream s", "log f.csv");
// `id_hint` is how the caller spells the id option ("--id", "id"). Errors: `id` given and not
// reached (kNotFound, code unknown_test); the replayed level differs from the one recorded
// (kConflict).
Result<ExplainedTest> explain_walk(const ExplainWalk& walk, const std::optional<std::string>& id,
                                   std::string_view where, std::string_view id_hint);

// Both: a test of a stream in the ledger, explained.
Result<ExplainedTest> explain_stream_test(Ledger& ledger, std::string_view stream,
                                          const std::optional<std::string>& id,
                                          std::string_view id_hint = "id");

// The JSON object (one line, no newline): {"stream","id","rule","evaluation","test","display",
// "level","uncapped","terms":[{"kind","rejection","test","lag","weight","base","scale","amount"}],
// "cap":{"what","value"}|null,"running":{"explained_test_running","reserved","tests":[{"id","launch",
// "level"}]}}. stream and id are null when not given; a running test's id is null when not known.
std::string explanation_json(const ExplainedTest& e, const std::optional<std::string>& stream,
                             const std::optional<std::string>& id);

}  // namespace alphaledger
