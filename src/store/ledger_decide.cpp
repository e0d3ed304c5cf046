// Decisions in the Ledger over a Store: decide and decide_batch (ledger_impl.hpp).
#include <algorithm>
#include <cstdint>
#include <functional>
#include <span>
#include <string>
#include <unordered_map>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_impl.hpp"

namespace alphaledger::store {

// Whether the stream's rule takes the kind of number given (p-value or e-value).
Status evidence_fits(std::string_view stream, const RuleConfig& config, bool e_value, std::string_view test) {
  const bool wants_e = rule_takes_e_values(config.kind);
  if (wants_e == e_value) return {};
  const std::string rule(rule_name(config.kind));
  if (wants_e) {
    return invalid_input(std::string(test) + ": stream " + in_quotes(stream) + " uses rule " + rule +
                         ", which takes e-values: give e_value, not p_value (the ledger is unchanged)");
  }
  return invalid_input(
      std::string(test) + ": stream " + in_quotes(stream) + " uses rule " + rule +
      ", which takes p-values: give p_value, not e_value (only e-lond streams take e-values; "
      "the ledger is unchanged)");
}

Result<DecideResult> StoreLedger::decide(std::string_view stream, std::string_view id, double p_value) {
  return decide_value(stream, id, p_value, false);
}

Result<DecideResult> StoreLedger::decide_e(std::string_view stream, std::string_view id, double e_value) {
  auto r = decide_value(stream, id, e_value, true);
  if (r) r->record.e_value = true;
  return r;
}

Result<DecideResult> StoreLedger::decide_value_once(std::string_view stream, std::string_view id, double p_value,
                                                    bool e_value) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  if (auto s = e_value ? validate_e_value(p_value) : validate_p_value(p_value); !s)
    return invalid_input("test " + in_quotes(id) + ": " + s.error().message);
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  if (auto s = evidence_fits(stream, slot->config.config, e_value, "test " + in_quotes(id)); !s)
    return s.error();
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  WriteBatch batch;
  auto result = decide_event_into(stream, *slot, id, p_value, e_value, batch, nullptr);
  if (!result || batch.empty()) return result;
  put_head(stream, *slot, batch);
  if (auto s = commit(stream, *slot, batch); !s) return s.error();
  slot->loaded = true;
  return result;
}

namespace {

// The batch's new ids, each with the first row that gives it: open addressing with linear
// probing over 32-bit row numbers (4 bytes a slot, at most half full), the ids themselves staying
// where the caller holds them. A std::unordered_map of string_view to row cost ~50 bytes a row.
class FirstRowTable {
 public:
  static constexpr std::uint32_t kEmpty = static_cast<std::uint32_t>(-1);

  explicit FirstRowTable(std::size_t rows) {
    std::size_t capacity = 16;
    while (capacity < 2 * rows) capacity *= 2;
    slots_.assign(capacity, kEmpty);
    mask_ = capacity - 1;
  }

  // The slot that holds `id`'s row, or the empty slot where it belongs.
  std::uint32_t& slot(std::string_view id, std::span<const TestView> tests) {
    std::size_t at = std::hash<std::string_view>{}(id)&mask_;
    while (slots_[at] != kEmpty && tests[slots_[at]].id != id) at = (at + 1) & mask_;
    return slots_[at];
  }

 private:
  std::vector<std::uint32_t> slots_;
  std::size_t mask_ = 0;
};

std::vector<TestView> views_of(const std::vector<TestInput>& tests) {
  std::vector<TestView> views;
  views.reserve(tests.size());
  for (const auto& t : tests) views.push_back({t.id, t.p_value, t.e_value});
  return views;
}

}  // namespace

Result<Ledger::BatchResult> StoreLedger::decide_batch(std::string_view stream,
                                                      const std::vector<TestInput>& tests,
                                                      std::size_t group_size) {
  const std::vector<TestView> views = views_of(tests);
  return decide_batch_streamed(stream, std::span<const TestView>(views), group_size, nullptr);
}

Result<Ledger::BatchResult> StoreLedger::decide_batch_streamed(std::string_view stream,
                                                               const std::vector<TestInput>& tests,
                                                               std::size_t group_size,
                                                               const GroupCallback& on_durable) {
  const std::vector<TestView> views = views_of(tests);
  return decide_batch_streamed(stream, std::span<const TestView>(views), group_size, on_durable);
}

namespace {

// Row numbers of a batch are 32-bit; the largest value marks a row whose id the ledger holds.
constexpr std::uint32_t kStoredRow = static_cast<std::uint32_t>(-1);

// Every row's id and p-value, before anything is looked up.
Status validate_batch(std::span<const TestView> tests) {
  if (tests.size() >= kStoredRow - 1) {
    return invalid_input("a batch holds at most " + std::to_string(kStoredRow - 2) + " tests, got " +
                         std::to_string(tests.size()) + "; split it");
  }
  for (std::size_t i = 0; i < tests.size(); ++i) {
    const auto& t = tests[i];
    if (auto s = validate_test_id(t.id); !s) {
      return invalid_input("test " + std::to_string(i + 1) + " of the batch: " + s.error().message);
    }
    if (auto s = t.e_value ? validate_e_value(t.p_value) : validate_p_value(t.p_value); !s) {
      return invalid_input("test " + std::to_string(i + 1) + " of the batch (" + in_quotes(t.id) +
                           "): " + s.error().message);
    }
  }
  return {};
}

// The rows of a batch that a later row repeats (plan_batch's first_row points to them).
std::vector<bool> rows_repeated_later(const std::vector<std::uint32_t>& first_row) {
  std::vector<bool> out(first_row.size(), false);
  for (std::size_t i = 0; i < first_row.size(); ++i) {
    if (first_row[i] != kStoredRow && first_row[i] != i) out[first_row[i]] = true;
  }
  return out;
}

}  // namespace

Result<bool> StoreLedger::plan_batch(std::string_view stream, std::span<const TestView> tests,
                                     std::vector<std::uint32_t>& first_row, BatchResult& out) {
  first_row.assign(tests.size(), 0);
  std::string key;  // the index key, built in one reused buffer
  FirstRowTable first_new(tests.size());
  for (std::size_t i = 0; i < tests.size(); ++i) {
    const auto& t = tests[i];
    std::uint32_t& seen = first_new.slot(t.id, tests);
    if (seen != FirstRowTable::kEmpty) {
      const double first_p = tests[seen].p_value;
      if (first_p != t.p_value) {
        out.error =
            conflict("test " + in_quotes(t.id) + " appears twice in the batch with different p-values (" +
                     readable_number(first_p) + " at position " + std::to_string(seen + 1) + ", " +
                     readable_number(t.p_value) + " at position " + std::to_string(i + 1) +
                     "); a test id is decided once (the ledger is unchanged)");
        out.stopped_at = i;
        return false;
      }
      first_row[i] = seen;
      continue;
    }
    auto found = find_decided(stream, t.id, key);
    if (!found && found.error().kind == ErrorKind::kConflict) {  // a running or abandoned id
      out.error = with_message(found.error(),
                               "test " + std::to_string(i + 1) + " of the batch: " + found.error().message);
      out.stopped_at = i;
      return false;
    }
    if (!found) return found.error();
    if (*found) {
      if (auto r = repeat_or_conflict(stream, **found, t.p_value, t.e_value); !r) {
        out.error = with_message(r.error(), r.error().message + " (the ledger is unchanged)");
        out.stopped_at = i;
        return false;
      }
      first_row[i] = kStoredRow;
    } else {
      seen = static_cast<std::uint32_t>(i);
      first_row[i] = static_cast<std::uint32_t>(i);
    }
  }
  return true;
}

void StoreLedger::write_batch_groups(std::string_view stream, StreamSlot& slot,
                                     std::span<const TestView> tests,
                                     const std::vector<std::uint32_t>& first_row, std::size_t group_size,
                                     const GroupCallback& on_durable, BatchResult& out) {
  // As in decide(): the cached state advances in place and counts as loaded only after each
  // successful write. Every row gives one result, in input order, so row j's result is
  // group[j - group_start] while its group is being decided, and afterwards out.decided[j] (or
  // kept[j] with on_durable set).
  Rule& rule = *slot.rule;
  StoredHead& head = slot.head;
  // With on_durable set, results go to the callback and only rows a later repeat in the batch
  // points to are kept (in `kept`): a 10^6-row batch does not hold 10^6 results at once.
  const bool keep_all = !on_durable;
  std::unordered_map<std::size_t, DecisionRecord> kept;  // row -> record, rows repeated later
  const std::vector<bool> repeated_later = keep_all ? std::vector<bool>{} : rows_repeated_later(first_row);
  const std::size_t group_capacity = std::min(group_size, tests.size());
  WriteBatch batch;
  batch.ops.reserve(2 * group_capacity + 1);
  std::vector<DecideResult> group;
  group.reserve(group_capacity);
  if (keep_all) out.decided.reserve(tests.size());
  std::size_t group_start = 0;  // the first row of the group being decided
  std::string key;

  // Writes the group (if it decided anything), then publishes it. Returns false on failure,
  // having recorded the error in `out`.
  auto flush = [&]() -> bool {
    if (!batch.empty()) {
      put_head(stream, slot, batch);
      if (auto s = commit(stream, slot, batch); !s) {
        out.error = s.error();
        out.stopped_at = group_start;
        return false;  // the slot stays not loaded: the next call reloads from the store
      }
      slot.loaded = true;
    }
    if (on_durable && !group.empty()) on_durable(group);
    out.durable += group.size();
    for (std::size_t j = 0; j < group.size(); ++j) {
      if (keep_all) {
        out.decided.push_back(std::move(group[j]));
      } else if (repeated_later[group_start + j]) {
        kept.emplace(group_start + j, std::move(group[j].record));
      }
    }
    group.clear();
    batch.ops.clear();  // keeps the capacity for the next group
    return true;
  };

  for (std::size_t i = 0; i < tests.size(); ++i) {
    const auto& t = tests[i];
    const std::size_t first = first_row[i];
    if (first == kStoredRow) {
      // Read again: the stream's lock has been held since the first pass, so it is still there.
      auto found = find_decided(stream, t.id, key);
      if (!found || !*found) {
        out.error = !found ? found.error()
                           : corruption("ledger " + location() + ", stream " + in_quotes(stream) + ", test " +
                                        in_quotes(t.id) + ": its record went missing during the batch");
        out.stopped_at = group_start;  // this group is not written; the slot reloads if it advanced
        return;
      }
      group.push_back(DecideResult{std::string(stream), std::move(**found), true});
    } else if (first != i) {
      const DecisionRecord& earlier = first >= group_start ? group[first - group_start].record
                                      : keep_all           ? out.decided[first].record
                                                           : kept.at(first);
      group.push_back(DecideResult{std::string(stream), earlier, true});
    } else {
      slot.loaded = false;
      group.push_back(decide_into(stream, rule, head, std::string(t.id), t.p_value, batch));
    }
    group.back().record.e_value = t.e_value;
    if (group.size() >= group_size) {
      if (!flush()) return;
      group_start = i + 1;
    }
  }
  flush();
}

Result<Ledger::BatchResult> StoreLedger::decide_batch_once(std::string_view stream,
                                                           std::span<const TestView> tests, std::size_t group_size,
                                                           const GroupCallback& on_durable) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_batch(tests); !s) return s.error();
  if (group_size == 0) group_size = 1;
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  for (std::size_t i = 0; i < tests.size(); ++i) {
    auto s =
        evidence_fits(stream, slot->config.config, tests[i].e_value,
                      "test " + std::to_string(i + 1) + " of the batch (" + in_quotes(tests[i].id) + ")");
    if (!s) return s.error();
  }
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);

  BatchResult out;
  // First pass, before anything is written: every id is looked up, so a conflict (with the
  // ledger, or between two rows of the batch) refuses the batch with the ledger unchanged.
  // first_row[i] is i for a row that decides a new id, the first such row for a later row with
  // the same new id, and kStoredRow for an id the ledger already holds (its record is read again
  // when its row's turn comes, rather than kept: a resumed 10^6-row batch would hold them all).
  std::vector<std::uint32_t> first_row;
  auto planned = plan_batch(stream, tests, first_row, out);
  if (!planned) return planned.error();
  if (!*planned) return out;
  write_batch_groups(stream, *slot, tests, first_row, group_size, on_durable, out);
  return out;
}

// The stored decision for `id`, if any.
Result<std::optional<DecisionRecord>> StoreLedger::find_decided(std::string_view stream,
                                                                std::string_view id) {
  std::string key;
  return find_decided(stream, id, key);
}

// The same, building the index key in `key` (a buffer the caller reuses across calls). A running
// or abandoned id is kConflict: a batch does not finish launched tests (docs/ledger.md).
Result<std::optional<DecisionRecord>> StoreLedger::find_decided(std::string_view stream, std::string_view id,
                                                                std::string& key) {
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  switch (found->phase) {
    case TestLookup::Phase::kNone:
      return std::optional<DecisionRecord>{};
    case TestLookup::Phase::kDecided:
      return std::optional<DecisionRecord>{std::move(found->row)};
    case TestLookup::Phase::kRunning:
      return with_reason(conflict("test " + in_quotes(id) + " is running (launched at " +
                                      format_timestamp(found->event.at_ms) +
                                      "); a batch does not finish launched tests: decide it on its own "
                                      "(the ledger is unchanged)",
                                  "running_test"),
                         "running_in_batch", std::string(stream));
    case TestLookup::Phase::kAbandoned:
      break;
  }
  auto e = not_running(stream, *found, "decide");
  return with_message(e, e.message + " (the ledger is unchanged)");
}

Result<DecideResult> StoreLedger::repeat_or_conflict(std::string_view stream, const DecisionRecord& prior,
                                                     double p_value, bool e_value) {
  if (prior.p_value == p_value) return DecideResult{std::string(stream), prior, true};
  const std::string field = e_value ? "e_value " : "p_value ";
  return conflict("test " + in_quotes(prior.id) + " was already decided in stream " + in_quotes(stream) +
                  " at step " + std::to_string(prior.step) + " with " + field +
                  readable_number(prior.p_value) + "; a test id is decided once, so " + field +
                  readable_number(p_value) + " is refused");
}

// Decides one new test on `rule` / `head` and adds its record and index entry to `batch`.
DecideResult StoreLedger::decide_into(std::string_view stream, Rule& rule, StoredHead& head, std::string id,
                                      double p_value, WriteBatch& batch) {
  if (head.steps != rule.tests()) {
    // A finish or abandon event is in the chain, so entry numbers and launch numbers differ: the
    // test is written as a launch event and its finish (docs/ledger-format.md "Event record").
    EventRecord launched;
    launched.kind = EventKind::kLaunch;
    launched.id = std::move(id);
    const Reservation r = rule.launch();
    launched.launch = r.launch;
    launched.level = r.level;
    launched.wealth = r.wealth;
    launched.at_ms = clock_();
    launched.launched_at_ms = launched.at_ms;
    append_event(stream, head, launched, batch);
    auto finished = finish_into(stream, rule, head, launched, p_value, batch);
    return std::move(*finished);  // cannot fail: the test was launched just above, p was validated
  }
  const Outcome o = rule.record(p_value);
  DecisionRecord rec;
  rec.step = o.step;
  rec.id = std::move(id);
  rec.p_value = p_value;
  rec.level = o.level;
  rec.rejected = o.rejected;
  rec.wealth = o.wealth;
  rec.decided_at_ms = clock_();
  rec.launch = o.step;
  rec.launched_at_ms = rec.decided_at_ms;
  Digest hash{};
  batch.put(store::record_key(stream, rec.step), store::encode_record(rec, head.last_hash, &hash));
  batch.put(store::index_key(stream, rec.id), store::encode_step(rec.step));
  head.steps = rec.step;
  head.last_hash = hash;  // head.rule_state is filled when the batch is written
  return DecideResult{std::string(stream), std::move(rec), false};
}

}  // namespace alphaledger::store
