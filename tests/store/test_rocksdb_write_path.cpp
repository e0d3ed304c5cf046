// The RocksDB store's write path tuned for group commit (src/store/rocksdb_store.cpp): Bloom
// filters answer id lookups, and the memtable inserts each stream's records from a remembered
// position per "r/<stream>/" prefix. Neither may change what is stored or read back. Streams
// whose names are prefixes of each other ("a", "a.b", "a_b") are decided interleaved, in groups,
// over enough decisions for a writer's close to move the memtable into a table file, and then
// reopened: every stream's history comes back in step order, equal to what `replay` decides for
// its p-values, every id is found, and verify passes. The expected values come from our own replay
// (no outside source: this checks the store against the rule engine).
#include <doctest/doctest.h>

#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;

TEST_CASE("RocksDB store: interleaved streams with prefix names read back in step order after a flush") {
  const std::uint64_t seed = store_test::test_seed(20261202);
  INFO("seed = " << seed << " (set ALPHALEDGER_TEST_SEED to reproduce)");
  store_test::TempDir dir;
  const std::string path = dir.sub("ledger");
  auto config = resolve_config({.rule = "lord++", .evaluation = "fast"});
  REQUIRE(config.ok());
  const std::vector<std::string> names = {"a", "a.b", "a_b", "b"};
  // 4 streams x 2,500 decisions: more than the 16,384 memtable entries after which a closing
  // writer flushes (each decision writes a record and an index entry).
  constexpr std::size_t kPerStream = 2500;
  constexpr std::size_t kGroup = 500;
  std::vector<std::vector<double>> p;
  for (std::size_t s = 0; s < names.size(); ++s) p.push_back(store_test::random_p_values(seed + s, kPerStream));
  {
    auto ledger = Ledger::open(path);
    REQUIRE(ledger.ok());
    for (const auto& n : names) REQUIRE((*ledger)->create_stream(n, *config).ok());
    for (std::size_t start = 0; start < kPerStream; start += kGroup) {
      for (std::size_t s = 0; s < names.size(); ++s) {
        std::vector<TestInput> inputs;
        // Ids in no sorted order, and the same ids in every stream.
        for (std::size_t i = start; i < start + kGroup; ++i)
          inputs.push_back({store_test::numbered("id-", (i * 7919) % kPerStream), p[s][i]});
        auto r = (*ledger)->decide_batch(names[s], inputs, 128);
        REQUIRE(r.ok());
        REQUIRE(!r->error);
      }
    }
  }
  auto ledger = Ledger::open(path, RocksStoreOptions{.create_if_missing = false, .read_only = true});
  REQUIRE(ledger.ok());
  for (std::size_t s = 0; s < names.size(); ++s) {
    CAPTURE(names[s]);
    const auto expected = store_test::replay_decisions(*config, p[s]);
    auto history = (*ledger)->history(names[s]);
    REQUIRE(history.ok());
    REQUIRE(history->size() == kPerStream);
    for (std::size_t i = 0; i < kPerStream; ++i) {
      const auto& rec = (*history)[i];
      if (rec.step != i + 1 || rec.id != store_test::numbered("id-", (i * 7919) % kPerStream) ||
          !store_test::same_bits(rec.level, expected[i].level)) {
        CAPTURE(i);
        REQUIRE(false);
      }
    }
    auto verify = (*ledger)->verify(names[s]);
    REQUIRE(verify.ok());
    CHECK(verify->ok);
    CHECK(verify->steps == kPerStream);
  }
  // Every id is found again, none missed by a filter: a repeat (same p-value) comes back as the
  // stored decision. Repeats go through the writer's decide path.
  ledger = Ledger::open(path);
  REQUIRE(ledger.ok());
  for (std::size_t s = 0; s < names.size(); ++s) {
    for (std::size_t i = 0; i < kPerStream; i += 97) {
      auto d = (*ledger)->decide(names[s], store_test::numbered("id-", (i * 7919) % kPerStream), p[s][i]);
      REQUIRE(d.ok());
      CHECK(d->repeat);
      CHECK(d->record.step == i + 1);
    }
  }
}
