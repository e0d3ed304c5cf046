// The simulation model's flags read and checked: non-null patterns, correlation, the model's
// ranges and the peeking settings (include/alphaledger/simulate.hpp, docs/simulate.md). Numbers and
// words in, values or clear errors out.
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

constexpr std::uint64_t kMaxTests = 100'000'000;
constexpr double kMaxMean = 40;
constexpr double kMaxMeanDuration = 1'000'000;
constexpr std::uint64_t kMaxLooks = 100'000;

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

}  // namespace

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
        return invalid_field("nonnull_pattern",
                             pattern_text(m.pattern) +
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
        return invalid_field("nonnull_pattern",
                             pattern_text(m.pattern) +
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
    return invalid_field("mean_duration",
                         "must be a number of launches in [0, 1000000], got " + num(m.mean_duration));
  }
  return {};
}

Status validate_peeking(const PeekingSpec& p) {
  if (p.looks > kMaxLooks) {
    return invalid_field("peeking",
                         "must be a whole number of looks in [0, 100000], got " + std::to_string(p.looks));
  }
  if (!(std::isfinite(p.mixture_sd) && p.mixture_sd >= 0 && p.mixture_sd <= kMaxMean)) {
    return invalid_field("mixture_sd",
                         "must be a number in (0, 40] (0: the effect), got " + num(p.mixture_sd));
  }
  return {};
}

double peeking_mixture_sd(const PeekingSpec& p, const SimulationModel& m) {
  if (p.mixture_sd > 0) return p.mixture_sd;
  return m.effect != 0 ? std::abs(m.effect) : 1.0;
}

}  // namespace alphaledger
