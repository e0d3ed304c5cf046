// recover_ledger's report on what it could not prove (include/alphaledger/recover.hpp): keys that
// are no part of the ledger format are copied but named as not verified; records and heads of a
// stream whose configuration is gone are named, not copied; a closing whose time was changed is
// not passed off as the original. The ledgers are edited behind the ledger's back through the
// store, as damage would; the expected values follow the format in docs/ledger-format.md
// (common practice, no source).
#include <doctest/doctest.h>

#include "alphaledger/ledger.hpp"
#include "alphaledger/recover.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store_test_util.hpp"

namespace {

using namespace alphaledger;
using store_test::TempDir;

// A ledger folder with stream "s" (lord++, `n` decisions), closed when `close` is set.
void make_ledger(const std::string& folder, int n, bool close) {
  auto ledger = Ledger::open(folder, store_test::ticking_clock());
  REQUIRE(ledger.ok());
  REQUIRE((*ledger)->create_stream("s", *resolve_config(RuleSpec{.rule = "lord++"})).ok());
  for (int k = 1; k <= n; ++k) REQUIRE((*ledger)->decide("s", store_test::numbered("t", k), 0.3).ok());
  if (close) REQUIRE((*ledger)->close_stream("s").ok());
}

void put_raw(const std::string& folder, const std::string& key, const std::string& value) {
  auto store = open_rocksdb_store(folder, RocksStoreOptions{.create_if_missing = false});
  REQUIRE(store.ok());
  WriteBatch b;
  b.put(key, value);
  REQUIRE((*store)->write(b).ok());
}

TEST_CASE("Recover report: foreign keys are copied and named as not verified; orphan streams are named") {
  TempDir dir;
  const std::string src = dir.sub("src");
  make_ledger(src, 4, false);
  put_raw(src, "x/note", "kept as it was");
  // Records and a head of a stream "ghost" whose configuration key does not exist.
  put_raw(src, "h/ghost", "whatever");
  put_raw(src, "r/ghost/0000000000000001", "whatever");

  auto report = recover_ledger(src, dir.sub("dst"));
  REQUIRE(report.ok());
  CHECK(report->other_keys_copied == 1);
  REQUIRE(report->other_key_names.size() == 1);
  CHECK(report->other_key_names[0] == "x/note");
  CHECK(report->streams_without_configuration == std::vector<std::string>{"ghost"});
  CHECK_FALSE(report->complete());
  REQUIRE(report->streams.size() == 1);
  CHECK(report->streams[0].complete());
  CHECK(report->streams[0].kept_steps == 4);

  auto copy = Ledger::open(dir.sub("dst"), RocksStoreOptions{.create_if_missing = false, .read_only = true});
  REQUIRE(copy.ok());
  auto streams = (*copy)->streams();
  REQUIRE(streams.ok());
  CHECK(streams->size() == 1);  // no "ghost"
}

TEST_CASE("Recover report: a closing with a changed time is closed again and reported as not proven") {
  TempDir dir;
  const std::string src = dir.sub("src");
  make_ledger(src, 3, true);
  std::string original_hash;
  {
    auto ledger = Ledger::open(src, RocksStoreOptions{.create_if_missing = false, .read_only = true});
    REQUIRE(ledger.ok());
    auto v = (*ledger)->verify("s");
    REQUIRE(v.ok());
    REQUIRE(v->ok);
    original_hash = v->closing_hash;
  }
  // Move the closing time by 1 ms, keeping the head's closing hash.
  std::int64_t changed_time = 0;
  {
    auto store = open_rocksdb_store(src, RocksStoreOptions{.create_if_missing = false});
    REQUIRE(store.ok());
    auto bytes = (*store)->get(store::head_key("s"));
    REQUIRE(bytes.ok());
    REQUIRE(bytes->has_value());
    auto head = store::decode_head(**bytes);
    REQUIRE(head.ok());
    REQUIRE(head->closed_at_ms.has_value());
    changed_time = *head->closed_at_ms + 1;
    head->closed_at_ms = changed_time;
    WriteBatch b;
    b.put(store::head_key("s"), store::encode_head(*head));
    REQUIRE((*store)->write(b).ok());
  }
  auto report = recover_ledger(src, dir.sub("dst"));
  REQUIRE(report.ok());
  REQUIRE(report->streams.size() == 1);
  const StreamRecovery& s = report->streams[0];
  CHECK(s.kept_steps == 3);
  CHECK(s.closed_at_ms == changed_time);
  CHECK_FALSE(s.closing_proven);
  CHECK(s.closing_problem.find("does not hash to the closing hash in the head") != std::string::npos);
  CHECK(s.closing_hash != original_hash);
  CHECK_FALSE(s.complete());
  CHECK_FALSE(report->complete());

  // A closed stream that lost its last record: closed again over the kept steps, and said so.
  TempDir lost;
  make_ledger(lost.sub("src"), 3, true);
  {
    auto store = open_rocksdb_store(lost.sub("src"), RocksStoreOptions{.create_if_missing = false});
    REQUIRE(store.ok());
    WriteBatch b;
    b.erase(store::record_key("s", 3));
    REQUIRE((*store)->write(b).ok());
  }
  auto short_report = recover_ledger(lost.sub("src"), lost.sub("dst"));
  REQUIRE(short_report.ok());
  const StreamRecovery& t = short_report->streams.at(0);
  CHECK(t.kept_steps == 2);
  CHECK(t.closed_at_ms.has_value());
  CHECK_FALSE(t.closing_proven);
  CHECK(t.closing_problem.find("the closing covered 3 step(s) but only 2 were kept") != std::string::npos);
  {
    auto copy =
        Ledger::open(lost.sub("dst"), RocksStoreOptions{.create_if_missing = false, .read_only = true});
    REQUIRE(copy.ok());
    auto v = (*copy)->verify("s");
    REQUIRE(v.ok());
    CHECK(v->ok);
    CHECK(v->steps == 2);
    CHECK(v->closing_hash == t.closing_hash);
    CHECK((*copy)->status("s")->closed_at_ms == t.closed_at_ms);
  }

  // Intact: proven, the same hash (the control for the case above).
  TempDir again;
  make_ledger(again.sub("src"), 3, true);
  auto fine = recover_ledger(again.sub("src"), again.sub("dst"));
  REQUIRE(fine.ok());
  CHECK(fine->streams[0].closing_proven);
  CHECK(fine->complete());
}

}  // namespace
