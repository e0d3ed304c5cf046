// The ledger on every backend (memory, RocksDB, and PostgreSQL when $ALPHALEDGER_TEST_PG names a
// server): the same calls give the same answers bit for bit; and what only a shared store does:
// several ledgers (standing for several processes) deciding on one stream at once, idempotent
// retries across them, fresh reads of a stream another one changed, and verify catching a row
// of the readable tables edited by hand.
#include <doctest/doctest.h>

#include <atomic>
#include <map>
#include <set>
#include <string>
#include <thread>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store_test_util.hpp"
#include "support/store_backends.hpp"

using namespace alphaledger;
using store_test::same_bits;
using test_support::ledger_backends;
using test_support::pg_exec;
using test_support::pg_value;
using test_support::ScratchDatabase;
using test_support::test_pg_uri;

namespace {

RuleConfig config_of(const RuleSpec& spec) {
  auto c = resolve_config(spec);
  REQUIRE(c.ok());
  return *c;
}

std::unique_ptr<Ledger> open_ledger(std::unique_ptr<Store> store, Clock clock = store_test::ticking_clock()) {
  auto l = Ledger::open(std::move(store), std::move(clock));
  REQUIRE_MESSAGE(l.ok(), (l.ok() ? "" : l.error().message));
  return std::move(*l);
}

// A representative session: create, decide, a batch, launch and finish, abandon, close; the
// history and verify at the end. Returns the history rows.
std::vector<DecisionRecord> session(Ledger& ledger) {
  auto created = ledger.create_stream("s", config_of({"saffron", 0.05}));
  REQUIRE(created.ok());
  CHECK(created->created);
  const std::vector<double> p = store_test::kTableStream;
  for (std::size_t i = 0; i < 4; ++i) {
    auto d = ledger.decide("s", store_test::numbered("t", i + 1), p[i]);
    REQUIRE_MESSAGE(d.ok(), (d.ok() ? "" : d.error().message));
  }
  auto repeat = ledger.decide("s", "t2", p[1]);
  REQUIRE(repeat.ok());
  CHECK(repeat->repeat);
  auto conflict = ledger.decide("s", "t2", 0.5);
  REQUIRE_FALSE(conflict.ok());
  CHECK(conflict.error().kind == ErrorKind::kConflict);
  std::vector<TestInput> batch;
  for (std::size_t i = 4; i < 8; ++i) batch.push_back({store_test::numbered("t", i + 1), p[i]});
  auto b = ledger.decide_batch("s", batch, 3);
  REQUIRE(b.ok());
  CHECK_FALSE(b->error);
  CHECK(b->durable == 4);
  auto launched = ledger.launch("s", "later");
  REQUIRE(launched.ok());
  auto gone = ledger.launch("s", "gone");
  REQUIRE(gone.ok());
  auto finished = ledger.decide("s", "later", p[8]);
  REQUIRE(finished.ok());
  auto abandoned = ledger.abandon("s", "gone");
  REQUIRE(abandoned.ok());
  auto closed = ledger.close_stream("s");
  REQUIRE(closed.ok());
  auto after = ledger.decide("s", "t99", 0.5);
  REQUIRE_FALSE(after.ok());
  auto verified = ledger.verify("s");
  REQUIRE(verified.ok());
  CHECK_MESSAGE(verified->ok, verified->problem);
  auto history = ledger.history("s");
  REQUIRE(history.ok());
  return *history;
}

}  // namespace

// The levels themselves are checked against the papers by the rule tests (tests/core) and the
// RocksDB ledger tests; here every backend must give the memory store's answers bit for bit.
TEST_CASE("Ledger on every backend: the same session gives the same history bit for bit") {
  std::optional<std::vector<DecisionRecord>> reference;
  for (auto& backend : ledger_backends()) {
    CAPTURE(backend.name);
    auto ledger = open_ledger(backend.open());
    const auto rows = session(*ledger);
    REQUIRE(rows.size() == 10);  // 8 decided, 1 launched and finished, 1 abandoned
    // Reopened over the same data: the same status.
    ledger.reset();
    auto again = open_ledger(backend.open());
    auto info = again->status("s");
    REQUIRE(info.ok());
    CHECK(info->tests == 10);
    CHECK(info->closed_at_ms.has_value());
    if (!reference) {
      reference = rows;
      continue;
    }
    for (std::size_t i = 0; i < rows.size(); ++i) {
      CAPTURE(i);
      CHECK(rows[i].id == (*reference)[i].id);
      CHECK(rows[i].step == (*reference)[i].step);
      CHECK(same_bits(rows[i].level, (*reference)[i].level));
      CHECK(same_bits(rows[i].wealth, (*reference)[i].wealth));
      CHECK(rows[i].rejected == (*reference)[i].rejected);
      CHECK(rows[i].abandoned == (*reference)[i].abandoned);
      CHECK(rows[i].decided_at_ms == (*reference)[i].decided_at_ms);
    }
  }
}

TEST_CASE("PostgreSQL: two ledgers race on one stream from several threads; every test once, chain linear") {
  const auto server = test_pg_uri();
  if (!server) {
    MESSAGE("skipped: set ALPHALEDGER_TEST_PG to a PostgreSQL server URI to run it");
    return;
  }
  ScratchDatabase db(*server);
  auto open_pg = [&] {
    auto s = open_postgres_store(db.uri());
    REQUIRE(s.ok());
    return open_ledger(std::move(*s), system_clock_ms);
  };
  auto a = open_pg();
  auto b = open_pg();
  // Both create the same stream at once: one creates it, the other finds it.
  std::atomic<int> created{0};
  {
    const RuleConfig config = config_of({"lord++", 0.05});
    std::atomic<int> refused{0};
    auto create = [&](Ledger& l) {
      auto r = l.create_stream("race", config);
      if (!r.ok()) ++refused;
      if (r.ok() && r->created) ++created;
    };
    std::thread ta([&] { create(*a); });
    std::thread tb([&] { create(*b); });
    ta.join();
    tb.join();
    CHECK(refused.load() == 0);
  }
  CHECK(created.load() == 1);

  constexpr int kThreads = 3;  // per ledger
  constexpr int kEach = 15;
  const auto p = store_test::random_p_values(store_test::test_seed(20261202), kThreads * 2 * kEach);
  std::atomic<int> failures{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < 2 * kThreads; ++t) {
    threads.emplace_back([&, t] {
      Ledger& ledger = t % 2 == 0 ? *a : *b;
      for (int i = 0; i < kEach; ++i) {
        const int n = t * kEach + i;
        auto r = ledger.decide("race", store_test::numbered("id", n), p[n]);
        if (!r.ok()) {
          ++failures;
          continue;
        }
        // The same id again through the other ledger: the stored decision, not a new one.
        if (i % 5 == 0) {
          Ledger& other = t % 2 == 0 ? *b : *a;
          auto again = other.decide("race", store_test::numbered("id", n), p[n]);
          if (!again.ok() || !again->repeat || again->record.step != r->record.step) ++failures;
        }
      }
    });
  }
  // A batch through ledger a at the same time, in small groups.
  std::vector<TestInput> batch;
  for (int i = 0; i < 20; ++i) batch.push_back({store_test::numbered("batch", i), 0.3 + i * 0.01});
  auto grouped = a->decide_batch("race", batch, 4);
  for (auto& t : threads) t.join();
  REQUIRE(grouped.ok());
  CHECK_FALSE(grouped->error);
  CHECK(grouped->decided.size() == 20);
  CHECK(failures.load() == 0);

  const std::size_t total = 2 * kThreads * kEach + 20;
  for (Ledger* l : {a.get(), b.get()}) {
    // Both see every decision (no stale cached head), each id once, steps 1..total.
    auto info = l->status("race");
    REQUIRE(info.ok());
    CHECK(info->tests == total);
    auto h = l->history("race");
    REQUIRE(h.ok());
    REQUIRE(h->size() == total);
    std::set<std::string> ids;
    for (std::size_t i = 0; i < h->size(); ++i) {
      CHECK((*h)[i].step == i + 1);
      ids.insert((*h)[i].id);
    }
    CHECK(ids.size() == total);
    auto v = l->verify("race");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
  }
  // The readable table holds the same rows.
  CHECK(pg_value(db.uri(), "SELECT count(*) FROM alphaledger.decisions WHERE stream = 'race'") ==
        std::to_string(total));
  CHECK(pg_value(db.uri(), "SELECT record_count FROM alphaledger.streams WHERE stream = 'race'") ==
        std::to_string(total));
}

TEST_CASE("PostgreSQL: verify reports a decisions or streams row edited by hand, naming step and column") {
  const auto server = test_pg_uri();
  if (!server) {
    MESSAGE("skipped: set ALPHALEDGER_TEST_PG to a PostgreSQL server URI to run it");
    return;
  }
  ScratchDatabase db(*server);
  auto store = open_postgres_store(db.uri());
  REQUIRE(store.ok());
  auto ledger = open_ledger(std::move(*store));
  REQUIRE(ledger->create_stream("x", config_of({"lond", 0.05})).ok());
  for (std::size_t i = 0; i < 5; ++i)
    REQUIRE(ledger->decide("x", store_test::numbered("t", i + 1), store_test::kTableStream[i]).ok());
  auto clean = ledger->verify("x");
  REQUIRE(clean.ok());
  CHECK(clean->ok);
  // An analyst's query reads the decisions (the values the ledger returned).
  CHECK(pg_value(db.uri(), "SELECT id FROM alphaledger.decisions WHERE stream = 'x' AND step = 3") == "t3");
  CHECK(pg_value(db.uri(), "SELECT rejected FROM alphaledger.decisions WHERE stream = 'x' AND step = 1") ==
        "t");

  SUBCASE("a level") {
    pg_exec(db.uri(), "UPDATE alphaledger.decisions SET level = 0.9 WHERE stream = 'x' AND step = 3");
    auto v = ledger->verify("x");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
    CHECK(v->first_bad_step == 3);
    CHECK(v->problem.find("step 3") != std::string::npos);
    CHECK(v->problem.find("column level") != std::string::npos);
  }
  SUBCASE("a rejection") {
    pg_exec(db.uri(),
            "UPDATE alphaledger.decisions SET rejected = NOT rejected WHERE stream = 'x' AND step = 2");
    auto v = ledger->verify("x");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
    CHECK(v->problem.find("column rejected") != std::string::npos);
  }
  SUBCASE("a row deleted") {
    pg_exec(db.uri(), "DELETE FROM alphaledger.decisions WHERE stream = 'x' AND step = 5");
    auto v = ledger->verify("x");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
    CHECK(v->first_bad_step == 5);
    CHECK(v->problem.find("missing") != std::string::npos);
  }
  SUBCASE("the stream's row") {
    pg_exec(db.uri(), "UPDATE alphaledger.streams SET alpha = 0.5 WHERE stream = 'x'");
    auto v = ledger->verify("x");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
    CHECK(v->problem.find("column alpha") != std::string::npos);
  }
  SUBCASE("the entry bytes: the hash chain catches it") {
    // The record of step 2 with one byte of its p-value changed (byte 40 lies inside the fields).
    pg_exec(db.uri(),
            "UPDATE alphaledger.entries SET value = set_byte(value, 40, (get_byte(value, 40) # 1)) "
            "WHERE key = convert_to('r/x/', 'UTF8') || convert_to(lpad(to_hex(2), 16, '0'), 'UTF8')");
    auto v = ledger->verify("x");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
  }
}

TEST_CASE("PostgreSQL: a ledger sees what another one wrote; e-lond rows fill e_value") {
  const auto server = test_pg_uri();
  if (!server) {
    MESSAGE("skipped: set ALPHALEDGER_TEST_PG to a PostgreSQL server URI to run it");
    return;
  }
  ScratchDatabase db(*server);
  auto open_pg = [&] {
    auto s = open_postgres_store(db.uri());
    REQUIRE(s.ok());
    return open_ledger(std::move(*s));
  };
  auto a = open_pg();
  auto b = open_pg();
  REQUIRE(a->create_stream("s", config_of({"lord++", 0.05})).ok());
  REQUIRE(b->status("s").ok());  // b caches the stream
  REQUIRE(a->decide("s", "one", 0.01).ok());
  auto seen = b->status("s");
  REQUIRE(seen.ok());
  CHECK(seen->tests == 1);
  // b decides on the state a left: step 2.
  auto second = b->decide("s", "two", 0.5);
  REQUIRE(second.ok());
  CHECK(second->record.step == 2);
  REQUIRE(a->close_stream("s").ok());
  auto refused = b->decide("s", "three", 0.5);
  REQUIRE_FALSE(refused.ok());
  CHECK(refused.error().reason == "closed_stream");

  RuleSpec e{"e-lond", 0.05};
  REQUIRE(a->create_stream("e", config_of(e)).ok());
  REQUIRE(a->decide_e("e", "big", 40.0).ok());
  CHECK(pg_value(db.uri(), "SELECT e_value FROM alphaledger.decisions WHERE stream = 'e'") == "40");
  CHECK(pg_value(db.uri(), "SELECT p_value IS NULL FROM alphaledger.decisions WHERE stream = 'e'") == "t");
  auto v = b->verify("e");
  REQUIRE(v.ok());
  CHECK_MESSAGE(v->ok, v->problem);
}
