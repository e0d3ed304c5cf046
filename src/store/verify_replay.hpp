// The rule half of Ledger::verify (ledger_verify.cpp): replays a stream's chain entries, one at a
// time and in step order, through the stream's rule, and says where an entry disagrees with the
// replay. Holds the rule and the tests running at that point of the walk, not the history.
// Internal to the store.
//
// Thread-safety: one replay per thread; it reads the store (look state keys), which is safe from
// many threads.
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <string_view>

#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"

namespace alphaledger::store {

// "replaying the rule gives <what> <got> but the record has <stored>".
std::string replay_mismatch(const char* what, double got, double stored);

class ChainReplay {
 public:
  // A test launched and not yet finished or abandoned in the walk: its id, launch entry and time,
  // where the id index points (set by the caller's index check), and its last look so far.
  struct Launched {
    std::string id;
    std::uint64_t entry = 0;
    std::int64_t at_ms = 0;
    std::optional<std::uint64_t> indexed;
    std::optional<LookPayload> last_look;
    std::uint64_t last_look_entry = 0;
  };

  // `store` and `stream` are read for the look state keys of finished tests.
  ChainReplay(Store& store, std::string_view stream, const RuleConfig& config, Alternative alternative)
      : store_(store), stream_(stream), rule_(config), alternative_(alternative) {}

  // Replays one entry: the problem text when it disagrees, else nothing. After a problem that
  // came from reading the store, io_error() is set.
  std::optional<std::string> replay(const ChainEntry& e);

  // The look state key of a test that was looked at must point to its last look.
  std::optional<std::string> look_state_problem(const Launched& t);

  const Rule& rule() const { return rule_; }
  std::map<std::uint64_t, Launched>& running() { return running_; }
  // A look said stop and the test's finish has not come yet.
  bool stop_pending() const { return pending_stop_.has_value(); }
  // Tests launched so far: decision records and launch events (one id each).
  std::uint64_t launches() const { return launches_; }
  const std::optional<Error>& io_error() const { return io_error_; }

 private:
  std::optional<std::string> evidence_problem(double x) const;
  double running_level(std::uint64_t launch) const;
  std::optional<std::string> replay_decision(const DecisionRecord& r);
  std::optional<std::string> replay_launch(const EventRecord& ev);
  std::optional<std::string> replay_look(const EventRecord& ev, Launched& t);
  std::optional<std::string> replay_finish(const EventRecord& ev);
  std::optional<std::string> replay_abandon(const EventRecord& ev);

  Store& store_;
  std::string_view stream_;
  Rule rule_;
  Alternative alternative_;
  std::map<std::uint64_t, Launched> running_;
  std::optional<std::uint64_t> pending_stop_;  // a look said stop: its launch, and the value to finish with
  double pending_value_ = 0;
  std::uint64_t launches_ = 0;
  std::optional<Error> io_error_;
};

}  // namespace alphaledger::store
