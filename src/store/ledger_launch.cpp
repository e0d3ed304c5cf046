// Launch-time events in the Ledger over a Store: launch, finish (through decide) and abandon
// (docs/ledger.md "Launch-time levels"; entries in docs/ledger-format.md "Event record"). The
// running tests are read in ledger_running.cpp; the rule's side is Rule::launch / finish /
// abandon (src/core/rules_launch.cpp).
#include <algorithm>
#include <map>
#include <optional>
#include <string>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_impl.hpp"
#include "store/ledger_internal.hpp"

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

Result<StoreLedger::TestLookup> StoreLedger::look_up_in(std::string_view stream, std::string_view id,
                                                        std::string& key, const Touched* touched) {
  if (touched) {
    auto it = touched->find(id);
    if (it != touched->end()) return it->second;
  }
  return look_up(stream, id, key);
}

Error StoreLedger::not_running(std::string_view stream, const TestLookup& found, std::string_view what) {
  const DecisionRecord& r = found.row;
  const std::string name = "test " + in_quotes(r.id) + " in stream " + in_quotes(stream);
  if (found.phase == TestLookup::Phase::kAbandoned) {
    return conflict(name + " was abandoned at " + format_timestamp(r.decided_at_ms) + " (launch " +
                        std::to_string(r.launch) + ", step " + std::to_string(r.step) +
                        "); an abandoned test cannot be " +
                        (what == "decide" ? "decided" : "launched again") + ": give the new test a new id",
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
                                              const EventRecord& launched, double p_value,
                                              WriteBatch& batch) {
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

Result<LaunchResult> StoreLedger::launch_into(std::string_view stream, StreamSlot& slot, std::string_view id,
                                              WriteBatch& batch, Touched* touched) {
  std::string key;
  auto found = look_up_in(stream, id, key, touched);
  if (!found) return found.error();
  if (found->phase == TestLookup::Phase::kRunning) {
    const EventRecord& e = found->event;
    return LaunchResult{std::string(stream), e.id, e.launch, e.level, e.wealth, e.at_ms, e.entry, true};
  }
  if (found->phase != TestLookup::Phase::kNone) {
    const Error e = not_running(stream, *found, "launch");
    return with_message(e, e.message + " (the ledger is unchanged)");
  }
  slot.loaded = false;  // as in decide(): trusted again only after the write
  Rule& rule = *slot.rule;
  const Reservation r = rule.launch();
  EventRecord e;
  e.kind = EventKind::kLaunch;
  e.launch = r.launch;
  e.id = std::string(id);
  e.level = r.level;
  e.wealth = r.wealth;
  e.at_ms = clock_();
  e.launched_at_ms = e.at_ms;
  append_event(stream, slot.head, e, batch);
  batch.put(store::running_key(stream, e.launch), store::encode_running({e.launch, e.level, e.at_ms, e.id}));
  LaunchResult out{std::string(stream), e.id, e.launch, e.level, e.wealth, e.at_ms, e.entry, false};
  if (touched) {
    TestLookup now;
    now.phase = TestLookup::Phase::kRunning;
    now.event = std::move(e);
    (*touched)[std::string(id)] = std::move(now);
  }
  return out;
}

Result<AbandonResult> StoreLedger::abandon_into(std::string_view stream, StreamSlot& slot,
                                                std::string_view id, WriteBatch& batch, Touched* touched) {
  std::string key;
  auto found = look_up_in(stream, id, key, touched);
  if (!found) return found.error();
  using Phase = TestLookup::Phase;
  if (found->phase == Phase::kNone) {
    return with_reason(
        not_found("test " + in_quotes(id) + " was never launched in stream " + in_quotes(stream) +
                      "; only a running test can be abandoned (the ledger is unchanged)",
                  "unknown_test"),
        "not_launched", std::string(stream));
  }
  if (found->phase == Phase::kAbandoned) {
    const EventRecord& e = found->event;
    return AbandonResult{std::string(stream), e.id,    e.launch, e.level, e.wealth,
                         e.launched_at_ms,    e.at_ms, e.entry,  true};
  }
  if (found->phase == Phase::kDecided) {
    const Error e = not_running(stream, *found, "abandon");
    return with_message(e, e.message + " (the ledger is unchanged)");
  }
  slot.loaded = false;
  Rule& rule = *slot.rule;
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
  append_event(stream, slot.head, e, batch);
  batch.erase(store::running_key(stream, e.launch));
  AbandonResult out{std::string(stream), e.id,    e.launch, e.level, e.wealth,
                    e.launched_at_ms,    e.at_ms, e.entry,  false};
  if (touched) {
    TestLookup now;
    now.phase = Phase::kAbandoned;
    now.row = event_row(e);
    now.event = std::move(e);
    (*touched)[std::string(id)] = std::move(now);
  }
  return out;
}

Result<DecideResult> StoreLedger::decide_event_into(std::string_view stream, StreamSlot& slot,
                                                    std::string_view id, double p_value, bool e_value,
                                                    WriteBatch& batch, Touched* touched) {
  std::string key;
  auto found = look_up_in(stream, id, key, touched);
  if (!found) return found.error();
  using Phase = TestLookup::Phase;
  if (found->phase == Phase::kDecided) {
    auto r = repeat_or_conflict(stream, found->row, p_value, e_value);
    if (!r) return with_message(r.error(), r.error().message + " (the ledger is unchanged)");
    return r;
  }
  if (found->phase == Phase::kAbandoned) return not_running(stream, *found, "decide");
  std::optional<DecideResult> result;
  // The cached rule and head advance in place (no copy of a long exact-mode state); until the
  // write succeeds the slot counts as not loaded, so a failure (or an exception) makes the next
  // call reload the stream from the store, which is the truth.
  slot.loaded = false;
  if (found->phase == Phase::kRunning) {
    // A launched test is decided against the level reserved at its launch (a finish event).
    auto finished = finish_into(stream, *slot.rule, slot.head, found->event, p_value, batch);
    if (!finished) return finished.error();  // the rule is unchanged on error; reloaded anyway
    batch.erase(store::running_key(stream, found->event.launch));
    result = std::move(*finished);
  } else {
    result = decide_into(stream, *slot.rule, slot.head, std::string(id), p_value, batch);
  }
  if (touched) {
    TestLookup now;
    now.phase = Phase::kDecided;
    now.row = result->record;
    (*touched)[std::string(id)] = std::move(now);
  }
  return std::move(*result);
}

void StoreLedger::put_head(std::string_view stream, StreamSlot& slot, WriteBatch& batch) {
  const Rule& rule = *slot.rule;
  StoredHead& head = slot.head;
  head.running_apart = rule.running_count() > 0;
  head.rule_state = head.running_apart ? rule.encode_state_without_running() : rule.encode_state();
  // An older-form head listed its running tests in the rule state: from this write on, each one
  // still running has its own key (those the batch finished or abandoned need none).
  for (const StoredRunning& t : slot.legacy_running) {
    if (rule.is_running(t.launch)) batch.put(store::running_key(stream, t.launch), store::encode_running(t));
  }
  slot.legacy_running.clear();  // a failed write leaves the slot not loaded: the next load reads them again
  batch.put(store::head_key(stream), store::encode_head(head));
}

namespace {

// Whether an answer ends the group: a failure of the store (nothing of the group is written).
template <typename T>
bool store_failed(const Result<T>& r) {
  return !r.ok() && is_storage_failure(r.error().kind);
}

}  // namespace

template <typename R>
Result<R> StoreLedger::one_event_once(std::string_view stream, std::string_view id, EventInto<R> into) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  WriteBatch batch;
  auto out = (this->*into)(stream, *slot, id, batch, nullptr);
  if (!out || batch.empty()) return out;
  put_head(stream, *slot, batch);
  if (auto s = commit(stream, *slot, batch); !s) return s.error();
  slot->loaded = true;
  return out;
}

Result<LaunchResult> StoreLedger::launch_once(std::string_view stream, std::string_view id) {
  return one_event_once<LaunchResult>(stream, id, &StoreLedger::launch_into);
}

Result<AbandonResult> StoreLedger::abandon_once(std::string_view stream, std::string_view id) {
  return one_event_once<AbandonResult>(stream, id, &StoreLedger::abandon_into);
}

std::vector<Result<EventOutcome>> StoreLedger::apply_events_once(std::string_view stream,
                                                                 std::span<const EventInput> events) {
  std::vector<Result<EventOutcome>> out;
  out.reserve(events.size());
  // Checks of each input on its own, as the single calls make them before touching the stream.
  std::vector<std::optional<Error>> bad(events.size());
  for (std::size_t k = 0; k < events.size(); ++k) {
    const EventInput& in = events[k];
    if (auto s = validate_test_id(in.id); !s) {
      bad[k] = s.error();
    } else if (in.type == EventType::kDecide) {
      if (auto p = in.e_value ? validate_e_value(in.p_value) : validate_p_value(in.p_value); !p)
        bad[k] = invalid_input("test " + in_quotes(in.id) + ": " + p.error().message);
    }
  }
  auto answer_all = [&](const Error& e) {
    out.clear();
    for (std::size_t k = 0; k < events.size(); ++k) out.emplace_back(bad[k] ? *bad[k] : e);
    return out;
  };
  if (auto s = store::validate_stream_name(stream); !s) return answer_all(s.error());
  SlotGuard slot(*this, stream);
  if (auto s = load(stream, *slot); !s) return answer_all(s.error());
  if (!slot->exists) return answer_all(unknown_stream(stream, location()));
  if (slot->head.closed_at_ms) return answer_all(closed_stream(stream, *slot->head.closed_at_ms));
  WriteBatch batch;
  Touched touched;
  for (std::size_t k = 0; k < events.size(); ++k) {
    const EventInput& in = events[k];
    if (bad[k]) {
      out.emplace_back(*bad[k]);
      continue;
    }
    std::optional<Error> failed;
    switch (in.type) {
      case EventType::kDecide: {
        if (auto s = evidence_fits(stream, slot->config.config, in.e_value, "test " + in_quotes(in.id)); !s) {
          out.emplace_back(s.error());
          break;
        }
        auto r = decide_event_into(stream, *slot, in.id, in.p_value, in.e_value, batch, &touched);
        if (r && in.e_value) r->record.e_value = true;
        if (store_failed(r)) failed = r.error();
        out.push_back(r ? Result<EventOutcome>(std::move(*r)) : Result<EventOutcome>(r.error()));
        break;
      }
      case EventType::kLaunch: {
        auto r = launch_into(stream, *slot, in.id, batch, &touched);
        if (store_failed(r)) failed = r.error();
        out.push_back(r ? Result<EventOutcome>(std::move(*r)) : Result<EventOutcome>(r.error()));
        break;
      }
      case EventType::kAbandon: {
        auto r = abandon_into(stream, *slot, in.id, batch, &touched);
        if (store_failed(r)) failed = r.error();
        out.push_back(r ? Result<EventOutcome>(std::move(*r)) : Result<EventOutcome>(r.error()));
        break;
      }
    }
    if (failed) {
      slot->loaded = false;  // earlier events of the group may have advanced the cached state
      return answer_all(*failed);
    }
  }
  if (batch.empty()) return out;
  put_head(stream, *slot, batch);
  if (auto s = commit(stream, *slot, batch); !s) return answer_all(s.error());
  slot->loaded = true;
  return out;
}

}  // namespace alphaledger::store
