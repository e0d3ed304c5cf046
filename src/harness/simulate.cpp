// Simulated streams of one-sided z-tests and the metrics over runs (include/alphaledger/simulate.hpp,
// docs/simulate.md). Numbers in, numbers out: no I/O, no logging, no clock, no globals.
#include "alphaledger/simulate.hpp"

#include <algorithm>
#include <bit>
#include <charconv>
#include <cmath>
#include <limits>

#include "alphaledger/anytime.hpp"
#include "alphaledger/offline.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {
namespace {

constexpr double kTwoPi = 6.283185307179586476925286766559;
constexpr double kInvSqrt2 = 0.70710678118654752440084436210485;
constexpr std::uint64_t kMaxTests = 100'000'000;
constexpr double kMaxMean = 40;
constexpr double kMaxMeanDuration = 1'000'000;
constexpr std::uint64_t kMaxLooks = 100'000;
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

// For messages: format_number, but NaN written as "nan" rather than as an empty cell.
std::string num(double v) { return std::isnan(v) ? "nan" : format_number(v); }
std::optional<double> parse_double(std::string_view s) { return read_finite_number(s); }
std::optional<std::uint64_t> parse_count(std::string_view s) { return read_whole_number(s); }

std::vector<std::string_view> split_colons(std::string_view s) {
  std::vector<std::string_view> parts;
  std::size_t start = 0;
  while (true) {
    const std::size_t c = s.find(':', start);
    parts.push_back(s.substr(start, c == std::string_view::npos ? std::string_view::npos : c - start));
    if (c == std::string_view::npos) break;
    start = c + 1;
  }
  return parts;
}

double sample_se(double sum, double sum_sq, double n) {
  if (n < 2) return std::numeric_limits<double>::quiet_NaN();
  const double mean = sum / n;
  const double ss = std::max(0.0, sum_sq - n * mean * mean);
  return std::sqrt(ss / (n - 1) / n);
}

}  // namespace

// ---------------------------------------------------------------------------------------------

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

// ---------------------------------------------------------------------------------------------

Result<PatternSpec> parse_nonnull_pattern(std::string_view text) {
  const std::string accepted =
      "; accepted: constant, bursts, bursts:LENGTH, bursts:LENGTH:SHARE (LENGTH a whole number >= 1, "
      "0 < SHARE <= 1), rising, falling";
  const auto bad = [&](const std::string& why) -> Error {
    return invalid_field("nonnull_pattern", why + ", got '" + std::string(text) + "'" + accepted);
  };
  PatternSpec p;
  if (text == "constant") return p;
  if (text == "rising") {
    p.kind = NonnullPattern::kRising;
    return p;
  }
  if (text == "falling") {
    p.kind = NonnullPattern::kFalling;
    return p;
  }
  const auto parts = split_colons(text);
  if (parts[0] != "bursts" || parts.size() > 3) return bad("is not a known pattern");
  p.kind = NonnullPattern::kBursts;
  if (parts.size() >= 2) {
    const auto len = parse_count(parts[1]);
    if (!len || *len < 1 || *len > kMaxTests) return bad("needs LENGTH a whole number in [1, 100000000]");
    p.burst_length = *len;
  }
  if (parts.size() == 3) {
    const auto share = parse_double(parts[2]);
    if (!share || !(*share > 0 && *share <= 1)) return bad("needs SHARE in (0, 1]");
    p.burst_share = *share;
  }
  return p;
}

std::string pattern_text(const PatternSpec& p) {
  switch (p.kind) {
    case NonnullPattern::kConstant:
      return "constant";
    case NonnullPattern::kRising:
      return "rising";
    case NonnullPattern::kFalling:
      return "falling";
    case NonnullPattern::kBursts:
      return "bursts:" + std::to_string(p.burst_length) + ":" + num(p.burst_share);
  }
  return "constant";
}

Result<CorrelationSpec> parse_correlation(std::string_view text) {
  const std::string accepted =
      "; accepted: none, ar1:RHO, blocks:SIZE:RHO (0 <= RHO < 1, SIZE a whole number >= 1)";
  const auto bad = [&](const std::string& why) -> Error {
    return invalid_field("correlation", why + ", got '" + std::string(text) + "'" + accepted);
  };
  CorrelationSpec c;
  if (text == "none") return c;
  const auto parts = split_colons(text);
  if (parts[0] == "ar1" && parts.size() == 2) {
    const auto rho = parse_double(parts[1]);
    if (!rho || !(*rho >= 0 && *rho < 1)) return bad("needs RHO in [0, 1)");
    c.kind = Correlation::kAr1;
    c.rho = *rho;
    return c;
  }
  if (parts[0] == "blocks" && parts.size() == 3) {
    const auto size = parse_count(parts[1]);
    if (!size || *size < 1 || *size > kMaxTests) return bad("needs SIZE a whole number in [1, 100000000]");
    const auto rho = parse_double(parts[2]);
    if (!rho || !(*rho >= 0 && *rho < 1)) return bad("needs RHO in [0, 1)");
    c.kind = Correlation::kBlocks;
    c.block_size = *size;
    c.rho = *rho;
    return c;
  }
  return bad("is not a known form");
}

std::string correlation_text(const CorrelationSpec& c) {
  switch (c.kind) {
    case Correlation::kNone:
      return "none";
    case Correlation::kAr1:
      return "ar1:" + num(c.rho);
    case Correlation::kBlocks:
      return "blocks:" + std::to_string(c.block_size) + ":" + num(c.rho);
  }
  return "none";
}

Status validate_model(const SimulationModel& m) {
  if (m.tests < 1 || m.tests > kMaxTests) {
    return invalid_field("tests", "must be a whole number in [1, 100000000], got " + std::to_string(m.tests));
  }
  if (!(m.nonnull_fraction >= 0 && m.nonnull_fraction <= 1)) {
    return invalid_field("nonnull_fraction", "must be in [0, 1], got " + num(m.nonnull_fraction));
  }
  if (!(std::abs(m.effect) <= kMaxMean)) {
    return invalid_field("effect", "must be a number in [-40, 40], got " + num(m.effect));
  }
  if (!(m.effect_sd >= 0 && m.effect_sd <= kMaxMean)) {
    return invalid_field("effect_sd", "must be in [0, 40], got " + num(m.effect_sd));
  }
  if (!(std::abs(m.null_mean) <= kMaxMean)) {
    return invalid_field("null_mean", "must be a number in [-40, 40], got " + num(m.null_mean));
  }
  switch (m.pattern.kind) {
    case NonnullPattern::kConstant:
      break;
    case NonnullPattern::kRising:
    case NonnullPattern::kFalling:
      if (m.nonnull_fraction > 0.5) {
        return invalid_field("nonnull_pattern", pattern_text(m.pattern) +
                             " goes from 0 to twice the non-null fraction, so it needs "
                             "a non-null fraction <= 0.5, got " +
                             num(m.nonnull_fraction));
      }
      break;
    case NonnullPattern::kBursts:
      if (!(m.pattern.burst_length >= 1 && m.pattern.burst_share > 0 && m.pattern.burst_share <= 1)) {
        return invalid_field("nonnull_pattern", "bursts needs LENGTH >= 1 and SHARE in (0, 1]");
      }
      if (m.nonnull_fraction > m.pattern.burst_share) {
        return invalid_field("nonnull_pattern", pattern_text(m.pattern) +
                             " needs a non-null fraction <= the share inside a burst (" +
                             num(m.pattern.burst_share) + "), got " + num(m.nonnull_fraction));
      }
      break;
  }
  if (m.correlation.kind != Correlation::kNone && !(m.correlation.rho >= 0 && m.correlation.rho < 1)) {
    return invalid_field("correlation", "needs RHO in [0, 1), got " + num(m.correlation.rho));
  }
  if (m.correlation.kind == Correlation::kBlocks && m.correlation.block_size < 1) {
    return invalid_field("correlation", "blocks needs SIZE >= 1");
  }
  if (!(m.mean_duration >= 0 && m.mean_duration <= kMaxMeanDuration)) {
    return invalid_field("mean_duration", "must be a number of launches in [0, 1000000], got " +
                         num(m.mean_duration));
  }
  return {};
}

Status validate_peeking(const PeekingSpec& p) {
  if (p.looks > kMaxLooks) {
    return invalid_field("peeking", "must be a whole number of looks in [0, 100000], got " +
                         std::to_string(p.looks));
  }
  if (!(std::isfinite(p.mixture_sd) && p.mixture_sd >= 0 && p.mixture_sd <= kMaxMean)) {
    return invalid_field("mixture_sd", "must be a number in (0, 40] (0: the effect), got " +
                         num(p.mixture_sd));
  }
  return {};
}

double peeking_mixture_sd(const PeekingSpec& p, const SimulationModel& m) {
  if (p.mixture_sd > 0) return p.mixture_sd;
  return m.effect != 0 ? std::abs(m.effect) : 1.0;
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

// ---------------------------------------------------------------------------------------------

RunTally tally_decisions(const SimulatedStream& stream, const std::vector<bool>& rejected) {
  RunTally t;
  t.nonnulls = stream.nonnulls;
  for (std::size_t i = 0; i < rejected.size(); ++i) {
    if (!rejected[i]) continue;
    ++t.rejections;
    t.false_discoveries += stream.is_null[i];
  }
  return t;
}

std::string_view evidence_suffix(Evidence evidence) {
  switch (evidence) {
    case Evidence::kFinal:
      return "";
    case Evidence::kPeekFixed:
      return ":peek-fixed";
    case Evidence::kPeekAnytime:
      return ":peek-anytime";
    case Evidence::kPeekMixture:
      return ":peek-mixture";
  }
  return "";
}

SimulationPlan::SimulationPlan(std::vector<Procedure> procedures, PeekingSpec peeking) : peeking_(peeking) {
  for (const auto& p : procedures) {
    std::vector<Evidence> kinds = {Evidence::kFinal};
    if (const auto* rc = std::get_if<RuleConfig>(&p.config); rc && peeking.looks > 0) {
      if (rule_takes_e_values(rc->kind)) {
        kinds.push_back(Evidence::kPeekMixture);
      } else {
        kinds.push_back(Evidence::kPeekFixed);
        kinds.push_back(Evidence::kPeekAnytime);
      }
    }
    for (Evidence kind : kinds) {
      Procedure row = p;
      row.name += evidence_suffix(kind);
      rows_.push_back(std::move(row));
      evidence_.push_back(kind);
      if (const auto* rc = std::get_if<RuleConfig>(&p.config)) {
        prototypes_.emplace_back(Rule(*rc));
      } else {
        prototypes_.emplace_back(std::nullopt);
      }
    }
  }
}

StreamNeeds SimulationPlan::needs() const {
  StreamNeeds n;
  n.peeking = peeking_;
  for (const auto& p : rows_) {
    if (const auto* rc = std::get_if<RuleConfig>(&p.config)) {
      n.e_values = n.e_values || rule_takes_e_values(rc->kind);
    } else if (std::get<OfflineConfig>(p.config).method == OfflineMethod::kEBh) {
      n.e_values = true;
    }
  }
  return n;
}

namespace {

// The order in which running tests finish: tests grouped by the launch they finish before (n: at
// the end), in launch order within a group (a stable counting sort). first[k]..first[k+1] index
// `order` for the tests that finish just before launch k.
struct FinishSchedule {
  std::vector<std::uint64_t> first;
  std::vector<std::uint64_t> order;

  explicit FinishSchedule(const std::vector<std::uint64_t>& finish_before) {
    const std::size_t n = finish_before.size();
    first.assign(n + 2, 0);
    for (auto f : finish_before) ++first[f + 1];
    for (std::size_t k = 1; k < first.size(); ++k) first[k] += first[k - 1];
    order.resize(n);
    std::vector<std::uint64_t> next(first.begin(), first.end() - 1);
    for (std::size_t t = 0; t < n; ++t) order[next[finish_before[t]]++] = t;
  }
};

// The evidence test t reports when it finishes, given the level reserved at its launch. A test
// that stops early reports the evidence that stopped it; any value at or past the level gives the
// same decision and the same state, so the extreme over the looks stands for it.
double reported_evidence(const SimulatedStream& s, Evidence evidence, bool takes_e, std::size_t t,
                         double level) {
  switch (evidence) {
    case Evidence::kFinal:
      return takes_e ? s.e_value[t] : s.p_value[t];
    case Evidence::kPeekFixed:  // stop at the first look with p <= level, else run to the end
      return s.p_min_fixed[t] <= level ? s.p_min_fixed[t] : s.p_value[t];
    case Evidence::kPeekAnytime:  // the running minimum, whether the test stopped early or not
      return s.p_min_anytime[t];
    case Evidence::kPeekMixture:  // stop when the ratio reaches 1 / level, else its value at the end
      return s.e_max_mixture[t] >= 1.0 / level ? s.e_max_mixture[t] : s.e_last_mixture[t];
  }
  return s.p_value[t];
}

RunTally decide_by_events(Rule rule, const SimulatedStream& s, Evidence evidence,
                          const FinishSchedule& schedule) {
  RunTally tally;
  tally.nonnulls = s.nonnulls;
  const bool takes_e = rule_takes_e_values(rule.config().kind);
  const std::size_t n = s.p_value.size();
  std::vector<Reservation> reserved(n);
  const auto finish = [&](std::size_t t) {
    const double x = reported_evidence(s, evidence, takes_e, t, reserved[t].level);
    auto o = takes_e ? rule.finish_e(reserved[t].launch, x) : rule.finish(reserved[t].launch, x);
    if (o.ok() && o->rejected) {
      ++tally.rejections;
      tally.false_discoveries += s.is_null[t];
    }
  };
  for (std::size_t k = 0; k <= n; ++k) {
    for (std::uint64_t i = schedule.first[k]; i < schedule.first[k + 1]; ++i) finish(schedule.order[i]);
    if (k < n) reserved[k] = rule.launch();
  }
  return tally;
}

}  // namespace

std::vector<RunTally> SimulationPlan::decide(const SimulatedStream& stream) const {
  std::vector<RunTally> out;
  out.reserve(rows_.size());
  const std::size_t n = stream.p_value.size();
  std::optional<FinishSchedule> schedule;
  for (std::size_t i = 0; i < rows_.size(); ++i) {
    RunTally t;
    t.nonnulls = stream.nonnulls;
    if (prototypes_[i]) {
      const bool takes_e = rule_takes_e_values(prototypes_[i]->config().kind);
      if (evidence_[i] == Evidence::kFinal && stream.finish_before.empty()) {
        Rule rule = *prototypes_[i];  // synchronous: record(), today's rules exactly
        for (std::size_t k = 0; k < n; ++k) {
          const bool rejected =
              takes_e ? rule.record_e(stream.e_value[k]).rejected : rule.record(stream.p_value[k]).rejected;
          if (rejected) {
            ++t.rejections;
            t.false_discoveries += stream.is_null[k];
          }
        }
      } else {
        if (!schedule) {
          if (stream.finish_before.empty()) {
            std::vector<std::uint64_t> next(n);
            for (std::size_t k = 0; k < n; ++k) next[k] = k + 1;
            schedule.emplace(next);
          } else {
            schedule.emplace(stream.finish_before);
          }
        }
        t = decide_by_events(*prototypes_[i], stream, evidence_[i], *schedule);
      }
    } else {
      const auto& oc = std::get<OfflineConfig>(rows_[i].config);
      const OfflineDecisions od =
          oc.method == OfflineMethod::kEBh  ? e_benjamini_hochberg(stream.e_value, oc.alpha)
          : oc.method == OfflineMethod::kBh ? benjamini_hochberg(stream.p_value, oc.alpha)
                                            : storey_bh(stream.p_value, oc.alpha, oc.candidate_threshold);
      t = tally_decisions(stream, od.rejected);
    }
    out.push_back(t);
  }
  return out;
}

std::vector<RunTally> simulate_run(const SimulationPlan& plan, const SimulationModel& model,
                                   std::uint64_t seed, std::uint64_t run) {
  return plan.decide(generate_stream(model, seed, run, plan.needs()));
}

// ---------------------------------------------------------------------------------------------

void MetricTotals::add(const RunTally& r) {
  const double rv = static_cast<double>(r.rejections);
  const double vv = static_cast<double>(r.false_discoveries);
  const double r1v = std::max(rv, 1.0);
  const double fdp_run = vv / r1v;
  ++runs;
  rejections += rv;
  fdp += fdp_run;
  fdp_sq += fdp_run * fdp_run;
  v += vv;
  v_sq += vv * vv;
  r1 += r1v;
  r1_sq += r1v * r1v;
  v_r1 += vv * r1v;
  r_sq += rv * rv;
  v_r += vv * rv;
  any_false += r.false_discoveries >= 1 ? 1 : 0;
  if (r.nonnulls > 0) {
    const double pw = (rv - vv) / static_cast<double>(r.nonnulls);
    ++power_runs;
    power += pw;
    power_sq += pw * pw;
  }
}

void MetricTotals::merge(const MetricTotals& o) {
  runs += o.runs;
  rejections += o.rejections;
  fdp += o.fdp;
  fdp_sq += o.fdp_sq;
  v += o.v;
  v_sq += o.v_sq;
  r1 += o.r1;
  r1_sq += o.r1_sq;
  v_r1 += o.v_r1;
  r_sq += o.r_sq;
  v_r += o.v_r;
  any_false += o.any_false;
  power_runs += o.power_runs;
  power += o.power;
  power_sq += o.power_sq;
}

std::string_view error_metric_name(ErrorMetric metric) {
  switch (metric) {
    case ErrorMetric::kFdr:
      return "FDR";
    case ErrorMetric::kMfdrEta:
      return "mFDR_eta";
    case ErrorMetric::kFwer:
      return "FWER";
  }
  return "FDR";
}

ErrorMetric promised_metric(const Procedure& procedure) {
  if (const auto* rc = std::get_if<RuleConfig>(&procedure.config)) {
    if (rc->kind == RuleKind::kAlphaSpending) return ErrorMetric::kFwer;
    if (rc->kind == RuleKind::kAlphaInvesting) return ErrorMetric::kMfdrEta;
  }
  return ErrorMetric::kFdr;
}

bool exceeds_by_three_se(double estimate, double se, double target) {
  if (std::isnan(se) || std::isnan(estimate)) return false;
  return estimate > target + 3.0 * se;
}

ProcedureSummary summarize_totals(const Procedure& procedure, const MetricTotals& t, std::uint64_t tests) {
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  ProcedureSummary s;
  s.rule = procedure.name;
  s.runs = t.runs;
  s.tests = tests;
  if (const auto* rc = std::get_if<RuleConfig>(&procedure.config)) {
    s.target = rc->alpha;
    if (rc->kind == RuleKind::kAlphaInvesting) s.eta = rc->initial_wealth / rc->alpha;
    if (rc->kind == RuleKind::kLordPlusPlus || rc->kind == RuleKind::kSaffron ||
        rc->kind == RuleKind::kAddis) {
      s.evaluation = rc->evaluation;
    }
  } else {
    s.target = std::get<OfflineConfig>(procedure.config).alpha;
  }
  s.metric = promised_metric(procedure);
  const double n = static_cast<double>(t.runs);
  if (t.runs == 0) {
    s.mean_rejections = s.fdr = s.fdr_se = s.mfdr = s.mfdr_se = s.power = s.power_se = s.fwer = s.fwer_se =
        kNaN;
    s.promised = s.promised_se = kNaN;
    return s;
  }
  s.mean_rejections = t.rejections / n;
  s.fdr = t.fdp / n;
  s.fdr_se = sample_se(t.fdp, t.fdp_sq, n);
  s.mfdr = t.v / t.r1;
  if (t.runs >= 2) {
    const double m = s.mfdr;
    const double resid = std::max(0.0, t.v_sq - 2.0 * m * t.v_r1 + m * m * t.r1_sq);
    s.mfdr_se = std::sqrt(resid / (n * (n - 1))) / (t.r1 / n);
  } else {
    s.mfdr_se = kNaN;
  }
  s.fwer = static_cast<double>(t.any_false) / n;
  s.fwer_se = t.runs >= 2 ? std::sqrt(s.fwer * (1 - s.fwer) / (n - 1)) : kNaN;
  if (t.power_runs > 0) {
    const double pn = static_cast<double>(t.power_runs);
    s.power = t.power / pn;
    s.power_se = sample_se(t.power, t.power_sq, pn);
  } else {
    s.power = s.power_se = kNaN;
  }
  switch (s.metric) {
    case ErrorMetric::kFdr:
      s.promised = s.fdr;
      s.promised_se = s.fdr_se;
      break;
    case ErrorMetric::kFwer:
      s.promised = s.fwer;
      s.promised_se = s.fwer_se;
      break;
    case ErrorMetric::kMfdrEta: {
      // Foster & Stine (2008): E[V] / (E[R] + eta), as a ratio of means over runs.
      const double eta = s.eta;
      const double denominator = t.rejections / n + eta;
      const double m = (t.v / n) / denominator;
      s.promised = m;
      if (t.runs >= 2) {
        const double sum_d_sq = t.r_sq + 2 * eta * t.rejections + n * eta * eta;  // sum (R_i + eta)^2
        const double sum_v_d = t.v_r + eta * t.v;                                 // sum V_i (R_i + eta)
        const double resid = std::max(0.0, t.v_sq - 2.0 * m * sum_v_d + m * m * sum_d_sq);
        s.promised_se = std::sqrt(resid / (n * (n - 1))) / denominator;
      } else {
        s.promised_se = kNaN;
      }
      break;
    }
  }
  s.exceeds_target = exceeds_by_three_se(s.promised, s.promised_se, s.target);
  return s;
}

}  // namespace alphaledger
