// Simulated streams of one-sided z-tests and the metrics over runs (include/alphaledger/simulate.hpp,
// docs/simulate.md). Numbers in, numbers out: no I/O, no logging, no clock, no globals.
#include "alphaledger/simulate.hpp"
#include "alphaledger/text.hpp"

#include <algorithm>
#include <bit>
#include <charconv>
#include <cmath>
#include <limits>

#include "alphaledger/offline.hpp"

namespace alphaledger {
namespace {

constexpr double kTwoPi = 6.283185307179586476925286766559;
constexpr double kInvSqrt2 = 0.70710678118654752440084436210485;
constexpr std::uint64_t kMaxTests = 100'000'000;
constexpr double kMaxMean = 40;

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
    return invalid_input("--nonnull-pattern " + why + ", got '" + std::string(text) + "'" + accepted);
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
    return invalid_input("--correlation " + why + ", got '" + std::string(text) + "'" + accepted);
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
    return invalid_input("--tests must be a whole number in [1, 100000000], got " + std::to_string(m.tests));
  }
  if (!(m.nonnull_fraction >= 0 && m.nonnull_fraction <= 1)) {
    return invalid_input("--nonnull-fraction must be in [0, 1], got " + num(m.nonnull_fraction));
  }
  if (!(std::abs(m.effect) <= kMaxMean)) {
    return invalid_input("--effect must be a number in [-40, 40], got " + num(m.effect));
  }
  if (!(m.effect_sd >= 0 && m.effect_sd <= kMaxMean)) {
    return invalid_input("--effect-sd must be in [0, 40], got " + num(m.effect_sd));
  }
  if (!(std::abs(m.null_mean) <= kMaxMean)) {
    return invalid_input("--null-mean must be a number in [-40, 40], got " + num(m.null_mean));
  }
  switch (m.pattern.kind) {
    case NonnullPattern::kConstant:
      break;
    case NonnullPattern::kRising:
    case NonnullPattern::kFalling:
      if (m.nonnull_fraction > 0.5) {
        return invalid_input("--nonnull-pattern " + pattern_text(m.pattern) +
                             " goes from 0 to twice the non-null fraction, so it needs "
                             "--nonnull-fraction <= 0.5, got " +
                             num(m.nonnull_fraction));
      }
      break;
    case NonnullPattern::kBursts:
      if (!(m.pattern.burst_length >= 1 && m.pattern.burst_share > 0 && m.pattern.burst_share <= 1)) {
        return invalid_input("--nonnull-pattern bursts needs LENGTH >= 1 and SHARE in (0, 1]");
      }
      if (m.nonnull_fraction > m.pattern.burst_share) {
        return invalid_input("--nonnull-pattern " + pattern_text(m.pattern) +
                             " needs --nonnull-fraction <= the share inside a burst (" +
                             num(m.pattern.burst_share) + "), got " + num(m.nonnull_fraction));
      }
      break;
  }
  if (m.correlation.kind != Correlation::kNone && !(m.correlation.rho >= 0 && m.correlation.rho < 1)) {
    return invalid_input("--correlation needs RHO in [0, 1), got " + num(m.correlation.rho));
  }
  if (m.correlation.kind == Correlation::kBlocks && m.correlation.block_size < 1) {
    return invalid_input("--correlation blocks needs SIZE >= 1");
  }
  return {};
}

double upper_tail_p_value(double z) { return 0.5 * std::erfc(z * kInvSqrt2); }

void generate_stream(const SimulationModel& m, std::uint64_t seed, std::uint64_t run, SimulatedStream& out) {
  RandomStream truth(seed, run, 1);
  RandomStream effects(seed, run, 2);
  RandomStream noise(seed, run, 3);
  const std::uint64_t n = m.tests;
  out.p_value.resize(n);
  out.is_null.resize(n);
  out.nonnulls = 0;
  const double f = m.nonnull_fraction;
  const double nd = static_cast<double>(n);
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
    switch (m.pattern.kind) {
      case NonnullPattern::kConstant:
        break;
      case NonnullPattern::kRising:
        share = 2.0 * f * (static_cast<double>(t) + 0.5) / nd;
        break;
      case NonnullPattern::kFalling:
        share = 2.0 * f * (nd - static_cast<double>(t) - 0.5) / nd;
        break;
      case NonnullPattern::kBursts:
        if (t % m.pattern.burst_length == 0) {
          share = truth.uniform() < burst_probability ? m.pattern.burst_share : 0.0;
        }
        break;
    }
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
    out.p_value[t] = upper_tail_p_value(mean + e);
    out.is_null[t] = nonnull ? 0 : 1;
    out.nonnulls += nonnull ? 1 : 0;
  }
}

SimulatedStream generate_stream(const SimulationModel& model, std::uint64_t seed, std::uint64_t run) {
  SimulatedStream s;
  generate_stream(model, seed, run, s);
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

SimulationPlan::SimulationPlan(std::vector<Procedure> procedures) : procedures_(std::move(procedures)) {
  for (const auto& p : procedures_) {
    if (const auto* rc = std::get_if<RuleConfig>(&p.config)) {
      prototypes_.emplace_back(Rule(*rc));
    } else {
      prototypes_.emplace_back(std::nullopt);
    }
  }
}

std::vector<RunTally> SimulationPlan::decide(const SimulatedStream& stream) const {
  std::vector<RunTally> out;
  out.reserve(procedures_.size());
  const std::size_t n = stream.p_value.size();
  for (std::size_t i = 0; i < procedures_.size(); ++i) {
    RunTally t;
    t.nonnulls = stream.nonnulls;
    if (prototypes_[i]) {
      Rule rule = *prototypes_[i];
      for (std::size_t k = 0; k < n; ++k) {
        if (rule.record(stream.p_value[k]).rejected) {
          ++t.rejections;
          t.false_discoveries += stream.is_null[k];
        }
      }
    } else {
      const auto& oc = std::get<OfflineConfig>(procedures_[i].config);
      const OfflineDecisions od = oc.method == OfflineMethod::kBh
                                      ? benjamini_hochberg(stream.p_value, oc.alpha)
                                      : storey_bh(stream.p_value, oc.alpha, oc.candidate_threshold);
      t = tally_decisions(stream, od.rejected);
    }
    out.push_back(t);
  }
  return out;
}

std::vector<RunTally> simulate_run(const SimulationPlan& plan, const SimulationModel& model,
                                   std::uint64_t seed, std::uint64_t run) {
  return plan.decide(generate_stream(model, seed, run));
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
