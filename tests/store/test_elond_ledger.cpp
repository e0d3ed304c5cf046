// e-LOND streams in the Ledger: e-values in, levels from the core Rule("e-lond"), rejections iff
// e >= 1/level, history, verify, repeats and refusals (docs/ledger.md "Streams of e-values").
// The core e-LOND levels are checked against the formula of Xu & Ramdas (2024), "Online
// multiple testing with e-values" (e-LOND: a test is rejected iff e_t >= 1/alpha_t, with alpha_t as in
// docs/methods.md section 10); the core is checked against it in tests/core, and here the ledger
// must give the very same numbers.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <random>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::same_bits;

namespace {

RuleConfig elond_config() {
  auto c = resolve_config({.rule = "e-lond"});
  REQUIRE(c.ok());
  return *c;
}

std::unique_ptr<Ledger> open_over(Store& store) {
  auto l = Ledger::open(borrow_store(store), store_test::ticking_clock());
  REQUIRE(l.ok());
  return std::move(*l);
}

// e-values with some large enough to reject: exp of a normal draw, some shifted up.
std::vector<double> random_e_values(std::uint64_t seed, std::size_t n) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> z(0.0, 1.0);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  std::vector<double> out;
  for (std::size_t i = 0; i < n; ++i) out.push_back(std::exp(z(gen) * 2.0 + (u(gen) < 0.3 ? 6.0 : 0.0)));
  return out;
}

}  // namespace

// The ledger's e-LOND levels equal the core Rule's (Xu & Ramdas 2024, e-LOND; the core is checked
// against the paper's formula in tests/core), bit for bit, decision by decision, across a reopen.
TEST_CASE("e-LOND ledger: levels and rejections equal the core Rule(\"e-lond\") on a random stream") {
  const std::uint64_t seed = store_test::test_seed(15);
  INFO("seed " << seed);
  const auto e_values = random_e_values(seed, 200);
  MemoryStore mem;
  Rule rule(elond_config());
  {
    auto ledger = open_over(mem);
    REQUIRE(ledger->create_stream("e", elond_config()).ok());
  }
  std::size_t rejections = 0;
  std::unique_ptr<Ledger> held;
  for (std::size_t i = 0; i < e_values.size(); ++i) {
    if (i % 50 == 0) {  // reopen now and then: the state carries over
      held.reset();
      held = open_over(mem);
    }
    const Outcome o = rule.record_e(e_values[i]);
    auto d = held->decide_e("e", store_test::numbered("t", i), e_values[i]);
    REQUIRE(d.ok());
    CHECK(same_bits(d->record.level, o.level));
    CHECK(d->record.rejected == o.rejected);
    CHECK(d->record.rejected == (e_values[i] >= 1.0 / o.level));
    CHECK(same_bits(d->record.wealth, o.wealth));
    CHECK(same_bits(d->record.p_value, e_values[i]));
    CHECK(d->record.e_value);
    rejections += o.rejected ? 1 : 0;
  }
  CHECK(rejections > 0);  // the stream exercises both outcomes
  auto ledger = open_over(mem);
  auto v = ledger->verify("e");
  REQUIRE(v.ok());
  CHECK(v->ok);
  auto h = ledger->history("e");
  REQUIRE(h.ok());
  REQUIRE(h->size() == e_values.size());
  CHECK(same_bits((*h)[7].p_value, e_values[7]));
  auto again = ledger->decide_e("e", "t3", e_values[3]);
  REQUIRE(again.ok());
  CHECK(again->repeat);
  CHECK(again->record.e_value);
}

TEST_CASE("e-LOND ledger: wrong kind of number, bad e-values and conflicts leave the ledger unchanged") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("e", elond_config()).ok());
  REQUIRE(ledger->create_stream("p", *resolve_config({.rule = "lord++"})).ok());
  REQUIRE(ledger->decide_e("e", "a", 5.0).ok());
  const auto before = copy_contents(mem);

  auto p_on_e = ledger->decide("e", "b", 0.01);
  REQUIRE_FALSE(p_on_e.ok());
  CHECK(p_on_e.error().kind == ErrorKind::kInvalidArgument);
  CHECK(p_on_e.error().message.find("give e_value, not p_value") != std::string::npos);
  auto e_on_p = ledger->decide_e("p", "b", 3.0);
  REQUIRE_FALSE(e_on_p.ok());
  CHECK(e_on_p.error().kind == ErrorKind::kInvalidArgument);
  CHECK(e_on_p.error().message.find("give p_value, not e_value") != std::string::npos);
  for (double bad : {-1.0, std::nan(""), std::numeric_limits<double>::infinity()}) {
    auto r = ledger->decide_e("e", "b", bad);
    REQUIRE_FALSE(r.ok());
    CHECK(r.error().kind == ErrorKind::kInvalidArgument);
    CHECK(r.error().message.find("e_value") != std::string::npos);
  }
  auto other = ledger->decide_e("e", "a", 6.0);  // same id, another e-value
  REQUIRE_FALSE(other.ok());
  CHECK(other.error().kind == ErrorKind::kConflict);
  CHECK(other.error().message.find("e_value 5") != std::string::npos);
  // A batch whose rows are p-values is refused whole on an e-lond stream.
  auto batch = ledger->decide_batch("e", {{"c", 0.5}}, 16);
  REQUIRE_FALSE(batch.ok());
  CHECK(batch.error().message.find("e_value") != std::string::npos);
  CHECK(copy_contents(mem) == before);
}

TEST_CASE("e-LOND ledger: a batch of e-values and launched tests finished with e-values match the Rule") {
  const auto e_values = random_e_values(7, 40);
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("e", elond_config()).ok());
  Rule rule(elond_config());
  std::vector<TestInput> batch;
  for (std::size_t i = 0; i < 20; ++i) batch.push_back({store_test::numbered("b", i), e_values[i], true});
  auto r = ledger->decide_batch("e", batch, 8);
  REQUIRE(r.ok());
  REQUIRE_FALSE(r->error);
  REQUIRE(r->decided.size() == 20);
  for (std::size_t i = 0; i < 20; ++i) {
    const Outcome o = rule.record_e(e_values[i]);
    CHECK(same_bits(r->decided[i].record.level, o.level));
    CHECK(r->decided[i].record.rejected == o.rejected);
    CHECK(r->decided[i].record.e_value);
  }
  // Two overlapping launches (docs/methods.md 9.1), finished with e-values in the other order.
  auto l1 = ledger->launch("e", "x1");
  auto l2 = ledger->launch("e", "x2");
  REQUIRE((l1.ok() && l2.ok()));
  const Reservation r1 = rule.launch(), r2 = rule.launch();
  CHECK(same_bits(l1->level, r1.level));
  CHECK(same_bits(l2->level, r2.level));
  auto f2 = ledger->decide_e("e", "x2", 1e6);
  auto o2 = rule.finish_e(r2.launch, 1e6);
  REQUIRE((f2.ok() && o2.ok()));
  CHECK(f2->record.rejected == o2->rejected);
  CHECK(f2->record.rejected);
  CHECK(same_bits(f2->record.wealth, o2->wealth));
  auto f1 = ledger->decide_e("e", "x1", 0.5);
  auto o1 = rule.finish_e(r1.launch, 0.5);
  REQUIRE((f1.ok() && o1.ok()));
  CHECK_FALSE(f1->record.rejected);
  CHECK(same_bits(f1->record.wealth, o1->wealth));
  auto v = ledger->verify("e");
  REQUIRE(v.ok());
  CHECK(v->ok);
}
