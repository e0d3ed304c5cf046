// The durable ledger: named streams of tests, each with a frozen rule configuration, whose
// alpha-wealth carries over across processes, machines and restarts. Every decision is one atomic,
// synced write batch holding the decision record and the rule's new state together; records are
// append-only and hash-chained so `verify` can prove the history (docs/ledger.md,
// docs/ledger-format.md).
//
// Example (the first level is methods.md 14.3's LORD++ check table, row 1):
//   auto ledger = Ledger::open("alphaledger.db");
//   (*ledger)->create_stream("checkout-team", *resolve_config({.rule = "lord++"}));
//   auto d = (*ledger)->decide("checkout-team", "exp-0142", 0.0004);
//   d->record.level;      // 0.001370386057...
//   d->record.rejected;   // true: 0.0004 <= level
//   decision_json(*d);    // {"step":1,"id":"exp-0142","p_value":0.0004,"level":0.0013703860574...,
//                         //  "rejected":1,"wealth":0.07...,"stream":"checkout-team",
//                         //  "decided_at":"2025-03-14T09:30:00.000Z","repeat":false}
//
// Thread-safety: a Ledger is safe to use from many threads. Decisions on one stream are
// serialised; different streams proceed in parallel. A second *process* opening the same folder
// gets kStorage naming the lock holder.
//
// Failure: every fallible member returns an Error (kInvalidInput, kRefused or kStorage, the exit
// codes of CONTRACT.md) and leaves the ledger as it was, except where a member says otherwise
// (decide_batch keeps the groups that were already durable).
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/store.hpp"

namespace alphaledger {

// Milliseconds since the Unix epoch; injected so tests control time.
using Clock = std::function<std::int64_t()>;
std::int64_t system_clock_ms();

// ISO 8601 UTC with milliseconds, e.g. 1700000000000 -> "2023-11-14T22:13:20.000Z": how
// decided_at and created_at are printed.
std::string format_timestamp(std::int64_t ms);

// The configuration in one line for people, e.g. "lord++ alpha=0.05 initial_wealth=0.025
// spending=jm evaluation=exact" (only the parameters the rule takes; numbers round-trip).
std::string describe_config(const RuleConfig& config);

struct StreamInfo {
  std::string name;
  RuleConfig config;
  // The direction in which summary rows (docs/formats.md) are turned into p-values when this
  // stream decides them. Frozen with the configuration. Default: two-sided.
  Alternative alternative = Alternative::kTwoSided;
  std::int64_t created_at_ms = 0;
  std::uint64_t tests = 0;
  std::uint64_t rejections = 0;
  double wealth = 0;
  double next_level = 0;
};

struct DecisionRecord {
  std::uint64_t step = 0;
  std::string id;
  double p_value = 0;
  double level = 0;
  bool rejected = false;
  double wealth = 0;
  std::int64_t decided_at_ms = 0;
};

struct DecideResult {
  std::string stream;
  DecisionRecord record;
  bool repeat = false;  // the id was decided before with the same p-value; nothing changed
};

struct TestInput {
  std::string id;
  double p_value = 0;
};

// The answer of `decide --json` and of the HTTP service, as one line of JSON with the keys
// step, id, p_value, level, rejected (1/0, as replay prints it), wealth, stream, decided_at
// (format_timestamp) and repeat. Numbers in shortest round-trip form. With a non-empty `rule`, a
// first key "rule" holds it (decide --file rows, which carry replay's rule column).
std::string decision_json(const DecideResult& d, std::string_view rule = {});

struct VerifyReport {
  std::uint64_t steps = 0;  // records checked
  bool ok = true;
  std::uint64_t first_bad_step = 0;
  std::string problem;  // what did not match, for the first bad step
  // When ok: SHA-256 (hex) of the last record, or of the configuration when there is none. It
  // commits to the whole history: keep it elsewhere to prove later that nothing up to here
  // changed (docs/ledger.md "What verify proves").
  std::string chain_hash;
};

class Ledger {
 public:
  // Opens (creating if absent) the RocksDB ledger in folder `path`.
  // Errors (kStorage): locked by another process (names the lock), corrupt, newer format,
  // unwritable folder.
  static Result<std::unique_ptr<Ledger>> open(const std::string& path, Clock clock = system_clock_ms);
  // The same with store options; with create_if_missing == false a folder holding no ledger is
  // kRefused ("no ledger at ...") and nothing is created (read-only commands use this).
  static Result<std::unique_ptr<Ledger>> open(const std::string& path, const RocksStoreOptions& options,
                                              Clock clock = system_clock_ms);
  // Over any Store (tests: in-memory or fault-injecting). An empty store gets the format version
  // key; a store with data but no version key, or a newer version, is kStorage.
  static Result<std::unique_ptr<Ledger>> open(std::unique_ptr<Store> store, Clock clock = system_clock_ms);
  virtual ~Ledger() = default;

  // Creates a stream. Same name and same configuration: succeeds, changes nothing, and returns
  // created == false. Same name, other configuration: kRefused. Bad name: kInvalidInput (names
  // are 1..128 bytes of ASCII letters, digits, '-', '_', '.', and not "." or ".."; see
  // docs/ledger.md). A config that resolve_config() would not produce: kInvalidInput.
  // REQUIRES: config came from resolve_config().
  struct Created {
    StreamInfo info;
    bool created = true;
  };
  virtual Result<Created> create_stream(std::string_view name, const RuleConfig& config) = 0;
  // The same, with the direction for summary rows frozen too (create_stream uses two-sided).
  // "Same configuration" means the same RuleConfig and the same direction.
  virtual Result<Created> create_stream_directed(std::string_view name, const RuleConfig& config,
                                                 Alternative alternative) = 0;

  // Decides one test. Unknown stream: kRefused. Bad id or p-value: kInvalidInput. Same id and
  // same p-value as before: the stored decision with repeat = true. Same id, other p-value:
  // kRefused. On any failure the ledger is unchanged. The decision is durable (synced) before
  // this returns.
  virtual Result<DecideResult> decide(std::string_view stream, std::string_view id, double p_value) = 0;

  // Decides tests in order with one synced write per group (group commit). Every input is
  // checked first: a bad id or p-value (kInvalidInput), or a conflict (kRefused: an id already
  // decided with another p-value, or given twice in the batch with different p-values) refuses
  // the whole batch with the ledger unchanged, as BatchResult{decided = {}, error, stopped_at}.
  // Only a storage failure can stop a batch part-way: the groups written before it stay
  // durable and are returned in `decided`.
  struct BatchResult {
    std::vector<DecideResult> decided;  // durable, in input order (repeats included)
    std::optional<Error> error;         // set if the batch was refused or stopped early
    std::size_t stopped_at = 0;         // index of the input that failed, when error is set
  };
  // Errors returned directly (nothing decided): bad stream name, id or p-value (kInvalidInput,
  // naming the input's 1-based position), unknown stream (kRefused). In the BatchResult: a
  // conflict (nothing decided; `stopped_at` is the conflicting input), or a storage failure while
  // writing a group (`error` is kStorage, `stopped_at` is the first input of the group that was
  // not written, `decided` holds the earlier, durable groups). Within the batch, an id repeated
  // with the same p-value is a repeat of its first occurrence. Default group_size: 256 (0 is
  // taken as 1).
  virtual Result<BatchResult> decide_batch(std::string_view stream, const std::vector<TestInput>& tests,
                                           std::size_t group_size = 256) = 0;

  // decide_batch that also calls on_durable(group) after each group is synced (and before the
  // next group is decided), with that group's results in input order, repeats included. The CLI
  // prints each group there, so nothing is printed before it is durable. on_durable runs with
  // the stream's lock held: it must not call back into this Ledger for the same stream.
  using GroupCallback = std::function<void(const std::vector<DecideResult>&)>;
  virtual Result<BatchResult> decide_batch_streamed(std::string_view stream,
                                                    const std::vector<TestInput>& tests,
                                                    std::size_t group_size,
                                                    const GroupCallback& on_durable) = 0;

  // The level the next test will get; changes nothing. Unknown stream: kRefused.
  virtual Result<double> next_level(std::string_view stream) = 0;
  // Configuration, counts, wealth, next level, created time. Unknown stream: kRefused.
  virtual Result<StreamInfo> status(std::string_view stream) = 0;
  // Every stream, by name in byte order.
  virtual Result<std::vector<StreamInfo>> streams() = 0;
  // Every decision in step order. Unknown stream: kRefused; an undecodable record: kStorage.
  virtual Result<std::vector<DecisionRecord>> history(std::string_view stream) = 0;
  // Replays the stored history through a fresh Rule and checks, step by step: the record's own
  // hash, the chain link to the record before (the first links to the configuration), the step
  // number, the level, decision and wealth bit for bit, and the test id index; then the head
  // (record count, last hash) and that the stored rule state equals the replayed state.
  // ok == false names the first bad step (0: the configuration or head itself) and what did
  // not match. Unknown stream: kRefused. Reads the store, never a cache: it sees what is on disk.
  virtual Result<VerifyReport> verify(std::string_view stream) = 0;

  // The chain hash at `step` (SHA-256 hex of that record, which commits to every record up to it),
  // as stored; run verify() to know it is consistent. Unknown stream: kRefused; step 0 or past the
  // last record: kInvalidInput naming the range.
  virtual Result<std::string> chain_hash_at(std::string_view stream, std::uint64_t step) = 0;

  // A short description of where the ledger lives (the folder path), for messages.
  virtual std::string location() const = 0;
};

}  // namespace alphaledger
