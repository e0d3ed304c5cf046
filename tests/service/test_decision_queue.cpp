// decide_in_order and DecisionQueue (group commit for concurrent callers), in process over the
// in-memory and fault-injecting stores.
#include <doctest/doctest.h>

#include <atomic>
#include <random>
#include <thread>

#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"
#include "store/faulty_store.hpp"

namespace alphaledger {
namespace {

struct MemoryLedger {
  MemoryStore memory;
  FaultyStore faulty{memory};
  std::unique_ptr<Ledger> ledger;
  MemoryLedger() {
    auto l = Ledger::open(borrow_store(faulty), [] { return std::int64_t{1700000000000}; });
    REQUIRE(l.ok());
    ledger = std::move(l).value();
  }
  RuleConfig create(const std::string& name, const std::string& rule) {
    auto config = resolve_config(RuleSpec{.rule = rule});
    REQUIRE(config.ok());
    REQUIRE(ledger->create_stream(name, *config).ok());
    return *config;
  }
};

TEST_CASE(
    "decide_in_order: one answer per input in order; an invalid input or a conflict is answered alone") {
  MemoryLedger m;
  const RuleConfig config = m.create("s", "lord++");
  REQUIRE(m.ledger->decide("s", "old", 0.2).ok());
  const std::vector<TestInput> inputs = {{"a", 0.01},  {"old", 0.9},  // conflict with the ledger
                                         {"b", 2.0},                  // invalid p-value (not pre-checked)
                                         {"c", 0.5},   {"a", 0.01},   // a repeat of the first input
                                         {"d", 0.0001}};
  const auto out = decide_in_order(*m.ledger, "s", inputs, /*max_group=*/4);
  REQUIRE(out.size() == inputs.size());
  for (const auto& r : out) REQUIRE(r.has_value());
  CHECK(out[0]->ok());
  REQUIRE_FALSE(out[1]->ok());
  CHECK(out[1]->error().kind == ErrorKind::kConflict);
  REQUIRE_FALSE(out[2]->ok());
  CHECK(out[2]->error().kind == ErrorKind::kInvalidArgument);
  CHECK(out[3]->ok());
  REQUIRE(out[4]->ok());
  CHECK(out[4]->value().repeat);
  CHECK(out[4]->value().record.step == out[0]->value().record.step);
  CHECK(out[5]->ok());
  auto history = m.ledger->history("s");
  REQUIRE(history.ok());
  std::vector<std::string> ids;
  for (const auto& r : *history) ids.push_back(r.id);
  CHECK(ids == std::vector<std::string>{"old", "a", "c", "d"});
  test_support::check_history_equals_replay(*history, config);
}

TEST_CASE(
    "DecisionQueue: 8 threads on 2 streams with retries decide each id once, and each history equals "
    "replay") {
  const std::uint64_t seed = 7;
  INFO("seed " << seed);
  MemoryLedger m;
  const RuleConfig lord = m.create("one", "lord++");
  const RuleConfig addis = m.create("two", "addis");
  DecisionQueue queue(*m.ledger, 16);
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> unif(0.0, 1.0);
  std::vector<double> p(400);
  for (auto& v : p) v = unif(rng) < 0.2 ? unif(rng) * 1e-3 : unif(rng);
  std::vector<std::vector<std::pair<std::string, DecideResult>>> seen(8);
  std::vector<std::thread> threads;
  std::atomic<int> failures{0};
  for (int c = 0; c < 8; ++c) {
    threads.emplace_back([&, c] {
      // Every test is sent by two threads (c and c+1): one decides it, the other gets a repeat.
      for (int n = 0; n < 400; ++n) {
        if (n % 8 != c && n % 8 != (c + 1) % 8) continue;
        const std::string stream = n % 2 == 0 ? "one" : "two";
        auto r = queue.decide(stream, test_support::tag("t", n), p[static_cast<std::size_t>(n)]);
        if (!r) {
          ++failures;
          continue;
        }
        seen[static_cast<std::size_t>(c)].emplace_back(stream, *r);
      }
    });
  }
  for (auto& t : threads) t.join();
  CHECK(failures == 0);
  std::map<std::string, int> first_time;
  for (const auto& list : seen) {
    for (const auto& [stream, d] : list) {
      if (!d.repeat) ++first_time[d.record.id];
    }
  }
  CHECK(first_time.size() == 400);
  for (const auto& [id, count] : first_time)
    CHECK_MESSAGE(count == 1, id << " decided " << count << " times");
  auto h1 = m.ledger->history("one");
  auto h2 = m.ledger->history("two");
  REQUIRE(h1.ok());
  REQUIRE(h2.ok());
  CHECK(h1->size() == 200);
  CHECK(h2->size() == 200);
  test_support::check_history_equals_replay(*h1, lord);
  test_support::check_history_equals_replay(*h2, addis);
  // Every answer equals the stored record.
  std::map<std::string, DecisionRecord> stored;
  for (const auto& r : *h1) stored[r.id] = r;
  for (const auto& r : *h2) stored[r.id] = r;
  for (const auto& list : seen) {
    for (const auto& [stream, d] : list) {
      const DecisionRecord& s = stored[d.record.id];
      CHECK(d.record.step == s.step);
      CHECK(d.record.level == s.level);
      CHECK(d.record.wealth == s.wealth);
    }
  }
}

TEST_CASE(
    "DecisionQueue: when the store refuses writes every waiting caller gets kIOError and nothing is "
    "decided") {
  MemoryLedger m;
  m.create("s", "saffron");
  DecisionQueue queue(*m.ledger);
  m.faulty.fail_all_writes("Input/output error");
  const auto before = copy_contents(m.memory);
  std::vector<std::thread> threads;
  std::atomic<int> storage_errors{0};
  for (int c = 0; c < 4; ++c) {
    threads.emplace_back([&, c] {
      for (int n = 0; n < 10; ++n) {
        auto r = queue.decide("s", test_support::tag("t", c) + test_support::tag("-", n), 0.3);
        if (!r && r.error().kind == ErrorKind::kIOError) ++storage_errors;
      }
    });
  }
  for (auto& t : threads) t.join();
  CHECK(storage_errors == 40);
  CHECK(copy_contents(m.memory) == before);
  m.faulty.clear_faults();
  auto r = queue.decide("s", "after", 0.3);  // the queue recovers once the store does
  REQUIRE(r.ok());
  CHECK(r->record.step == 1);
}

TEST_CASE("DecisionQueue: lanes exist only while deciding; unknown and finished streams leave none") {
  MemoryLedger m;
  const RuleConfig config = m.create("kept", "lord++");
  DecisionQueue queue(*m.ledger);
  CHECK(queue.lane_count() == 0);
  for (int k = 0; k < 1000; ++k) {
    auto d = queue.decide(test_support::tag("unknown-", k), "x", 0.5);
    REQUIRE_FALSE(d.ok());
    CHECK(d.error().kind == ErrorKind::kNotFound);
  }
  CHECK(queue.lane_count() == 0);  // 1,000 names asked for, none kept
  std::vector<std::thread> threads;
  std::atomic<std::size_t> most{0};
  for (int c = 0; c < 6; ++c) {
    threads.emplace_back([&, c] {
      for (int n = 0; n < 30; ++n) {
        auto d = queue.decide("kept", test_support::tag("c", c) + test_support::tag("-", n), 0.3);
        CHECK(d.ok());
        std::size_t now = queue.lane_count(), seen = most.load();
        while (now > seen && !most.compare_exchange_weak(seen, now)) {
        }
      }
    });
  }
  for (auto& t : threads) t.join();
  CHECK(most.load() <= 1);  // one stream, one lane at most
  CHECK(queue.lane_count() == 0);
  auto h = m.ledger->history("kept");
  REQUIRE(h.ok());
  CHECK(h->size() == 180);
  test_support::check_history_equals_replay(*h, config);
}

}  // namespace
}  // namespace alphaledger
