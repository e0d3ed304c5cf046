// The durable ledger: named streams of tests, each with a frozen rule configuration, whose
// alpha-wealth carries over across processes, machines and restarts. Every decision is one atomic,
// synced write batch holding the decision record and the rule's new state together; records are
// append-only and hash-chained so `verify` can prove the history (docs/ledger.md,
// docs/ledger-format.md).
//
// Example (the first level is the LORD++ check table's row 1, tests/store/test_ledger.cpp):
//   auto ledger = Ledger::open("alphaledger.db");
//   (*ledger)->create_stream("checkout-team", *resolve_config({.rule = "lord++"}));
//   auto d = (*ledger)->decide("checkout-team", "exp-0142", 0.0004);
//   d->record.level;      // 0.001370386057...
//   d->record.rejected;   // true: 0.0004 <= level
//   decision_json(*d);    // (alphaledger/forms.hpp) {"step":1,"id":"exp-0142","p_value":0.0004,"level":0.0013703860566622432,
//                         //  "rejected":1,"wealth":0.04862961394333776,"stream":"checkout-team",
//                         //  "decided_at":"2025-03-14T09:30:00.000Z","repeat":false}  (the time of the call)
//
// Thread-safety: a Ledger is safe to use from many threads. Decisions on one stream are
// serialised; different streams proceed in parallel. A second *process* opening the same folder
// gets kBusy naming the lock holder.
//
// Failure: every fallible member returns an Error (alphaledger/result.hpp; the kinds and what the
// command line and HTTP make of them: docs/errors.md) and leaves the ledger as it was, except where a
// member says otherwise
// (decide_batch keeps the groups that were already durable).
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {

// Milliseconds since the Unix epoch; injected so tests control time.
using Clock = std::function<std::int64_t()>;
std::int64_t system_clock_ms();

// format_timestamp(ms), how decided_at and created_at are printed, is in alphaledger/text.hpp.

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
  // Tests launched and not yet decided or abandoned, and the sum of the levels reserved for them
  // (summed in launch order; Rule::reserved).
  std::uint64_t running = 0;
  double reserved = 0;
  // Set once the stream is closed (Ledger::close_stream): the time it was closed.
  std::optional<std::int64_t> closed_at_ms;
};

// One test as the history shows it. `step` is the position of its last entry in the stream's
// chain (its decision, or its abandon): the number anchors and verify --at-step use. In a stream
// where no test was launched on its own, step and launch are equal. `level` is the level reserved
// for the test at its launch, the one it was decided against.
struct DecisionRecord {
  std::uint64_t step = 0;
  std::string id;
  double p_value = 0;
  double level = 0;
  bool rejected = false;
  double wealth = 0;
  std::int64_t decided_at_ms = 0;  // for an abandoned test: when it was abandoned
  std::uint64_t launch = 0;        // launch number, 1-based, in launch order
  std::int64_t launched_at_ms = 0; // equal to decided_at_ms when decided without a launch first
  // The test was abandoned (Ledger::abandon): never decided, p_value 0, rejected false.
  bool abandoned = false;
  // p_value holds the test's e-value (a stream whose rule takes e-values, e-lond). Set in the
  // answers of decide_e, decide_batch rows with e_value and looks; history rows leave it false
  // (their rule says it: forms.hpp prints e_value for e-lond rows).
  bool e_value = false;
};

struct DecideResult {
  std::string stream;
  DecisionRecord record;
  bool repeat = false;  // the id was decided before with the same p-value; nothing changed
};

// A test's reservation (Ledger::launch).
struct LaunchResult {
  std::string stream;
  std::string id;
  std::uint64_t launch = 0;         // launch number, 1-based
  double level = 0;                 // the level its decision will be made against
  double wealth = 0;                // alpha-wealth right after the launch
  std::int64_t launched_at_ms = 0;
  std::uint64_t step = 0;           // the launch's position in the stream's chain
  bool repeat = false;              // the id was already running: the stored reservation, nothing changed
};

// A test abandoned (Ledger::abandon): it never reports a p-value.
struct AbandonResult {
  std::string stream;
  std::string id;
  std::uint64_t launch = 0;
  double level = 0;  // the level that had been reserved for it
  double wealth = 0; // alpha-wealth right after the abandon
  std::int64_t launched_at_ms = 0;
  std::int64_t abandoned_at_ms = 0;
  std::uint64_t step = 0;  // the abandon's position in the stream's chain
  bool repeat = false;     // it was abandoned before; nothing changed
};

// A running test (Ledger::running).
struct RunningEntry {
  std::string id;
  std::uint64_t launch = 0;
  double level = 0;
  std::int64_t launched_at_ms = 0;
  friend bool operator==(const RunningEntry&, const RunningEntry&) = default;
};

// One look at a running test (Ledger::look): the cumulative summaries of both arms so far, and the
// mixing scale of the always-valid p-value (alphaledger/anytime.hpp). Looks of one test keep the
// same kind of summary and the same mixture_sd; counts never go down between looks.
enum class LookSummary : std::uint8_t { kProportions = 1, kMeans = 2 };  // stored on disk: do not change
struct LookData {
  LookSummary summary = LookSummary::kProportions;
  ProportionArm control_proportions{};  // kProportions
  ProportionArm treatment_proportions{};
  MeanArm control_means{};  // kMeans
  MeanArm treatment_means{};
  // tau, on the scale of the estimate, > 0. Absent: the one the test's first look used (the first
  // look must give it). Later looks may repeat it but not change it.
  std::optional<double> mixture_sd;
};
// Same summaries and mixing scale, bit for bit (a retried look).
bool same_look_data(const LookData& a, const LookData& b);

// The answer to one look (Ledger::look, Ledger::looks).
struct LookResult {
  std::string stream;
  std::string id;
  std::uint64_t look = 0;    // 1-based: this test's looks so far
  std::uint64_t launch = 0;  // the test's launch number
  std::uint64_t step = 0;    // the look's position in the stream's chain
  double level = 0;          // the level reserved at the launch
  double estimate = 0;       // treatment minus control at this look
  double anytime_p_value = 1;  // 1 / e_value, at most 1: the always-valid p-value of this look alone
  double running_min = 1;      // the smallest anytime_p_value over this test's looks up to this one
  double e_value = 1;          // the mixture likelihood ratio at this look
  double cs_low = 0;           // confidence sequence at coverage 1 - alpha (the stream's alpha)
  double cs_high = 0;
  bool stop = false;  // p-value streams: running_min <= level; e-lond: e_value >= 1 / level
  std::int64_t looked_at_ms = 0;
  LookData data;
  std::optional<DecisionRecord> decision;  // when stop: the decision the look made
  bool repeat = false;  // the same look data as the test's last look: the stored answer, nothing changed
};

struct TestInput {
  std::string id;
  double p_value = 0;  // or the e-value, with e_value set
  bool e_value = false;  // the number is an e-value (streams whose rule takes e-values: e-lond)
};

// One event of a group given to Ledger::apply_events.
enum class EventType : std::uint8_t { kDecide, kLaunch, kAbandon };
struct EventInput {
  EventType type = EventType::kDecide;
  std::string_view id;
  double p_value = 0;     // kDecide only: the p-value, or the e-value with e_value set
  bool e_value = false;  // kDecide only: the number is an e-value (e-lond streams)
};
// The answer to one EventInput: what decide(), launch() or abandon() returns.
using EventOutcome = std::variant<DecideResult, LaunchResult, AbandonResult>;

// A test of a batch whose id the caller holds (decide --file points into the log it read, so a
// 10^6-row log is not copied into 10^6 strings). The id must outlive the call.
struct TestView {
  std::string_view id;
  double p_value = 0;
  bool e_value = false;  // as in TestInput
};

// A chain hash noted earlier (from verify's output), to check that the ledger still holds it:
// the record at `step` must have this chain hash. Step 0 names the configuration (the chain's
// start); `closing` names the closing entry of a closed stream instead of a step.
struct Anchor {
  std::uint64_t step = 0;
  bool closing = false;
  std::string chain_hash;  // 64 lowercase hex digits
  friend bool operator==(const Anchor&, const Anchor&) = default;
};

// Reads "STEP:HASH" (STEP a decimal step number, 0 for the configuration) or "closed:HASH", where
// HASH is 64 hex digits in either case. Errors (kInvalidArgument) say what is accepted and quote at
// most an excerpt() of the text.
// Example:
//   auto anchor = parse_anchor("12:" + std::string(64, 'F'));
//   anchor->step;         // 12
//   anchor->closing;      // false
//   anchor->chain_hash;   // 64 lowercase 'f's
Result<Anchor> parse_anchor(std::string_view text);

// How an anchor is written back, "STEP:HASH" or "closed:HASH" (parse_anchor reads it).
std::string anchor_text(const Anchor& anchor);

struct VerifyReport {
  std::uint64_t steps = 0;  // records checked
  bool ok = true;
  std::uint64_t first_bad_step = 0;
  std::string problem;  // what did not match, for the first bad step
  // When ok: SHA-256 (hex) of the last record (step `steps`), or of the configuration when there
  // is none. It commits to the whole history: note "steps:chain_hash" elsewhere and pass it back
  // as an Anchor later to prove nothing up to here changed (docs/ledger.md "Anchors").
  std::string chain_hash;
  // When ok and the stream is closed: when, and the hash of the closing entry, which commits to
  // the whole history and to the closing ("closed:closing_hash" as an Anchor).
  std::optional<std::int64_t> closed_at_ms;
  std::string closing_hash;
  std::size_t anchors_checked = 0;  // when ok: how many anchors were given, all of them matched
};

// One page of a stream's history (Ledger::history_page).
struct HistoryPage {
  std::vector<DecisionRecord> records;  // steps from_step, from_step + 1, ..., in order
  std::uint64_t total = 0;              // records in the stream when the page was read
  std::uint64_t next_step = 0;          // the from_step of the next page; 0 when this page reaches the end
};

class Ledger {
 public:
  // Opens (creating if absent) the ledger at `path`: a RocksDB folder, or the PostgreSQL database a
  // postgresql:// or postgres:// URI names (open_store_at in store.hpp; docs/postgresql.md).
  // Errors: locked by another process (kBusy, names the lock), corrupt (kCorruption), newer format,
  // unwritable folder; for PostgreSQL: server unreachable or login refused (kIOError).
  static Result<std::unique_ptr<Ledger>> open(const std::string& path, Clock clock = system_clock_ms);
  // The same with store options; with create_if_missing == false a folder (or database) holding no
  // ledger is kNotFound ("no ledger at ...", code no_ledger) and nothing is created (read-only
  // commands use this). For PostgreSQL only create_if_missing and read_only apply.
  static Result<std::unique_ptr<Ledger>> open(const std::string& path, const RocksStoreOptions& options,
                                              Clock clock = system_clock_ms);
  // Over any Store (tests: in-memory or fault-injecting). An empty store gets the format version
  // key; a store with data but no version key, or a newer version, is kCorruption.
  static Result<std::unique_ptr<Ledger>> open(std::unique_ptr<Store> store, Clock clock = system_clock_ms);
  virtual ~Ledger() = default;

  // Creates a stream. Same name and same configuration: succeeds, changes nothing, and returns
  // created == false. Same name, other configuration: kConflict. Bad name: kInvalidArgument (names
  // are 1..128 bytes of ASCII letters, digits, '-', '_', '.', and not "." or ".."; see
  // docs/ledger.md). A config that resolve_config() would not produce: kInvalidArgument.
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

  // Decides one test. Unknown stream: kNotFound. Bad id or p-value: kInvalidArgument. Same id and
  // same p-value as before: the stored decision with repeat = true. Same id, other p-value:
  // kConflict. On any failure the ledger is unchanged. The decision is durable (synced) before
  // this returns. A running id (launch()) is decided against the level reserved at its launch
  // (a finish event); an abandoned id is kConflict. An id never launched is launched and decided
  // at once, as before launches existed (docs/ledger.md "Launch-time levels").
  virtual Result<DecideResult> decide(std::string_view stream, std::string_view id, double p_value) = 0;
  // A stream whose rule takes e-values (e-lond) is decided with decide_e, every other stream with
  // decide: the other call is kInvalidArgument naming the field it wants (p_value / e_value).
  // decide_e: the e-value must be finite and >= 0; the test is rejected iff e >= 1 / level, the
  // e-value is stored where a p-value stream stores its p-value, and the rest is as decide. In a
  // batch, TestInput::e_value says which each row holds.
  virtual Result<DecideResult> decide_e(std::string_view stream, std::string_view id, double e_value) = 0;

  // Decides tests in order with one synced write per group (group commit). Every input is
  // checked first: a bad id or p-value (kInvalidArgument), or a conflict (kConflict: an id already
  // decided with another p-value, or given twice in the batch with different p-values) refuses
  // the whole batch with the ledger unchanged, as BatchResult{decided = {}, error, stopped_at}.
  // Only a storage failure can stop a batch part-way: the groups written before it stay
  // durable and are returned in `decided`.
  struct BatchResult {
    std::vector<DecideResult> decided;  // durable, in input order (repeats included); empty
                                        // from decide_batch_streamed, whose callback gets them
    std::size_t durable = 0;            // rows decided and durable (repeats included)
    std::optional<Error> error;         // set if the batch was refused or stopped early
    std::size_t stopped_at = 0;         // index of the input that failed, when error is set
  };
  // Errors returned directly (nothing decided): bad stream name, id or p-value (kInvalidArgument,
  // naming the input's 1-based position), unknown stream (kNotFound). In the BatchResult: a
  // conflict (nothing decided; `stopped_at` is the conflicting input), or a storage failure while
  // writing a group (`error` is kCorruption, kIOError or kBusy, `stopped_at` is the first input of the group that was
  // not written, `decided` holds the earlier, durable groups). Within the batch, an id repeated
  // with the same p-value is a repeat of its first occurrence. Default group_size: 256 (0 is
  // taken as 1).
  virtual Result<BatchResult> decide_batch(std::string_view stream, const std::vector<TestInput>& tests,
                                           std::size_t group_size = 256) = 0;

  // decide_batch that also calls on_durable(group) after each group is synced (and before the
  // next group is decided), with that group's results in input order, repeats included. The CLI
  // prints each group there, so nothing is printed before it is durable. With on_durable set, the
  // results are not also kept in BatchResult::decided (`durable` counts them), so memory does not
  // grow with the batch. on_durable runs with the stream's lock held: it must not call back into
  // this Ledger for the same stream.
  using GroupCallback = std::function<void(const std::vector<DecideResult>&)>;
  virtual Result<BatchResult> decide_batch_streamed(std::string_view stream,
                                                    const std::vector<TestInput>& tests,
                                                    std::size_t group_size,
                                                    const GroupCallback& on_durable) = 0;
  // The same over views of the tests (nothing copied). Besides them and one result group, a batch
  // holds 12 to 20 bytes a row (a 32-bit row number a row, a table of 32-bit row numbers of the new
  // ids with 2 to 4 slots a row); at most 2^32 - 3 tests (more: kInvalidArgument).
  virtual Result<BatchResult> decide_batch_streamed(std::string_view stream, std::span<const TestView> tests,
                                                    std::size_t group_size,
                                                    const GroupCallback& on_durable) = 0;

  // Launches a test: reserves its level from the outcomes decided so far (Rule::launch) and
  // records the launch in the chain, durable before this returns. An id already running: the
  // stored reservation with repeat = true. An id already decided or abandoned: kConflict naming
  // what happened to it. Unknown stream: kNotFound; closed stream: kConflict; bad id:
  // kInvalidArgument. On any failure the ledger is unchanged.
  virtual Result<LaunchResult> launch(std::string_view stream, std::string_view id) = 0;
  // Abandons a running test: it will never be decided (Rule::abandon). Unknown id: kNotFound
  // (code unknown_test); an id already decided: kConflict; an id already abandoned: the stored
  // abandon with repeat = true. Closed stream: kConflict. On any failure the ledger is unchanged.
  virtual Result<AbandonResult> abandon(std::string_view stream, std::string_view id) = 0;
  // Group commit of mixed events: applies `events` to `stream` in order, each answered exactly
  // as decide(), launch() or abandon() called one after another would answer it (same levels,
  // same chain, same refusals and messages), and makes every new event durable with one synced
  // write before returning. One answer per input, in order; a refusal answers its input only. A
  // storage failure (a read or the write) answers every input with that error and the group
  // counts as not done: the slot is reloaded, and sending the group again is safe (what reached
  // the disk comes back as repeats).
  virtual std::vector<Result<EventOutcome>> apply_events(std::string_view stream,
                                                         std::span<const EventInput> events) = 0;
  // The running tests in launch order. Unknown stream: kNotFound. Reads one key per running
  // test (docs/ledger-format.md "Running tests").
  virtual Result<std::vector<RunningEntry>> running(std::string_view stream) = 0;
  // One running test by id. Unknown id: kNotFound (code unknown_test); decided or abandoned:
  // kConflict saying so (its level is no longer reserved). Unknown stream: kNotFound.
  virtual Result<RunningEntry> running_test(std::string_view stream, std::string_view id) = 0;

  // Looks at running test `id` (docs/ledger.md "Watching a running test"): computes the
  // always-valid p-value from the cumulative summaries (anytime_evidence, the stream's alpha and
  // direction), keeps the running minimum over the test's looks, and records the look as a chain
  // entry. When the running minimum is at most the reserved level (e-lond: the e-value at least
  // 1 / level) the look says stop and decides the test in the same write, exactly as decide with
  // p = the running minimum (decide_e with the look's e-value). Otherwise nothing but the look is
  // written. The same data as the test's last look: that look's answer with repeat = true (also
  // after a stop decided the test). Errors (ledger unchanged): bad summaries or mixture_sd
  // (kInvalidArgument naming the field), counts lower than at the last look, another kind of
  // summary or mixture_sd than the first look (kInvalidArgument); unknown stream or an id never
  // launched (kNotFound, code unknown_test); decided, abandoned or closed (kConflict).
  virtual Result<LookResult> look(std::string_view stream, std::string_view id, const LookData& data) = 0;
  // The looks of one test, oldest first (running, decided or abandoned). Unknown stream or id:
  // kNotFound; a test never looked at gives an empty list.
  virtual Result<std::vector<LookResult>> looks(std::string_view stream, std::string_view id) = 0;

  // Closes a stream: it takes no more tests, and its history stays readable and verifiable. The
  // closing time is hashed into the chain (docs/ledger-format.md "Closing"), so verify covers it.
  // Closing a closed stream succeeds, changes nothing and returns newly_closed == false. Unknown
  // stream: kConflict. Afterwards decide, decide_batch and next_level refuse the stream (kConflict,
  // "stream X is closed since TIME"), repeats of earlier tests included.
  struct Closing {
    StreamInfo info;           // closed_at_ms is set
    bool newly_closed = true;  // false: it was closed before; nothing changed
    std::string closing_hash;  // SHA-256 (hex) of the closing entry: an anchor "closed:HASH"
  };
  virtual Result<Closing> close_stream(std::string_view stream) = 0;

  // The level the next test will get; changes nothing. Unknown stream: kNotFound; closed stream: kConflict.
  virtual Result<double> next_level(std::string_view stream) = 0;
  // Configuration, counts, wealth, next level, created time, closing time. Unknown stream: kNotFound.
  virtual Result<StreamInfo> status(std::string_view stream) = 0;
  // Every stream, by name in byte order.
  virtual Result<std::vector<StreamInfo>> streams() = 0;
  // Every decided or abandoned test in step order, in one vector (abandoned ones have abandoned
  // set; launches still running are not listed). Unknown stream: kNotFound; an undecodable or
  // missing record: kCorruption.
  virtual Result<std::vector<DecisionRecord>> history(std::string_view stream) = 0;
  // The decided and abandoned tests among the chain entries from_step .. from_step + limit - 1,
  // in step order, reading only those entries (from_step 0 is taken as 1); a launch entry gives
  // no row, so a page can hold fewer than `limit` rows. `total` counts chain entries. A from_step past the last record gives an empty page. Unknown
  // stream: kConflict; limit 0: kInvalidArgument; an undecodable or missing record: kCorruption.
  virtual Result<HistoryPage> history_page(std::string_view stream, std::uint64_t from_step,
                                           std::size_t limit) = 0;
  // Calls visit(record) for each decided test whose step >= from_step (0 is taken as 1) up to the
  // last chain entry at the time of the call, in step order, until visit returns false. Abandoned
  // tests and running launches are not decisions and are skipped. Holds one record at
  // a time and no lock while visiting, so visit may call back into this Ledger. Errors as
  // history_page (an error after some records were visited stops the walk there).
  using DecisionVisitor = std::function<bool(const DecisionRecord&)>;
  virtual Status for_each_decision(std::string_view stream, std::uint64_t from_step,
                                   const DecisionVisitor& visit) = 0;
  // Replays the stored history through a fresh Rule and checks, step by step: the record's own
  // hash, the chain link to the record before (the first links to the configuration), the step
  // number, the level, decision and wealth bit for bit, and the test id index; then the head
  // (record count, last hash, closing entry) and that the stored rule state equals the replayed
  // state; and each anchor: its step must still be there with the same chain hash (a lost tail
  // is caught even when the rest is consistent), a "closed" anchor needs the same closing entry.
  // ok == false names the first bad step (0: the configuration or head itself; for an anchor,
  // the anchor's step) and what did not match. Unknown stream: kNotFound. Reads the store, never
  // a cache, one record at a time. Memory: the rule's state, not the history.
  virtual Result<VerifyReport> verify(std::string_view stream, const std::vector<Anchor>& anchors) = 0;
  Result<VerifyReport> verify(std::string_view stream) { return verify(stream, {}); }

  // The chain hash at `step` (SHA-256 hex of that record, which commits to every record up to it),
  // as stored; run verify() to know it is consistent. Unknown stream: kNotFound; step 0 or past the
  // last record: kInvalidArgument naming the range.
  virtual Result<std::string> chain_hash_at(std::string_view stream, std::uint64_t step) = 0;

  // A short description of where the ledger lives (the folder path), for messages.
  virtual std::string location() const = 0;

  // How many streams have their state held in memory. Only streams that exist are held (names
  // asked for that do not exist are never kept), so this is at most the number of streams in the
  // ledger. For tests and diagnostics.
  virtual std::size_t cached_streams() const = 0;
};

}  // namespace alphaledger
