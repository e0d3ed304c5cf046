// The ledger on RocksDB (7.8.3, Debian): a folder on disk that survives reopening, its lock, its
// format version, and damaged folders.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::kTableStream;
using store_test::TempDir;

namespace {

RuleConfig lord() { return resolve_config({.rule = "lord++"}).value(); }

}  // namespace

// Persistence across closing and reopening the folder; levels are methods.md 14.3 (LORD++,
// Ramdas et al. 2017 display, W0 = alpha/2, JM gamma), 1e-9 relative.
TEST_CASE("RocksStore: decisions persist across reopening the folder") {
  const std::vector<double> table = {0.001370386057,  0.0016684017,   0.003292613799, 0.001060948593,
                                     0.00363847711,   0.001351990812, 0.00115660396,  0.000989535854,
                                     0.0008614799781, 0.0007620915508};
  TempDir dir;
  const std::string path = dir.sub("ledger");
  {
    auto ledger = Ledger::open(path, store_test::ticking_clock());
    REQUIRE(ledger.ok());
    REQUIRE((*ledger)->create_stream("s", lord()).ok());
    for (std::size_t i = 0; i < 5; ++i)
      REQUIRE((*ledger)->decide("s", store_test::numbered("t", i + 1), kTableStream[i]).ok());
  }
  {
    auto ledger =
        Ledger::open(path, RocksStoreOptions{.create_if_missing = false}, store_test::ticking_clock());
    REQUIRE(ledger.ok());
    CHECK((*ledger)->status("s")->tests == 5);
    CHECK((*ledger)->decide("s", "t3", kTableStream[2])->repeat);
    for (std::size_t i = 5; i < 10; ++i)
      REQUIRE((*ledger)->decide("s", store_test::numbered("t", i + 1), kTableStream[i]).ok());
    auto h = (*ledger)->history("s");
    REQUIRE(h.ok());
    REQUIRE(h->size() == 10);
    for (std::size_t i = 0; i < 10; ++i) {
      CAPTURE(i + 1);
      CHECK(std::abs((*h)[i].level - table[i]) <= 1e-9 * table[i]);
    }
    auto v = (*ledger)->verify("s");
    REQUIRE(v.ok());
    CHECK(v->ok);
  }
}

// Issue 3 item 5: a second open of an open ledger gets kStorage naming the lock file, not a
// crash. (The cross-process case, naming the holder's pid, is in tests/cli/test_ledger_cli.cpp.)
// Message text of RocksDB 7.8.3 ("lock hold by current process") checked by running it.
TEST_CASE("RocksStore: a ledger in use is refused with a message naming its lock") {
  TempDir dir;
  const std::string path = dir.sub("ledger");
  auto first = Ledger::open(path);
  REQUIRE(first.ok());
  REQUIRE((*first)->create_stream("s", lord()).ok());
  auto second = Ledger::open(path);
  REQUIRE_FALSE(second.ok());
  CHECK(second.error().kind == ErrorKind::kStorage);
  CHECK(second.error().message.find(path + "/LOCK") != std::string::npos);
  CHECK(second.error().message.find("held by this process") != std::string::npos);
  // The failed second open did not disturb the first (its lock and its data are intact).
  CHECK((*first)->decide("s", "a", 0.0001)->record.step == 1);
  auto third = Ledger::open(path);
  CHECK_FALSE(third.ok());
}

// Format version (docs/ledger-format.md): a newer ledger is refused on open and left as it was.
TEST_CASE("RocksStore: a newer-format ledger is refused and not changed") {
  TempDir dir;
  const std::string path = dir.sub("ledger");
  {
    auto store = open_rocksdb_store(path);
    REQUIRE(store.ok());
    WriteBatch b;
    b.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion + 1));
    REQUIRE((*store)->write(b).ok());
  }
  auto ledger = Ledger::open(path);
  REQUIRE_FALSE(ledger.ok());
  CHECK(ledger.error().kind == ErrorKind::kStorage);
  CHECK(ledger.error().message.find("format version 2, newer than this build") != std::string::npos);
  auto store = open_rocksdb_store(path);
  REQUIRE(store.ok());
  CHECK((*store)->get(store::kFormatKey).value() == store::encode_format_version(2));
}

// A corrupt folder, a file in place of the folder, and a missing ledger for a read-only command.
TEST_CASE("RocksStore: corrupt, misplaced and missing ledgers give clear errors") {
  TempDir dir;
  SUBCASE("CURRENT overwritten with garbage") {
    const std::string path = dir.sub("ledger");
    {
      auto ledger = Ledger::open(path);
      REQUIRE(ledger.ok());
      REQUIRE((*ledger)->create_stream("s", lord()).ok());
    }
    std::ofstream(path + "/CURRENT", std::ios::trunc) << "garbage\n";
    auto ledger = Ledger::open(path);
    REQUIRE_FALSE(ledger.ok());
    CHECK(ledger.error().kind == ErrorKind::kStorage);
    CHECK(ledger.error().message.find(path) != std::string::npos);
  }
  SUBCASE("a file where the folder should be") {
    const std::string path = dir.sub("plain-file");
    std::ofstream(path) << "not a ledger\n";
    auto ledger = Ledger::open(path);
    REQUIRE_FALSE(ledger.ok());
    CHECK(ledger.error().kind == ErrorKind::kStorage);
    CHECK(ledger.error().message.find("not a folder") != std::string::npos);
  }
  SUBCASE("no ledger yet, and the caller does not create one") {
    const std::string path = dir.sub("absent");
    auto ledger = Ledger::open(path, RocksStoreOptions{.create_if_missing = false});
    REQUIRE_FALSE(ledger.ok());
    CHECK(ledger.error().kind == ErrorKind::kRefused);
    CHECK(ledger.error().message.find("no ledger at") != std::string::npos);
    CHECK_FALSE(std::filesystem::exists(path));
  }
}

// Tampering through the store interface of the real store (issue 3 "Tampering"), then verify
// after reopening: the damage is on disk, and verify names the step.
TEST_CASE("RocksStore: verify finds a record edited on disk") {
  TempDir dir;
  const std::string path = dir.sub("ledger");
  {
    auto ledger = Ledger::open(path);
    REQUIRE(ledger.ok());
    REQUIRE((*ledger)->create_stream("s", lord()).ok());
    for (std::size_t i = 0; i < 10; ++i)
      REQUIRE((*ledger)->decide("s", store_test::numbered("t", i + 1), kTableStream[i]).ok());
  }
  {
    auto store = open_rocksdb_store(path);
    REQUIRE(store.ok());
    auto bytes = (*store)->get(store::record_key("s", 4));
    REQUIRE(bytes.ok());
    auto rec = store::decode_record(bytes->value());
    REQUIRE(rec.ok());
    rec->record.p_value = 0.0008;  // still rejected at level 0.00106: only the chain shows it
    WriteBatch b;
    b.put(store::record_key("s", 4), store::encode_record(rec->record, rec->prev_hash));
    REQUIRE((*store)->write(b).ok());
  }
  auto ledger = Ledger::open(path);
  REQUIRE(ledger.ok());
  auto v = (*ledger)->verify("s");
  REQUIRE(v.ok());
  CHECK_FALSE(v->ok);
  CHECK(v->first_bad_step == 4);
}
