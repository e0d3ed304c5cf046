// Online testing rules: each gives the next test its level before its p-value is seen, records the
// outcome, and keeps its alpha-wealth. Pure math: no I/O, no logging, no clock, no globals.
//
// Rules (docs/rules.md says when to use each, its guarantee and its conditions):
//   alpha-spending   level alpha*gamma_t; FWER <= alpha under any dependence
//   alpha-investing  Foster & Stine (2008); mFDR <= alpha
//   lond             Javanmard & Montanari (2018); FDR <= alpha under independence or PRDS
//   lord++           Ramdas et al. (2017); FDR <= alpha under independence
//   saffron          Ramdas et al. (2018); FDR <= alpha under independence
//   addis            Tian & Ramdas (2019); FDR <= alpha under independence, uniformly conservative nulls
//   e-lond           Xu & Ramdas (2024); FDR <= alpha under any dependence; takes e-values
//
// Example (docs/methods.md section 14.3, LORD++ with the defaults):
//   auto config = resolve_config(RuleSpec{.rule = "lord++"});
//   Rule rule(*config);
//   rule.next_level();          // 0.001370386057...
//   Outcome o = rule.record(0.0004);   // o.rejected == true
//
// Tests that overlap in time (docs/methods.md section 9.1, docs/rules.md "Launch-time levels"):
//   Reservation a = rule.launch();              // a.level is fixed now, a.launch == 1
//   Reservation b = rule.launch();              // a batch: no finish between the launches
//   auto o = rule.finish(a.launch, 0.0004);     // decided against a.level
//   rule.abandon(b.launch);                     // b never reports a p-value
// record(p) is exactly launch() followed by finish() of that launch.
//
// Thread-safety: a Rule is a value; distinct Rules may be used from distinct threads. Copying a
// Rule is cheap (the spending sequence and its mixture are shared, immutable; a fast-mode Rule
// carries a copy of the mixture's arrays, 1-2 KB).
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <new>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/spending.hpp"

namespace alphaledger {

// Stored on disk inside stream configurations: do not change the numbers.
enum class RuleKind : std::uint8_t {
  kAlphaSpending = 1,
  kAlphaInvesting = 2,
  kLond = 3,
  kLordPlusPlus = 4,
  kSaffron = 5,
  kAddis = 6,
  kELond = 7,  // takes e-values, not p-values
};

// Stored on disk: do not change the numbers.
enum class Evaluation : std::uint8_t { kExact = 1, kFast = 2 };

std::string_view rule_name(RuleKind kind);                // "lord++", ...
Result<RuleKind> parse_rule_name(std::string_view name);  // refuses unknown names, listing the known
std::string_view evaluation_name(Evaluation e);           // "exact" / "fast"
// True for rules whose tests report e-values (e-lond): a test is rejected when e >= 1/level.
bool rule_takes_e_values(RuleKind kind);
Result<Evaluation> parse_evaluation(std::string_view name);

// What a user asks for: every parameter optional. resolve_config() fills defaults and validates.
struct RuleSpec {
  std::string rule = {};                           // a rule name
  std::optional<double> alpha = {};                // Default: 0.05
  std::optional<double> initial_wealth = {};       // Default: alpha/2 (alpha*(1-alpha) for alpha-investing)
  std::optional<double> candidate_threshold = {};  // lambda. Default: 1/2 (saffron), 1/4 (addis)
  std::optional<double> discard_threshold = {};    // tau. Default: 1/2 (addis)
  std::optional<double> payout = {};               // omega. Default: alpha (alpha-investing)
  std::optional<std::string> spending = {};        // Default: per rule, see default_spending()
  std::optional<std::string> evaluation = {};      // Default: "exact"
};

// A complete, validated configuration. Parameters a rule does not use are 0 / empty.
struct RuleConfig {
  RuleKind kind = RuleKind::kLordPlusPlus;
  double alpha = 0.05;
  double initial_wealth = 0;
  double candidate_threshold = 0;
  double discard_threshold = 0;
  double payout = 0;
  std::string spending;  // canonical spec, empty for alpha-investing
  Evaluation evaluation = Evaluation::kExact;

  friend bool operator==(const RuleConfig&, const RuleConfig&) = default;
};

std::string default_spending(RuleKind kind);  // "power:1.6", "jm", "power-shift:1.6", or ""

// Fills defaults and checks every condition of the rule. A parameter the rule does not take
// (e.g. --payout for lord++) is refused. Errors are kInvalidArgument and name the broken condition,
// e.g. "initial_wealth must satisfy 0 <= W0 <= alpha = 0.05 for lord++, got 0.2".
Result<RuleConfig> resolve_config(const RuleSpec& spec);

// Which parameters a rule takes (used to refuse flags that no listed rule takes).
bool rule_takes(RuleKind kind, std::string_view parameter);  // "initial_wealth", "payout", ...

// The result of deciding (or finishing) one test.
struct Outcome {
  std::uint64_t step = 0;  // the test's launch number: 1-based position in launch order
  double level = 0;        // the level granted, fixed before the p-value was read
  bool rejected = false;   // p <= level
  double wealth = 0;       // alpha-wealth after the test (docs/rules.md defines it per rule)
};

// The level reserved for a test at its launch.
struct Reservation {
  std::uint64_t launch = 0;  // launch number, 1-based
  double level = 0;          // the level its finish will be decided against
  double wealth = 0;         // alpha-wealth right after the launch
};

// A test launched and not yet finished or abandoned.
struct RunningTest {
  std::uint64_t launch = 0;
  double level = 0;

  friend bool operator==(const RunningTest&, const RunningTest&) = default;
};

namespace internal {

// Memory for a Rule's fast-mode buffer, on 64-byte (cache line) boundaries: the sums read and
// write it in 32-byte vectors, and a vector that straddles two lines costs two accesses.
template <class T>
struct LineAlignedAllocator {
  using value_type = T;
  static constexpr std::align_val_t kAlign{64};
  LineAlignedAllocator() = default;
  template <class U>
  LineAlignedAllocator(const LineAlignedAllocator<U>&) noexcept {}
  T* allocate(std::size_t n) { return static_cast<T*>(::operator new(n * sizeof(T), kAlign)); }
  void deallocate(T* p, std::size_t) noexcept { ::operator delete(p, kAlign); }
  template <class U>
  bool operator==(const LineAlignedAllocator<U>&) const noexcept {
    return true;
  }
};

}  // namespace internal

class Rule {
 public:
  // REQUIRES: config came from resolve_config().
  explicit Rule(const RuleConfig& config);

  const RuleConfig& config() const { return config_; }

  // The level the next launched test will get. Does not change the state. O(K) normally; when a
  // saffron/addis test launched last is still running it copies the Rule (O(running tests)).
  double next_level() const;

  // Decides a test with p-value p and advances the state: launch() then finish() of that launch.
  // REQUIRES: 0 <= p <= 1 (callers validate input; see validate_p_value()).
  Outcome record(double p) {
    if (fast_step_ != nullptr && running_.empty()) return fast_step_(*this, p);  // the hot path
    return record_any(p);
  }
  // The same for a rule that takes e-values (e-lond): rejected iff e >= 1 / level.
  // REQUIRES: rule_takes_e_values(kind); e finite and >= 0 (see validate_e_value()).
  Outcome record_e(double e);

  // Launch-time events (docs/methods.md section 9.1). launch() reserves the next test's level from the
  // outcomes finished so far and changes the state (the level is spent, the clock advances).
  Reservation launch();
  // Decides running test `launch` against its reserved level and applies the outcome. A p-value
  // outside [0, 1] is kInvalidArgument; a launch number never launched is kInvalidArgument; one already
  // finished or abandoned is kConflict. On error the Rule is unchanged.
  Result<Outcome> finish(std::uint64_t launch, double p);
  // finish() for an e-value rule. Either call on the wrong kind of rule is kInvalidInput.
  Result<Outcome> finish_e(std::uint64_t launch, double e);
  // The test will never report a p-value: no rejection, no deposit; saffron/addis count it as
  // advancing the clock. Errors as finish().
  Status abandon(std::uint64_t launch);
  // Running tests in launch order.
  std::vector<RunningTest> running() const;
  std::size_t running_count() const { return running_.size(); }
  // Sum of the levels reserved by running tests (summed in launch order).
  double reserved() const;

  std::uint64_t tests() const { return step_; }             // tests launched (recorded tests included)
  std::uint64_t rejections() const { return rejections_; }  // rejections finished
  double wealth() const;

  // The compact state: every counter and accumulator, little-endian, versioned. Restoring the
  // encoded state into a Rule of the same configuration continues bit-identically. With no
  // running tests the bytes are those of format version 1 (every state saved before launch-time
  // levels existed); with running tests, version 2 appends them.
  std::string encode_state() const;
  // On failure (truncated, wrong version, wrong shape for this configuration) returns
  // kCorruption and leaves this Rule unchanged.
  Status restore_state(std::string_view bytes);
  // The compact state without the list of running tests (version 3): the counters and
  // accumulators of encode_state(), how many tests are running, whether the test launched last is
  // running without having advanced the clock (saffron/addis), and the alpha-investing
  // reservation. Its size does not grow with the number of running tests, so a store that keeps
  // each running test apart (docs/ledger-format.md) writes it per event in O(K) in fast mode.
  std::string encode_state_without_running() const;
  // Restores a version 3 state with its running tests (launch number and level, in launch order)
  // given back. Errors as restore_state(), also when the list disagrees with the state's count.
  Status restore_state_without_running(std::string_view bytes, std::span<const RunningTest> running);
  // Whether test `launch` is running.
  bool is_running(std::uint64_t launch) const { return running_.count(launch) != 0; }

  // The spending sequence in use (exact mode) or its mixture (fast mode). Null for
  // alpha-investing.
  const SpendingSequence* sequence() const { return sequence_.get(); }

 private:
  double deposit_sum() const;  // sum_d c_d gamma(index_d), exact or fast
  double exact_sum() const;    // over the deposit list with the published gamma
  double mixture_sum() const;  // over the head slots and accumulators, fixed order
  void advance(bool tick, bool rejected);
  void advance_fast(bool tick, bool rejected, double c_new);  // advance() in fast mode
  // record() in fast mode with no running test: the same operations as record(), in one
  // function per rule and mixture shape, with an AVX2 version picked once (rules_deposit.cpp);
  // tests/core/test_levels_golden.cpp pins the bits. fast_step_ is null in exact mode.
  struct FastKernel;
  using FastStep = Outcome (*)(Rule&, double);
  Outcome record_any(double p);  // record() on every other path (exact mode, running tests)
  // Whether evidence x (a p-value, or an e-value for e-lond) rejects at `level`.
  bool rejects(double x, double level) const {
    return config_.kind == RuleKind::kELond ? x >= 1.0 / level : x <= level;
  }
  void set_head_mask();              // fast mode: head_mask_ from the head slots
  void fill_window();                // exact mode: window_ for the clocks from clock_ on
  void add_to_window(double c_new);  // exact mode: a deposit made at clock_
  void ensure_window();              // exact mode: a window covering clock_
  double level_now() const;          // the level at the current state (no pending clock advance)
  // The deposit the next rejection makes (lord++, saffron, addis): alpha - W0 for the first,
  // alpha after it.
  double next_deposit() const {
    return rejections_ == 0 ? config_.alpha - config_.initial_wealth : config_.alpha;
  }
  Status check_running(std::uint64_t launch, std::string_view event) const;
  Outcome finish_running(std::uint64_t launch, double p);  // REQUIRES: launch is running
  void clock_advance_for(double level);                    // saffron/addis: one test advances the clock
  Status restore_running(std::string_view bytes);          // version 2 tail of the encoded state, into *this
  // Version 3 tail, with the running tests given apart, into *this.
  Status restore_apart(std::string_view bytes, std::span<const RunningTest> running);
  // restore_state() / restore_state_without_running() (running null for the first).
  Status restore_any(std::string_view bytes, const std::span<const RunningTest>* running);
  void encode_counters(std::string& out, std::uint8_t version) const;  // every state version's start

  // A running test. `advanced`: saffron/addis, it has already advanced the clock.
  struct Running {
    double level = 0;
    bool advanced = false;
  };

  RuleConfig config_;
  std::shared_ptr<const SpendingSequence> sequence_;
  const GeometricMixture* mixture_ = nullptr;  // fast mode only; owned by sequence_

  std::uint64_t step_ = 0;
  std::uint64_t rejections_ = 0;
  double wealth_ = 0;
  std::uint64_t last_rejection_ = 0;          // alpha-investing: k*
  std::uint64_t clock_ = 0;                   // deposit rules: ticks so far
  std::vector<std::uint64_t> deposit_clock_;  // exact mode: clock at each deposit (index 0: W0)
  // Fast mode's one buffer (rules_deposit.cpp, init_fast()): the head slots (the coefficient at
  // each head index 1..L), the accumulators A_k, then copies of the mixture's head weights,
  // coefficients, ratios r_k and r_k^L; each part padded with +0 to whole vectors of four, so
  // no 32-byte access straddles two cache lines.
  std::vector<double, internal::LineAlignedAllocator<double>> fast_;
  std::size_t head_slots_ = 0;  // the head part's padded size (0 without a head)
  std::size_t acc_slots_ = 0;   // the accumulator part's padded size
  double* head_at() { return fast_.data(); }
  const double* head_at() const { return fast_.data(); }
  double* acc_at() { return fast_.data() + head_slots_; }
  const double* acc_at() const { return fast_.data() + head_slots_; }
  const double* weight_at() const { return acc_at() + acc_slots_; }      // head weights
  const double* coefficient_at() const { return weight_at() + head_slots_; }
  const double* ratio_at() const { return coefficient_at() + acc_slots_; }
  const double* ratio_head_at() const { return ratio_at() + acc_slots_; }
  void init_fast();  // fast_ for mixture_, every head slot and accumulator +0
  FastStep fast_step_ = nullptr;  // set by init_fast()
  double fast_sum_ = 0;                       // fast mode: mixture_sum() of the current state
  std::uint64_t head_mask_ = 0;  // fast mode: bit i set iff head slot i != 0 (every bit for heads of 64+)
  std::map<std::uint64_t, Running> running_;  // launched, not finished or abandoned
  double investing_reserved_ = 0;             // alpha-investing: sum of level/(1-level) over running tests

  // Exact mode: window_[i] is exact_sum() at clock window_start_ + i, each lane summed over the
  // deposits in the same order as exact_sum(), so bit-identical to it (docs/benchmarks.md,
  // "How exact evaluation is fast"). Empty when no window is filled; never part of the encoded state.
  std::vector<double> window_;
  std::uint64_t window_start_ = 0;
  std::size_t next_lanes_ = 8;  // lanes of the next window: doubles per fill, up to a bound
  std::shared_ptr<const std::vector<double>> gamma_table_;  // covers every lane of window_
};

// Checks a p-value: finite and in [0, 1]. The message names the field and the value.
Status validate_p_value(double p);
// Checks an e-value: finite and >= 0. The message names the field and the value.
Status validate_e_value(double e);

}  // namespace alphaledger
