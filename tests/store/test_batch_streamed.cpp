// decide_batch_streamed keeps only what later rows of the batch need: repeats of a row decided in
// an earlier (already reported and released) group must still come back with that row's record.
// The reference is decide_batch on a twin ledger (no outside source: self-consistency).
#include <doctest/doctest.h>

#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::same_bits;

TEST_CASE("decide_batch_streamed: repeats across released groups match decide_batch") {
  auto config = resolve_config({.rule = "lord++"});
  REQUIRE(config.ok());
  const std::vector<TestInput> inputs{{"a", 0.001}, {"b", 0.2},   {"c", 0.0001}, {"a", 0.001}, {"d", 0.4},
                                      {"d", 0.4},   {"old", 0.5}, {"old", 0.5},  {"e", 0.003}, {"c", 0.0001},
                                      {"a", 0.001}, {"f", 0.02}};
  for (std::size_t group : {1u, 2u, 3u, 5u, 64u}) {
    CAPTURE(group);
    MemoryStore m1, m2;
    auto a = std::move(Ledger::open(borrow_store(m1), store_test::ticking_clock()).value());
    auto b = std::move(Ledger::open(borrow_store(m2), store_test::ticking_clock()).value());
    for (Ledger* l : {a.get(), b.get()}) {
      REQUIRE(l->create_stream("s", *config).ok());
      REQUIRE(l->decide("s", "old", 0.5).ok());
    }
    auto want = a->decide_batch("s", inputs, group);
    REQUIRE(want.ok());
    REQUIRE_FALSE(want->error.has_value());
    CHECK(want->durable == inputs.size());
    std::vector<DecideResult> got;
    auto r = b->decide_batch_streamed("s", inputs, group, [&](const std::vector<DecideResult>& g) {
      got.insert(got.end(), g.begin(), g.end());
    });
    REQUIRE(r.ok());
    REQUIRE_FALSE(r->error.has_value());
    CHECK(r->durable == inputs.size());
    CHECK(r->decided.empty());
    REQUIRE(got.size() == want->decided.size());
    for (std::size_t i = 0; i < got.size(); ++i) {
      CAPTURE(i);
      CHECK(got[i].repeat == want->decided[i].repeat);
      CHECK(got[i].record.id == want->decided[i].record.id);
      CHECK(got[i].record.step == want->decided[i].record.step);
      CHECK(same_bits(got[i].record.level, want->decided[i].record.level));
      CHECK(got[i].record.rejected == want->decided[i].record.rejected);
    }
  }
}
