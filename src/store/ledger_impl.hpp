// The Ledger over a Store: the class StoreLedger, shared by ledger.cpp (open, create, status,
// streams) and ledger_decide.cpp (decide, decide_batch). Internal to the store.
//
// Each stream has an in-memory copy of its configuration, rule and head, loaded on first use and
// guarded by the stream's mutex. A decision advances that copy, is written as one synced batch
// (record, id index entry, head with the rule's new state), and only then is the copy trusted
// again; if the write fails, the copy is marked stale and the stream is reloaded from the store
// on next use, so the store is always the truth. Only streams that exist keep a copy: a name that
// turns out not to exist is dropped from the cache before the call returns (SlotGuard).
//
// On a shared store (Store::shared(): PostgreSQL, where other processes write too) the copy is
// only a cache: every call re-reads the stream's head under the stream's mutex and reloads when
// its bytes differ from the cached ones, and every write is a Store::write_if() on the head read.
// A write that loses the race (head_moved) reloads and redoes the whole call, up to
// kSharedAttempts times (ledger_shared.cpp). On a store this process owns alone, none of this
// happens: no extra read, no conditional write.
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger::store {

Error closed_stream(std::string_view name, std::int64_t closed_at_ms);

// One stream's cached state. `mu` serialises every decision on the stream. A slot is in the
// cache only while a call works on it or while it holds a stream that exists; `retired` marks a
// slot dropped from the cache, which a caller still holding it must not use.
struct StreamSlot {
  std::mutex mu;
  bool retired = false;
  bool loaded = false;
  bool exists = false;
  StoredConfig config;
  std::string encoded_config;
  std::optional<Rule> rule;
  StoredHead head;
  // The head's bytes as last read or written (what a shared store's write_if expects).
  std::string head_bytes;
  // A head of the older form (running tests listed inside its rule state, no running keys): the
  // running tests read from the chain at load, written under their own keys by the next write
  // (StoreLedger::put_head). Empty otherwise.
  std::vector<StoredRunning> legacy_running;
};

class StoreLedger final : public Ledger {
 public:
  using Ledger::verify;

  StoreLedger(std::unique_ptr<Store> store, Clock clock)
      : store_(std::move(store)), clock_(std::move(clock)), shared_(store_->shared()) {}

  // How many times a call on a shared store is made before a race lost each time is reported
  // (as kBusy: retry later).
  static constexpr int kSharedAttempts = 50;
  // Sleeps a little before attempt `attempt` + 1 (randomised, growing), so racing writers spread.
  static void pause_before_retry(int attempt);

  std::string location() const override { return store_->describe(); }

  std::size_t cached_streams() const override;

  Result<Created> create_stream(std::string_view name, const RuleConfig& config) override;

  Result<Created> create_stream_directed(std::string_view name, const RuleConfig& config,
                                         Alternative alternative) override;

  Result<DecideResult> decide(std::string_view stream, std::string_view id, double p_value) override;

  Result<DecideResult> decide_e(std::string_view stream, std::string_view id, double e_value) override;

  Result<LookResult> look(std::string_view stream, std::string_view id, const LookData& data) override;

  Result<std::vector<LookResult>> looks(std::string_view stream, std::string_view id) override;

  Result<BatchResult> decide_batch(std::string_view stream, const std::vector<TestInput>& tests,
                                   std::size_t group_size) override;

  Result<BatchResult> decide_batch_streamed(std::string_view stream, const std::vector<TestInput>& tests,
                                            std::size_t group_size, const GroupCallback& on_durable) override;

  Result<BatchResult> decide_batch_streamed(std::string_view stream, std::span<const TestView> tests,
                                            std::size_t group_size, const GroupCallback& on_durable) override;

  Result<LaunchResult> launch(std::string_view stream, std::string_view id) override;

  std::vector<Result<EventOutcome>> apply_events(std::string_view stream,
                                                 std::span<const EventInput> events) override;

  Result<AbandonResult> abandon(std::string_view stream, std::string_view id) override;

  Result<std::vector<RunningEntry>> running(std::string_view stream) override;

  Result<RunningEntry> running_test(std::string_view stream, std::string_view id) override;

  Result<Closing> close_stream(std::string_view stream) override;

  Result<double> next_level(std::string_view stream) override;

  Result<StreamInfo> status(std::string_view stream) override;

  Result<std::vector<StreamInfo>> streams() override;

  Result<std::vector<DecisionRecord>> history(std::string_view stream) override;

  Result<HistoryPage> history_page(std::string_view stream, std::uint64_t from_step,
                                   std::size_t limit) override;

  Status for_each_decision(std::string_view stream, std::uint64_t from_step,
                           const DecisionVisitor& visit) override;

  Result<VerifyReport> verify(std::string_view stream, const std::vector<Anchor>& anchors) override;

  Result<std::string> chain_hash_at(std::string_view stream, std::uint64_t step) override;

  Status check_format();

 private:
  // The public calls that write, made once; the public ones retry them on a shared store
  // (ledger_shared.cpp).
  Result<Created> create_stream_once(std::string_view name, const RuleConfig& config, Alternative alternative);
  Result<Closing> close_stream_once(std::string_view stream);
  Result<DecideResult> decide_value_once(std::string_view stream, std::string_view id, double p_value,
                                         bool e_value);
  Result<BatchResult> decide_batch_once(std::string_view stream, std::span<const TestView> tests,
                                        std::size_t group_size, const GroupCallback& on_durable);
  Result<LaunchResult> launch_once(std::string_view stream, std::string_view id);
  Result<AbandonResult> abandon_once(std::string_view stream, std::string_view id);
  std::vector<Result<EventOutcome>> apply_events_once(std::string_view stream, std::span<const EventInput> events);
  Result<LookResult> look_once(std::string_view stream, std::string_view id, const LookData& data);

  // Writes `batch`, which holds the stream's new head: a plain synced write, or on a shared store
  // a write_if() against the head the slot was loaded with (absent for a stream not yet created).
  // On a shared store a failed write leaves the slot not loaded. REQUIRES: slot.mu held.
  Status commit(std::string_view stream, StreamSlot& slot, const WriteBatch& batch);

  // The locked slot of one stream: while it is held, no other call works on the stream. On
  // release, a slot that does not hold an existing stream (an unknown name, a failed load or
  // create) is dropped from the cache and retired, so names that do not exist never stay in
  // memory. A caller that fetched a slot which was retired before it got the lock takes a fresh
  // one, so a name never has two live slots. Lock order: a slot's mu, then slots_mu_.
  class SlotGuard {
   public:
    SlotGuard(StoreLedger& ledger, std::string_view name) : ledger_(ledger), name_(name) {
      while (true) {
        slot_ = ledger_.slot_for(name);
        lock_ = std::unique_lock(slot_->mu);
        if (!slot_->retired) break;
        lock_.unlock();
      }
    }
    ~SlotGuard() {
      if (slot_->exists) return;
      std::lock_guard lock(ledger_.slots_mu_);
      auto it = ledger_.slots_.find(name_);
      if (it != ledger_.slots_.end() && it->second == slot_) ledger_.slots_.erase(it);
      slot_->retired = true;
    }
    SlotGuard(const SlotGuard&) = delete;
    SlotGuard& operator=(const SlotGuard&) = delete;
    StreamSlot& operator*() { return *slot_; }
    StreamSlot* operator->() { return slot_.get(); }

   private:
    StoreLedger& ledger_;
    std::string_view name_;
    std::shared_ptr<StreamSlot> slot_;
    std::unique_lock<std::mutex> lock_;
  };

  std::shared_ptr<StreamSlot> slot_for(std::string_view name);

  // Makes the slot hold the stream as stored: reads it when not loaded, and on a shared store
  // also when the stored head differs from the cached one (ledger_shared.cpp). REQUIRES: slot.mu held.
  Status load(std::string_view name, StreamSlot& slot);
  // Reads the stream from the store into the slot. REQUIRES: slot.mu held.
  Status load_now(std::string_view name, StreamSlot& slot);
  // load(), then kNotFound unknown_stream when the stream does not exist. REQUIRES: slot.mu held.
  Status load_existing(std::string_view name, StreamSlot& slot);

  StreamInfo info_of(const StreamSlot& slot) const;

  // The number of chain entries of an existing stream (its head's count).
  Result<std::uint64_t> entries(std::string_view stream);

  // Where an id stands: the latest chain entry the id index points to (ledger_launch.cpp).
  struct TestLookup {
    enum class Phase { kNone, kDecided, kRunning, kAbandoned } phase = Phase::kNone;
    DecisionRecord row;  // kDecided, kAbandoned: the history row
    EventRecord event;   // kRunning: the launch event; kAbandoned: the abandon event
  };
  Result<TestLookup> look_up(std::string_view stream, std::string_view id, std::string& key);
  // Where a test that was launched stands (running, decided or abandoned) in a loaded, existing
  // stream; kNotFound not_launched for an id never launched there. REQUIRES: slot.mu held.
  Result<TestLookup> launched_test(std::string_view stream, std::string_view id, StreamSlot& slot);
  // Ids changed earlier in the same group of events (apply_events), not yet in the store.
  using Touched = std::map<std::string, TestLookup, std::less<>>;
  // look_up(), seeing the group's earlier events first when `touched` is set.
  Result<TestLookup> look_up_in(std::string_view stream, std::string_view id, std::string& key,
                                const Touched* touched);
  // One event on a loaded, open stream: its answer, its entries, index entries and running keys
  // added to `batch`, the cached rule and head advanced (slot.loaded turned false before any
  // change), `touched` updated. The head is not written (put_head). ledger_launch.cpp.
  Result<LaunchResult> launch_into(std::string_view stream, StreamSlot& slot, std::string_view id,
                                   WriteBatch& batch, Touched* touched);
  Result<AbandonResult> abandon_into(std::string_view stream, StreamSlot& slot, std::string_view id,
                                     WriteBatch& batch, Touched* touched);
  // launch_once and abandon_once: the checks, the slot, the event through `into`, one write
  // (none when the event changes nothing, as a repeated launch). ledger_launch.cpp.
  template <typename R>
  using EventInto = Result<R> (StoreLedger::*)(std::string_view, StreamSlot&, std::string_view, WriteBatch&,
                                               Touched*);
  template <typename R>
  Result<R> one_event_once(std::string_view stream, std::string_view id, EventInto<R> into);
  // With e_value the number is an e-value (e-lond streams; the caller has checked that it fits).
  Result<DecideResult> decide_event_into(std::string_view stream, StreamSlot& slot, std::string_view id,
                                         double p_value, bool e_value, WriteBatch& batch, Touched* touched);
  // Adds the head (its rule state in the form that fits: version 3 with the running tests apart
  // while any runs) to `batch`, and the running keys of an older-form head still to be written.
  void put_head(std::string_view stream, StreamSlot& slot, WriteBatch& batch);
  // The running tests stored apart (one key each), in launch order.
  Result<std::vector<StoredRunning>> stored_running(std::string_view stream);
  // The running tests of an older-form head, from the chain (launch events from the earliest running one).
  Result<std::vector<StoredRunning>> running_from_chain(std::string_view stream, const Rule& rule,
                                                        std::uint64_t entries);
  // The refusal for an id that is no longer running (decided or abandoned), for `what` (launch,
  // abandon, decide).
  Error not_running(std::string_view stream, const TestLookup& found, std::string_view what);

  // The first pass of a batch, before anything is written (ledger_decide.cpp): first_row[i] is i
  // for a row that decides a new id, the first row with the same new id for a repeat, and a marker
  // for an id the ledger holds. False (with out.error and out.stopped_at set) when the batch is
  // refused; an error when the store fails.
  Result<bool> plan_batch(std::string_view stream, std::span<const TestView> tests,
                          std::vector<std::uint32_t>& first_row, BatchResult& out);
  // The second pass: decides and writes the rows group by group, publishing each durable group.
  void write_batch_groups(std::string_view stream, StreamSlot& slot, std::span<const TestView> tests,
                          const std::vector<std::uint32_t>& first_row, std::size_t group_size,
                          const GroupCallback& on_durable, BatchResult& out);

  // The stored decision for `id`, if any.
  Result<std::optional<DecisionRecord>> find_decided(std::string_view stream, std::string_view id);
  // The same, building the index key in `key` (a buffer the caller reuses across calls).
  Result<std::optional<DecisionRecord>> find_decided(std::string_view stream, std::string_view id,
                                                     std::string& key);

  Result<DecideResult> repeat_or_conflict(std::string_view stream, const DecisionRecord& prior,
                                          double p_value, bool e_value = false);

  // decide and decide_e: `e_value` says which the number is.
  Result<DecideResult> decide_value(std::string_view stream, std::string_view id, double p_value, bool e_value);

  // The test's last look (its look state key), if it was looked at (ledger_look.cpp).
  Result<std::optional<LookResult>> last_look(std::string_view stream, std::string_view id);
  // Writes a new look at running test `launched` after `previous` (and its finish when it says stop).
  Result<LookResult> write_look(std::string_view stream, StreamSlot& slot, const EventRecord& launched,
                                LookData data, const std::optional<LookResult>& previous);
  // The stored answer of the look at chain entry `entry` (a look event of test `id`).
  Result<LookResult> stored_look(std::string_view stream, std::string_view id, std::uint64_t entry);

  // Finishes running test (its launch event `launched`) with p_value and adds the finish event and
  // index entry to `batch` (ledger_launch.cpp).
  Result<DecideResult> finish_into(std::string_view stream, Rule& rule, StoredHead& head,
                                   const EventRecord& launched, double p_value, WriteBatch& batch);
  // Adds event `e` (entry and hash filled here) as the next chain entry to `batch`, with the id's
  // index entry pointing to it, and advances `head`.
  void append_event(std::string_view stream, StoredHead& head, EventRecord& e, WriteBatch& batch);

  // Decides one new test on `rule` / `head` and adds its record and index entry to `batch`: a
  // decision record while entry n is launch n, else a launch and a finish event.
  DecideResult decide_into(std::string_view stream, Rule& rule, StoredHead& head, std::string id,
                           double p_value, WriteBatch& batch);

  std::unique_ptr<Store> store_;
  Clock clock_;
  const bool shared_;  // store_->shared()
  mutable std::mutex slots_mu_;
  std::map<std::string, std::shared_ptr<StreamSlot>, std::less<>> slots_;
};

}  // namespace alphaledger::store
