// The deposit sums of lord++, saffron and addis (docs/methods.md sections 5.2, 6 and 7;
// docs/benchmarks.md "How exact evaluation is fast"): exact mode over the deposit list with a
// window of future clocks, fast mode over the geometric mixture's head and accumulators, and the
// clock tick with its deposit. The levels that use them are in rules.cpp; the other parts of the
// rules are named in core/rules_internal.hpp.
#include <algorithm>
#include <atomic>
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

// Fast mode's kernels (Rule::FastKernel below) pick their AVX2 version themselves, once per Rule
// or per call, and so work in sanitizer builds as well: a direct call, no resolver.
std::atomic<bool> baseline_only{false};  // rules_detail::use_baseline_kernels()

#if defined(__x86_64__) && defined(__GNUC__)
#define ALPHALEDGER_AVX2 1
bool have_avx2() {
  static const bool yes = [] {
    __builtin_cpu_init();  // may run before the constructors that set up the CPU model
    return __builtin_cpu_supports("avx2") != 0;
  }();
  return yes && !baseline_only.load(std::memory_order_relaxed);
}
#else
#define ALPHALEDGER_AVX2 0
#endif

// lanes[i] += c * g[i]: one deposit's term added to every lane. Each lane is its own running sum
// (no reassociation), so the loop vectorises and every lane stays bit-identical to a scalar sum.
ALPHALEDGER_VECTOR_CLONES void add_scaled(double* __restrict lanes, double c, const double* __restrict g,
                                          std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) lanes[i] += c * g[i];
}

// Fast mode's sum: four partial sums, the four lanes of one vector. Term i goes to lane i mod 4,
// in order, and the lanes are added as (s0 + s1) + (s2 + s3) at the end (docs/rules.md "Fast
// evaluation"). The Rule's fast buffer pads its head, accumulators and copies of the mixture's
// arrays with +0 to whole vectors; a padded term, +0 * +0, changes no bit of a lane, which starts
// at +0 and so is never -0. That gives the bits of the unpadded loop, whose last one to three
// terms went lane by lane.
//
// Lane-wise IEEE operations in the same order as a scalar loop give the same bits on any
// instruction set; Rule::FastKernel has a baseline and an AVX2 version of each use.
// Internal functions: the vector ABI does not matter. Not popped: GCC reports what it finds in
// template instances at the end of the file.
#pragma GCC diagnostic ignored "-Wpsabi"
using V4 = double __attribute__((vector_size(32)));
using rules_detail::whole_vectors;

[[gnu::always_inline]] inline V4 load4(const double* p) {
  V4 v;
  std::memcpy(&v, p, sizeof v);
  return v;
}
[[gnu::always_inline]] inline void store4(double* p, V4 v) { std::memcpy(p, &v, sizeof v); }

struct Lanes {
  V4 v = {};
  [[gnu::always_inline]] void add(V4 x) { v += x; }
  [[gnu::always_inline]] double finish() const { return (v[0] + v[1]) + (v[2] + v[3]); }
};

// The term counts of a sum, whole vectors: fixed at compile time for the mixtures the published
// sequences give (the loops unroll), or kAny, read from the mixture at run time.
inline constexpr std::size_t kAny = ~std::size_t{0};
template <std::size_t kHead, std::size_t kAcc>
struct Shape {
  [[gnu::always_inline]] static std::size_t head(const GeometricMixture& m) {
    if constexpr (kHead == kAny) return m.head.size();
    return kHead;
  }
  [[gnu::always_inline]] static std::size_t acc_terms(const GeometricMixture& m) {
    if constexpr (kAcc == kAny) return whole_vectors(m.weight.size());
    return kAcc;
  }
};
using AnyShape = Shape<kAny, kAny>;
using JmShape = Shape<16, 28>;     // jm: 16 exact lags, 28 accumulators
using PowerShape = Shape<0, 68>;   // power and power-shift: 65 accumulators, padded to 68

// lanes += term(i) for i = 0, 4, .. n-4 (n a multiple of 4), in that order.
template <class Term>
[[gnu::always_inline]] inline void add_terms(Lanes& lanes, std::size_t n, Term term) {
#pragma GCC unroll 32
  for (std::size_t i = 0; i < n; i += 4) lanes.add(term(i));
}

// lanes += x[i] * y[i] for i = 0 .. n-1, in order.
[[gnu::always_inline]] inline void add_products(Lanes& lanes, const double* x, const double* y, std::size_t n) {
  add_terms(lanes, n, [&](std::size_t i) __attribute__((always_inline)) { return load4(x + i) * load4(y + i); });
}

// h[i] <- h[i-1] for i = l-1 .. 1, h[0] <- +0: moves only, the same bits on any machine. For a
// head that is not whole vectors (every mixture's head is 16 slots or none).
[[gnu::always_inline]] inline void shift_head(double* h, std::size_t l) {
  for (std::size_t i = l; i-- > 1;) h[i] = h[i - 1];
  h[0] = 0.0;
}

// shift_head() for a head of whole vectors (l a multiple of 4), with the new head's products with
// w added to lanes as add_products() adds them. Returns the value that left (the old h[l-1]). Each
// vector is read before it is written and moved within registers; the stores are whole aligned
// vectors, which the next tick's loads take straight from the store buffer. Moves only: the same
// bits as shift_head() then add_products().
[[gnu::always_inline]] inline double shift_and_add_head(Lanes& lanes, double* h, const double* w, std::size_t l) {
  [[maybe_unused]] typedef long long V4i __attribute__((vector_size(32)));
  V4 below = {};  // the vector below; its lane 3 moves into lane 0
  add_terms(lanes, l, [&](std::size_t i) __attribute__((always_inline)) {
    const V4 v = load4(h + i);
#if defined(__clang__)
    const V4 moved = __builtin_shufflevector(below, v, 3, 4, 5, 6);
#else
    const V4 moved = __builtin_shuffle(below, v, V4i{3, 4, 5, 6});
#endif
    below = v;
    store4(h + i, moved);
    return moved * load4(w + i);
  });
  return below[3];
}

// One clock tick of every accumulator, A_k <- A_k r_k + leaving r_k^L, with each new A_k's term
// coef_k A_k added to lanes (which hold the head's terms) counted from 0. When nothing leaves the
// head the second product is +0 and adding it changes no bit (every A_k r_k >= +0), so it is
// skipped.
template <bool kLeaving>
[[gnu::always_inline]] inline void tick_and_add(Lanes& lanes, const double* coef, const double* ratio,
                                                const double* ratio_head, double leaving, double* acc, std::size_t n) {
  const V4 out = {leaving, leaving, leaving, leaving};
  add_terms(lanes, n, [&](std::size_t i) __attribute__((always_inline)) {
    V4 a = load4(acc + i) * load4(ratio + i);
    if constexpr (kLeaving) a = a + out * load4(ratio_head + i);
    store4(acc + i, a);
    return load4(coef + i) * a;
  });
}

}  // namespace

// Fast mode's kernels: the sum, advance() and the whole of record() with no running test (for one
// rule), for a Shape. Each has a baseline version and, on x86-64, an AVX2 version of the same
// source: the same IEEE operations in the same order, so the same bits. The version is picked
// once per Rule (fast_step_) or per call (the others), with no indirection through the dynamic
// loader.
struct Rule::FastKernel {
  // sum_i head[i] * weight[i] + sum_k coef[k] * acc[k]: the head terms, then the accumulator
  // terms counted from 0 again.
  template <class S>
  [[gnu::always_inline]] static double sum(const Rule& r) {
    Lanes lanes;
    add_products(lanes, r.head_at(), r.weight_at(), whole_vectors(S::head(*r.mixture_)));
    add_products(lanes, r.coefficient_at(), r.acc_at(), S::acc_terms(*r.mixture_));
    return lanes.finish();
  }

  template <class S>
  [[gnu::always_inline]] static void advance(Rule& r, bool tick, bool rejected, double c_new) {
    const GeometricMixture& m = *r.mixture_;
    if (tick) {
      // Only a head holding a deposit moves; an empty head adds only +0 terms, which change no
      // bit of the sum, so it is skipped. A head that becomes empty adds them: the same bits.
      const std::size_t l = S::head(m);
      double leaving = 0.0;
      Lanes lanes;
      if (l != 0 && r.head_mask_ != 0) {
        double* head = r.head_at();
        if (l % 4 == 0) {
          leaving = shift_and_add_head(lanes, head, r.weight_at(), l);
        } else {
          leaving = head[l - 1];
          shift_head(head, l);
          add_products(lanes, head, r.weight_at(), whole_vectors(l));
        }
        r.head_mask_ = l >= 64 ? ~std::uint64_t{0} : (r.head_mask_ << 1) & ((std::uint64_t{1} << l) - 1);
      }
      // The update of every A_k and the new sum in one pass. A deposit changes the state again,
      // so a tick with a rejection sums again after it (below).
      const std::size_t n = S::acc_terms(m);
      if (leaving == 0.0) {
        tick_and_add<false>(lanes, r.coefficient_at(), r.ratio_at(), r.ratio_head_at(), 0.0, r.acc_at(), n);
      } else {
        tick_and_add<true>(lanes, r.coefficient_at(), r.ratio_at(), r.ratio_head_at(), leaving, r.acc_at(), n);
      }
      // Stored even when a rejection sums again below: computed on one path only, the sum would
      // be moved past the branch, with the loads of its coefficients kept before the stores
      // (they share a buffer) and so spilled to the stack.
      r.fast_sum_ = lanes.finish();
    }
    if (rejected) {
      if (S::head(m) == 0) {
        double* acc = r.acc_at();
        for (std::size_t k = 0; k < m.weight.size(); ++k) acc[k] += c_new;
      } else {
        double* head = r.head_at();
        head[0] += c_new;
        if (head[0] != 0.0) r.head_mask_ |= 1;
      }
      r.fast_sum_ = sum<S>(r);  // a test that neither ticks nor rejects keeps its sum
    }
  }

  // level_now(), record() and advance(), in their order.
  template <class S, RuleKind K>
  [[gnu::always_inline]] static Outcome step(Rule& r, double p) {
    static_assert(K == RuleKind::kLordPlusPlus || K == RuleKind::kSaffron || K == RuleKind::kAddis);
    Outcome o;
    const double s = r.fast_sum_;
    const double lambda = r.config_.candidate_threshold;
    const double tau = r.config_.discard_threshold;
    bool tick = true;
    if constexpr (K == RuleKind::kSaffron) {
      o.level = std::min(lambda, (1 - lambda) * s);
      tick = p > lambda;
    } else if constexpr (K == RuleKind::kAddis) {
      o.level = std::min(lambda, (tau - lambda) * s);
      tick = p > lambda && p <= tau;
    } else {
      o.level = s;
    }
    o.rejected = p <= o.level;
    o.step = ++r.step_;
    if (tick) {
      if constexpr (K == RuleKind::kSaffron) {
        r.wealth_ -= o.level / (1 - lambda);
      } else if constexpr (K == RuleKind::kAddis) {
        r.wealth_ -= o.level / (tau - lambda);
      } else {
        r.wealth_ -= o.level;
      }
    }
    const double c_new = r.next_deposit();
    advance<S>(r, tick, o.rejected, c_new);
    if (o.rejected) {
      r.wealth_ += c_new;
      ++r.rejections_;
    }
    o.wealth = r.wealth_;
    return o;
  }

  static double sum_base(const Rule& r) { return sum<AnyShape>(r); }
  static void advance_base(Rule& r, bool tick, bool rejected, double c_new) {
    advance<AnyShape>(r, tick, rejected, c_new);
  }
  template <class S, RuleKind K>
  static Outcome step_base(Rule& r, double p) {
    return step<S, K>(r, p);
  }
#if ALPHALEDGER_AVX2
  [[gnu::target("avx2")]] static double sum_avx2(const Rule& r) { return sum<AnyShape>(r); }
  [[gnu::target("avx2")]] static void advance_avx2(Rule& r, bool tick, bool rejected, double c_new) {
    advance<AnyShape>(r, tick, rejected, c_new);
  }
  template <class S, RuleKind K>
  [[gnu::target("avx2")]] static Outcome step_avx2(Rule& r, double p) {
    return step<S, K>(r, p);
  }
#endif

  template <class S, RuleKind K>
  static FastStep pick() {
#if ALPHALEDGER_AVX2
    if (have_avx2()) return step_avx2<S, K>;
#endif
    return step_base<S, K>;
  }
  template <class S>
  static FastStep pick(RuleKind kind) {
    switch (kind) {
      case RuleKind::kSaffron:
        return pick<S, RuleKind::kSaffron>();
      case RuleKind::kAddis:
        return pick<S, RuleKind::kAddis>();
      default:
        return pick<S, RuleKind::kLordPlusPlus>();
    }
  }
  // The record() of a rule, for the mixture's shape.
  static FastStep pick(RuleKind kind, const GeometricMixture& m) {
    if (m.head.size() == 16 && whole_vectors(m.weight.size()) == 28) return pick<JmShape>(kind);
    if (m.head.empty() && whole_vectors(m.weight.size()) == 68) return pick<PowerShape>(kind);
    return pick<AnyShape>(kind);
  }
};

void rules_detail::use_baseline_kernels(bool on) { baseline_only.store(on, std::memory_order_relaxed); }

double Rule::deposit_sum() const {
  if (mixture_ != nullptr) return fast_sum_;
  return exact_sum();
}

double Rule::mixture_sum() const {
  // Four partial sums in a fixed order: deterministic, and four times the instruction-level
  // parallelism of one running sum.
#if ALPHALEDGER_AVX2
  if (have_avx2()) return FastKernel::sum_avx2(*this);
#endif
  return FastKernel::sum_base(*this);
}

void Rule::init_fast() {
  const GeometricMixture& m = *mixture_;
  head_slots_ = whole_vectors(m.head.size());
  acc_slots_ = whole_vectors(m.weight.size());
  fast_.assign(2 * head_slots_ + 4 * acc_slots_, 0.0);
  auto put = [&](const std::vector<double>& from, const double* to) {
    std::copy(from.begin(), from.end(), fast_.begin() + (to - fast_.data()));
  };
  put(m.head, weight_at());
  put(m.coefficient, coefficient_at());
  put(m.ratio, ratio_at());
  put(m.ratio_head, ratio_head_at());
  fast_step_ = FastKernel::pick(config_.kind, m);
}

void Rule::set_head_mask() {
  head_mask_ = 0;
  const std::size_t l = mixture_->head.size();
  for (std::size_t i = 0; i < l; ++i) {
    if (head_at()[i] == 0.0) continue;
    head_mask_ |= l >= 64 ? ~std::uint64_t{0} : std::uint64_t{1} << i;
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
  const double c_new = next_deposit();
  if (mixture_ != nullptr) {
    advance_fast(tick, rejected, c_new);
  } else {
    if (tick) ++clock_;
    if (rejected) {
      deposit_clock_.push_back(clock_);
      add_to_window(c_new);
    }
  }
  if (rejected) wealth_ += c_new;
}

void Rule::advance_fast(bool tick, bool rejected, double c_new) {
#if ALPHALEDGER_AVX2
  if (have_avx2()) return FastKernel::advance_avx2(*this, tick, rejected, c_new);
#endif
  FastKernel::advance_base(*this, tick, rejected, c_new);
}

void Rule::ensure_window() {
  if (is_deposit_rule(config_.kind) && mixture_ == nullptr &&
      !(clock_ >= window_start_ && clock_ - window_start_ < window_.size())) {
    fill_window();
  }
}

}  // namespace alphaledger
