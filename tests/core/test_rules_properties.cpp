// Properties of the rules on thousands of seeded random streams. Each property is the validity
// argument of the rule's paper as restated in docs/methods.md:
//   LORD++ (Ramdas et al. 2017; docs/methods.md 5.2): alpha_t <= alpha, and sum_j alpha_j <= alpha max(R,1).
//   SAFFRON (Ramdas et al. 2018; docs/methods.md 6): alpha_t <= lambda, and
//     sum_j alpha_j 1{p_j > lambda} / (1 - lambda) <= alpha max(R,1).
//   ADDIS (Tian & Ramdas 2019; docs/methods.md 7): alpha_t <= lambda, a discarded p (> tau) is never
//     rejected, and sum_j alpha_j 1{lambda < p_j <= tau} / (tau - lambda) <= alpha max(R,1).
//   Alpha-investing (Foster & Stine 2008; docs/methods.md 2): alpha_j <= W/(1+W) and W >= 0.
//   Alpha-spending (union bound; docs/methods.md 1): sum_j alpha_j <= alpha.
// Fast evaluation (docs/methods.md 15.2, 15.5): equals the direct sum over deposits of the same
// mixture sequence (the literal transcription of docs/methods.md Appendix A with that gamma) to 1e-12
// relative, with identical decisions.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <functional>
#include <random>
#include <vector>

#include "alphaledger/rules.hpp"

using namespace alphaledger;

namespace {

// A mixed stream as in docs/methods.md 15.5: signals p = U^12, uniform nulls, conservative nulls U^0.3.
std::vector<double> random_stream(std::uint64_t seed, std::size_t n, double signal_share) {
  std::mt19937_64 gen(seed);  // mt19937_64's output sequence is fixed by the C++ standard
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    const double kind = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    if (kind < signal_share) x = std::pow(u, 12.0);
    else if (kind < signal_share + (1 - signal_share) / 2) x = u;
    else x = std::pow(u, 0.3);
  }
  return p;
}

Rule make(RuleSpec spec) {
  auto c = resolve_config(spec);
  REQUIRE_MESSAGE(c.ok(), (c.ok() ? "" : c.error().message));
  return Rule(*c);
}

using Gamma = std::function<double(std::uint64_t)>;

// docs/methods.md Appendix A, translated literally: lord_pp, saffron and addis with a given gamma.
std::vector<std::pair<double, bool>> direct_lord(const std::vector<double>& p, double a, double w0, const Gamma& g) {
  std::vector<std::pair<double, bool>> out;
  std::vector<std::uint64_t> rej;
  for (std::uint64_t t = 1; t <= p.size(); ++t) {
    double at = g(t) * w0;
    for (std::size_t j = 0; j < rej.size(); ++j) at += (j == 0 ? a - w0 : a) * g(t - rej[j]);
    const bool r = p[t - 1] <= at;
    if (r) rej.push_back(t);
    out.emplace_back(at, r);
  }
  return out;
}

std::vector<std::pair<double, bool>> direct_addis(const std::vector<double>& p, double a, double w0, double lam,
                                                  double tau, const Gamma& g) {
  // Index of deposit j at time t: 1 + #{i in (tau_j, t): lam < p_i <= tau} (docs/methods.md 7 invariant);
  // with tau = 1 this is SAFFRON (docs/methods.md 6).
  std::vector<std::pair<double, bool>> out;
  std::vector<std::uint64_t> rej;
  std::vector<std::uint64_t> ticks_before(p.size() + 2, 0);  // ticks among steps 1..t-1
  for (std::uint64_t t = 1; t <= p.size(); ++t) {
    auto idx = [&](std::uint64_t dep_time) { return 1 + ticks_before[t] - ticks_before[dep_time + 1]; };
    double s = w0 * g(idx(0));
    for (std::size_t j = 0; j < rej.size(); ++j) s += (j == 0 ? a - w0 : a) * g(idx(rej[j]));
    const double at = std::min(lam, (tau - lam) * s);
    const bool r = p[t - 1] <= at;
    if (r) rej.push_back(t);
    const bool tick = p[t - 1] > lam && p[t - 1] <= tau;
    ticks_before[t + 1] = ticks_before[t] + (tick ? 1 : 0);
    out.emplace_back(at, r);
  }
  return out;
}

}  // namespace

TEST_CASE("Rules: levels respect their caps and the estimated-FDP invariants on random streams") {
  const double alpha = 0.05;
  // Prototypes built once; copies share the immutable sequence (rules.hpp).
  const Rule lord_proto[2] = {make({.rule = "lord++", .evaluation = "exact"}), make({.rule = "lord++", .evaluation = "fast"})};
  const Rule saffron_proto[2] = {make({.rule = "saffron", .evaluation = "exact"}), make({.rule = "saffron", .evaluation = "fast"})};
  const Rule addis_proto[2] = {make({.rule = "addis", .evaluation = "exact"}), make({.rule = "addis", .evaluation = "fast"})};
  const Rule invest_proto = make({.rule = "alpha-investing"});
  const Rule spend_proto = make({.rule = "alpha-spending"});
  const Rule lond_proto = make({.rule = "lond"});
  for (std::uint64_t seed = 1; seed <= 2000; ++seed) {
    CAPTURE(seed);
    const double share = static_cast<double>(seed % 7) / 10.0;  // 0 .. 0.6
    const auto p = random_stream(seed, 200, share);
    const int fast = seed % 2 == 0 ? 1 : 0;
    Rule lord = lord_proto[fast];
    Rule saffron = saffron_proto[fast];
    Rule addis = addis_proto[fast];
    Rule invest = invest_proto;
    Rule spend = spend_proto;
    Rule lond = lond_proto;
    double lord_spent = 0, saffron_spent = 0, addis_spent = 0, spend_total = 0;
    std::uint64_t r_lord = 0, r_saffron = 0, r_addis = 0;
    for (double x : p) {
      const Outcome ol = lord.record(x);
      REQUIRE(ol.level <= alpha);
      lord_spent += ol.level;
      r_lord += ol.rejected;
      REQUIRE(lord_spent <= alpha * std::max<double>(1, r_lord) * (1 + 1e-12));

      const Outcome os = saffron.record(x);
      REQUIRE(os.level <= 0.5);
      if (x > 0.5) saffron_spent += os.level / 0.5;
      r_saffron += os.rejected;
      REQUIRE(saffron_spent <= alpha * std::max<double>(1, r_saffron) * (1 + 1e-12));

      const Outcome oa = addis.record(x);
      REQUIRE(oa.level <= 0.25);
      if (x > 0.5) REQUIRE_FALSE(oa.rejected);  // discarded: never rejected
      if (x > 0.25 && x <= 0.5) addis_spent += oa.level / 0.25;
      r_addis += oa.rejected;
      REQUIRE(addis_spent <= alpha * std::max<double>(1, r_addis) * (1 + 1e-12));

      const double w_before = invest.wealth();
      const Outcome oi = invest.record(x);
      REQUIRE(oi.level <= w_before / (1 + w_before) * (1 + 1e-15));
      REQUIRE(oi.wealth >= 0);

      const Outcome oo = spend.record(x);
      spend_total += oo.level;
      REQUIRE(spend_total <= alpha);

      const Outcome od = lond.record(x);
      REQUIRE(od.level <= alpha);
    }
  }
}

TEST_CASE("Rules: fast evaluation equals the direct sum over deposits of the same mixture") {
  // docs/methods.md 15.5 setup: T = 3000, 30% signals p = U^12, 35% uniform, 35% conservative U^0.3.
  for (const char* spending : {"power:1.6", "jm", "power-shift:1.6"}) {
    for (std::uint64_t seed : {11u, 12u, 13u}) {
      CAPTURE(spending);
      CAPTURE(seed);
      const auto p = random_stream(seed, 3000, 0.3);
      auto seq = SpendingSequence::parse(spending);
      REQUIRE(seq.ok());
      const GeometricMixture& m = seq->mixture();
      const Gamma g = [&](std::uint64_t j) { return m.gamma(j); };

      Rule lord = make({.rule = "lord++", .spending = spending, .evaluation = "fast"});
      Rule saffron = make({.rule = "saffron", .spending = spending, .evaluation = "fast"});
      Rule addis = make({.rule = "addis", .spending = spending, .evaluation = "fast"});
      const auto dl = direct_lord(p, 0.05, 0.025, g);
      const auto ds = direct_addis(p, 0.05, 0.025, 0.5, 1.0, g);
      const auto da = direct_addis(p, 0.05, 0.025, 0.25, 0.5, g);
      std::size_t rejections = 0;
      for (std::size_t i = 0; i < p.size(); ++i) {
        const Outcome ol = lord.record(p[i]);
        const Outcome os = saffron.record(p[i]);
        const Outcome oa = addis.record(p[i]);
        REQUIRE(std::abs(ol.level - dl[i].first) <= 1e-12 * dl[i].first);
        REQUIRE(ol.rejected == dl[i].second);
        REQUIRE(std::abs(os.level - ds[i].first) <= 1e-12 * ds[i].first);
        REQUIRE(os.rejected == ds[i].second);
        REQUIRE(std::abs(oa.level - da[i].first) <= 1e-12 * da[i].first);
        REQUIRE(oa.rejected == da[i].second);
        rejections += ol.rejected;
      }
      CHECK(rejections > 100);  // the check exercised many deposits (docs/methods.md 15.5: ~550)
    }
  }
}

TEST_CASE("Rules: exact mode equals the Appendix A transcription on long random streams") {
  // docs/methods.md Appendix A (literal transcriptions) with the published sequences.
  const auto p = random_stream(99, 1500, 0.2);
  auto jm = SpendingSequence::parse("jm");
  auto p16 = SpendingSequence::parse("power:1.6");
  auto p16s = SpendingSequence::parse("power-shift:1.6");
  const auto dl = direct_lord(p, 0.05, 0.025, [&](std::uint64_t j) { return jm->gamma(j); });
  const auto ds = direct_addis(p, 0.05, 0.025, 0.5, 1.0, [&](std::uint64_t j) { return p16->gamma(j); });
  const auto da = direct_addis(p, 0.05, 0.025, 0.25, 0.5, [&](std::uint64_t j) { return p16s->gamma(j); });
  Rule lord = make({.rule = "lord++"}), saffron = make({.rule = "saffron"}), addis = make({.rule = "addis"});
  for (std::size_t i = 0; i < p.size(); ++i) {
    const Outcome ol = lord.record(p[i]), os = saffron.record(p[i]), oa = addis.record(p[i]);
    REQUIRE(std::abs(ol.level - dl[i].first) <= 1e-12 * dl[i].first);
    REQUIRE(ol.rejected == dl[i].second);
    REQUIRE(std::abs(os.level - ds[i].first) <= 1e-12 * ds[i].first);
    REQUIRE(os.rejected == ds[i].second);
    REQUIRE(std::abs(oa.level - da[i].first) <= 1e-12 * da[i].first);
    REQUIRE(oa.rejected == da[i].second);
  }
}

TEST_CASE("Rules: save and restore mid-stream continues bit-identically") {
  const auto p = random_stream(7, 2000, 0.25);
  for (const char* rule : {"alpha-spending", "alpha-investing", "lond", "lord++", "saffron", "addis"}) {
    for (const char* eval : {"exact", "fast"}) {
      const bool takes_eval = std::string(rule) == "lord++" || std::string(rule) == "saffron" || std::string(rule) == "addis";
      if (!takes_eval && std::string(eval) == "fast") continue;
      CAPTURE(rule);
      CAPTURE(eval);
      RuleSpec spec{.rule = rule};
      if (takes_eval) spec.evaluation = eval;
      Rule straight = make(spec);
      Rule first = make(spec);
      for (std::size_t i = 0; i < 1000; ++i) first.record(p[i]);
      const std::string saved = first.encode_state();
      Rule resumed = make(spec);
      REQUIRE(resumed.restore_state(saved).ok());
      CHECK(resumed.encode_state() == saved);  // encode/decode round trip, identical bytes
      for (std::size_t i = 0; i < 1000; ++i) straight.record(p[i]);
      for (std::size_t i = 1000; i < p.size(); ++i) {
        const Outcome a = straight.record(p[i]);
        const Outcome b = resumed.record(p[i]);
        REQUIRE(a.level == b.level);  // bit for bit
        REQUIRE(a.rejected == b.rejected);
        REQUIRE(a.wealth == b.wealth);
      }
      CHECK(straight.encode_state() == resumed.encode_state());
    }
  }
}

TEST_CASE("Rules: corrupt state is refused and leaves the rule unchanged") {
  Rule rule = make({.rule = "lord++"});
  rule.record(0.0001);
  const std::string before = rule.encode_state();
  CHECK_FALSE(rule.restore_state(before.substr(0, before.size() - 3)).ok());
  CHECK_FALSE(rule.restore_state(before + "x").ok());
  Rule other = make({.rule = "saffron"});
  CHECK_FALSE(other.restore_state(before).ok());
  std::string wrong_version = before;
  wrong_version[0] = 9;
  CHECK_FALSE(rule.restore_state(wrong_version).ok());
  CHECK(rule.encode_state() == before);
}

TEST_CASE("RuleConfig: parameters that break a rule's conditions are refused, naming the condition") {
  // Conditions from docs/methods.md: W0 <= alpha (5.2, 6, 7), lambda < tau (7), payout <= alpha (2).
  auto check_refused = [](RuleSpec spec, const std::string& needle) {
    auto c = resolve_config(spec);
    REQUIRE_FALSE(c.ok());
    CHECK(c.error().kind == ErrorKind::kInvalidArgument);
    CHECK_MESSAGE(c.error().message.find(needle) != std::string::npos, c.error().message);
  };
  check_refused({.rule = "lord++", .initial_wealth = 0.2}, "W0 <= alpha");
  check_refused({.rule = "addis", .candidate_threshold = 0.6, .discard_threshold = 0.5}, "lambda < tau");
  check_refused({.rule = "saffron", .candidate_threshold = 1.0}, "lambda < 1");
  check_refused({.rule = "alpha-investing", .payout = 0.1}, "payout <= alpha");
  check_refused({.rule = "lord++", .alpha = 1.5}, "0 < alpha < 1");
  check_refused({.rule = "lord++", .payout = 0.01}, "does not apply");
  check_refused({.rule = "lond", .spending = "power:0.5"}, "1 < S");
  check_refused({.rule = "lord++", .spending = "jm:0.1"}, "sum to at most 1");
  check_refused({.rule = "bonferroni"}, "unknown rule");
  check_refused({.rule = "lord++", .evaluation = "approximate"}, "exact or fast");
  CHECK_FALSE(validate_p_value(std::nan("")).ok());
  CHECK_FALSE(validate_p_value(-0.1).ok());
  CHECK(validate_p_value(0.0).ok());
  CHECK(validate_p_value(1.0).ok());
}
