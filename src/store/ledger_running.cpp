// The running tests of a stream in the Ledger over a Store: the keys kept apart for them, the
// older-form head that lists them in its rule state (read back from the chain), and the check of
// those keys that verify makes (docs/ledger-format.md "Running test").
#include <algorithm>
#include <map>
#include <optional>
#include <string>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_impl.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger::store {

Result<std::vector<StoredRunning>> StoreLedger::stored_running(std::string_view stream) {
  std::vector<StoredRunning> out;
  std::optional<Error> bad;
  auto s = store_->scan(store::running_prefix(stream), [&](std::string_view key, std::string_view value) {
    auto t = store::decode_running(key, value);
    if (!t) {
      bad = t.error();
      return false;
    }
    out.push_back(std::move(*t));
    return true;
  });
  if (!s) return s.error();
  if (bad) return *bad;
  return out;
}

Result<std::vector<StoredRunning>> StoreLedger::running_from_chain(std::string_view stream, const Rule& rule,
                                                                   std::uint64_t entries) {
  const std::vector<RunningTest> tests = rule.running();
  std::vector<StoredRunning> out;
  if (tests.empty()) return out;
  // Launch L is written at chain entry L or later, so the walk starts at the earliest running
  // launch number.
  std::map<std::uint64_t, std::size_t> wanted;  // launch -> position in `tests`
  for (std::size_t i = 0; i < tests.size(); ++i) wanted.emplace(tests[i].launch, i);
  out.resize(tests.size());
  std::size_t filled = 0;
  auto s =
      visit_entries(*store_, location(), stream, tests.front().launch, entries, [&](const ChainEntry& e) {
        if (!e.is_event || e.event.event.kind != EventKind::kLaunch) return true;
        auto it = wanted.find(e.event.event.launch);
        if (it == wanted.end()) return true;
        // The level is the rule state's (the chain's launch event holds the same, verify checks it).
        out[it->second] = StoredRunning{e.event.event.launch, tests[it->second].level, e.event.event.at_ms,
                                        e.event.event.id};
        return ++filled < tests.size();
      });
  if (!s) return s.error();
  if (filled < tests.size()) {
    return with_reason(
        corruption("ledger " + location() + ", stream " + in_quotes(stream) + ": the rule state lists " +
                   std::to_string(tests.size()) + " running tests but the chain launches only " +
                   std::to_string(filled) + " of them"),
        "damaged_record", std::string(stream));
  }
  return out;
}

Result<std::vector<RunningEntry>> StoreLedger::running(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  std::vector<RunningEntry> out;
  const std::size_t count = slot->rule->running_count();
  if (count == 0) return out;
  std::vector<StoredRunning> tests;
  if (!slot->legacy_running.empty()) {
    tests = slot->legacy_running;
  } else {
    auto stored = stored_running(stream);
    if (!stored) {
      if (stored.error().kind != ErrorKind::kCorruption) return stored.error();
      return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) + ": " +
                                    stored.error().message),
                         "damaged_record", std::string(stream));
    }
    tests = std::move(*stored);
  }
  if (tests.size() != count) {
    return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) +
                                  ": the rule state counts " + std::to_string(count) + " running tests but " +
                                  std::to_string(tests.size()) + " are stored"),
                       "damaged_record", std::string(stream));
  }
  out.reserve(tests.size());
  for (auto& t : tests) out.push_back(RunningEntry{std::move(t.id), t.launch, t.level, t.launched_at_ms});
  return out;
}

Result<StoreLedger::TestLookup> StoreLedger::launched_test(std::string_view stream, std::string_view id,
                                                           StreamSlot& slot) {
  if (auto s = load_existing(stream, slot); !s) return s.error();
  std::string key;
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  if (found->phase == TestLookup::Phase::kNone) {
    return with_reason(
        not_found("test " + in_quotes(id) + " was never launched in stream " + in_quotes(stream), "unknown_test"),
        "not_launched", std::string(stream));
  }
  return found;
}

Result<RunningEntry> StoreLedger::running_test(std::string_view stream, std::string_view id) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  auto found = launched_test(stream, id, *slot);
  if (!found) return found.error();
  if (found->phase == TestLookup::Phase::kRunning)
    return RunningEntry{found->event.id, found->event.launch, found->event.level, found->event.at_ms};
  const DecisionRecord& r = found->row;
  return conflict("test " + in_quotes(id) + " in stream " + in_quotes(stream) + " is not running: it was " +
                      (r.abandoned ? "abandoned" : "decided") + " at " + format_timestamp(r.decided_at_ms) +
                      " (launch " + std::to_string(r.launch) + ", level " + readable_number(r.level) + ")",
                  r.abandoned ? "abandoned_test" : "decided_test");
}

Result<std::optional<std::string>> running_keys_problem(Store& store, std::string_view stream,
                                                        const std::vector<StoredRunning>& expected) {
  std::optional<std::string> problem;
  std::size_t seen = 0;
  auto s = store.scan(running_prefix(stream), [&](std::string_view key, std::string_view value) {
    auto t = decode_running(key, value);
    if (!t) {
      problem = "a running test's key cannot be read: " + t.error().message;
      return false;
    }
    if (seen >= expected.size() || expected[seen].launch > t->launch) {
      problem = "a key says launch " + std::to_string(t->launch) + " (test " + in_quotes(excerpt(t->id)) +
                ") is running, but the history says it is not";
      return false;
    }
    const StoredRunning& want = expected[seen];
    if (want.launch < t->launch) {
      problem = "running test " + in_quotes(excerpt(want.id)) + " (launch " + std::to_string(want.launch) +
                ") has no key of its own";
      return false;
    }
    if (!(want == *t)) {
      problem = "the key of running test " + in_quotes(excerpt(want.id)) + " (launch " +
                std::to_string(want.launch) + ") does not hold its id, reserved level and launch time";
      return false;
    }
    ++seen;
    return true;
  });
  if (!s) return s.error();
  if (!problem && seen < expected.size()) {
    problem = "running test " + in_quotes(excerpt(expected[seen].id)) + " (launch " +
              std::to_string(expected[seen].launch) + ") has no key of its own";
  }
  return problem;
}

}  // namespace alphaledger::store
