// Checks a stream's stored history against replay() of the same tests (tests that link the store).
#pragma once

#include <doctest/doctest.h>

#include <set>
#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger::test_support {

// Each id once, steps 1..n, and every level, decision and wealth bit-identical to replay() of the
// same (id, p_value) sequence under the stream's rule.
inline void check_history_equals_replay(const std::vector<DecisionRecord>& history,
                                        const RuleConfig& config) {
  TestLog log;
  log.source = "history";
  std::set<std::string> ids;
  for (const auto& r : history) {
    CHECK_MESSAGE(ids.insert(r.id).second, "id " << r.id << " appears twice in the history");
    TestRecord t;
    t.id = r.id;
    t.p_value = r.p_value;
    log.records.push_back(t);
  }
  const std::vector<Procedure> procs = {Procedure{std::string(rule_name(config.kind)), config}};
  const ReplayResult replayed = replay(log, procs);
  REQUIRE(replayed.decisions.size() == 1);
  REQUIRE(replayed.decisions[0].size() == history.size());
  for (std::size_t k = 0; k < history.size(); ++k) {
    const Decision& d = replayed.decisions[0][k];
    INFO("step " << k + 1 << " id " << history[k].id);
    CHECK(history[k].step == k + 1);
    CHECK(d.step == history[k].step);
    CHECK(d.level == history[k].level);  // bit-identical: same inputs, same outputs
    CHECK(d.rejected == history[k].rejected);
    REQUIRE(d.wealth.has_value());
    CHECK(*d.wealth == history[k].wealth);
  }
}

}  // namespace alphaledger::test_support
