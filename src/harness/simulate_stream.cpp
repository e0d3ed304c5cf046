// Simulated streams: the counter-based random numbers, the truth of each test, its z-statistic,
// its overlap and its looks (include/alphaledger/simulate.hpp, docs/simulate.md). Numbers in,
// numbers out: no I/O, no logging, no clock, no globals.
#include <algorithm>
#include <bit>
#include <charconv>
#include <cmath>
#include <limits>

#include "alphaledger/anytime.hpp"
#include "alphaledger/offline.hpp"
#include "alphaledger/simulate.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {
namespace {

constexpr double kTwoPi = 6.283185307179586476925286766559;
constexpr double kInvSqrt2 = 0.70710678118654752440084436210485;
constexpr double kMaxLogDouble = 709.0;  // exp(709) < DBL_MAX

// exp(x) capped at exp(709), so an overwhelming likelihood ratio stays a finite e-value.
double capped_exp(double x) { return std::exp(std::min(x, kMaxLogDouble)); }

// The number of later launches a test runs for: Geometric on {0, 1, ...} with mean d, by inversion,
// floor(log u / log q) with q = d / (1 + d), log q = -log1p(1 / d). REQUIRES: d > 0.
double geometric_draw(RandomStream& r, double d) {
  return std::floor(std::log(r.uniform()) / -std::log1p(1.0 / d));
}

// The splitmix64 output function (Steele, Lea & Flood 2014), a bijection of 64-bit words.
std::uint64_t mix64(std::uint64_t z) {
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

}  // namespace

std::uint64_t splitmix64_next(std::uint64_t& state) {
  state += 0x9e3779b97f4a7c15ULL;
  return mix64(state);
}

RandomStream::RandomStream(std::uint64_t seed, std::uint64_t run, std::uint64_t purpose) {
  std::uint64_t key = mix64(mix64(mix64(seed) + run) + purpose);
  for (auto& word : s_) word = splitmix64_next(key);
  if ((s_[0] | s_[1] | s_[2] | s_[3]) == 0) s_[0] = 1;  // the one forbidden xoshiro state
}

std::uint64_t RandomStream::next_u64() {
  // xoshiro256** 1.0 (Blackman & Vigna 2021).
  const std::uint64_t result = std::rotl(s_[1] * 5, 7) * 9;
  const std::uint64_t t = s_[1] << 17;
  s_[2] ^= s_[0];
  s_[3] ^= s_[1];
  s_[1] ^= s_[2];
  s_[0] ^= s_[3];
  s_[2] ^= t;
  s_[3] = std::rotl(s_[3], 45);
  return result;
}

double RandomStream::uniform() { return (static_cast<double>(next_u64() >> 11) + 0.5) * 0x1.0p-53; }

double RandomStream::normal() {
  if (has_spare_) {
    has_spare_ = false;
    return spare_;
  }
  const double radius = std::sqrt(-2.0 * std::log(uniform()));
  const double angle = kTwoPi * uniform();
  spare_ = radius * std::sin(angle);
  has_spare_ = true;
  return radius * std::cos(angle);
}

double upper_tail_p_value(double z) { return 0.5 * std::erfc(z * kInvSqrt2); }

namespace {

// The chance that test t is non-null under the model's pattern; `share` is test t-1's (bursts
// keep it within a block and draw it at a block's first test, from `truth`).
double share_at(const SimulationModel& m, std::uint64_t t, double share, double burst_probability,
                RandomStream& truth) {
  const double f = m.nonnull_fraction;
  const double nd = static_cast<double>(m.tests);
  switch (m.pattern.kind) {
    case NonnullPattern::kConstant:
      return share;
    case NonnullPattern::kRising:
      return 2.0 * f * (static_cast<double>(t) + 0.5) / nd;
    case NonnullPattern::kFalling:
      return 2.0 * f * (nd - static_cast<double>(t) - 0.5) / nd;
    case NonnullPattern::kBursts:
      if (t % m.pattern.burst_length == 0) {
        return truth.uniform() < burst_probability ? m.pattern.burst_share : 0.0;
      }
      return share;
  }
  return share;
}

// What K looks at one test saw: the smallest fixed-horizon and always-valid p-values, and the
// largest and last mixture e-values.
struct LookSummary {
  double p_fixed = 1, p_anytime = 1, e_max = 0, e_last = 1;
};

// K = path.size() looks at a test of mean `mean` whose final noise is `e` (final z `z`): a
// Brownian path on the looks tied to end at the test's own noise. W(k/K) from independent
// N(0, 1/K) steps, then B(s) = W(s) - s W(1) + s e (a Brownian bridge plus s e), so B(1) = e.
LookSummary look_at_test(double mean, double e, double z, RandomStream& paths, std::vector<double>& path,
                         const MixtureSettings& mixture) {
  const std::size_t looks = path.size();
  const double look_sd = std::sqrt(1.0 / static_cast<double>(looks));
  double w = 0;
  for (std::size_t k = 0; k < looks; ++k) path[k] = (w += look_sd * paths.normal());
  const double w_end = path[looks - 1];
  LookSummary out;
  for (std::size_t k = 1; k <= looks; ++k) {
    const bool last = k == looks;
    const double s = last ? 1.0 : static_cast<double>(k) / static_cast<double>(looks);
    const double b = last ? e : path[k - 1] - s * w_end + s * e;
    const double sum = mean * s + b;  // S(s), the cumulative data
    const double zk = last ? z : sum / std::sqrt(s);
    out.p_fixed = std::min(out.p_fixed, upper_tail_p_value(zk));
    const double log_ratio = *log_mixture_likelihood_ratio({sum / s, 1.0 / s}, mixture);
    out.p_anytime = std::min(out.p_anytime, std::min(1.0, std::exp(-log_ratio)));
    out.e_last = capped_exp(log_ratio);
    out.e_max = std::max(out.e_max, out.e_last);
  }
  return out;
}

}  // namespace

void generate_stream(const SimulationModel& m, std::uint64_t seed, std::uint64_t run, SimulatedStream& out,
                     const StreamNeeds& needs) {
  RandomStream truth(seed, run, 1);
  RandomStream effects(seed, run, 2);
  RandomStream noise(seed, run, 3);
  RandomStream durations(seed, run, 4);
  RandomStream paths(seed, run, 5);
  const std::uint64_t n = m.tests;
  out.p_value.resize(n);
  out.is_null.resize(n);
  out.nonnulls = 0;
  const bool overlap = m.mean_duration > 0;
  out.finish_before.resize(overlap ? n : 0);
  out.e_value.resize(needs.e_values ? n : 0);
  const std::uint64_t looks = needs.peeking.looks;
  for (auto* v : {&out.p_min_fixed, &out.p_min_anytime, &out.e_max_mixture, &out.e_last_mixture}) {
    v->resize(looks > 0 ? n : 0);
  }
  std::vector<double> path(looks);  // the cumulative noise W(k / K), k = 1..K
  MixtureSettings mixture;
  mixture.mixture_sd = peeking_mixture_sd(needs.peeking, m);
  mixture.alternative = Alternative::kGreater;  // the simulated tests are one-sided
  const double f = m.nonnull_fraction;
  const double rho = m.correlation.rho;
  const double innovation = std::sqrt(1.0 - rho * rho);  // AR(1)
  const double shared_weight = std::sqrt(rho);           // blocks
  const double own_weight = std::sqrt(1.0 - rho);
  const double burst_probability =
      m.pattern.kind == NonnullPattern::kBursts ? f / m.pattern.burst_share : 0.0;
  double share = f;
  double previous = 0;  // AR(1) state
  double shared = 0;    // block component
  for (std::uint64_t t = 0; t < n; ++t) {
    share = share_at(m, t, share, burst_probability, truth);
    const bool nonnull = truth.uniform() < share;
    double mean = m.null_mean;
    if (nonnull) {
      mean = m.effect;
      if (m.effect_sd > 0) mean += m.effect_sd * effects.normal();
    }
    double e = 0;
    switch (m.correlation.kind) {
      case Correlation::kNone:
        e = noise.normal();
        break;
      case Correlation::kAr1:
        e = t == 0 ? noise.normal() : rho * previous + innovation * noise.normal();
        previous = e;
        break;
      case Correlation::kBlocks:
        if (t % m.correlation.block_size == 0) shared = noise.normal();
        e = shared_weight * shared + own_weight * noise.normal();
        break;
    }
    const double z = mean + e;
    out.p_value[t] = upper_tail_p_value(z);
    out.is_null[t] = nonnull ? 0 : 1;
    out.nonnulls += nonnull ? 1 : 0;
    if (overlap) {
      const double d = geometric_draw(durations, m.mean_duration);
      const double left = static_cast<double>(n - t - 1);  // launches after this one
      out.finish_before[t] = d >= left ? n : t + 1 + static_cast<std::uint64_t>(d);
    }
    if (needs.e_values) out.e_value[t] = capped_exp(m.effect * z - 0.5 * m.effect * m.effect);
    if (looks > 0) {
      const LookSummary l = look_at_test(mean, e, z, paths, path, mixture);
      out.p_min_fixed[t] = l.p_fixed;
      out.p_min_anytime[t] = l.p_anytime;
      out.e_max_mixture[t] = l.e_max;
      out.e_last_mixture[t] = l.e_last;
    }
  }
}

SimulatedStream generate_stream(const SimulationModel& model, std::uint64_t seed, std::uint64_t run,
                                const StreamNeeds& needs) {
  SimulatedStream s;
  generate_stream(model, seed, run, s, needs);
  return s;
}

}  // namespace alphaledger
