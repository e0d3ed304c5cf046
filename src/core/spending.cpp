// Spending sequences and their geometric-mixture versions (docs/methods.md sections 13 and 15).
#include "alphaledger/spending.hpp"

#include <algorithm>
#include <atomic>
#include <charconv>
#include <cmath>
#include <iterator>
#include <limits>
#include <map>
#include <mutex>
#include <numeric>

#include "core/math_policy.hpp"
#include "core/spending_fit.hpp"

namespace alphaledger {
namespace {

// gamma_j is read from a table for j <= kTableSize and computed from the formula past it (the same
// bits either way: the table holds the formula's values). No value is computed when a sequence is
// made: the table is filled on the first gamma_j after kLazyMisses calls that computed gamma_j
// directly, and table() (exact evaluation) grows its own in steps of kTableStep values. A read
// command decides nothing and needs a handful of values: filling 65,536 values was 10-20% of its
// CPU time, and the 4,096 made eagerly after that still 19% of its instructions (docs/benchmarks.md
// "CLI fixed cost", "libpq loaded on demand").
constexpr std::size_t kTableSize = 65536;
constexpr std::uint32_t kLazyMisses = 1024;  // formula calls before the table is filled
constexpr std::uint64_t kTableStep = 512;    // table() sizes are multiples of this

double jm_shape(double j) {
  const double l = std::log(j);
  return std::log(std::max(j, 2.0)) / (j * std::exp(std::sqrt(l)));
}

Result<double> parse_number(std::string_view text, std::string_view spec) {
  double v = 0;
  const char* first = text.data();
  const char* last = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(first, last, v);
  if (text.empty() || ec != std::errc() || ptr != last || !std::isfinite(v)) {
    return invalid_input("spending sequence '" + std::string(spec) + "': '" + std::string(text) +
                         "' is not a number");
  }
  return v;
}

std::string shortest(double v) {
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v);
  return std::string(buf, ptr);
}

}  // namespace

double jm_shape_sum() {
  constexpr std::uint64_t kN = 100000;
  // Neumaier summation of the exact terms j < N.
  double sum = 0, comp = 0;
  for (std::uint64_t j = 1; j < kN; ++j) {
    const double t = jm_shape(static_cast<double>(j));
    const double s = sum + t;
    comp += std::abs(sum) >= std::abs(t) ? (sum - s) + t : (t - s) + sum;
    sum = s;
  }
  // Euler–Maclaurin tail from N: integral + f(N)/2 - f'(N)/12.
  const double n = static_cast<double>(kN);
  const double l = std::log(n);
  const double a = std::sqrt(l);
  const double integral = 2 * std::exp(-a) * (a * a * a + 3 * a * a + 6 * a + 6);
  const double deriv = std::exp(-a) / (n * n) * (1 - a / 2 - l);
  return sum + comp + integral + jm_shape(n) / 2 - deriv / 12;
}

struct SpendingSequence::GrowingTable {
  std::mutex mutex;
  std::shared_ptr<const std::vector<double>> current;
  // gamma_j for j <= kTableSize, filled once after kLazyMisses calls of gamma().
  std::atomic<bool> full_ready{false};
  std::vector<double> full;
  // gamma_j past the eager part computed from the formula before the table is filled: a few
  // such calls (fitting fast mode's mixture makes about 30) do not pay for 61,440 values.
  std::atomic<std::uint32_t> misses{0};
};

struct SpendingSequence::LazyMixture {
  std::once_flag once;
  GeometricMixture value;
};

Result<SpendingSequence> SpendingSequence::parse(std::string_view spec) {
  SpendingSequence seq;
  const auto colon = spec.find(':');
  const std::string_view name = spec.substr(0, colon);
  const bool has_param = colon != std::string_view::npos;
  const std::string_view param_text = has_param ? spec.substr(colon + 1) : std::string_view{};
  constexpr const char* kAccepted = "accepted: jm, jm:C, power:S, power-shift:S";
  if (name == "jm") {
    seq.kind_ = SpendingKind::kJm;
    seq.parameter_ = kJmConstant;
    if (has_param) {
      auto c = parse_number(param_text, spec);
      if (!c) return c.error();
      if (*c <= 0)
        return invalid_input("spending sequence '" + std::string(spec) + "': jm:C needs C > 0, got " +
                             shortest(*c));
      const double total = *c * jm_shape_sum();
      if (total > 1.0) {
        return invalid_input("spending sequence '" + std::string(spec) +
                             "': the sequence must sum to at most 1, but C = " + shortest(*c) + " gives " +
                             shortest(total) + "; jm:C needs C <= " + shortest(1.0 / jm_shape_sum()));
      }
      seq.parameter_ = *c;
    }
    seq.normaliser_ = seq.parameter_;
    seq.spec_ = has_param ? "jm:" + shortest(seq.parameter_) : "jm";
  } else if (name == "power" || name == "power-shift") {
    if (!has_param)
      return invalid_input("spending sequence '" + std::string(spec) + "' needs an exponent, e.g. " +
                           std::string(name) + ":1.6; " + kAccepted);
    auto s = parse_number(param_text, spec);
    if (!s) return s.error();
    if (!(*s > 1.0) || *s > 50) {
      return invalid_input("spending sequence '" + std::string(spec) + "': " + std::string(name) +
                           ":S needs 1 < S <= 50 (the sum must be finite), got " + shortest(*s));
    }
    seq.kind_ = name == "power" ? SpendingKind::kPower : SpendingKind::kPowerShift;
    seq.parameter_ = *s;
    const double z = detail::zeta(*s);
    seq.normaliser_ = 1.0 / (seq.kind_ == SpendingKind::kPower ? z : z - 1.0);
    seq.spec_ = std::string(name) + ":" + shortest(*s);
  } else {
    return invalid_input("unknown spending sequence '" + std::string(spec) + "'; " + kAccepted);
  }
  // No table yet: gamma_j and table() give the same bits, computed when first asked for.
  seq.grown_ = std::make_shared<GrowingTable>();
  seq.grown_->current = std::make_shared<const std::vector<double>>();
  seq.mixture_ = std::make_shared<LazyMixture>();
  return seq;
}

double SpendingSequence::closed_form(std::uint64_t j) const {
  const double x = static_cast<double>(j);
  switch (kind_) {
    case SpendingKind::kJm:
      return normaliser_ * jm_shape(x);
    case SpendingKind::kPower:
      return normaliser_ * std::pow(x, -parameter_);
    case SpendingKind::kPowerShift:
      return normaliser_ * std::pow(x + 1.0, -parameter_);
  }
  return 0.0;
}

double SpendingSequence::gamma(std::uint64_t j) const {
  if (j == 0) return 0.0;
  if (j > kTableSize) return closed_form(j);
  GrowingTable& g = *grown_;
  if (!g.full_ready.load(std::memory_order_acquire)) {
    if (g.misses.fetch_add(1, std::memory_order_relaxed) < kLazyMisses) return closed_form(j);
    std::lock_guard lock(g.mutex);
    if (!g.full_ready.load(std::memory_order_relaxed)) {
      g.full.reserve(kTableSize);
      for (std::uint64_t i = g.full.size() + 1; i <= kTableSize; ++i) g.full.push_back(closed_form(i));
      g.full_ready.store(true, std::memory_order_release);
    }
  }
  return g.full[j - 1];
}

std::shared_ptr<const std::vector<double>> SpendingSequence::table(std::uint64_t at_least) const {
  std::lock_guard lock(grown_->mutex);
  const auto& current = grown_->current;
  if (current->size() >= at_least) return current;
  // At least double, in whole steps, so a growing stream grows the table rarely.
  std::uint64_t n = std::max<std::uint64_t>(at_least, 2 * current->size());
  n = (n + kTableStep - 1) / kTableStep * kTableStep;
  std::vector<double> next;
  next.reserve(n);
  next.assign(current->begin(), current->end());
  for (std::uint64_t j = current->size() + 1; j <= n; ++j) next.push_back(closed_form(j));
  grown_->current = std::make_shared<const std::vector<double>>(std::move(next));
  return grown_->current;
}

Result<std::shared_ptr<const SpendingSequence>> SpendingSequence::shared(std::string_view spec) {
  // Never destroyed: Rules may outlive static destruction order at exit.
  static auto* mutex = new std::mutex;
  static auto* known = new std::map<std::string, std::weak_ptr<const SpendingSequence>, std::less<>>;
  std::lock_guard lock(*mutex);
  if (auto it = known->find(spec); it != known->end()) {
    if (auto alive = it->second.lock()) return alive;
  }
  auto seq = parse(spec);
  if (!seq) return seq.error();
  auto made = std::make_shared<const SpendingSequence>(std::move(seq).value());
  if (known->size() >= 64) std::erase_if(*known, [](const auto& e) { return e.second.expired(); });
  (*known)[std::string(spec)] = made;
  return made;
}

const GeometricMixture& SpendingSequence::mixture() const {
  std::call_once(mixture_->once, [this] {
    if (kind_ == SpendingKind::kJm && parameter_ == kJmConstant) {
      mixture_->value = stored_jm_mixture();
    } else if (kind_ == SpendingKind::kJm) {
      mixture_->value = fit_hybrid_mixture(*this);
    } else {
      mixture_->value =
          fit_power_mixture(parameter_, kind_ == SpendingKind::kPowerShift, 0.5, -28.0, 4.0, kMixtureMass);
    }
  });
  return mixture_->value;
}

}  // namespace alphaledger
