// e-LOND (rules.hpp, RuleKind::kELond): levels against a literal transcription of the rule, the
// pathwise FDP bound of its proof, and FDR under strong positive dependence in simulation.
// Source: Z. Xu and A. Ramdas, "Online multiple testing with e-values", AISTATS 2024 (PMLR 238),
// arXiv:2311.06412: alpha_t = alpha * gamma_t * (R(t-1) + 1), reject iff E_t >= 1/alpha_t
// (docs/methods.md section 10, recalled from memory there and written out in our words).
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "alphaledger/rules.hpp"
#include "alphaledger/spending.hpp"

using namespace alphaledger;

namespace {

Rule make_elond(double alpha = 0.05, const char* spending = nullptr) {
  RuleSpec spec{.rule = "e-lond", .alpha = alpha};
  if (spending != nullptr) spec.spending = spending;
  auto config = resolve_config(spec);
  REQUIRE(config.ok());
  return Rule(*config);
}

// Mostly null e-values (mean 1: exp(mu X - mu^2/2) with X ~ N(0, 1)) and some signals (X ~ N(mu, 1)).
std::vector<double> random_e_values(std::uint64_t seed, std::size_t n, double signal_share, double mu) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> z(0.0, 1.0);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  std::vector<double> e(n);
  for (auto& x : e) {
    const double shift = u(gen) < signal_share ? mu : 0.0;
    x = std::exp(mu * (z(gen) + shift) - mu * mu / 2);
  }
  return e;
}

}  // namespace

TEST_CASE("e-LOND levels and decisions equal the literal rule") {
  for (const char* spending : {"jm", "power:1.6", "power:2"}) {
    std::uint64_t found = 0;
    for (std::uint64_t seed : {1, 2, 3}) {
      const std::string spec = spending;
      CAPTURE(spec);
      const auto e = random_e_values(seed, 3000, 0.2, 3.0);
      Rule rule = make_elond(0.05, spending);
      auto seq = SpendingSequence::parse(spending);
      REQUIRE(seq.ok());
      std::uint64_t rejections = 0;  // R(t-1) of the transcription
      for (std::size_t t = 1; t <= e.size(); ++t) {
        const double level = 0.05 * seq->gamma(t) * static_cast<double>(rejections + 1);
        const bool rejected = e[t - 1] >= 1.0 / level;
        CHECK(rule.next_level() == level);
        const Outcome o = rule.record_e(e[t - 1]);
        REQUIRE(o.level == level);
        REQUIRE(o.rejected == rejected);
        rejections += rejected ? 1 : 0;
      }
      CHECK(rule.rejections() == rejections);
      found += rejections;
    }
    CHECK(found > 0);  // the streams have signals strong enough to be found
  }
}

TEST_CASE("e-LOND's false discoveries are bounded pathwise as in its proof") {
  // Xu & Ramdas (2024), proof of FDR control: 1{E_t >= 1/alpha_t} <= alpha_t E_t and
  // alpha_t / max(R(T), 1) <= alpha gamma_t for a rejected t, so
  // FDP(T) <= alpha * sum over null t of gamma_t E_t, on every path.
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  for (std::uint64_t seed = 10; seed < 60; ++seed) {
    std::mt19937_64 gen(seed);
    std::normal_distribution<double> z(0.0, 1.0);
    std::uniform_real_distribution<double> u(0.0, 1.0);
    Rule rule = make_elond(0.1);
    double false_rejections = 0, bound_sum = 0;
    for (std::uint64_t t = 1; t <= 2000; ++t) {
      const bool is_null = u(gen) >= 0.3;
      const double mu = 2.5;
      const double e = std::exp(mu * (z(gen) + (is_null ? 0.0 : mu)) - mu * mu / 2);
      const Outcome o = rule.record_e(e);
      if (is_null) {
        false_rejections += o.rejected ? 1 : 0;
        bound_sum += seq->gamma(t) * e;
      }
    }
    const double fdp = false_rejections / std::max<double>(1.0, static_cast<double>(rule.rejections()));
    CHECK(fdp <= 0.1 * bound_sum * (1 + 1e-12));
  }
}

TEST_CASE("e-LOND keeps FDR under strong positive dependence between nulls") {
  // Setting: every null statistic shares one factor, X_t = rho Z + sqrt(1 - rho^2) eps_t (rho = 0.9),
  // so each null e-value exp(mu X_t - mu^2/2) still has mean 1 but all rise and fall together.
  // Xu & Ramdas (2024): FDR <= alpha under arbitrary dependence. Checked: mean FDP over 2,000
  // streams <= alpha + 3 standard errors (common practice for simulation checks, no source).
  const double alpha = 0.1, rho = 0.9, mu = 3.0;
  const int runs = 2000;
  std::mt19937_64 gen(2026);
  std::normal_distribution<double> z(0.0, 1.0);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  double sum = 0, sum2 = 0;
  for (int r = 0; r < runs; ++r) {
    Rule rule = make_elond(alpha);
    const double factor = z(gen);
    double false_rejections = 0;
    for (int t = 0; t < 200; ++t) {
      const bool is_null = u(gen) >= 0.1;
      const double x = is_null ? rho * factor + std::sqrt(1 - rho * rho) * z(gen) : mu + z(gen);
      const Outcome o = rule.record_e(std::exp(mu * x - mu * mu / 2));
      if (is_null && o.rejected) ++false_rejections;
    }
    const double fdp = false_rejections / std::max<double>(1.0, static_cast<double>(rule.rejections()));
    sum += fdp;
    sum2 += fdp * fdp;
  }
  const double mean = sum / runs;
  const double se = std::sqrt(std::max(0.0, sum2 / runs - mean * mean) / runs);
  CHECK(mean <= alpha + 3 * se);
}

TEST_CASE("e-LOND launch-time: a batch shares the known past and finishes in any order") {
  // Launch-time LOND (docs/methods.md 9.1): alpha_t = alpha gamma_t (D_t + 1), D_t = rejections
  // finished before launch t. Hand-worked with jm gamma: launch 1 and 2 before any finish get
  // D = 0; test 2 finishes first with a huge e-value (rejected), so launch 3 gets D = 1.
  Rule rule = make_elond(0.05);
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  const Reservation a = rule.launch();
  const Reservation b = rule.launch();
  CHECK(a.level == 0.05 * seq->gamma(1));
  CHECK(b.level == 0.05 * seq->gamma(2));
  auto fb = rule.finish_e(b.launch, 1e9);
  REQUIRE(fb.ok());
  CHECK(fb->rejected);
  const Reservation c = rule.launch();
  CHECK(c.level == 0.05 * seq->gamma(3) * 2);
  auto fa = rule.finish_e(a.launch, 1.0);
  REQUIRE(fa.ok());
  CHECK_FALSE(fa->rejected);
}

TEST_CASE("e-values are refused where they do not belong, and bad ones are refused") {
  Rule elond = make_elond();
  const Reservation r = elond.launch();
  auto as_p = elond.finish(r.launch, 0.01);
  REQUIRE_FALSE(as_p.ok());
  CHECK(as_p.error().message.find("e-lond takes e-values, not p-values") != std::string::npos);
  for (double bad : {-1.0, std::nan(""), std::numeric_limits<double>::infinity()}) {
    auto f = elond.finish_e(r.launch, bad);
    REQUIRE_FALSE(f.ok());
    CHECK(f.error().message.find("e_value must be a finite number >= 0") != std::string::npos);
  }
  auto lord = resolve_config(RuleSpec{.rule = "lord++"});
  REQUIRE(lord.ok());
  Rule p_rule(*lord);
  const Reservation pr = p_rule.launch();
  auto as_e = p_rule.finish_e(pr.launch, 20.0);
  REQUIRE_FALSE(as_e.ok());
  CHECK(as_e.error().message.find("lord++ takes p-values, not e-values") != std::string::npos);
  CHECK(rule_takes_e_values(RuleKind::kELond));
  CHECK_FALSE(rule_takes_e_values(RuleKind::kLond));
  // e-lond takes a spending sequence and alpha, nothing else.
  CHECK_FALSE(resolve_config(RuleSpec{.rule = "e-lond", .initial_wealth = 0.01}).ok());
  CHECK_FALSE(resolve_config(RuleSpec{.rule = "e-lond", .evaluation = "fast"}).ok());
}

TEST_CASE("e-LOND state round-trips") {
  Rule a = make_elond();
  for (double e : {0.5, 2000.0, 3.0, 1e6}) a.record_e(e);
  const Reservation running = a.launch();
  Rule b = make_elond();
  REQUIRE(b.restore_state(a.encode_state()).ok());
  CHECK(b.next_level() == a.next_level());
  auto fa = a.finish_e(running.launch, 50.0);
  auto fb = b.finish_e(running.launch, 50.0);
  REQUIRE(fa.ok());
  REQUIRE(fb.ok());
  CHECK(fa->level == fb->level);
  CHECK(fa->rejected == fb->rejected);
}
