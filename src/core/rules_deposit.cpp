// The deposit sums of lord++, saffron and addis (docs/methods.md sections 5.2, 6 and 7;
// docs/benchmarks.md "How exact evaluation is fast"): exact mode over the deposit list with a
// window of future clocks, fast mode over the geometric mixture's head and accumulators, and the
// clock tick with its deposit. The levels that use them are in rules.cpp; the other parts of the
// rules are named in core/rules_internal.hpp.
#include <algorithm>
#include <cstring>

#include "alphaledger/rules.hpp"
#include "core/rules_internal.hpp"

namespace alphaledger {
namespace {

using rules_detail::is_deposit_rule;
using rules_detail::kMaxLanes;

// Hot loops get an AVX2 clone, chosen at run time, on x86-64. The clones do the same IEEE
// operations in the same order, so they give the same bits as the baseline code. Not in sanitizer
// builds: the clone is picked by an ifunc resolver that the dynamic loader runs while relocating,
// before the sanitizer's runtime has started, and ThreadSanitizer's instrumented resolver crashes
// there (every test binary died at load, docs/testing.md "Sanitizers").
#if defined(__x86_64__) && defined(__GNUC__) && defined(__linux__) && !defined(__SANITIZE_THREAD__) && \
    !defined(__SANITIZE_ADDRESS__)
#define ALPHALEDGER_VECTOR_CLONES [[gnu::target_clones("avx2", "default")]]
#else
#define ALPHALEDGER_VECTOR_CLONES
#endif

// lanes[i] += c * g[i]: one deposit's term added to every lane. Each lane is its own running sum
// (no reassociation), so the loop vectorises and every lane stays bit-identical to a scalar sum.
ALPHALEDGER_VECTOR_CLONES void add_scaled(double* __restrict lanes, double c, const double* __restrict g,
                                          std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) lanes[i] += c * g[i];
}

// Fast mode's sums: four partial sums (lane i & 3 gets term i, in order), as four lanes of one
// vector. Lane-wise IEEE operations in the same order as the scalar loop give the same bits on any
// instruction set; the compiler makes a clone for AVX2 and picks it at run time.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wpsabi"  // internal functions: the vector ABI does not matter
using V4 = double __attribute__((vector_size(32)));

inline V4 load4(const double* p) {
  V4 v;
  std::memcpy(&v, p, sizeof v);
  return v;
}
inline void store4(double* p, V4 v) { std::memcpy(p, &v, sizeof v); }

// part[i & 3] += x[i] * y[i] for i = 0 .. n-1, in order.
inline void add_products(V4& part, const double* x, const double* y, std::size_t n) {
  std::size_t i = 0;
  for (; i + 4 <= n; i += 4) part += load4(x + i) * load4(y + i);
  for (; i < n; ++i) part[i & 3] += x[i] * y[i];
}

inline double finish_parts(V4 part) { return (part[0] + part[1]) + (part[2] + part[3]); }

// sum_i head[i] * weight[i] + sum_k coef[k] * acc[k] in the four fixed partial sums.
ALPHALEDGER_VECTOR_CLONES double mixture_dot(const double* head, const double* head_weight, std::size_t l,
                                             const double* coef, const double* acc, std::size_t n) {
  V4 part = {0, 0, 0, 0};
  add_products(part, head, head_weight, l);
  add_products(part, coef, acc, n);
  return finish_parts(part);
}

// One clock tick of every accumulator, A_k <- A_k r_k + leaving r_k^L, fused with the sum of the
// new state (head already shifted). When nothing leaves the head the second product is +0 and
// adding it changes no bit (every A_k r_k >= +0), so it is skipped.
ALPHALEDGER_VECTOR_CLONES double tick_and_dot(const double* head, const double* head_weight, std::size_t l,
                                              const double* coef, const double* ratio,
                                              const double* ratio_head, double leaving, double* acc,
                                              std::size_t n) {
  V4 part = {0, 0, 0, 0};
  add_products(part, head, head_weight, l);
  std::size_t k = 0;
  if (leaving == 0.0) {
    for (; k + 4 <= n; k += 4) {
      const V4 a = load4(acc + k) * load4(ratio + k);
      store4(acc + k, a);
      part += load4(coef + k) * a;
    }
    for (; k < n; ++k) {
      acc[k] = acc[k] * ratio[k];
      part[k & 3] += coef[k] * acc[k];
    }
  } else {
    const V4 out = {leaving, leaving, leaving, leaving};
    for (; k + 4 <= n; k += 4) {
      const V4 a = load4(acc + k) * load4(ratio + k) + out * load4(ratio_head + k);
      store4(acc + k, a);
      part += load4(coef + k) * a;
    }
    for (; k < n; ++k) {
      acc[k] = acc[k] * ratio[k] + leaving * ratio_head[k];
      part[k & 3] += coef[k] * acc[k];
    }
  }
  return finish_parts(part);
}
#pragma GCC diagnostic pop

}  // namespace

double Rule::deposit_sum() const {
  if (mixture_ != nullptr) return fast_sum_;
  return exact_sum();
}

double Rule::mixture_sum() const {
  // Four partial sums in a fixed order: deterministic, and four times the instruction-level
  // parallelism of one running sum. Head terms first (term i in part i & 3), then the
  // accumulators (term k in part k & 3).
  return mixture_dot(head_.data(), mixture_->head.data(), head_.size(), mixture_->coefficient.data(),
                     accumulator_.data(), accumulator_.size());
}

void Rule::set_head_mask() {
  head_mask_ = 0;
  for (std::size_t i = 0; i < head_.size(); ++i) {
    if (head_[i] == 0.0) continue;
    head_mask_ |= head_.size() >= 64 ? ~std::uint64_t{0} : std::uint64_t{1} << i;
  }
}

double Rule::exact_sum() const {
  if (clock_ >= window_start_ && clock_ - window_start_ < window_.size())
    return window_[clock_ - window_start_];
  const double w0 = config_.initial_wealth;
  const double a = config_.alpha;
  double s = 0;
  for (std::size_t d = 0; d < deposit_clock_.size(); ++d) {
    const double c = d == 0 ? w0 : (d == 1 ? a - w0 : a);
    s += c * sequence_->gamma(1 + clock_ - deposit_clock_[d]);
  }
  return s;
}

void Rule::fill_window() {
  const std::size_t lanes = next_lanes_;
  next_lanes_ = std::min(kMaxLanes, 2 * lanes);
  const std::uint64_t t0 = clock_;
  // Lane i, deposit d: gamma(1 + t0 + i - clock_d) = table[t0 + i - clock_d].
  gamma_table_ = sequence_->table(t0 + lanes);
  const double* table = gamma_table_->data();
  window_.assign(lanes, 0.0);
  window_start_ = t0;
  double* w = window_.data();
  const double w0 = config_.initial_wealth;
  const double a = config_.alpha;
  const std::size_t n = deposit_clock_.size();
  for (std::size_t d = 0; d < n; ++d) {
    const double c = d == 0 ? w0 : (d == 1 ? a - w0 : a);
    add_scaled(w, c, table + (t0 - deposit_clock_[d]), lanes);
  }
}

void Rule::add_to_window(double c_new) {
  if (window_.empty() || clock_ < window_start_ || clock_ - window_start_ >= window_.size()) return;
  // Appending the newest deposit's term to each lane keeps the order of exact_sum(): lanes of
  // clocks before clock_ are never read again.
  const std::size_t first = clock_ - window_start_;
  add_scaled(window_.data() + first, c_new, gamma_table_->data(), window_.size() - first);
}

void Rule::advance(bool tick, bool rejected) {
  const double c_new = rejections_ == 0 ? config_.alpha - config_.initial_wealth : config_.alpha;
  if (mixture_ != nullptr) {
    if (tick) {
      // Only a head holding a deposit moves; an empty head adds only +0 terms, which change no
      // bit of the sum, so it is skipped.
      const std::size_t l = head_.size();
      double leaving = 0.0;
      std::size_t live = 0;
      if (head_mask_ != 0) {
        leaving = head_[l - 1];
        for (std::size_t i = l; i-- > 1;) head_[i] = head_[i - 1];
        head_[0] = 0.0;
        head_mask_ = l >= 64 ? ~std::uint64_t{0} : (head_mask_ << 1) & ((std::uint64_t{1} << l) - 1);
        live = head_mask_ != 0 ? l : 0;
      }
      // The update of every A_k and the new sum in one pass; a deposit changes the state again,
      // so a tick with a rejection sums after it (below).
      const double sum = tick_and_dot(head_.data(), mixture_->head.data(), live, mixture_->coefficient.data(),
                                      mixture_->ratio.data(), mixture_->ratio_head.data(), leaving,
                                      accumulator_.data(), accumulator_.size());
      if (!rejected) fast_sum_ = sum;
    }
    if (rejected) {
      if (head_.empty()) {
        for (double& acc : accumulator_) acc += c_new;
      } else {
        head_[0] += c_new;
        if (head_[0] != 0.0) head_mask_ |= 1;
      }
    }
    if (rejected) fast_sum_ = mixture_sum();  // a test that neither ticks nor rejects keeps its sum
  } else {
    if (tick) ++clock_;
    if (rejected) {
      deposit_clock_.push_back(clock_);
      add_to_window(c_new);
    }
  }
  if (rejected) wealth_ += c_new;
}

void Rule::ensure_window() {
  if (is_deposit_rule(config_.kind) && mixture_ == nullptr &&
      !(clock_ >= window_start_ && clock_ - window_start_ < window_.size())) {
    fill_window();
  }
}

}  // namespace alphaledger
