// The machinery behind fast exact evaluation: shared sequences, grown gamma tables, and the
// window of future sums a Rule keeps. Every check here is bit-for-bit: exact mode must give the
// very bits of a direct left-to-right sum over the deposits (the LORD++ display of Ramdas et al.
// 2017 as docs/rules.md states it), however the work is arranged.
#include <doctest/doctest.h>

#include <bit>
#include <cmath>
#include <cstdint>
#include <random>
#include <thread>
#include <vector>

#include "alphaledger/rules.hpp"
#include "alphaledger/spending.hpp"

using namespace alphaledger;

namespace {

std::vector<double> stream(std::uint64_t seed, std::size_t n, double signal_share) {
  std::mt19937_64 gen(seed);  // output sequence fixed by the C++ standard
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    const double kind = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    x = kind < signal_share ? u * u * u * u * u * u : u;
  }
  return p;
}

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

RuleConfig config(const char* rule, const char* evaluation = "exact") {
  auto c = resolve_config(RuleSpec{.rule = rule, .evaluation = evaluation});
  REQUIRE(c.ok());
  return *c;
}

}  // namespace

TEST_CASE("SpendingSequence::table: the same bits as gamma(j), also past the first 65,536 lags") {
  for (const char* spec : {"jm", "power:1.6", "power-shift:1.6", "jm:0.07"}) {
    const std::string name = spec;
    CAPTURE(name);
    auto seq = SpendingSequence::parse(spec);
    REQUIRE(seq.ok());
    const auto small = seq->table(10);
    const auto big = seq->table(200000);
    REQUIRE(big->size() >= 200000);
    CHECK(small->size() <= big->size());
    for (std::size_t i = 0; i < small->size(); ++i) REQUIRE(same_bits((*small)[i], (*big)[i]));
    for (std::uint64_t j :
         {1ULL, 2ULL, 65535ULL, 65536ULL, 65537ULL, 100000ULL, 131072ULL, 199999ULL, 200000ULL})
      REQUIRE(same_bits((*big)[j - 1], seq->gamma(j)));
    // A snapshot already handed out never changes when the table grows again.
    const double kept = (*big)[150000];
    const auto bigger = seq->table(500000);
    CHECK(same_bits((*big)[150000], kept));
    CHECK(same_bits((*bigger)[150000], kept));
    CHECK(same_bits((*bigger)[499999], seq->gamma(500000)));
  }
}

TEST_CASE("SpendingSequence::table: threads growing one table at once all see the same values") {
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  std::vector<std::shared_ptr<const std::vector<double>>> got(4);
  std::vector<std::thread> threads;
  for (std::size_t i = 0; i < got.size(); ++i)
    threads.emplace_back([&, i] { got[i] = seq->table(70000 + 40000 * i); });
  for (auto& t : threads) t.join();
  for (std::size_t i = 0; i < got.size(); ++i) {
    REQUIRE(got[i]->size() >= 70000 + 40000 * i);
    for (std::uint64_t j = 65000; j <= 70000; ++j) REQUIRE(same_bits((*got[i])[j - 1], seq->gamma(j)));
  }
}

TEST_CASE("SpendingSequence::shared: one object per specification, refusals as parse()") {
  auto a = SpendingSequence::shared("power:1.6");
  auto b = SpendingSequence::shared("power:1.6");
  auto c = SpendingSequence::shared("power:1.7");
  REQUIRE(a.ok());
  REQUIRE(b.ok());
  REQUIRE(c.ok());
  CHECK(a->get() == b->get());
  CHECK(a->get() != c->get());
  CHECK((*c)->parameter() == 1.7);
  auto bad = SpendingSequence::shared("power:0.5");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.error().message.find("1 < S <= 50") != std::string::npos);
  // Two Rules of one configuration share their sequence (and so its table and mixture).
  Rule r1(config("lord++", "fast"));
  Rule r2(config("lord++", "fast"));
  CHECK(r1.sequence() == r2.sequence());
  CHECK(&r1.sequence()->mixture() == &r2.sequence()->mixture());
}

// The LORD++ / SAFFRON / ADDIS sum written out directly, term by term, left to right: the
// definition exact mode must reproduce bit for bit.
TEST_CASE(
    "Exact evaluation: every level equals the direct left-to-right sum over the deposits, bit for bit") {
  for (const char* rule : {"lord++", "saffron", "addis"}) {
    const std::string name = rule;
    CAPTURE(name);
    const RuleConfig cfg = config(rule);
    auto seq = SpendingSequence::parse(cfg.spending);
    REQUIRE(seq.ok());
    Rule r(cfg);
    std::vector<std::uint64_t> deposits = {0};  // clock at each deposit
    std::uint64_t clock = 0;
    const double a = cfg.alpha;
    const double w0 = cfg.initial_wealth;
    const double lambda = cfg.candidate_threshold;
    const double tau = cfg.discard_threshold;
    // 5,000 tests: several windows of the largest size, with rejections inside windows.
    const auto p = stream(7, 5000, 0.25);
    for (std::size_t i = 0; i < p.size(); ++i) {
      CAPTURE(i);
      double s = 0;
      for (std::size_t d = 0; d < deposits.size(); ++d) {
        const double c = d == 0 ? w0 : (d == 1 ? a - w0 : a);
        s += c * seq->gamma(1 + clock - deposits[d]);
      }
      double want = s;
      if (cfg.kind == RuleKind::kSaffron) want = std::min(lambda, (1 - lambda) * s);
      if (cfg.kind == RuleKind::kAddis) want = std::min(lambda, (tau - lambda) * s);
      REQUIRE(same_bits(r.next_level(), want));
      const Outcome o = r.record(p[i]);
      REQUIRE(same_bits(o.level, want));
      bool tick = true;
      if (cfg.kind == RuleKind::kSaffron) tick = p[i] > lambda;
      if (cfg.kind == RuleKind::kAddis) tick = p[i] > lambda && p[i] <= tau;
      if (tick) ++clock;
      if (o.rejected) deposits.push_back(clock);
    }
    CHECK(deposits.size() > 300);
  }
}

TEST_CASE("Exact evaluation: copies and restored states continue bit for bit at any point of a window") {
  for (const char* rule : {"lord++", "saffron", "addis"}) {
    for (const char* evaluation : {"exact", "fast"}) {
      const std::string name = std::string(rule) + "/" + evaluation;
      CAPTURE(name);
      const RuleConfig cfg = config(rule, evaluation);
      const auto p = stream(11, 3000, 0.2);
      Rule whole(cfg);
      std::vector<double> want;
      for (double x : p) want.push_back(whole.record(x).level);
      // Break the run at points inside and at the edges of the windows (8, 16, 32, ... lanes).
      for (std::size_t cut : {1u, 7u, 8u, 9u, 24u, 100u, 1023u, 1024u, 2047u, 2500u}) {
        CAPTURE(cut);
        Rule first(cfg);
        for (std::size_t i = 0; i < cut; ++i) first.record(p[i]);
        Rule restored(cfg);
        REQUIRE(restored.restore_state(first.encode_state()).ok());
        Rule copied = first;
        for (std::size_t i = cut; i < p.size(); ++i) {
          REQUIRE(same_bits(restored.record(p[i]).level, want[i]));
          REQUIRE(same_bits(copied.record(p[i]).level, want[i]));
          REQUIRE(same_bits(first.record(p[i]).level, want[i]));
        }
      }
    }
  }
}
