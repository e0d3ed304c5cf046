// Simulate: what each rule does on streams like yours. Many simulated streams of one-sided z-tests
// are decided by every listed procedure (the online rules of rules.hpp through the one Rule
// implementation, and the hindsight baselines bh / storey-bh of offline.hpp); the realized FDR,
// mFDR, FWER and power are averaged over the streams, with Monte Carlo standard errors.
//
// The model (docs/simulate.md; docs/cli.md "Simulate"): test t is non-null with probability
// share_t (the non-null fraction, or a pattern over time with that average). A non-null test has
// mean mu ~ Normal(effect, effect_sd), drawn per test; a null test has mean null_mean (negative
// means conservative nulls). z_t = mean_t + e_t with e_t ~ Normal(0, 1), independent or positively
// correlated between neighbours, and p_t = 1 - Phi(z_t) = erfc(z_t / sqrt 2) / 2. Optionally tests
// overlap in time (mean_duration: levels reserved at launch, decided at finish), e-value rules see
// the likelihood ratio of z_t at the effect, and each test can be looked at K times (PeekingSpec).
//
// Paired design: within one run every procedure decides the very same p-values, so differences
// between procedures are paired, not noise. Determinism: run r of seed s is generated from its own
// random streams, keyed by (s, r), so every number depends only on the inputs, never on the
// number of threads; sums are combined in a fixed order of fixed-size chunks of runs.
//
// Example (the same as `alphaledger simulate --tests 1000 --runs 200 --rules lord++,bh`):
//   auto procs = resolve_procedures({"lord++", "bh"}, RuleSpec{.evaluation = "fast"}, true);
//   SimulationPlan plan(*procs);
//   SimulationModel model;                   // 1000 tests, 10% non-null, effect 3
//   auto result = run_simulation(plan, model, {.runs = 200, .seed = 1, .threads = 2});
//   result->summaries[0].fdr;                // 0.010998251329119458 (LORD++'s realized FDR)
//   result->summaries[1].power;              // 0.6125682499065886 (BH's power)
//
// Thread-safety: SimulationPlan is immutable after construction and may be shared by threads;
// the free functions have no shared state. RandomStream is a value (one per thread).
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/replay.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger {

// ---------------------------------------------------------------------------------------------
// Random numbers (documented, portable; std::normal_distribution is implementation-defined).
//
// splitmix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014)
// turns a key into the 256-bit state of xoshiro256** (Blackman & Vigna, "Scrambled linear
// pseudorandom number generators", ACM TOMS 47(4), 2021). Uniforms take the top 53 bits:
// u = (floor(x / 2^11) + 1/2) / 2^53, so 0 < u < 1. Normals use the Box–Muller transform (Box &
// Muller, Ann. Math. Statist. 29:610-611, 1958): with u1, u2 uniform, sqrt(-2 ln u1) cos(2 pi u2)
// and sqrt(-2 ln u1) sin(2 pi u2) are two independent standard normals (both are used).

// One splitmix64 step: advances `state` by 0x9e3779b97f4a7c15 and returns the mixed output.
std::uint64_t splitmix64_next(std::uint64_t& state);

class RandomStream {
 public:
  // The stream for (seed, run, purpose). Distinct triples give unrelated streams: the key is
  // splitmix-mixed from all three, and four splitmix64 outputs of the key seed xoshiro256**.
  RandomStream(std::uint64_t seed, std::uint64_t run, std::uint64_t purpose);

  std::uint64_t next_u64();  // xoshiro256**
  double uniform();          // in (0, 1), never 0 or 1
  double normal();           // standard normal, Box–Muller

 private:
  std::uint64_t s_[4];
  double spare_ = 0;
  bool has_spare_ = false;
};

// ---------------------------------------------------------------------------------------------
// Scenarios.

// How the chance of being non-null changes along the stream. Its average is always the
// non-null fraction f.
enum class NonnullPattern {
  kConstant,  // "constant": share f at every test
  kBursts,    // "bursts:LENGTH:SHARE": blocks of LENGTH tests; a block is a burst with probability
              // f / SHARE, drawn per block; share SHARE inside a burst, 0 outside. REQUIRES f <= SHARE.
  kRising,    // "rising": share rises linearly from 0 to 2f along the stream. REQUIRES f <= 1/2.
  kFalling,   // "falling": share falls linearly from 2f to 0. REQUIRES f <= 1/2.
};

struct PatternSpec {
  NonnullPattern kind = NonnullPattern::kConstant;
  std::uint64_t burst_length = 100;  // Default: 100 ("bursts" alone means bursts:100:0.5)
  double burst_share = 0.5;          // Default: 1/2
};

// Parses "constant", "bursts", "bursts:LENGTH", "bursts:LENGTH:SHARE", "rising", "falling".
// On failure returns kInvalidArgument naming the field, the value and the accepted forms.
Result<PatternSpec> parse_nonnull_pattern(std::string_view text);
std::string pattern_text(const PatternSpec& pattern);  // canonical, e.g. "bursts:100:0.5"

// Positive correlation between the noise terms e_t of neighbouring tests (nulls and non-nulls).
enum class Correlation {
  kNone,    // "none": independent tests
  kAr1,     // "ar1:RHO": e_t = RHO e_{t-1} + sqrt(1 - RHO^2) eta_t, stationary, corr RHO^|s-t|
  kBlocks,  // "blocks:SIZE:RHO": consecutive blocks of SIZE tests, correlation RHO inside a
            // block (e = sqrt(RHO) shared + sqrt(1 - RHO) own), independent between blocks
};

struct CorrelationSpec {
  Correlation kind = Correlation::kNone;
  double rho = 0;                // 0 <= RHO < 1
  std::uint64_t block_size = 0;  // blocks only, >= 1
};

Result<CorrelationSpec> parse_correlation(std::string_view text);
std::string correlation_text(const CorrelationSpec& correlation);  // e.g. "ar1:0.5"

struct SimulationModel {
  std::uint64_t tests = 1000;     // tests per stream, >= 1
  double nonnull_fraction = 0.1;  // Default: 0.1; in [0, 1]
  double effect = 3;              // Default: 3; mean of a non-null test's z, finite, |effect| <= 40
  double effect_sd = 0;           // Default: 0; spread of that mean between tests, in [0, 40]
  double null_mean = 0;           // Default: 0; |null_mean| <= 40. Negative: conservative nulls.
                                  // Positive: anti-conservative (invalid) nulls, for stress only.
  PatternSpec pattern;            // Default: constant
  CorrelationSpec correlation;    // Default: none
  // Overlap between tests. Tests launch in stream order; test t runs while D_t further tests launch,
  // then finishes (before the next launch), with D_t ~ Geometric on {0, 1, 2, ...} with mean
  // mean_duration: P(D_t = k) = (1 - q) q^k, q = mean_duration / (1 + mean_duration). Tests still
  // running at the end of the stream finish there, in launch order. 0 (the default): every test
  // finishes before the next launches, the synchronous rules exactly. In [0, 1000000].
  double mean_duration = 0;
};

// Checks every field. On failure returns kInvalidArgument naming the field (as its CLI flag), the
// value and the accepted range, e.g. "--nonnull-fraction must be in [0, 1], got 1.5".
Status validate_model(const SimulationModel& model);

// Watching tests while they run (simulate --peeking K). Each test's data arrive in K equal
// increments of a fixed sample; at look k the cumulative data give the fixed-horizon z-statistic
// z_k = S(k/K) / sqrt(k/K), where S(s) = mean s + B(s) and B is a Brownian motion with B(1) = e_t, the
// test's noise term (so the last look is the test's z_t and the correlation between tests is kept).
// At each look the evidence is also measured by the one-sided normal-mixture likelihood ratio of
// anytime.hpp (estimate S(s)/s, variance 1/s, mixing scale mixture_sd on the same scale as the
// effect), whose running minimum of 1/ratio is the always-valid p-value.
struct PeekingSpec {
  std::uint64_t looks = 0;  // K; 0 = no peeking (only the final p-value exists). In [0, 100000].
  double mixture_sd = 0;    // tau > 0; 0 = the model's |effect| (1 when the effect is 0)
};
Status validate_peeking(const PeekingSpec& peeking);
// The mixing scale used for `model`: peeking.mixture_sd, or |effect| (1 when the effect is 0).
double peeking_mixture_sd(const PeekingSpec& peeking, const SimulationModel& model);

// What a plan needs generated beyond the p-values (SimulationPlan::needs()).
struct StreamNeeds {
  bool e_values = false;     // e_value: the likelihood ratio of z against the model's effect
  PeekingSpec peeking = {};  // looks > 0: the per-test summaries of the looks
};

// One simulated stream: p-values and the truth, in launch order.
struct SimulatedStream {
  std::vector<double> p_value;
  std::vector<std::uint8_t> is_null;  // 1 = null, 0 = non-null
  std::uint64_t nonnulls = 0;
  // mean_duration > 0 only: the launch (0-based) before which test t finishes, in (t, n]; n means
  // at the end of the stream. Empty when every test finishes before the next launches.
  std::vector<std::uint64_t> finish_before;
  // needs.e_values only: e_t = exp(mu z_t - mu^2 / 2) with mu = the model's effect, the likelihood
  // ratio of N(mu, 1) against N(0, 1) at z_t; E[e_t] = 1 for a null of mean 0 and <= 1 for a
  // conservative null (mean < 0) when mu >= 0, so it is an e-value. Capped at the largest double.
  std::vector<double> e_value;
  // needs.peeking.looks > 0 only, per test over its K looks:
  std::vector<double> p_min_fixed;     // min_k of the fixed-horizon p-value 1 - Phi(z_k)
  std::vector<double> p_min_anytime;   // min_k of min(1, 1 / ratio_k): the always-valid p-value at the end
  std::vector<double> e_max_mixture;   // max_k ratio_k
  std::vector<double> e_last_mixture;  // ratio_K, the mixture likelihood ratio at the last look
};

// Fills `out` (buffers are reused) with run `run` of seed `seed`. Independent random streams per
// run, one each for the truth (purpose 1), the non-null means (2), the noise (3), the durations (4)
// and the paths between looks (5), so changing the effect, the correlation, the duration or the
// looks does not change which tests are non-null, and the final z_t do not depend on the duration
// or the looks. REQUIRES: validate_model(model) and validate_peeking(needs.peeking) succeeded.
void generate_stream(const SimulationModel& model, std::uint64_t seed, std::uint64_t run,
                     SimulatedStream& out, const StreamNeeds& needs = {});
SimulatedStream generate_stream(const SimulationModel& model, std::uint64_t seed, std::uint64_t run,
                                const StreamNeeds& needs = {});

// p = 1 - Phi(z), computed as erfc(z / sqrt 2) / 2 so that it stays accurate for large z.
double upper_tail_p_value(double z);

// ---------------------------------------------------------------------------------------------
// Deciding and counting.

// What one procedure did on one stream.
struct RunTally {
  std::uint64_t rejections = 0;         // R
  std::uint64_t false_discoveries = 0;  // V
  std::uint64_t nonnulls = 0;           // non-null tests in the stream

  friend bool operator==(const RunTally&, const RunTally&) = default;
};

// Counts R and V from a list of decisions. REQUIRES: rejected.size() == stream.p_value.size().
RunTally tally_decisions(const SimulatedStream& stream, const std::vector<bool>& rejected);

// Which evidence a row of the plan decides on.
enum class Evidence : std::uint8_t {
  kFinal,        // the final p-value (e-value rules: the likelihood ratio at the effect)
  kPeekFixed,    // peeking: stop at the first look whose fixed-horizon p <= level (not valid)
  kPeekAnytime,  // peeking: the always-valid p-value, used at its running minimum
  kPeekMixture,  // peeking, e-value rules: the mixture ratio, stopped when it reaches 1 / level
};
// The suffix a row's name gets: "", ":peek-fixed", ":peek-anytime", ":peek-mixture".
std::string_view evidence_suffix(Evidence evidence);

// The procedures of one simulation with a prototype Rule for each online rule (built once;
// copying a Rule is cheap, so every run starts from a fresh copy).
//
// Rows: without peeking, one row per procedure. With peeking, every online p-value rule R gives
// three rows, "R" (the final p-value, looked at once), "R:peek-fixed" and "R:peek-anytime"; e-lond
// gives "e-lond" and "e-lond:peek-mixture"; the offline baselines (bh, storey-bh, e-bh) keep one
// row on the final evidence, since they need every result at once.
class SimulationPlan {
 public:
  // REQUIRES: procedures came from resolve_procedures(); validate_peeking(peeking) succeeded.
  explicit SimulationPlan(std::vector<Procedure> procedures, PeekingSpec peeking = {});

  // One per row, named as the row (the rule name plus evidence_suffix()).
  const std::vector<Procedure>& procedures() const { return rows_; }
  const std::vector<Evidence>& evidence() const { return evidence_; }
  const PeekingSpec& peeking() const { return peeking_; }
  StreamNeeds needs() const;

  // Decides the stream with every row, each from its start state; one tally per row, in order.
  // Every row sees the identical stream. When the stream has finish_before, online rules decide
  // through Rule::launch() / finish() in the stream's event order; otherwise (and for the final
  // evidence) through record(), the synchronous rules exactly.
  std::vector<RunTally> decide(const SimulatedStream& stream) const;

 private:
  std::vector<Procedure> rows_;
  std::vector<Evidence> evidence_;
  std::vector<std::optional<Rule>> prototypes_;  // empty for offline procedures
  PeekingSpec peeking_;
};

// One run, start to end: generate_stream() then plan.decide(). The unit of all simulation work.
std::vector<RunTally> simulate_run(const SimulationPlan& plan, const SimulationModel& model,
                                   std::uint64_t seed, std::uint64_t run);

// Running sums over runs for one procedure. Combining is deterministic when done in a fixed order.
struct MetricTotals {
  std::uint64_t runs = 0;
  double rejections = 0;           // sum R
  double fdp = 0, fdp_sq = 0;      // sum and sum of squares of V / max(R, 1)
  double v = 0, v_sq = 0;          // sum V, sum V^2
  double r1 = 0, r1_sq = 0;        // sum max(R, 1), sum max(R, 1)^2
  double v_r1 = 0;                 // sum V max(R, 1)
  double r_sq = 0, v_r = 0;        // sum R^2, sum V R
  std::uint64_t any_false = 0;     // runs with V >= 1
  std::uint64_t power_runs = 0;    // runs with at least one non-null
  double power = 0, power_sq = 0;  // over those runs: sum and sum of squares of (R - V) / nonnulls

  void add(const RunTally& run);
  void merge(const MetricTotals& other);
};

// The error rate a procedure promises (rules.hpp): FWER for alpha-spending, FDR for lond,
// lord++, saffron, addis, bh and storey-bh, and for alpha-investing the quantity Foster & Stine
// (2008) bound: mFDR_eta = E[V] / (E[R] + eta) <= alpha with eta = W0 / alpha (1 - alpha with the
// default W0). It differs from the contract's mfdr column (denominator E[max(R, 1)]) when streams
// have few rejections; the check uses the form the theorem states.
enum class ErrorMetric { kFdr, kMfdrEta, kFwer };
std::string_view error_metric_name(ErrorMetric metric);  // "FDR", "mFDR_eta", "FWER"
ErrorMetric promised_metric(const Procedure& procedure);

// One output row (docs/cli.md columns plus the extras the table and --json show).
struct ProcedureSummary {
  std::string rule;
  std::optional<Evaluation> evaluation;  // lord++, saffron, addis only
  std::uint64_t runs = 0;
  std::uint64_t tests = 0;
  double mean_rejections = 0;
  double fdr = 0, fdr_se = 0;              // mean of V / max(R, 1); its standard error
  double mfdr = 0, mfdr_se = 0;            // sum V / sum max(R, 1); delta-method standard error
  double power = 0, power_se = 0;          // NaN when no run had a non-null
  double fwer = 0, fwer_se = 0;            // share of runs with V >= 1
  ErrorMetric metric = ErrorMetric::kFdr;  // the promised one
  double eta = 0;                          // alpha-investing only: W0 / alpha
  double promised = 0, promised_se = 0;    // the promised metric's realized value and its SE
  double target = 0.05;                    // alpha
  bool exceeds_target = false;             // promised > target + 3 promised_se
};

// Standard errors are sample standard deviations over runs divided by sqrt(runs); with one run
// they are NaN (and nothing is flagged). Ratio metrics use the delta-method (ratio estimator)
// standard error: for mfdr, sqrt(sum (V_i - mfdr max(R_i,1))^2 / (n (n - 1))) / mean max(R_i,1),
// and for mFDR_eta the same with R_i + eta in place of max(R_i, 1).
ProcedureSummary summarize_totals(const Procedure& procedure, const MetricTotals& totals,
                                  std::uint64_t tests);

// The flag rule: estimate > target + 3 se. With a NaN se, false.
bool exceeds_by_three_se(double estimate, double se, double target);

// ---------------------------------------------------------------------------------------------
// Running many streams on threads.

struct SimulationOptions {
  std::uint64_t runs = 100;  // >= 1
  std::uint64_t seed = 1;    // Default: 1
  unsigned threads = 1;      // >= 1; the output does not depend on it
  bool keep_runs = false;    // keep every run's tallies (tests and small studies)
  // Called with the number of runs finished so far, from worker threads, one call at a time.
  std::function<void(std::uint64_t)> progress = {};
};

struct SimulationResult {
  std::vector<ProcedureSummary> summaries;  // one per procedure, in plan order
  std::vector<MetricTotals> totals;         // the sums behind them
  std::vector<std::vector<RunTally>> runs;  // [run][procedure], only with keep_runs
};

// Runs options.runs streams (run indices 0..runs-1) spread over options.threads threads, in
// chunks of runs_per_chunk(runs) runs combined in chunk order (at least kRunsPerChunk runs per
// chunk, at most kMaxChunks chunks, so memory stays small for any number of runs). On bad options
// or model returns kInvalidArgument and runs nothing.
inline constexpr std::uint64_t kRunsPerChunk = 16;
inline constexpr std::uint64_t kMaxChunks = 4096;
std::uint64_t runs_per_chunk(std::uint64_t runs);
Result<SimulationResult> run_simulation(const SimulationPlan& plan, const SimulationModel& model,
                                        const SimulationOptions& options);

}  // namespace alphaledger
