// The online rules (docs/methods.md sections 1, 2, 4, 5.2, 6, 7 and 15; docs/rules.md).
#include "alphaledger/rules.hpp"

#include <algorithm>
#include <array>
#include <bit>
#include <charconv>
#include <cmath>
#include <cstring>

#include "core/bytes.hpp"

namespace alphaledger {
namespace {

// Stored on disk: bump when the layout changes. Version 1: counters and accumulators. Version 2:
// version 1's fields, then the running tests (count, then launch number, level, flags each) and
// alpha-investing's reserved payment. A state without running tests is always written as version
// 1, so synchronous streams keep the bytes they had before launch-time levels existed.
constexpr std::uint8_t kStateVersion = 2;
constexpr std::uint8_t kStateVersionSynchronous = 1;
// The running tests kept apart (encode_state_without_running): counts and flags only.
constexpr std::uint8_t kStateVersionApart = 3;

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

// Exact mode sums for a window of future clocks at once. A window of n lanes costs n times one
// sum, so a Rule that decides one test (a ledger opened for one decision) starts small.
constexpr std::size_t kMinLanes = 8;
constexpr std::size_t kMaxLanes = 1024;

// lanes[i] += c * g[i]: one deposit's term added to every lane. Each lane is its own running sum
// (no reassociation), so the loop vectorises and every lane stays bit-identical to a scalar sum.
ALPHALEDGER_VECTOR_CLONES void add_scaled(double* __restrict lanes, double c, const double* __restrict g,
                                          std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) lanes[i] += c * g[i];
}

struct RuleNameEntry {
  RuleKind kind;
  std::string_view name;
};
constexpr std::array<RuleNameEntry, 7> kRuleNames = {{
    {RuleKind::kAlphaSpending, "alpha-spending"},
    {RuleKind::kAlphaInvesting, "alpha-investing"},
    {RuleKind::kLond, "lond"},
    {RuleKind::kLordPlusPlus, "lord++"},
    {RuleKind::kSaffron, "saffron"},
    {RuleKind::kAddis, "addis"},
    {RuleKind::kELond, "e-lond"},
}};

std::string num(double v) {
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v);
  return std::string(buf, ptr);
}

bool is_deposit_rule(RuleKind k) {
  return k == RuleKind::kLordPlusPlus || k == RuleKind::kSaffron || k == RuleKind::kAddis;
}

// Little-endian coding of the state (core/bytes.hpp).
using bytes::put_f64;
using bytes::put_u64;
using bytes::Reader;

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

std::string_view rule_name(RuleKind kind) {
  for (const auto& e : kRuleNames)
    if (e.kind == kind) return e.name;
  return "unknown";
}

Result<RuleKind> parse_rule_name(std::string_view name) {
  for (const auto& e : kRuleNames)
    if (e.name == name) return e.kind;
  return invalid_input("unknown rule '" + std::string(name) +
                       "'; accepted: alpha-spending, alpha-investing, lond, lord++, saffron, addis, e-lond");
}

std::string_view evaluation_name(Evaluation e) { return e == Evaluation::kFast ? "fast" : "exact"; }

Result<Evaluation> parse_evaluation(std::string_view name) {
  if (name == "exact") return Evaluation::kExact;
  if (name == "fast") return Evaluation::kFast;
  return invalid_input("evaluation must be exact or fast, got '" + std::string(name) + "'");
}

std::string default_spending(RuleKind kind) {
  switch (kind) {
    case RuleKind::kAlphaSpending:
      return "power:1.6";
    case RuleKind::kLond:
    case RuleKind::kELond:
      return "jm";
    case RuleKind::kLordPlusPlus:
      return "jm";
    case RuleKind::kSaffron:
      return "power:1.6";
    case RuleKind::kAddis:
      return "power-shift:1.6";
    case RuleKind::kAlphaInvesting:
      return "";
  }
  return "";
}

bool rule_takes(RuleKind kind, std::string_view parameter) {
  if (parameter == "alpha") return true;
  if (parameter == "initial_wealth") return is_deposit_rule(kind) || kind == RuleKind::kAlphaInvesting;
  if (parameter == "candidate_threshold") return kind == RuleKind::kSaffron || kind == RuleKind::kAddis;
  if (parameter == "discard_threshold") return kind == RuleKind::kAddis;
  if (parameter == "payout") return kind == RuleKind::kAlphaInvesting;
  if (parameter == "spending") return kind != RuleKind::kAlphaInvesting;
  if (parameter == "evaluation") return is_deposit_rule(kind);
  return false;
}

Result<RuleConfig> resolve_config(const RuleSpec& spec) {
  auto kind = parse_rule_name(spec.rule);
  if (!kind) return kind.error();
  RuleConfig c;
  c.kind = *kind;
  const std::string rn(spec.rule);
  auto refuse_unused = [&](bool given, std::string_view param) -> Status {
    if (given && !rule_takes(c.kind, param)) {
      return invalid_input(std::string(param) + " does not apply to " + rn);
    }
    return {};
  };
  for (auto [given, param] : std::array<std::pair<bool, std::string_view>, 6>{
           {{spec.initial_wealth.has_value(), "initial_wealth"},
            {spec.candidate_threshold.has_value(), "candidate_threshold"},
            {spec.discard_threshold.has_value(), "discard_threshold"},
            {spec.payout.has_value(), "payout"},
            {spec.spending.has_value(), "spending"},
            {spec.evaluation.has_value(), "evaluation"}}}) {
    if (auto s = refuse_unused(given, param); !s) return s.error();
  }

  c.alpha = spec.alpha.value_or(0.05);
  if (!(c.alpha > 0 && c.alpha < 1)) {
    return invalid_input("alpha must satisfy 0 < alpha < 1, got " + num(c.alpha));
  }
  if (c.kind == RuleKind::kAlphaInvesting) {
    c.initial_wealth = spec.initial_wealth.value_or(c.alpha * (1 - c.alpha));
    c.payout = spec.payout.value_or(c.alpha);
    if (!(c.initial_wealth > 0 && c.initial_wealth <= c.alpha)) {
      return invalid_input("initial_wealth must satisfy 0 < W0 <= alpha = " + num(c.alpha) +
                           " for alpha-investing, got " + num(c.initial_wealth));
    }
    if (!(c.payout >= 0 && c.payout <= c.alpha)) {
      return invalid_input("payout must satisfy 0 <= payout <= alpha = " + num(c.alpha) +
                           " for alpha-investing, got " + num(c.payout));
    }
  }
  if (is_deposit_rule(c.kind)) {
    c.initial_wealth = spec.initial_wealth.value_or(c.alpha / 2);
    if (!(c.initial_wealth >= 0 && c.initial_wealth <= c.alpha)) {
      return invalid_input("initial_wealth must satisfy 0 <= W0 <= alpha = " + num(c.alpha) + " for " + rn +
                           ", got " + num(c.initial_wealth));
    }
    auto e = parse_evaluation(spec.evaluation.value_or("exact"));
    if (!e) return e.error();
    c.evaluation = *e;
  }
  if (c.kind == RuleKind::kSaffron) {
    c.candidate_threshold = spec.candidate_threshold.value_or(0.5);
    if (!(c.candidate_threshold > 0 && c.candidate_threshold < 1)) {
      return invalid_input("candidate_threshold must satisfy 0 < lambda < 1 for saffron, got " +
                           num(c.candidate_threshold));
    }
  }
  if (c.kind == RuleKind::kAddis) {
    c.candidate_threshold = spec.candidate_threshold.value_or(0.25);
    c.discard_threshold = spec.discard_threshold.value_or(0.5);
    if (!(c.discard_threshold > 0 && c.discard_threshold <= 1)) {
      return invalid_input("discard_threshold must satisfy 0 < tau <= 1 for addis, got " +
                           num(c.discard_threshold));
    }
    if (!(c.candidate_threshold > 0 && c.candidate_threshold < c.discard_threshold)) {
      return invalid_input("candidate_threshold must satisfy 0 < lambda < tau = " + num(c.discard_threshold) +
                           " for addis, got " + num(c.candidate_threshold));
    }
  }
  if (c.kind != RuleKind::kAlphaInvesting) {
    auto seq = SpendingSequence::parse(spec.spending.value_or(default_spending(c.kind)));
    if (!seq) return seq.error();
    c.spending = seq->spec();
  }
  return c;
}

bool rule_takes_e_values(RuleKind kind) { return kind == RuleKind::kELond; }

Status validate_e_value(double e) {
  if (!(e >= 0.0) || !std::isfinite(e)) {
    return invalid_input("e_value must be a finite number >= 0, got " + num(e));
  }
  return {};
}

Status validate_p_value(double p) {
  if (!(p >= 0.0 && p <= 1.0)) {
    return invalid_input("p_value must be a number in [0, 1], got " + num(p));
  }
  return {};
}

Rule::Rule(const RuleConfig& config) : config_(config) {
  if (config_.kind != RuleKind::kAlphaInvesting) {
    // resolve_config() validated the spec; a failure here is a programming error.
    sequence_ = SpendingSequence::shared(config_.spending).value();
    if (is_deposit_rule(config_.kind) && config_.evaluation == Evaluation::kFast) {
      mixture_ = &sequence_->mixture();
    }
  }
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      wealth_ = config_.alpha;
      break;
    case RuleKind::kAlphaInvesting:
      wealth_ = config_.initial_wealth;
      break;
    default:
      wealth_ = config_.initial_wealth;
      if (mixture_ != nullptr) {
        head_.assign(mixture_->head.size(), 0.0);
        accumulator_.assign(mixture_->weight.size(), 0.0);
        if (head_.empty()) {
          std::fill(accumulator_.begin(), accumulator_.end(), config_.initial_wealth);
        } else {
          head_[0] = config_.initial_wealth;
          set_head_mask();
        }
        fast_sum_ = mixture_sum();
      } else {
        deposit_clock_.push_back(0);
      }
  }
}

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

double Rule::level_now() const {
  const std::uint64_t t = step_ + 1;
  const double a = config_.alpha;
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
      return a * sequence_->gamma(t);
    case RuleKind::kLond:
    case RuleKind::kELond:  // e-LOND's level is LOND's (Xu & Ramdas 2024)
      return a * sequence_->gamma(t) * static_cast<double>(rejections_ + 1);
    case RuleKind::kAlphaInvesting: {
      const double w = std::max(wealth_ - investing_reserved_, 0.0);
      const double policy = w / static_cast<double>(1 + t - last_rejection_);
      return std::min(policy, w / (1 + w));
    }
    case RuleKind::kLordPlusPlus:
      return deposit_sum();
    case RuleKind::kSaffron: {
      const double lambda = config_.candidate_threshold;
      return std::min(lambda, (1 - lambda) * deposit_sum());
    }
    case RuleKind::kAddis: {
      const double lambda = config_.candidate_threshold;
      return std::min(lambda, (config_.discard_threshold - lambda) * deposit_sum());
    }
  }
  return 0.0;
}

double Rule::next_level() const {
  const auto last = running_.find(step_);
  if (last != running_.end() && !last->second.advanced &&
      (config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis)) {
    // The last launched test is still running: the next launch advances the clock first.
    Rule preview = *this;
    return preview.launch().level;
  }
  return level_now();
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

Outcome Rule::record_e(double e) { return record(e); }  // rejects() reads e as an e-value

Outcome Rule::record(double p) {
  if (!running_.empty()) {
    // Tests are running: the general path (rules_launch.cpp). Without running tests the code
    // below is the same sequence of operations, fused; tests/core/test_launch.cpp compares bits.
    const Reservation r = launch();
    return finish_running(r.launch, p);
  }
  ensure_window();
  Outcome o;
  o.level = level_now();
  o.rejected = rejects(p, o.level);
  o.step = ++step_;
  const double a = config_.alpha;
  switch (config_.kind) {
    case RuleKind::kAlphaSpending:
    case RuleKind::kLond:
    case RuleKind::kELond:
      wealth_ -= a * sequence_->gamma(o.step);
      break;
    case RuleKind::kAlphaInvesting:
      if (o.rejected) {
        wealth_ += config_.payout;
        last_rejection_ = o.step;
      } else {
        wealth_ = std::max(0.0, wealth_ - o.level / (1 - o.level));
      }
      break;
    case RuleKind::kLordPlusPlus:
      wealth_ -= o.level;
      advance(true, o.rejected);
      break;
    case RuleKind::kSaffron: {
      const double lambda = config_.candidate_threshold;
      const bool tick = p > lambda;
      if (tick) wealth_ -= o.level / (1 - lambda);
      advance(tick, o.rejected);
      break;
    }
    case RuleKind::kAddis: {
      const double lambda = config_.candidate_threshold;
      const double tau = config_.discard_threshold;
      const bool tick = p > lambda && p <= tau;
      if (tick) wealth_ -= o.level / (tau - lambda);
      advance(tick, o.rejected);
      break;
    }
  }
  if (o.rejected) ++rejections_;
  o.wealth = wealth_;
  return o;
}

Status Rule::restore_running(std::string_view bytes) {
  Reader r{bytes};
  const std::uint64_t n = r.u64();
  if (!r.ok || n > r.in.size() / 17) return corruption("rule state is truncated (running tests)");
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  std::uint64_t previous = 0;
  for (std::uint64_t i = 0; i < n; ++i) {
    const std::uint64_t launch = r.u64();
    const double level = r.f64();
    const std::uint8_t flags = r.u8();
    if (!r.ok) return corruption("rule state is truncated (running tests)");
    if (launch <= previous || launch > step_) {
      return corruption("rule state is inconsistent: running test " + std::to_string(launch) +
                        " is out of order or beyond the " + std::to_string(step_) + " tests launched");
    }
    if (!(level >= 0.0 && level <= 1.0) || flags > 1 || (flags == 1 && !clocked) ||
        (clocked && flags == 0 && launch != step_)) {
      return corruption("rule state is inconsistent: running test " + std::to_string(launch) +
                        " has an impossible level or clock flag");
    }
    running_.emplace_hint(running_.end(), launch, Running{level, flags == 1});
    previous = launch;
  }
  investing_reserved_ = r.f64();
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes");
  const bool investing = config_.kind == RuleKind::kAlphaInvesting;
  if (!(investing_reserved_ >= 0.0 && investing_reserved_ < 1e300) ||
      (!investing && investing_reserved_ != 0.0) ||
      (investing && running_.empty() && investing_reserved_ != 0)) {
    return corruption("rule state is inconsistent: impossible reserved wealth");
  }
  return {};
}

void Rule::encode_counters(std::string& out, std::uint8_t version) const {
  out.push_back(static_cast<char>(version));
  out.push_back(static_cast<char>(config_.kind));
  out.push_back(static_cast<char>(config_.evaluation));
  put_u64(out, step_);
  put_u64(out, rejections_);
  put_f64(out, wealth_);
  put_u64(out, last_rejection_);
  put_u64(out, clock_);
  put_u64(out, deposit_clock_.size());
  for (auto c : deposit_clock_) put_u64(out, c);
  put_u64(out, head_.size());
  for (double h : head_) put_f64(out, h);
  put_u64(out, accumulator_.size());
  for (double a : accumulator_) put_f64(out, a);
}

std::string Rule::encode_state() const {
  std::string out;
  const bool synchronous = running_.empty() && investing_reserved_ == 0.0;
  encode_counters(out, synchronous ? kStateVersionSynchronous : kStateVersion);
  if (synchronous) return out;
  put_u64(out, running_.size());
  for (const auto& [launch, r] : running_) {
    put_u64(out, launch);
    put_f64(out, r.level);
    out.push_back(static_cast<char>(r.advanced ? 1 : 0));
  }
  put_f64(out, investing_reserved_);
  return out;
}

std::string Rule::encode_state_without_running() const {
  std::string out;
  encode_counters(out, kStateVersionApart);
  put_u64(out, running_.size());
  // Only the test launched last can be running without having advanced the clock (saffron,
  // addis: the next launch advances it), so one flag stands for every running test's flag.
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  const auto last = running_.find(step_);
  out.push_back(static_cast<char>(clocked && last != running_.end() && !last->second.advanced ? 1 : 0));
  put_f64(out, investing_reserved_);
  return out;
}

Status Rule::restore_state(std::string_view bytes) { return restore_any(bytes, nullptr); }

Status Rule::restore_state_without_running(std::string_view bytes, std::span<const RunningTest> running) {
  return restore_any(bytes, &running);
}

Status Rule::restore_apart(std::string_view bytes, std::span<const RunningTest> running) {
  Reader r{bytes};
  const std::uint64_t n = r.u64();
  const std::uint8_t last_pending = r.u8();
  investing_reserved_ = r.f64();
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes (running tests)");
  if (n != running.size()) {
    return corruption("rule state counts " + std::to_string(n) + " running tests but " +
                      std::to_string(running.size()) + " are stored");
  }
  const bool clocked = config_.kind == RuleKind::kSaffron || config_.kind == RuleKind::kAddis;
  if (last_pending > 1 || (last_pending == 1 && !clocked)) {
    return corruption("rule state is inconsistent: impossible clock flag for the test launched last");
  }
  std::uint64_t previous = 0;
  for (const RunningTest& t : running) {
    if (t.launch <= previous || t.launch > step_) {
      return corruption("rule state is inconsistent: running test " + std::to_string(t.launch) +
                        " is out of order or beyond the " + std::to_string(step_) + " tests launched");
    }
    if (!(t.level >= 0.0 && t.level <= 1.0)) {
      return corruption("rule state is inconsistent: running test " + std::to_string(t.launch) +
                        " has an impossible level");
    }
    const bool advanced = clocked && !(last_pending == 1 && t.launch == step_);
    running_.emplace_hint(running_.end(), t.launch, Running{t.level, advanced});
    previous = t.launch;
  }
  if (last_pending == 1 && running_.find(step_) == running_.end()) {
    return corruption("rule state is inconsistent: the test launched last is flagged but not running");
  }
  const bool investing = config_.kind == RuleKind::kAlphaInvesting;
  if (!(investing_reserved_ >= 0.0 && investing_reserved_ < 1e300) ||
      (!investing && investing_reserved_ != 0.0) ||
      (investing && running_.empty() && investing_reserved_ != 0)) {
    return corruption("rule state is inconsistent: impossible reserved wealth");
  }
  return {};
}

Status Rule::restore_any(std::string_view bytes, const std::span<const RunningTest>* running) {
  Reader r{bytes};
  const auto version = r.u8();
  const auto kind = r.u8();
  const auto evaluation = r.u8();
  if (!r.ok || (version != kStateVersion && version != kStateVersionSynchronous &&
                version != kStateVersionApart)) {
    return corruption("rule state has format version " + std::to_string(version) +
                      ", this build reads versions 1, 2 and 3");
  }
  if ((version == kStateVersionApart) != (running != nullptr)) {
    return corruption(version == kStateVersionApart
                          ? "rule state of version 3 keeps its running tests apart, and none were given"
                          : "rule state of version " + std::to_string(version) +
                                " holds its running tests itself, yet a list was given apart");
  }
  if (kind != static_cast<std::uint8_t>(config_.kind) ||
      evaluation != static_cast<std::uint8_t>(config_.evaluation)) {
    return corruption("rule state belongs to another rule or evaluation mode");
  }
  Rule next = *this;
  next.step_ = r.u64();
  next.rejections_ = r.u64();
  next.wealth_ = r.f64();
  next.last_rejection_ = r.u64();
  next.clock_ = r.u64();
  const std::uint64_t nd = r.u64();
  if (!r.ok || nd > r.in.size() / 8) return corruption("rule state is truncated (deposits)");
  next.deposit_clock_.assign(nd, 0);
  for (auto& c : next.deposit_clock_) c = r.u64();
  const std::uint64_t nh = r.u64();
  if (!r.ok || nh != head_.size()) return corruption("rule state has the wrong head size");
  for (auto& h : next.head_) h = r.f64();
  const std::uint64_t na = r.u64();
  if (!r.ok || na != accumulator_.size()) return corruption("rule state has the wrong accumulator count");
  for (auto& a : next.accumulator_) a = r.f64();
  next.running_.clear();
  next.investing_reserved_ = 0;
  if (version == kStateVersion) {
    if (auto s = next.restore_running(r.in); !s) return s.error();
    r.in = {};
  } else if (version == kStateVersionApart) {
    if (auto s = next.restore_apart(r.in, *running); !s) return s.error();
    r.in = {};
  }
  if (!r.ok || !r.in.empty()) return corruption("rule state is truncated or has trailing bytes");
  const bool exact_deposits = is_deposit_rule(config_.kind) && mixture_ == nullptr;
  if (exact_deposits && (nd != next.rejections_ + 1)) {
    return corruption("rule state is inconsistent: deposit count does not match rejections");
  }
  if (next.mixture_ != nullptr) {
    next.fast_sum_ = next.mixture_sum();
    next.set_head_mask();
  }
  next.window_.clear();
  next.gamma_table_.reset();
  next.next_lanes_ = kMinLanes;
  *this = std::move(next);
  return {};
}

}  // namespace alphaledger
