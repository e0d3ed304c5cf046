// Launch-time levels: launch(), finish(), abandon() (docs/methods.md section 9.1).
//
// Sources: the launch-time definitions in docs/methods.md section 9.1, derived for this project;
// the starred rules (LORD*, SAFFRON*, LOND*) of Zrnic, Ramdas & Jordan, "Asynchronous online
// testing of multiple hypotheses", JMLR 22 (2021). The synchronous levels they must reproduce are
// pinned by tests/core/test_levels_golden.cpp and the tables in tests/core/test_rules_tables.cpp.
#include <doctest/doctest.h>

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "alphaledger/rules.hpp"

using namespace alphaledger;

namespace {

// splitmix64 (Steele, Lea & Flood 2014): a fixed, portable sequence.
struct SplitMix {
  std::uint64_t state;
  std::uint64_t next() {
    std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  double uniform() { return static_cast<double>(next() >> 11) * 0x1.0p-53; }
  std::uint64_t below(std::uint64_t n) { return next() % n; }
};

// Signals u^8, uniform nulls and conservative nulls sqrt(u), mixed.
double mixed_p(SplitMix& gen, double signal_share) {
  const double u = gen.uniform();
  const double kind = gen.uniform();
  if (kind < signal_share) {
    const double u2 = u * u;
    const double u4 = u2 * u2;
    return u4 * u4;
  }
  if (kind < signal_share + (1 - signal_share) / 2) return u;
  return std::sqrt(u);
}

Rule make_rule(const std::string& name, std::optional<std::string> evaluation = {},
               std::optional<std::string> spending = {}) {
  RuleSpec spec{.rule = name};
  spec.evaluation = std::move(evaluation);
  spec.spending = std::move(spending);
  auto config = resolve_config(spec);
  REQUIRE_MESSAGE(config.ok(), name);
  return Rule(*config);
}

struct Variant {
  std::string rule;
  std::optional<std::string> evaluation;
  std::optional<std::string> spending;
  std::string label() const {
    return rule + " " + evaluation.value_or("-") + " " + spending.value_or("default");
  }
};

// Every rule x evaluation x several spending sequences.
std::vector<Variant> all_variants() {
  std::vector<Variant> v;
  for (const char* spending : {"power:1.6", "power:2", "power-shift:1.3", "jm"}) {
    v.push_back({"alpha-spending", std::nullopt, spending});
    v.push_back({"lond", std::nullopt, spending});
    for (const char* rule : {"lord++", "saffron", "addis"})
      for (const char* eval : {"exact", "fast"}) v.push_back({rule, eval, spending});
  }
  v.push_back({"alpha-investing", std::nullopt, std::nullopt});
  return v;
}

Rule make_rule(const Variant& v) { return make_rule(v.rule, v.evaluation, v.spending); }

std::uint64_t bits(double x) { return std::bit_cast<std::uint64_t>(x); }

Rule restored_copy(const Rule& rule) {
  Rule fresh(rule.config());
  const auto s = fresh.restore_state(rule.encode_state());
  REQUIRE(s.ok());
  return fresh;
}

}  // namespace

// ---------------------------------------------------------------------------------------------
// Synchronous use is the special case: record(p) and launch-then-finish give the same bits.
// Source: docs/methods.md section 9.1 ("every test finishes before the next one is launched gives
// back the synchronous rules exactly"); the synchronous levels themselves are pinned by the golden
// and section-14 tests.

TEST_CASE("Launch: launch-then-finish equals record() bit for bit, every rule, evaluation and sequence") {
  for (const auto& v : all_variants()) {
    CAPTURE(v.label());
    for (std::uint64_t seed : {1u, 2u, 3u}) {
      CAPTURE(seed);
      SplitMix gen{seed * 7919};
      Rule by_record = make_rule(v);
      Rule by_events = make_rule(v);
      const double share = seed == 1 ? 0.1 : (seed == 2 ? 0.4 : 0.9);
      for (int i = 0; i < 1500; ++i) {
        const double p = mixed_p(gen, share);
        const double predicted = by_events.next_level();
        const Outcome a = by_record.record(p);
        const Reservation r = by_events.launch();
        REQUIRE(bits(r.level) == bits(predicted));
        const auto b = by_events.finish(r.launch, p);
        REQUIRE(b.ok());
        REQUIRE(a.step == b->step);
        REQUIRE(bits(a.level) == bits(b->level));
        REQUIRE(a.rejected == b->rejected);
        REQUIRE(bits(a.wealth) == bits(b->wealth));
      }
      CHECK(by_record.encode_state() == by_events.encode_state());
      CHECK(by_record.rejections() == by_events.rejections());
      CHECK(by_events.running_count() == 0);
      // A state without running tests keeps the synchronous format (version 1), so stored
      // ledgers of synchronous streams keep their bytes.
      CHECK(by_events.encode_state()[0] == 1);
    }
  }
}

TEST_CASE("Launch: record() while tests run is launch-then-finish, and leaves the others running") {
  // Source: docs/methods.md section 9.1 (record is a launch followed at once by its finish).
  for (const auto& v : all_variants()) {
    CAPTURE(v.label());
    SplitMix gen{99};
    Rule a = make_rule(v);
    Rule b = make_rule(v);
    const Reservation ra = a.launch();
    const Reservation rb = b.launch();
    REQUIRE(bits(ra.level) == bits(rb.level));
    for (int i = 0; i < 300; ++i) {
      const double p = mixed_p(gen, 0.3);
      const Outcome oa = a.record(p);
      const Reservation r = b.launch();
      const Outcome ob = *b.finish(r.launch, p);
      REQUIRE(bits(oa.level) == bits(ob.level));
      REQUIRE(oa.rejected == ob.rejected);
      REQUIRE(bits(oa.wealth) == bits(ob.wealth));
    }
    REQUIRE(a.running_count() == 1);
    CHECK(a.encode_state() == b.encode_state());
    const auto fa = a.finish(ra.launch, 0.5);
    const auto fb = b.finish(rb.launch, 0.5);
    REQUIRE(fa.ok());
    CHECK(bits(fa->wealth) == bits(fb->wealth));
    CHECK(a.encode_state() == b.encode_state());
  }
}

// ---------------------------------------------------------------------------------------------
// The estimated-FDP invariants of docs/methods.md section 9.1, on random overlapping event
// sequences with batches of launches and abandons. Each rule's check names its bound.

namespace {

struct Tracked {
  double level = 0;
  std::uint64_t rejections_at_launch = 0;  // D_t: rejections finished before the launch
  bool running = true;
  bool advanced = false;       // saffron/addis: has advanced the clock (per the 9.1 rule)
  bool finished = false;       // finished (not abandoned)
  bool non_advancing = false;  // finished as a non-advancing outcome
  bool rejected = false;
};

// Tolerance for sums of a few thousand doubles below 1.
constexpr double kEps = 1e-12;

void run_invariants(const Variant& v, std::uint64_t seed, int events) {
  SplitMix gen{seed};
  Rule rule = make_rule(v);
  const RuleConfig& c = rule.config();
  const double alpha = c.alpha;
  const double w0 = c.initial_wealth;
  const double lambda = c.candidate_threshold;
  const double tau = c.discard_threshold;
  const bool clocked = c.kind == RuleKind::kSaffron || c.kind == RuleKind::kAddis;
  const double scale = c.kind == RuleKind::kSaffron ? 1 - lambda : tau - lambda;
  const double share = 0.05 + 0.6 * gen.uniform();
  std::vector<Tracked> tests(1);  // index = launch number
  std::vector<std::uint64_t> running;
  std::uint64_t rejections = 0;
  double investing_wealth = c.initial_wealth;  // alpha-investing, the 9.1 literal bookkeeping
  std::uint64_t investing_k = 0;

  auto advancing = [&](double p) {
    if (c.kind == RuleKind::kSaffron) return p > lambda;
    return p > lambda && p <= tau;
  };
  auto check = [&]() {
    const double r_or_1 = static_cast<double>(std::max<std::uint64_t>(rejections, 1));
    switch (c.kind) {
      case RuleKind::kELond:  // takes e-values: tests/core/test_elond.cpp
        FAIL("e-lond is not among this test's rules");
        break;
      case RuleKind::kAlphaSpending: {
        double sum = 0;
        for (std::size_t t = 1; t < tests.size(); ++t) sum += tests[t].level;
        REQUIRE(sum <= alpha + kEps);  // union bound budget: sum of levels <= alpha
        break;
      }
      case RuleKind::kLond: {
        double beta_sum = 0;
        for (std::size_t t = 1; t < tests.size(); ++t) {
          beta_sum += tests[t].level / static_cast<double>(tests[t].rejections_at_launch + 1);
          // A rejected test is not counted in its own D_t, so D_t + 1 <= R.
          if (tests[t].rejected) REQUIRE(tests[t].rejections_at_launch + 1 <= rejections);
        }
        REQUIRE(beta_sum <= alpha + kEps);  // sum_t beta_t <= alpha
        break;
      }
      case RuleKind::kLordPlusPlus: {
        double sum = 0;
        for (std::size_t t = 1; t < tests.size(); ++t) sum += tests[t].level;
        // sum_t alpha_t <= W0 + (alpha - W0) 1{R >= 1} + alpha (R - 1)_+ <= alpha (R v 1).
        const double bound = rejections == 0 ? w0 : alpha * static_cast<double>(rejections);
        REQUIRE(sum <= bound + kEps);
        REQUIRE(sum <= alpha * r_or_1 + kEps);
        REQUIRE(rule.wealth() >= -kEps);
        break;
      }
      case RuleKind::kSaffron:
      case RuleKind::kAddis: {
        double sum = 0;
        for (std::size_t t = 1; t < tests.size(); ++t)
          if (tests[t].advanced) sum += tests[t].level / scale;
        // sum_j alpha_j 1{advanced the clock} / s <= W0 (R = 0), <= alpha R (R >= 1).
        const double bound = rejections == 0 ? w0 : alpha * static_cast<double>(rejections);
        REQUIRE(sum <= bound + kEps);
        REQUIRE(rule.wealth() >= -kEps);
        break;
      }
      case RuleKind::kAlphaInvesting:
        // Wealth never negative; it matches the pay-at-launch, refund-at-finish bookkeeping.
        REQUIRE(rule.wealth() >= -kEps);
        REQUIRE(std::abs(rule.wealth() - investing_wealth) <= kEps);
        break;
    }
  };

  for (int e = 0; e < events; ++e) {
    const double u = gen.uniform();
    if (running.empty() || u < 0.4) {
      // A batch of 1..4 launches with no finish between.
      const std::uint64_t batch = 1 + gen.below(4);
      for (std::uint64_t b = 0; b < batch; ++b) {
        const double predicted = rule.next_level();
        // The previous launch advances the clock now if it is still running (9.1).
        if (clocked && tests.size() > 1) {
          Tracked& prev = tests.back();
          if (prev.running) prev.advanced = true;
        }
        if (c.kind == RuleKind::kAlphaInvesting) {
          const double w = std::max(investing_wealth, 0.0);
          const double t = static_cast<double>(tests.size());
          const double expected = std::min(w / (1 + t - static_cast<double>(investing_k)), w / (1 + w));
          const double before = rule.wealth();
          const Reservation r = rule.launch();
          REQUIRE(std::abs(r.level - expected) <= kEps);
          REQUIRE(r.level / (1 - r.level) <= std::max(before, 0.0) + kEps);  // alpha_j/(1-alpha_j) <= W
          investing_wealth -= r.level / (1 - r.level);
          tests.push_back({.level = r.level, .rejections_at_launch = rejections});
          REQUIRE(bits(r.level) == bits(predicted));
        } else {
          const Reservation r = rule.launch();
          REQUIRE(bits(r.level) == bits(predicted));
          REQUIRE(r.launch == tests.size());
          tests.push_back({.level = r.level, .rejections_at_launch = rejections});
          if (c.kind == RuleKind::kLond) {
            const auto* seq = rule.sequence();
            REQUIRE(bits(r.level) ==
                    bits(alpha * seq->gamma(r.launch) * static_cast<double>(rejections + 1)));
          }
          if (c.kind == RuleKind::kAlphaSpending) {
            REQUIRE(bits(r.level) == bits(alpha * rule.sequence()->gamma(r.launch)));
          }
        }
        running.push_back(tests.size() - 1);
      }
    } else {
      const std::size_t pick = gen.below(running.size());
      const std::uint64_t t = running[pick];
      running.erase(running.begin() + static_cast<std::ptrdiff_t>(pick));
      Tracked& tr = tests[t];
      tr.running = false;
      if (u < 0.5) {
        REQUIRE(rule.abandon(t).ok());
        if (clocked) tr.advanced = true;  // an abandoned test counts as clock-advancing
      } else {
        const double p = mixed_p(gen, share);
        const auto o = rule.finish(t, p);
        REQUIRE(o.ok());
        REQUIRE(o->step == t);
        REQUIRE(bits(o->level) == bits(tr.level));  // decided against the reserved level
        REQUIRE(o->rejected == (p <= tr.level));
        tr.finished = true;
        tr.rejected = o->rejected;
        if (clocked && advancing(p)) tr.advanced = true;
        if (o->rejected) {
          ++rejections;
          if (c.kind == RuleKind::kAlphaInvesting) {
            investing_wealth += c.payout + tr.level / (1 - tr.level);
            investing_k = std::max(investing_k, t);
          }
        }
      }
    }
    REQUIRE(rule.rejections() == rejections);
    REQUIRE(rule.running_count() == running.size());
    check();
    if (gen.uniform() < 0.03) {
      // The compact state covers running tests: a restored Rule continues bit-identically.
      Rule copy = restored_copy(rule);
      REQUIRE(copy.encode_state() == rule.encode_state());
      rule = copy;
    }
  }
  // Finish everything still running: the bounds hold once every test is done.
  for (std::uint64_t t : running) {
    REQUIRE(rule.abandon(t).ok());
    tests[t].running = false;
    if (clocked) tests[t].advanced = true;
  }
  if (c.kind == RuleKind::kAlphaInvesting) {
    // Abandoned tests keep their payment: the literal bookkeeping is unchanged.
  }
  check();
}

}  // namespace

TEST_CASE("Launch: estimated-FDP invariants on random overlapping sequences with batches and abandons") {
  std::uint64_t sequences = 0;
  for (const auto& v : all_variants()) {
    CAPTURE(v.label());
    const int count = v.spending == std::optional<std::string>("power:1.6") || !v.spending ? 300 : 60;
    for (int s = 0; s < count; ++s) {
      CAPTURE(s);
      run_invariants(v, 1000 + static_cast<std::uint64_t>(s), 80);
      ++sequences;
    }
  }
  CHECK(sequences > 4000);
}

TEST_CASE("Launch: fast evaluation with thousands of running tests") {
  // Source: docs/methods.md section 9.1 (LORD++ bound) and section 15 (fast evaluation).
  for (const char* name : {"lord++", "saffron", "addis"}) {
    CAPTURE(name);
    Rule rule = make_rule(name, "fast");
    std::vector<Reservation> launched;
    double sum = 0;
    for (int i = 0; i < 5000; ++i) {
      launched.push_back(rule.launch());
      sum += launched.back().level;
    }
    CHECK(rule.running_count() == 5000);
    const auto listed = rule.running();
    REQUIRE(listed.size() == 5000);
    CHECK(listed[17].launch == 18);
    CHECK(bits(listed[17].level) == bits(launched[17].level));
    // No outcome known: every level came from W0 alone, over distinct clock values.
    CHECK(sum <= rule.config().initial_wealth * (std::string(name) == "lord++" ? 1.0 : 0.5) + kEps);
    for (int i = 0; i < 5000; i += 2) REQUIRE(rule.finish(launched[i].launch, 0.9).ok());
    CHECK(rule.running_count() == 2500);
    Rule copy = restored_copy(rule);
    CHECK(copy.running() == rule.running());
    CHECK(bits(copy.launch().level) == bits(rule.launch().level));
  }
}

// ---------------------------------------------------------------------------------------------
// Hand-worked overlapping examples, one per rule. Source: the launch-time definitions in
// docs/methods.md section 9.1, derived for this project; the starred rules of Zrnic, Ramdas &
// Jordan, JMLR 22 (2021). alpha = 0.05 and W0 = alpha/2 = 0.025 unless said. g(m) is the rule's
// spending sequence, read from rule.sequence() so the check is about the event arithmetic; the
// decimals in the comments were worked out by hand from the definitions (to ~4 digits).

namespace {
// A level against its formula in g(m): the same arithmetic up to rounding.
void check_close(double got, double want) { CHECK(std::abs(got - want) <= 1e-15 + 1e-13 * std::abs(want)); }
// A level against the decimal worked out by hand (in double precision, with the JM constant
// C = 0.0790819667 of docs/methods.md section 13, 10 digits): 1e-9 relative.
void check_decimal(double got, double want) { CHECK(std::abs(got - want) <= 1e-9 * std::abs(want)); }
}  // namespace

TEST_CASE("Launch example: LORD++ (a rejection funds only tests launched after it finished)") {
  Rule rule = make_rule("lord++");  // JM sequence, g(1) = 0.05481, g(2) = 0.01192
  const auto g = [&](std::uint64_t m) { return rule.sequence()->gamma(m); };
  const double a = 0.05, w0 = 0.025;
  // L1: clock 0 -> a1 = W0 g(1) = 0.025 * 0.05481 = 0.001370; clock 1.
  const auto r1 = rule.launch();
  check_close(r1.level, w0 * g(1));
  check_decimal(r1.level, 0.0013703860562810123);
  // L2: a2 = W0 g(2) = 0.025 * 0.01192 = 0.000298; clock 2.
  const auto r2 = rule.launch();
  check_close(r2.level, w0 * g(2));
  // F1, p = 0.0001 <= 0.00137: rejected, first rejection: deposit a - W0 = 0.025 stamped clock 2.
  CHECK(rule.finish(r1.launch, 0.0001)->rejected);
  // L3 (clock 2): a3 = W0 g(3) + (a - W0) g(1 + 2 - 2) = W0 g(3) + 0.025 g(1) = 0.001624; clock 3.
  const auto r3 = rule.launch();
  check_close(r3.level, w0 * g(3) + (a - w0) * g(1));
  check_decimal(r3.level, 0.00162421209808416);
  // L4 (batch with L3): a4 = W0 g(4) + (a - W0) g(2) = 0.000509; clock 4.
  const auto r4 = rule.launch();
  check_close(r4.level, w0 * g(4) + (a - w0) * g(2));
  // F3, p = 0.9: not rejected. F2, p = 0.00001 <= a2 = 0.000298: rejected; deposit a stamped clock 4,
  // so tests 3 and 4 (launched before it was known) did not use it.
  CHECK_FALSE(rule.finish(r3.launch, 0.9)->rejected);
  CHECK(rule.finish(r2.launch, 0.00001)->rejected);
  CHECK(rule.abandon(r4.launch).ok());
  // L5 (clock 4): a5 = W0 g(5) + (a - W0) g(1 + 4 - 2) + a g(1 + 4 - 4) = W0 g(5) + 0.025 g(3) + 0.05 g(1).
  const auto r5 = rule.launch();
  check_close(r5.level, w0 * g(5) + (a - w0) * g(3) + a * g(1));
  check_decimal(r5.level, 0.0031735598038730678);
  // Bound: a1 + ... + a5 = 0.00729 <= W0 + (a - W0) + a (R - 1) = 0.1 with R = 2.
  CHECK(r1.level + r2.level + r3.level + r4.level + r5.level <= 2 * a);
}

TEST_CASE("Launch example: SAFFRON (running tests advance the clock at the next launch)") {
  Rule rule = make_rule("saffron");  // lambda = 1/2, s = 1 - lambda = 0.5, g(m) = m^-1.6 / zeta(1.6)
  const auto g = [&](std::uint64_t m) { return rule.sequence()->gamma(m); };
  const double a = 0.05, w0 = 0.025, s = 0.5;
  // L1 (clock 0): a1 = min(1/2, s W0 g(1)) = 0.5 * 0.025 * 0.4375 = 0.005469.
  const auto r1 = rule.launch();
  check_close(r1.level, s * w0 * g(1));
  check_decimal(r1.level, 0.005468627072180921);
  // L2: test 1 is still running, so it advances the clock first (clock 1); a2 = s W0 g(2) = 0.001804.
  const auto r2 = rule.launch();
  check_close(r2.level, s * w0 * g(2));
  // F1, p = 0.001 <= 0.005469: rejected (a candidate; it already advanced, no second advance).
  // Deposit a - W0 stamped clock 1.
  CHECK(rule.finish(r1.launch, 0.001)->rejected);
  // L3: test 2 still running: clock 2. a3 = s (W0 g(3) + (a - W0) g(1 + 2 - 1)) = 0.002747.
  const auto r3 = rule.launch();
  check_close(r3.level, s * (w0 * g(3) + (a - w0) * g(2)));
  check_decimal(r3.level, 0.002746914694853236);
  // F3, p = 0.3: a candidate (<= lambda), not rejected, finished before the next launch: it never
  // advances the clock. L4 therefore gets a3 again (same clock, same deposits).
  CHECK_FALSE(rule.finish(r3.launch, 0.3)->rejected);
  const auto r4 = rule.launch();
  CHECK(r4.level == r3.level);
  // F2, p = 0.8: clock-advancing, but test 2 already advanced at L3: nothing more.
  CHECK_FALSE(rule.finish(r2.launch, 0.8)->rejected);
  // Abandon 4: counts as clock-advancing, not yet advanced: clock 3.
  CHECK(rule.abandon(r4.launch).ok());
  // L5 (clock 3): a5 = s (W0 g(4) + (a - W0) g(1 + 3 - 1)) = 0.5 (0.025 g(4) + 0.025 g(3)) = 0.001538.
  const auto r5 = rule.launch();
  check_close(r5.level, s * (w0 * g(4) + (a - w0) * g(3)));
  check_decimal(r5.level, 0.0015380300714187942);
  // Bound: tests 1, 2, 4 advanced: (a1 + a2 + a4) / s = 0.0200 <= a R = 0.05.
  CHECK((r1.level + r2.level + r4.level) / s <= a);
}

TEST_CASE(
    "Launch example: ADDIS (discarded and candidate outcomes known at the next launch do not advance)") {
  Rule rule = make_rule("addis");  // lambda = 1/4, tau = 1/2, s = 0.25, g(m) = (m+1)^-1.6/(zeta(1.6)-1)
  const auto g = [&](std::uint64_t m) { return rule.sequence()->gamma(m); };
  const double a = 0.05, w0 = 0.025, s = 0.25;
  // L1 (clock 0): a1 = s W0 g(1) = 0.25 * 0.025 * 0.2566 = 0.001604.
  const auto r1 = rule.launch();
  check_close(r1.level, s * w0 * g(1));
  check_decimal(r1.level, 0.0016035045620012385);
  // F1, p = 0.9 > tau: discarded before the next launch: no advance. L2 gets a1 again.
  CHECK_FALSE(rule.finish(r1.launch, 0.9)->rejected);
  const auto r2 = rule.launch();
  CHECK(r2.level == r1.level);
  // L3: test 2 still running: clock 1. a3 = s W0 g(2) = 0.000838.
  const auto r3 = rule.launch();
  check_close(r3.level, s * w0 * g(2));
  check_decimal(r3.level, 0.0008381547012854539);
  // F3, p = 0.4 in (lambda, tau]: advancing, not yet advanced: clock 2.
  CHECK_FALSE(rule.finish(r3.launch, 0.4)->rejected);
  // F2, p = 0.0005 <= a2 = 0.001604: rejected; deposit a - W0 stamped clock 2.
  CHECK(rule.finish(r2.launch, 0.0005)->rejected);
  // L4 (clock 2): a4 = s (W0 g(3) + (a - W0) g(1)) = 0.25 (0.025 * 0.0851 + 0.025 * 0.2566) = 0.002132.
  const auto r4 = rule.launch();
  check_close(r4.level, s * (w0 * g(3) + (a - w0) * g(1)));
  check_decimal(r4.level, 0.002132463800631503);
}

TEST_CASE("Launch example: LOND (D_t counts rejections finished before the launch)") {
  Rule rule = make_rule("lond");  // beta_t = alpha g(t), JM sequence
  const auto g = [&](std::uint64_t m) { return rule.sequence()->gamma(m); };
  const double a = 0.05;
  // L1, L2: no rejection known: a1 = beta_1 = 0.002741, a2 = beta_2 = 0.000596.
  const auto r1 = rule.launch();
  const auto r2 = rule.launch();
  check_close(r1.level, a * g(1));
  check_close(r2.level, a * g(2));
  check_decimal(r2.level, 0.0005960312871312328);
  // F2, p = 0.00001 <= 0.000596: rejected. D = 1 from now on.
  CHECK(rule.finish(r2.launch, 0.00001)->rejected);
  // L3: a3 = beta_3 (1 + 1) = 0.001015. F1 (p = 0.5) is not rejected; L4: a4 = 2 beta_4.
  const auto r3 = rule.launch();
  check_close(r3.level, 2 * a * g(3));
  check_decimal(r3.level, 0.0010153041672125906);
  CHECK_FALSE(rule.finish(r1.launch, 0.5)->rejected);
  const auto r4 = rule.launch();
  check_close(r4.level, 2 * a * g(4));
  // F3, p = 0.000001: rejected (its own D_3 = 1 did not count it: D_3 + 1 = 2 <= R = 2).
  CHECK(rule.finish(r3.launch, 0.000001)->rejected);
  CHECK(rule.abandon(r4.launch).ok());
  // L5: a5 = 3 beta_5 = 0.001074.
  const auto r5 = rule.launch();
  check_close(r5.level, 3 * a * g(5));
  check_decimal(r5.level, 0.0010737698970473726);
}

TEST_CASE("Launch example: alpha-spending (outcomes never change a level)") {
  Rule rule = make_rule("alpha-spending");  // g(m) = m^-1.6 / zeta(1.6)
  const double a = 0.05;
  const auto r1 = rule.launch();  // a1 = a g(1) = 0.05 * 0.4375 = 0.021875
  const auto r2 = rule.launch();  // a2 = a g(2) = 0.007216
  check_decimal(r1.level, 0.021874508288723685);
  check_decimal(r2.level, 0.007215896682809535);
  CHECK(rule.finish(r1.launch, 1e-9)->rejected);
  CHECK(rule.abandon(r2.launch).ok());
  const auto r3 = rule.launch();  // a3 = a g(3) = 0.003772, whatever happened before
  check_close(r3.level, a * rule.sequence()->gamma(3));
  check_decimal(r3.level, 0.0037717620966034103);
}

TEST_CASE("Launch example: alpha-investing (paid at launch, refunded with the payout at finish)") {
  Rule rule = make_rule("alpha-investing");  // W(0) = a (1 - a) = 0.0475, payout omega = a = 0.05
  // L1: a1 = min(W/(1 + 1 - 0), W/(1 + W)) = 0.0475 / 2 = 0.02375; W -= a1/(1 - a1) = 0.024328
  //     -> W = 0.023172.
  const auto r1 = rule.launch();
  check_close(r1.level, 0.02375);
  double w = 0.0475 - 0.02375 / (1 - 0.02375);
  check_close(rule.wealth(), w);
  // L2: a2 = W/3 = 0.007724; W -= a2/(1 - a2) -> 0.015388.
  const auto r2 = rule.launch();
  check_close(r2.level, w / 3);
  check_decimal(r2.level, 0.007724071702944942);
  w -= r2.level / (1 - r2.level);
  // F1, p = 0.001 <= 0.02375: rejected; W += omega + a1/(1 - a1) -> 0.089716; k* = 1.
  CHECK(rule.finish(r1.launch, 0.001)->rejected);
  w += 0.05 + r1.level / (1 - r1.level);
  CHECK(std::abs(rule.wealth() - w) <= 1e-15);
  // L3: a3 = min(W/(1 + 3 - 1), W/(1 + W)) = W/3 = 0.029905.
  const auto r3 = rule.launch();
  CHECK(std::abs(r3.level - 0.029905267532724492) <= 1e-15);
  w -= r3.level / (1 - r3.level);
  // F2, p = 0.9: not rejected, nothing refunded; abandon 3: nothing refunded. W = 0.058889.
  CHECK_FALSE(rule.finish(r2.launch, 0.9)->rejected);
  CHECK(rule.abandon(r3.launch).ok());
  CHECK(std::abs(rule.wealth() - 0.058888640536726766) <= 1e-15);
  CHECK(rule.running_count() == 0);
}

// ---------------------------------------------------------------------------------------------
// Errors: the Rule is unchanged and the message says what was wrong.
// Source: common practice, no source (the project's error conventions).

TEST_CASE("Launch errors: unknown, finished and abandoned launch numbers; bad p-values") {
  for (const auto& v : all_variants()) {
    CAPTURE(v.label());
    Rule rule = make_rule(v);
    const auto r1 = rule.launch();
    const auto r2 = rule.launch();
    const std::string before = rule.encode_state();

    const auto never = rule.finish(7, 0.5);
    REQUIRE_FALSE(never.ok());
    CHECK(never.error().kind == ErrorKind::kInvalidArgument);
    CHECK(never.error().message.find("launch number 7") != std::string::npos);
    CHECK(rule.finish(0, 0.5).error().kind == ErrorKind::kInvalidArgument);
    CHECK(rule.abandon(3).error().kind == ErrorKind::kInvalidArgument);
    const auto bad_p = rule.finish(r1.launch, 1.5);
    REQUIRE_FALSE(bad_p.ok());
    CHECK(bad_p.error().kind == ErrorKind::kInvalidArgument);
    CHECK(rule.finish(r1.launch, std::nan("")).error().kind == ErrorKind::kInvalidArgument);
    CHECK(rule.encode_state() == before);

    REQUIRE(rule.finish(r1.launch, 0.5).ok());
    const auto again = rule.finish(r1.launch, 0.5);
    REQUIRE_FALSE(again.ok());
    CHECK(again.error().kind == ErrorKind::kConflict);
    CHECK(again.error().message.find("no longer running") != std::string::npos);
    CHECK(rule.abandon(r1.launch).error().kind == ErrorKind::kConflict);

    REQUIRE(rule.abandon(r2.launch).ok());
    const std::string after = rule.encode_state();
    CHECK(rule.abandon(r2.launch).error().kind == ErrorKind::kConflict);
    CHECK(rule.finish(r2.launch, 0.1).error().kind == ErrorKind::kConflict);
    CHECK(rule.encode_state() == after);
  }
}

TEST_CASE("Launch state: running tests round-trip; old states restore; damaged states are refused") {
  // Source: common practice, no source (versioned state format, docs/rules.md).
  for (const auto& v : all_variants()) {
    CAPTURE(v.label());
    Rule rule = make_rule(v);
    SplitMix gen{5};
    for (int i = 0; i < 40; ++i) rule.record(mixed_p(gen, 0.5));
    const std::string synchronous = rule.encode_state();
    CHECK(synchronous[0] == 1);
    const auto r1 = rule.launch();
    rule.launch();
    rule.launch();
    REQUIRE(rule.finish(r1.launch + 1, 0.01).ok());
    const std::string state = rule.encode_state();
    CHECK(state[0] == 2);
    Rule copy = restored_copy(rule);
    CHECK(copy.encode_state() == state);
    CHECK(copy.running() == rule.running());
    CHECK(bits(copy.reserved()) == bits(rule.reserved()));
    CHECK(bits(copy.wealth()) == bits(rule.wealth()));
    CHECK(bits(copy.next_level()) == bits(rule.next_level()));
    const auto a = copy.finish(r1.launch, 0.2);
    const auto b = rule.finish(r1.launch, 0.2);
    REQUIRE(a.ok());
    CHECK(bits(a->wealth) == bits(b->wealth));
    CHECK(copy.encode_state() == rule.encode_state());

    // A version 1 state (as written before launch-time levels) still restores.
    Rule old(rule.config());
    REQUIRE(old.restore_state(synchronous).ok());
    CHECK(old.running_count() == 0);
    CHECK(old.tests() == 40);

    // Damaged version 2 states: truncated, or a running test beyond the launched count.
    Rule target = make_rule(v);
    const std::string fresh = target.encode_state();
    for (std::size_t cut = 1; cut < 30 && cut < state.size(); ++cut) {
      const auto s = target.restore_state(std::string_view(state).substr(0, state.size() - cut));
      CHECK_FALSE(s.ok());
      if (!s.ok()) CHECK(s.error().kind == ErrorKind::kCorruption);
    }
    std::string bad = state;
    bad += '\x01';
    CHECK_FALSE(target.restore_state(bad).ok());
    CHECK(target.encode_state() == fresh);
  }
}
