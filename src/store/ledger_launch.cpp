// Launch-time events in the Ledger over a Store: launch, finish (through decide), abandon, and the
// running tests (docs/ledger.md "Launch-time levels"; entries in docs/ledger-format.md "Event
// record"). The rule's side is Rule::launch / finish / abandon (src/core/rules_launch.cpp).
#include <algorithm>
#include <string>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_impl.hpp"

namespace alphaledger::store {

Result<StoreLedger::TestLookup> StoreLedger::look_up(std::string_view stream, std::string_view id,
                                                     std::string& key) {
  store::assign_index_key(key, stream, id);
  auto index = store_->get(key);
  if (!index) return index.error();
  TestLookup out;
  if (!*index) return out;
  const std::string where =
      "ledger " + location() + ", stream " + in_quotes(stream) + ", test " + in_quotes(id) + ": ";
  auto step = store::decode_step(**index);
  if (!step) return corruption(where + step.error().message);
  auto bytes = store_->get(store::record_key(stream, *step));
  if (!bytes) return bytes.error();
  if (!*bytes)
    return corruption(where + "the index points to step " + std::to_string(*step) + ", which has no record");
  auto entry = store::decode_entry(**bytes);
  if (!entry) return corruption(where + entry.error().message);
  if (entry->id() != id) return corruption(where + "the index points to a record of another test");
  if (entry->is_event && entry->event.event.kind == EventKind::kLaunch) {
    out.phase = TestLookup::Phase::kRunning;
    out.event = std::move(entry->event.event);
    return out;
  }
  out.row = *history_row(*entry);
  if (out.row.abandoned) {
    out.phase = TestLookup::Phase::kAbandoned;
    out.event = std::move(entry->event.event);
  } else {
    out.phase = TestLookup::Phase::kDecided;
  }
  return out;
}

Error StoreLedger::not_running(std::string_view stream, const TestLookup& found, std::string_view what) {
  const DecisionRecord& r = found.row;
  const std::string name = "test " + in_quotes(r.id) + " in stream " + in_quotes(stream);
  if (found.phase == TestLookup::Phase::kAbandoned) {
    return conflict(name + " was abandoned at " + format_timestamp(r.decided_at_ms) + " (launch " +
                        std::to_string(r.launch) + ", step " + std::to_string(r.step) +
                        "); an abandoned test cannot be " + (what == "decide" ? "decided" : "launched again") +
                        ": give the new test a new id",
                    "abandoned_test");
  }
  return conflict(name + " was already decided at step " + std::to_string(r.step) + " (launch " +
                      std::to_string(r.launch) + ", p_value " + readable_number(r.p_value) + ", level " +
                      readable_number(r.level) + "); a decided test cannot be " +
                      (what == "abandon" ? "abandoned" : "launched again") + ": give the new test a new id",
                  "decided_test");
}

void StoreLedger::append_event(std::string_view stream, StoredHead& head, EventRecord& e, WriteBatch& batch) {
  e.entry = head.steps + 1;
  Digest hash{};
  batch.put(store::record_key(stream, e.entry), store::encode_event(e, head.last_hash, &hash));
  batch.put(store::index_key(stream, e.id), store::encode_step(e.entry));
  head.steps = e.entry;
  head.last_hash = hash;  // head.rule_state is filled when the batch is written
}

Result<DecideResult> StoreLedger::finish_into(std::string_view stream, Rule& rule, StoredHead& head,
                                              const EventRecord& launched, double p_value, WriteBatch& batch) {
  auto o = rule_takes_e_values(rule.config().kind) ? rule.finish_e(launched.launch, p_value)
                                                   : rule.finish(launched.launch, p_value);
  if (!o) {
    return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) + ", test " +
                                  in_quotes(launched.id) + ": the id index says it is running but the rule " +
                                  "state disagrees: " + o.error().message),
                       "damaged_record", std::string(stream));
  }
  EventRecord e;
  e.kind = EventKind::kFinish;
  e.launch = launched.launch;
  e.id = launched.id;
  e.level = o->level;
  e.p_value = p_value;
  e.rejected = o->rejected;
  e.wealth = o->wealth;
  e.at_ms = clock_();
  e.launched_at_ms = launched.launched_at_ms;
  append_event(stream, head, e, batch);
  DecideResult out;
  out.stream = std::string(stream);
  out.record = event_row(e);
  return out;
}

Result<LaunchResult> StoreLedger::launch(std::string_view stream, std::string_view id) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load(stream, *slot); !s) return s.error();
  if (!slot->exists) return unknown_stream(stream, location());
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  std::string key;
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  if (found->phase == TestLookup::Phase::kRunning) {
    const EventRecord& e = found->event;
    return LaunchResult{std::string(stream), e.id, e.launch, e.level, e.wealth, e.at_ms, e.entry, true};
  }
  if (found->phase != TestLookup::Phase::kNone) {
    const Error e = not_running(stream, *found, "launch");
    return with_message(e, e.message + " (the ledger is unchanged)");
  }
  slot->loaded = false;  // as in decide(): trusted again only after the write
  Rule& rule = *slot->rule;
  StoredHead& head = slot->head;
  const Reservation r = rule.launch();
  EventRecord e;
  e.kind = EventKind::kLaunch;
  e.launch = r.launch;
  e.id = std::string(id);
  e.level = r.level;
  e.wealth = r.wealth;
  e.at_ms = clock_();
  e.launched_at_ms = e.at_ms;
  WriteBatch batch;
  append_event(stream, head, e, batch);
  head.rule_state = rule.encode_state();
  batch.put(store::head_key(stream), store::encode_head(head));
  if (auto s = store_->write(batch, true); !s) return s.error();
  slot->loaded = true;
  return LaunchResult{std::string(stream), e.id, e.launch, e.level, e.wealth, e.at_ms, e.entry, false};
}

Result<AbandonResult> StoreLedger::abandon(std::string_view stream, std::string_view id) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load(stream, *slot); !s) return s.error();
  if (!slot->exists) return unknown_stream(stream, location());
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  std::string key;
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  using Phase = TestLookup::Phase;
  if (found->phase == Phase::kNone) {
    return with_reason(not_found("test " + in_quotes(id) + " was never launched in stream " + in_quotes(stream) +
                                     "; only a running test can be abandoned (the ledger is unchanged)",
                                 "unknown_test"),
                       "not_launched", std::string(stream));
  }
  if (found->phase == Phase::kAbandoned) {
    const EventRecord& e = found->event;
    return AbandonResult{std::string(stream), e.id, e.launch, e.level, e.wealth, e.launched_at_ms,
                         e.at_ms,             e.entry, true};
  }
  if (found->phase == Phase::kDecided) {
    const Error e = not_running(stream, *found, "abandon");
    return with_message(e, e.message + " (the ledger is unchanged)");
  }
  slot->loaded = false;
  Rule& rule = *slot->rule;
  StoredHead& head = slot->head;
  const EventRecord& launched = found->event;
  if (auto s = rule.abandon(launched.launch); !s) {
    return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) + ", test " +
                                  in_quotes(id) + ": the id index says it is running but the rule state " +
                                  "disagrees: " + s.error().message),
                       "damaged_record", std::string(stream));
  }
  EventRecord e;
  e.kind = EventKind::kAbandon;
  e.launch = launched.launch;
  e.id = launched.id;
  e.level = launched.level;
  e.wealth = rule.wealth();
  e.at_ms = clock_();
  e.launched_at_ms = launched.launched_at_ms;
  WriteBatch batch;
  append_event(stream, head, e, batch);
  head.rule_state = rule.encode_state();
  batch.put(store::head_key(stream), store::encode_head(head));
  if (auto s = store_->write(batch, true); !s) return s.error();
  slot->loaded = true;
  return AbandonResult{std::string(stream), e.id, e.launch, e.level, e.wealth, e.launched_at_ms, e.at_ms,
                       e.entry,             false};
}

Result<std::vector<RunningEntry>> StoreLedger::running(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  std::vector<RunningTest> tests;
  std::uint64_t count = 0;
  {
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    tests = slot->rule->running();
    count = slot->head.steps;
  }
  std::vector<RunningEntry> out;
  if (tests.empty()) return out;
  // Launch L is written at chain entry L or later, so the walk starts at the earliest running
  // launch number. A launch whose test is still running (in the rule state read above) is listed.
  std::map<std::uint64_t, std::size_t> wanted;  // launch -> position in `tests`
  for (std::size_t i = 0; i < tests.size(); ++i) wanted.emplace(tests[i].launch, i);
  out.resize(tests.size());
  std::size_t filled = 0;
  auto s = visit_entries(*store_, location(), stream, tests.front().launch, count, [&](const ChainEntry& e) {
    if (!e.is_event || e.event.event.kind != EventKind::kLaunch) return true;
    auto it = wanted.find(e.event.event.launch);
    if (it == wanted.end()) return true;
    out[it->second] = RunningEntry{e.event.event.id, e.event.event.launch, e.event.event.level,
                                   e.event.event.at_ms};
    return ++filled < tests.size();
  });
  if (!s) return s.error();
  if (filled < tests.size()) {
    return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) +
                                  ": the rule state lists " + std::to_string(tests.size()) +
                                  " running tests but the chain launches only " + std::to_string(filled) +
                                  " of them"),
                       "damaged_record", std::string(stream));
  }
  return out;
}

Result<RunningEntry> StoreLedger::running_test(std::string_view stream, std::string_view id) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load(stream, *slot); !s) return s.error();
  if (!slot->exists) return unknown_stream(stream, location());
  std::string key;
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  switch (found->phase) {
    case TestLookup::Phase::kNone:
      return with_reason(not_found("test " + in_quotes(id) + " was never launched in stream " + in_quotes(stream),
                                   "unknown_test"),
                         "not_launched", std::string(stream));
    case TestLookup::Phase::kRunning:
      return RunningEntry{found->event.id, found->event.launch, found->event.level, found->event.at_ms};
    case TestLookup::Phase::kDecided:
    case TestLookup::Phase::kAbandoned:
      break;
  }
  const DecisionRecord& r = found->row;
  return conflict("test " + in_quotes(id) + " in stream " + in_quotes(stream) + " is not running: it was " +
                      (r.abandoned ? "abandoned" : "decided") + " at " + format_timestamp(r.decided_at_ms) +
                      " (launch " + std::to_string(r.launch) + ", level " + readable_number(r.level) + ")",
                  r.abandoned ? "abandoned_test" : "decided_test");
}

}  // namespace alphaledger::store
