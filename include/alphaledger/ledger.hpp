// The durable ledger: named streams of tests, each with a frozen rule configuration, whose
// alpha-wealth carries over across processes, machines and restarts. Every decision is one atomic,
// synced write batch holding the decision record and the rule's new state together; records are
// append-only and hash-chained so `verify` can prove the history (docs/ledger.md,
// docs/ledger-format.md).
//
// Example:
//   auto ledger = Ledger::open("alphaledger.db", system_clock_ms);
//   (*ledger)->create_stream("checkout-team", *resolve_config({.rule = "lord++"}));
//   auto d = (*ledger)->decide("checkout-team", "exp-0142", 0.0004);
//   d->record.rejected;   // true: 0.0004 <= 0.001370386057 (the first LORD++ level)
//
// Thread-safety: a Ledger is safe to use from many threads. Decisions on one stream are
// serialised; different streams proceed in parallel. A second *process* opening the same folder
// gets kStorage naming the lock holder.
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

namespace alphaledger {

class Store;  // include/alphaledger/store.hpp

// Milliseconds since the Unix epoch; injected so tests control time.
using Clock = std::function<std::int64_t()>;
std::int64_t system_clock_ms();

struct StreamInfo {
  std::string name;
  RuleConfig config;
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

struct VerifyReport {
  std::uint64_t steps = 0;        // records checked
  bool ok = true;
  std::uint64_t first_bad_step = 0;
  std::string problem;            // what did not match, for the first bad step
};

class Ledger {
 public:
  // Opens (creating if absent) the RocksDB ledger in folder `path`.
  // Errors (kStorage): locked by another process (names the lock), corrupt, newer format,
  // unwritable folder.
  static Result<std::unique_ptr<Ledger>> open(const std::string& path, Clock clock = system_clock_ms);
  // Over any Store (tests: in-memory or fault-injecting).
  static Result<std::unique_ptr<Ledger>> open(std::unique_ptr<Store> store, Clock clock = system_clock_ms);
  virtual ~Ledger() = default;

  // Creates a stream. Same name and same configuration: succeeds, changes nothing, and returns
  // created == false. Same name, other configuration: kRefused. Bad name: kInvalidInput (names
  // are 1..128 bytes of letters, digits, '-', '_', '.'; see docs/formats.md).
  struct Created { StreamInfo info; bool created = true; };
  virtual Result<Created> create_stream(std::string_view name, const RuleConfig& config) = 0;

  // Decides one test. Unknown stream: kRefused. Bad id or p-value: kInvalidInput. Same id and
  // same p-value as before: the stored decision with repeat = true. Same id, other p-value:
  // kRefused. On any failure the ledger is unchanged. The decision is durable (synced) before
  // this returns.
  virtual Result<DecideResult> decide(std::string_view stream, std::string_view id, double p_value) = 0;

  // Decides tests in order with one synced write per group (group commit). Validation of every
  // input happens first; a refused input (conflict) stops the batch at that input: results before
  // it are durable and returned together with the error's position in `stopped_at`.
  struct BatchResult {
    std::vector<DecideResult> decided;   // durable
    std::optional<Error> error;          // set if the batch stopped early
    std::size_t stopped_at = 0;          // index of the input that failed, when error is set
  };
  virtual Result<BatchResult> decide_batch(std::string_view stream, const std::vector<TestInput>& tests,
                                           std::size_t group_size = 256) = 0;

  virtual Result<double> next_level(std::string_view stream) = 0;
  virtual Result<StreamInfo> status(std::string_view stream) = 0;
  virtual Result<std::vector<StreamInfo>> streams() = 0;
  virtual Result<std::vector<DecisionRecord>> history(std::string_view stream) = 0;
  // Replays the stored history through the rule and checks every level, decision and wealth,
  // the hash chain and the stored state. ok == false names the first bad step.
  virtual Result<VerifyReport> verify(std::string_view stream) = 0;
};

}  // namespace alphaledger
