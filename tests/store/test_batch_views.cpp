// decide_batch_streamed over views (what decide --file uses): its compact table of the batch's new
// ids and its re-reading of ids already in the ledger must give what the reference gives. The
// reference is decide() one test at a time on a twin ledger, plus the batch's own documented
// messages (no outside source: self-consistency).
#include <doctest/doctest.h>

#include <span>
#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::numbered;
using store_test::same_bits;

TEST_CASE("decide_batch_streamed over views: many rows, in-batch and stored repeats, as decide() one by one") {
  auto config = resolve_config({.rule = "lord++", .evaluation = "fast"});
  REQUIRE(config.ok());
  const auto p = store_test::random_p_values(store_test::test_seed(16), 3000);
  // Ids: row k names test k / 3 for k % 5 == 4 (a repeat of an earlier row, same p-value), else
  // test k; tests 0..199 were decided before the batch (so their rows are repeats of the ledger).
  std::vector<std::string> ids;
  std::vector<double> ps;
  for (std::size_t k = 0; k < p.size(); ++k) {
    const std::size_t t = k % 5 == 4 ? k / 3 : k;
    ids.push_back(numbered("t", t));
    ps.push_back(p[t]);
  }
  std::vector<TestView> views;
  for (std::size_t k = 0; k < ids.size(); ++k) views.push_back({ids[k], ps[k]});

  for (std::size_t group : {1u, 7u, 256u, 4096u}) {
    CAPTURE(group);
    MemoryStore m1, m2;
    auto one = std::move(Ledger::open(borrow_store(m1), store_test::ticking_clock()).value());
    auto batch = std::move(Ledger::open(borrow_store(m2), store_test::ticking_clock()).value());
    for (Ledger* l : {one.get(), batch.get()}) {
      REQUIRE(l->create_stream("s", *config).ok());
      for (std::size_t t = 0; t < 200; ++t) REQUIRE(l->decide("s", numbered("t", t), p[t]).ok());
    }
    std::vector<DecideResult> want;
    for (const auto& v : views) {
      auto d = one->decide("s", v.id, v.p_value);
      REQUIRE(d.ok());
      want.push_back(*d);
    }
    std::vector<DecideResult> got;
    auto r = batch->decide_batch_streamed("s", std::span<const TestView>(views), group,
                                          [&](const std::vector<DecideResult>& g) {
                                            got.insert(got.end(), g.begin(), g.end());
                                          });
    REQUIRE(r.ok());
    REQUIRE_FALSE(r->error.has_value());
    CHECK(r->durable == views.size());
    REQUIRE(got.size() == want.size());
    std::size_t repeats = 0;
    for (std::size_t i = 0; i < got.size(); ++i) {
      CAPTURE(i);
      CHECK(got[i].repeat == want[i].repeat);
      CHECK(got[i].record.id == want[i].record.id);
      CHECK(got[i].record.step == want[i].record.step);
      CHECK(same_bits(got[i].record.level, want[i].record.level));
      CHECK(got[i].record.rejected == want[i].record.rejected);
      repeats += got[i].repeat ? 1 : 0;
    }
    CHECK(repeats >= 500);  // repeats were exercised: 160 rows of tests 0..199, most of 600 rows k % 5 == 4
  }
}

TEST_CASE("decide_batch_streamed over views: two far-apart rows with one id and two p-values") {
  auto config = resolve_config({.rule = "lord++"});
  REQUIRE(config.ok());
  std::vector<std::string> ids;
  for (std::size_t k = 0; k < 5000; ++k) ids.push_back(numbered("x", k));
  std::vector<TestView> views;
  for (const auto& id : ids) views.push_back({id, 0.5});
  views.push_back({ids[17], 0.25});  // position 5001 repeats position 18 with another p-value
  MemoryStore m;
  auto ledger = std::move(Ledger::open(borrow_store(m), store_test::ticking_clock()).value());
  REQUIRE(ledger->create_stream("s", *config).ok());
  bool called = false;
  auto r = ledger->decide_batch_streamed("s", std::span<const TestView>(views), 256,
                                         [&](const std::vector<DecideResult>&) { called = true; });
  REQUIRE(r.ok());
  REQUIRE(r->error.has_value());
  CHECK(r->error->kind == ErrorKind::kConflict);
  CHECK(r->stopped_at == 5000);
  CHECK(r->error->message.find("position 18") != std::string::npos);
  CHECK(r->error->message.find("position 5001") != std::string::npos);
  CHECK_FALSE(called);
  CHECK(r->durable == 0);
  auto info = ledger->status("s");
  REQUIRE(info.ok());
  CHECK(info->tests == 0);  // the ledger is unchanged
}
