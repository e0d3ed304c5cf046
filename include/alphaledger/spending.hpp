// Spending sequences gamma_1, gamma_2, ...: how each deposit of alpha-wealth is spread over the
// tests that follow it. Pure math: no I/O, no logging, no globals.
//
// Accepted specifications (docs/rules.md):
//   "jm"            C * log(max(j,2)) / (j * exp(sqrt(log j))), C = kJmConstant (sums to 1)
//   "jm:C"          the same shape with a user constant C; refused if the sum would pass 1
//   "power:S"       j^-S / zeta(S), S > 1
//   "power-shift:S" (j+1)^-S / (zeta(S) - 1), S > 1
//
// Every sequence here is nonnegative, nonincreasing and sums to at most 1.
// Thread-safety: a constructed SpendingSequence is immutable and safe to share between threads.
//
// Example:
//   auto seq = SpendingSequence::parse("power:1.6");
//   seq->gamma(1);   // 0.4374901658... (= 1 / zeta(1.6))
//
// Rules get their sequence from SpendingSequence::shared(), so every Rule of one specification in
// the process shares one gamma table (grown on demand) and one fitted mixture.
#pragma once

#include <cstdint>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"

namespace alphaledger {

// Javanmard–Montanari normalising constant: C * sum_j log(max(j,2))/(j e^sqrt(ln j)) = 1 to about
// 1e-12 (docs/methods.md section 13, recomputed by jm_shape_sum() and checked in tests/core).
inline constexpr double kJmConstant = 0.079081966722;

// The kind of a sequence. Stored on disk inside stream configurations: do not change the numbers.
enum class SpendingKind : std::uint8_t { kJm = 1, kPower = 2, kPowerShift = 3 };

// A geometric mixture (docs/methods.md section 15): gamma_m = head[m-1] for m <= head.size(), and
// sum_k weight[k] * (1 - r_k) * r_k^(m-1) for larger m, with r_k = exp(-rate[k]).
// It is itself a valid sequence: nonnegative, nonincreasing, total mass <= 1 - 1e-9.
struct GeometricMixture {
  std::vector<double> head;         // exact published values for the first lags (JM hybrid), or empty
  std::vector<double> weight;       // w_k >= 0
  std::vector<double> rate;         // x_k = -ln r_k > 0
  std::vector<double> one_minus_r;  // 1 - r_k = -expm1(-x_k), precomputed
  std::vector<double> ratio;        // r_k = exp(-x_k)
  std::vector<double> ratio_head;   // r_k^L, L = head.size(): a deposit leaving the head
  std::vector<double> coefficient;  // w_k * (1 - r_k): the level's weight on accumulator k

  void finish();  // fills the derived vectors from head, weight and rate

  double gamma(std::uint64_t m) const;  // gamma_m; 0 for m == 0
  double total_mass() const;            // sum over all m >= 1, in closed form
};

class SpendingSequence {
 public:
  // Parses and validates a specification. On failure returns kInvalidArgument naming the broken
  // condition, e.g. "power:S needs S > 1, got 0.9".
  static Result<SpendingSequence> parse(std::string_view spec);

  // The sequence of a specification, shared by the whole process: parsed once, and kept while
  // anything uses it. Copies of the returned pointer share the gamma table and the mixture.
  // Thread-safe. Fails as parse() does.
  static Result<std::shared_ptr<const SpendingSequence>> shared(std::string_view spec);

  // gamma_j for j >= 1 (the published closed form); 0 for j == 0.
  double gamma(std::uint64_t j) const;

  // gamma_1 .. gamma_n at index j - 1, with n >= at_least: the same bits gamma(j) returns,
  // computed once per sequence (shared by all its copies) and grown on demand, at least doubling.
  // The returned snapshot never changes; a later, longer snapshot starts with the same values.
  // Thread-safe.
  std::shared_ptr<const std::vector<double>> table(std::uint64_t at_least) const;

  SpendingKind kind() const { return kind_; }
  double parameter() const { return parameter_; }    // C for jm, S for power and power-shift
  const std::string& spec() const { return spec_; }  // canonical text, e.g. "power:1.6"
  double normaliser() const { return normaliser_; }  // the factor in front of the shape

  // The geometric-mixture version used by --evaluation fast (docs/methods.md section 15.4): a
  // trapezoid fit of the Laplace integral for power laws, exact head of 16 lags plus a
  // nonnegative least-squares tail for jm. Deterministic: same spec, same numbers, bit for bit.
  const GeometricMixture& mixture() const;

 private:
  SpendingKind kind_ = SpendingKind::kPower;
  double parameter_ = 0;
  double normaliser_ = 0;
  std::string spec_;
  double closed_form(std::uint64_t j) const;  // gamma_j from the formula, j >= 1

  struct GrowingTable;  // the tables, grown on demand, thread-safe
  std::shared_ptr<GrowingTable> grown_;
  struct LazyMixture;  // fitted on first use, once, thread-safe
  std::shared_ptr<LazyMixture> mixture_;
};

// sum_{j>=1} log(max(j,2)) / (j e^sqrt(ln j)): exact summation to 10^6 plus an Euler–Maclaurin
// tail (docs/methods.md section 13). About 12.645107872872.
double jm_shape_sum();

}  // namespace alphaledger
