// The Ledger over a store that other processes write too (Store::shared(), ledger_impl.hpp):
// loading checks the stored head against the cached one, writes are conditional on the head read,
// and a call whose write lost the race is made again from the start, so it re-reads the stream and
// decides on what is stored now. On a store this process owns alone each public call here is the
// call made once, as before.
#include <algorithm>
#include <chrono>
#include <random>
#include <thread>

#include "store/codec.hpp"
#include "store/ledger_impl.hpp"

namespace alphaledger::store {

namespace {

// A race lost kSharedAttempts times in a row: the stream is too busy for now (kBusy: retry).
Error still_moving(const Error& last, std::string_view stream) {
  return busy("stream " + in_quotes(stream) + " kept changing under other writers for " +
              std::to_string(StoreLedger::kSharedAttempts) + " attempts; nothing was written by this call, " +
              "retry it (" + last.message + ")");
}

template <typename T>
bool lost_race(const Result<T>& r) {
  return !r.ok() && is_head_moved(r.error());
}

}  // namespace

void StoreLedger::pause_before_retry(int attempt) {
  thread_local std::minstd_rand random(
      static_cast<std::minstd_rand::result_type>(std::hash<std::thread::id>{}(std::this_thread::get_id()) ^
                                                 static_cast<std::size_t>(std::random_device{}())));
  const int ceiling_us = std::min(20000, 250 << std::min(attempt, 6));
  std::uniform_int_distribution<int> pick(50, ceiling_us);
  std::this_thread::sleep_for(std::chrono::microseconds(pick(random)));
}

Status StoreLedger::load_existing(std::string_view name, StreamSlot& slot) {
  if (auto s = load(name, slot); !s) return s;
  if (!slot.exists) return unknown_stream(name, location());
  return {};
}

Status StoreLedger::load(std::string_view name, StreamSlot& slot) {
  if (!shared_) return slot.loaded ? Status{} : load_now(name, slot);
  const std::string key = head_key(name);
  if (slot.loaded && slot.exists) {
    auto now = store_->get(key);
    if (!now) return now.error();
    if (*now && **now == slot.head_bytes) return {};
  }
  slot.loaded = false;
  // Another process may write between the reads of one load (configuration, head, running
  // tests): the load counts only when the head read after it is the one it was made from.
  Error last = busy("stream " + in_quotes(name) + " could not be read");
  for (int attempt = 0; attempt < kSharedAttempts; ++attempt) {
    auto s = load_now(name, slot);
    if (s && !slot.exists) return s;
    auto again = store_->get(key);
    if (!again) return again.error();
    // Steady: the load (or its refusal of a damaged stream) is of the stream as stored now.
    if (*again && **again == slot.head_bytes) return s;
    if (!s) last = s.error();
    slot.loaded = false;
    pause_before_retry(attempt);
  }
  return still_moving(last, name);
}

Status StoreLedger::commit(std::string_view stream, StreamSlot& slot, const WriteBatch& batch) {
  if (!shared_) return store_->write(batch, true);
  const std::string key = head_key(stream);
  std::optional<std::string> expected;
  if (slot.exists) expected = slot.head_bytes;
  if (auto s = store_->write_if(batch, key, expected, true); !s) {
    slot.loaded = false;
    return s;
  }
  for (auto it = batch.ops.rbegin(); it != batch.ops.rend(); ++it) {
    if (it->key == key && !it->erase) {
      slot.head_bytes = it->value;
      break;
    }
  }
  return {};
}

namespace {

// Makes `attempt` until it does not lose a race, at most kSharedAttempts times.
template <typename F>
auto retrying(bool shared, std::string_view stream, const F& attempt) -> decltype(attempt()) {
  if (!shared) return attempt();
  for (int i = 0;; ++i) {
    auto r = attempt();
    if (!lost_race(r)) return r;
    if (i + 1 >= StoreLedger::kSharedAttempts) return still_moving(r.error(), stream);
    StoreLedger::pause_before_retry(i);
  }
}

}  // namespace

Result<Ledger::Created> StoreLedger::create_stream_directed(std::string_view name, const RuleConfig& config,
                                                            Alternative alternative) {
  return retrying(shared_, name, [&] { return create_stream_once(name, config, alternative); });
}

Result<Ledger::Closing> StoreLedger::close_stream(std::string_view stream) {
  return retrying(shared_, stream, [&] { return close_stream_once(stream); });
}

Result<DecideResult> StoreLedger::decide_value(std::string_view stream, std::string_view id, double p_value,
                                               bool e_value) {
  return retrying(shared_, stream, [&] { return decide_value_once(stream, id, p_value, e_value); });
}

Result<LaunchResult> StoreLedger::launch(std::string_view stream, std::string_view id) {
  return retrying(shared_, stream, [&] { return launch_once(stream, id); });
}

Result<AbandonResult> StoreLedger::abandon(std::string_view stream, std::string_view id) {
  return retrying(shared_, stream, [&] { return abandon_once(stream, id); });
}

Result<LookResult> StoreLedger::look(std::string_view stream, std::string_view id, const LookData& data) {
  return retrying(shared_, stream, [&] { return look_once(stream, id, data); });
}

std::vector<Result<EventOutcome>> StoreLedger::apply_events(std::string_view stream,
                                                            std::span<const EventInput> events) {
  if (!shared_) return apply_events_once(stream, events);
  // A group whose write lost the race answers every event with that error: the whole group is
  // decided again on the stream as it now is.
  for (int i = 0;; ++i) {
    auto out = apply_events_once(stream, events);
    const bool lost = std::any_of(out.begin(), out.end(), [](const auto& r) { return lost_race(r); });
    if (!lost) return out;
    if (i + 1 >= kSharedAttempts) {
      for (auto& r : out) {
        if (lost_race(r)) r = still_moving(r.error(), stream);
      }
      return out;
    }
    pause_before_retry(i);
  }
}

Result<Ledger::BatchResult> StoreLedger::decide_batch_streamed(std::string_view stream,
                                                               std::span<const TestView> tests,
                                                               std::size_t group_size,
                                                               const GroupCallback& on_durable) {
  if (!shared_) return decide_batch_once(stream, tests, group_size, on_durable);
  // The groups written stay written (and published); a group whose write lost the race is made
  // again, with the rest of the batch, on the stream as it now is.
  BatchResult total;
  std::size_t offset = 0;
  for (int i = 0;; ++i) {
    auto r = decide_batch_once(stream, tests.subspan(offset), group_size, on_durable);
    if (!r) {
      if (!lost_race(r)) return r.error();
      if (i + 1 >= kSharedAttempts) return still_moving(r.error(), stream);
      pause_before_retry(i);
      continue;
    }
    for (auto& d : r->decided) total.decided.push_back(std::move(d));
    total.durable += r->durable;
    if (r->error && is_head_moved(*r->error) && i + 1 < kSharedAttempts) {
      offset += r->stopped_at;
      pause_before_retry(i);
      continue;
    }
    if (r->error) {
      total.error = is_head_moved(*r->error) ? still_moving(*r->error, stream) : *r->error;
      total.stopped_at = offset + r->stopped_at;
    }
    return total;
  }
}

}  // namespace alphaledger::store
