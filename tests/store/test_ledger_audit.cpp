// Ledger features for auditors: closing streams, anchors (chain hashes noted earlier), paged and
// streamed history, and a cache that never keeps names of streams that do not exist.
#include <doctest/doctest.h>

#include <atomic>
#include <chrono>
#include <barrier>
#include <cstdint>
#include <limits>
#include <mutex>
#include <set>
#include <thread>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store/sha256.hpp"
#include "store_test_util.hpp"
#include "store/faulty_store.hpp"

using namespace alphaledger;

namespace {

RuleConfig lord() {
  auto c = resolve_config({.rule = "lord++"});
  REQUIRE(c.ok());
  return *c;
}

std::unique_ptr<Ledger> open_over(Store& store, Clock clock = store_test::ticking_clock()) {
  auto l = Ledger::open(borrow_store(store), std::move(clock));
  REQUIRE(l.ok());
  return std::move(*l);
}

// A stream "s" of `n` LORD++ decisions with ids t1..tn on a fresh ledger over `mem`.
std::unique_ptr<Ledger> stream_of(MemoryStore& mem, std::size_t n) {
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("s", lord()).ok());
  const auto p = store_test::random_p_values(29, n);
  std::vector<TestInput> inputs;
  for (std::size_t i = 0; i < n; ++i) inputs.push_back({store_test::numbered("t", i + 1), p[i]});
  auto r = ledger->decide_batch("s", inputs, 64);
  REQUIRE(r.ok());
  REQUIRE_FALSE(r->error.has_value());
  return ledger;
}

store::StoredHead head_of(MemoryStore& mem, const std::string& stream) {
  auto bytes = mem.get(store::head_key(stream));
  REQUIRE(bytes.ok());
  REQUIRE(bytes->has_value());
  auto h = store::decode_head(**bytes);
  REQUIRE(h.ok());
  return *h;
}

void put(MemoryStore& mem, const std::string& key, const std::string& value) {
  WriteBatch b;
  b.put(key, value);
  REQUIRE(mem.write(b).ok());
}

store::Digest record_hash(MemoryStore& mem, const std::string& stream, std::uint64_t step) {
  auto rec = store::decode_record(mem.get(store::record_key(stream, step)).value().value());
  REQUIRE(rec.ok());
  return rec->hash;
}

// Counts how many decision records a caller reads: every record key visited by a scan and every
// record key fetched by get.
class CountingStore final : public Store {
 public:
  explicit CountingStore(Store& inner) : inner_(inner) {}
  Result<std::optional<std::string>> get(std::string_view key) override {
    if (key.starts_with("r/")) ++record_reads;
    return inner_.get(key);
  }
  Status write(const WriteBatch& batch, bool sync) override { return inner_.write(batch, sync); }
  Status scan(std::string_view prefix, const Visitor& visit) override {
    return inner_.scan(prefix, [&](std::string_view key, std::string_view value) {
      if (key.starts_with("r/")) ++record_reads;
      return visit(key, value);
    });
  }
  std::string describe() const override { return inner_.describe(); }
  std::atomic<std::uint64_t> record_reads{0};

 private:
  Store& inner_;
};

// Makes reads of a stream's configuration and every write take a while, as a disk would, so that
// calls racing on one stream overlap (tests of the cache under contention).
class SlowStore final : public Store {
 public:
  explicit SlowStore(Store& inner) : inner_(inner) {}
  Result<std::optional<std::string>> get(std::string_view key) override {
    if (key.starts_with("c/")) std::this_thread::sleep_for(std::chrono::microseconds(50));
    return inner_.get(key);
  }
  Status write(const WriteBatch& batch, bool sync) override {
    std::this_thread::sleep_for(std::chrono::microseconds(300));
    return inner_.write(batch, sync);
  }
  Status scan(std::string_view prefix, const Visitor& visit) override { return inner_.scan(prefix, visit); }
  std::string describe() const override { return inner_.describe(); }

 private:
  Store& inner_;
};

}  // namespace

// ---- closing ------------------------------------------------------------------------------

// Closing is idempotent, refuses every later decision with the ledger unchanged, shows in status
// and streams (also after a reopen), and verify covers it. Expected values: the ticking clock's
// times (store_test_util.hpp); the closing hash from its definition in docs/ledger-format.md
// ("Closing": SHA-256, FIPS 180-4, over u8 1, u64 count, i64 time, last record hash), computed here
// byte by byte.
TEST_CASE("Ledger close: a closed stream takes no more tests and keeps a verifiable history") {
  MemoryStore mem;
  auto ledger = stream_of(mem, 12);
  const store::Digest last = record_hash(mem, "s", 12);
  REQUIRE(ledger->create_stream("other", lord()).ok());

  auto closing = ledger->close_stream("s");
  REQUIRE(closing.ok());
  CHECK(closing->newly_closed);
  REQUIRE(closing->info.closed_at_ms.has_value());
  const std::int64_t closed_at = *closing->info.closed_at_ms;
  CHECK(closed_at > 1700000000000);
  CHECK(closing->info.tests == 12);
  std::string preimage(1, '\x01');
  for (int i = 0; i < 8; ++i) preimage.push_back(static_cast<char>(std::uint64_t{12} >> (8 * i)));
  for (int i = 0; i < 8; ++i)
    preimage.push_back(static_cast<char>(static_cast<std::uint64_t>(closed_at) >> (8 * i)));
  preimage.append(store::as_bytes(last));
  REQUIRE(preimage.size() == 49);
  CHECK(store::encode_closing(12, closed_at, last) == preimage);
  CHECK(closing->closing_hash == store::to_hex(store::sha256(preimage)));
  CHECK(head_of(mem, "s").last_hash == store::sha256(preimage));  // the head carries the closing
  CHECK(head_of(mem, "s").closed_at_ms == closed_at);

  const auto before = copy_contents(mem);
  auto again = ledger->close_stream("s");
  REQUIRE(again.ok());
  CHECK_FALSE(again->newly_closed);
  CHECK(again->info.closed_at_ms == closed_at);
  CHECK(again->closing_hash == closing->closing_hash);
  CHECK(copy_contents(mem) == before);

  for (int pass = 0; pass < 2; ++pass) {  // warm, then cold (reopened over the same store)
    CAPTURE(pass);
    auto d = ledger->decide("s", "new-test", 0.001);
    REQUIRE_FALSE(d.ok());
    CHECK(d.error().kind == ErrorKind::kConflict);
    CHECK(d.error().message.find("stream 's' is closed since " + format_timestamp(closed_at)) !=
          std::string::npos);
    const double p1 =
        store::decode_record(mem.get(store::record_key("s", 1)).value().value())->record.p_value;
    auto repeat = ledger->decide("s", "t1", p1);  // a repeat of an earlier test is refused too
    CHECK(repeat.error().kind == ErrorKind::kConflict);
    auto batch = ledger->decide_batch("s", {{"a", 0.1}, {"b", 0.2}});
    REQUIRE_FALSE(batch.ok());
    CHECK(batch.error().kind == ErrorKind::kConflict);
    CHECK(batch.error().message.find("is closed since") != std::string::npos);
    CHECK(ledger->next_level("s").error().kind == ErrorKind::kConflict);
    CHECK(copy_contents(mem) == before);

    auto info = ledger->status("s");
    REQUIRE(info.ok());
    CHECK(info->closed_at_ms == closed_at);
    CHECK(info->tests == 12);
    auto all = ledger->streams();
    REQUIRE(all.ok());
    REQUIRE(all->size() == 2);
    CHECK((*all)[0].name == "other");
    CHECK_FALSE((*all)[0].closed_at_ms.has_value());
    CHECK((*all)[1].closed_at_ms == closed_at);
    CHECK(ledger->history("s")->size() == 12);

    auto report = ledger->verify("s");
    REQUIRE(report.ok());
    CHECK(report->ok);
    CHECK(report->steps == 12);
    CHECK(report->chain_hash == store::to_hex(last));
    CHECK(report->closed_at_ms == closed_at);
    CHECK(report->closing_hash == closing->closing_hash);
    ledger = open_over(mem);
  }
  // Other streams are untouched by the closing.
  CHECK(ledger->decide("other", "x", 0.5).ok());
  // Errors: an unknown stream is refused, a bad name is invalid input.
  CHECK(ledger->close_stream("nope").error().kind == ErrorKind::kNotFound);
  CHECK(ledger->close_stream("a/b").error().kind == ErrorKind::kInvalidArgument);
}

// A stream with no records closes too: its closing links to the configuration (genesis hash).
TEST_CASE("Ledger close: an empty stream closes and verifies") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("e", lord()).ok());
  auto closing = ledger->close_stream("e");
  REQUIRE(closing.ok());
  const store::Digest genesis = store::genesis_hash(mem.get(store::config_key("e")).value().value());
  CHECK(closing->closing_hash == store::to_hex(store::closing_hash(0, *closing->info.closed_at_ms, genesis)));
  auto report = open_over(mem)->verify("e");
  REQUIRE(report.ok());
  CHECK(report->ok);
  CHECK(report->steps == 0);
  CHECK(report->chain_hash == store::to_hex(genesis));
}

// A failed closing write changes nothing and leaves the stream open (fault injection as in
// test_ledger.cpp).
TEST_CASE("Ledger close: a failed write leaves the stream open") {
  MemoryStore mem;
  auto faulty = std::make_unique<FaultyStore>(mem);
  FaultyStore* faults = faulty.get();
  auto ledger = std::move(Ledger::open(std::move(faulty), store_test::ticking_clock()).value());
  REQUIRE(ledger->create_stream("s", lord()).ok());
  REQUIRE(ledger->decide("s", "a", 0.01).ok());
  const auto before = copy_contents(mem);
  faults->fail_all_writes("No space left on device");
  auto c = ledger->close_stream("s");
  REQUIRE_FALSE(c.ok());
  CHECK(c.error().kind == ErrorKind::kIOError);
  CHECK(copy_contents(mem) == before);
  faults->clear_faults();
  CHECK_FALSE(ledger->status("s")->closed_at_ms.has_value());
  CHECK(ledger->decide("s", "b", 0.5)->record.step == 2);
}

// An open stream's head keeps value version 1 and the version-1 layout byte for byte (so ledgers
// written before closing existed read and verify unchanged, and older builds still read open
// streams); only a closed head is version 2, and other versions are refused. Layout:
// docs/ledger-format.md "Head".
TEST_CASE("Ledger close: open heads keep the version 1 layout; closed heads are version 2") {
  MemoryStore mem;
  auto ledger = stream_of(mem, 3);
  const std::string open_bytes = mem.get(store::head_key("s")).value().value();
  const store::StoredHead h = head_of(mem, "s");
  CHECK(open_bytes[0] == '\x01');
  CHECK(open_bytes.size() == 1 + 8 + 32 + 4 + h.rule_state.size());
  CHECK(open_bytes.substr(9, 32) == std::string(store::as_bytes(record_hash(mem, "s", 3))));
  // A head built by hand in the version-1 layout (as an older build wrote it) verifies.
  std::string old_layout(1, '\x01');
  for (int i = 0; i < 8; ++i) old_layout.push_back(static_cast<char>(std::uint64_t{3} >> (8 * i)));
  old_layout.append(store::as_bytes(record_hash(mem, "s", 3)));
  for (int i = 0; i < 4; ++i) old_layout.push_back(static_cast<char>(h.rule_state.size() >> (8 * i)));
  old_layout.append(h.rule_state);
  CHECK(old_layout == open_bytes);

  REQUIRE(ledger->close_stream("s").ok());
  const std::string closed_bytes = mem.get(store::head_key("s")).value().value();
  CHECK(closed_bytes[0] == '\x02');
  CHECK(closed_bytes.size() == open_bytes.size() + 8);
  CHECK(store::encode_head(*store::decode_head(closed_bytes)) == closed_bytes);
  std::string v3 = closed_bytes;
  v3[0] = '\x03';
  CHECK(store::decode_head(v3).error().kind == ErrorKind::kCorruption);
  CHECK_FALSE(store::decode_head(closed_bytes.substr(0, closed_bytes.size() - 1)).ok());
}

// A hand-made reopen: each way of editing the head is caught, by verify alone or, when the edit
// is consistent, by an anchor on the closing (docs/ledger.md "Closing a stream").
TEST_CASE("Ledger close: a reopen by hand is detected") {
  MemoryStore mem;
  auto ledger = stream_of(mem, 8);
  auto closing = ledger->close_stream("s");
  REQUIRE(closing.ok());
  const Anchor closed_anchor{0, true, closing->closing_hash};
  const Anchor last_anchor{8, false, store::to_hex(record_hash(mem, "s", 8))};
  CHECK(open_over(mem)->verify("s", {closed_anchor, last_anchor})->ok);
  const auto closed_state = copy_contents(mem);
  auto restore = [&] {
    WriteBatch b;
    for (const auto& [k, v] : copy_contents(mem))
      if (!closed_state.count(k)) b.erase(k);
    for (const auto& [k, v] : closed_state) b.put(k, v);
    REQUIRE(mem.write(b).ok());
  };

  SUBCASE("closing time removed from the head, hash left") {
    store::StoredHead h = head_of(mem, "s");
    h.closed_at_ms.reset();
    put(mem, store::head_key("s"), store::encode_head(h));
    auto r = open_over(mem)->verify("s");
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->first_bad_step == 8);
    CHECK(r->problem.find("closing was removed") != std::string::npos);
  }
  SUBCASE("closing time changed") {
    store::StoredHead h = head_of(mem, "s");
    *h.closed_at_ms += 1000;
    put(mem, store::head_key("s"), store::encode_head(h));
    auto r = open_over(mem)->verify("s");
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->problem.find("closing time") != std::string::npos);
  }
  SUBCASE("a consistent reopen, then a new decision") {
    store::StoredHead h = head_of(mem, "s");
    h.closed_at_ms.reset();
    h.last_hash = record_hash(mem, "s", 8);
    put(mem, store::head_key("s"), store::encode_head(h));
    auto reopened = open_over(mem);
    REQUIRE(reopened->decide("s", "late", 0.2).ok());
    auto plain = reopened->verify("s");
    REQUIRE(plain.ok());
    CHECK(plain->ok);  // consistent by itself: only the anchor can tell
    CHECK(reopened->verify("s", {last_anchor})->ok);
    auto r = reopened->verify("s", {last_anchor, closed_anchor});
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->problem.find("not closed") != std::string::npos);
  }
  restore();
  CHECK(open_over(mem)->verify("s", {closed_anchor})->ok);
}

// ---- anchors ------------------------------------------------------------------------------

// The accepted forms and the refusals, each naming what is accepted (common practice, no source).
TEST_CASE("Ledger anchors: parse_anchor reads STEP:HASH and closed:HASH") {
  const std::string hex = "0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcdef";
  std::string upper = hex;
  for (auto& c : upper) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  auto a = parse_anchor("12:" + upper);
  REQUIRE(a.ok());
  CHECK(a->step == 12);
  CHECK_FALSE(a->closing);
  CHECK(a->chain_hash == hex);
  CHECK(anchor_text(*a) == "12:" + hex);
  CHECK(parse_anchor(anchor_text(*a)).value() == *a);
  auto zero = parse_anchor("0:" + hex);
  REQUIRE(zero.ok());
  CHECK(zero->step == 0);
  auto c = parse_anchor("closed:" + hex);
  REQUIRE(c.ok());
  CHECK(c->closing);
  CHECK(anchor_text(*c) == "closed:" + hex);

  const std::vector<std::pair<std::string, std::string>> bad = {
      {hex, "no ':'"},
      {":" + hex, "step number"},
      {"x:" + hex, "step number"},
      {"-1:" + hex, "step number"},
      {"1.5:" + hex, "step number"},
      {"18446744073709551616:" + hex, "step number"},  // 2^64: out of range
      {"3:" + hex.substr(1), "64 hex digits"},
      {"3:" + hex + "0", "64 hex digits"},
      {"3:" + hex.substr(1) + "g", "64 hex digits"},
      {"3:", "64 hex digits"},
  };
  for (const auto& [text, says] : bad) {
    CAPTURE(text);
    auto r = parse_anchor(text);
    REQUIRE_FALSE(r.ok());
    CHECK(r.error().kind == ErrorKind::kInvalidArgument);
    CHECK(r.error().message.find(says) != std::string::npos);
    CHECK(r.error().message.find("STEP:HASH") != std::string::npos);
  }
  // A huge input is quoted only as an excerpt.
  auto huge = parse_anchor(std::string(100000, '7'));
  REQUIRE_FALSE(huge.ok());
  CHECK(huge.error().message.size() < 600);
}

// The auditor's case: the ledger lost its tail and the head was rewritten to match, so the
// remaining prefix is consistent and verify alone passes; an anchor noted before the loss names
// the missing step. Also: an anchor with another hash at its step, and one at step 0 (the
// configuration's hash, SHA-256 of its bytes: docs/ledger-format.md "The hash chain").
TEST_CASE("Ledger anchors: verify catches a lost tail and a changed step") {
  MemoryStore mem;
  auto ledger = stream_of(mem, 20);
  auto full = ledger->verify("s");
  REQUIRE(full.ok());
  REQUIRE(full->ok);
  const Anchor at20{20, false, full->chain_hash};
  const Anchor at7{7, false, ledger->chain_hash_at("s", 7).value()};
  const Anchor at0{0, false,
                   store::to_hex(store::genesis_hash(mem.get(store::config_key("s")).value().value()))};
  auto all = ledger->verify("s", {at20, at0, at7});  // any order
  REQUIRE(all.ok());
  CHECK(all->ok);
  CHECK(all->anchors_checked == 3);

  SUBCASE("a lost tail with a consistent head") {
    // Keep steps 1..15: drop the rest and their index entries, and write the head a build of
    // this code would have written after step 15 (replayed state, record 15's hash).
    const auto history = ledger->history("s").value();
    WriteBatch w;
    Rule rule(lord());
    for (std::size_t i = 0; i < 15; ++i) (void)rule.record(history[i].p_value);
    for (std::size_t i = 15; i < 20; ++i) {
      w.erase(store::record_key("s", i + 1));
      w.erase(store::index_key("s", history[i].id));
    }
    w.put(store::head_key("s"),
          store::encode_head(store::StoredHead(15, record_hash(mem, "s", 15), rule.encode_state())));
    REQUIRE(mem.write(w).ok());
    auto reopened = open_over(mem);
    auto plain = reopened->verify("s");
    REQUIRE(plain.ok());
    CHECK(plain->ok);  // the prefix is consistent
    CHECK(plain->steps == 15);
    CHECK(reopened->verify("s", {at7})->ok);
    auto r = reopened->verify("s", {at7, at20});
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->first_bad_step == 20);
    CHECK(r->problem.find("holds only 15 records") != std::string::npos);
  }
  SUBCASE("another hash at the anchor's step") {
    Anchor wrong = at7;
    wrong.chain_hash = at20.chain_hash;
    auto r = ledger->verify("s", {at0, wrong, at20});
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->first_bad_step == 7);
    CHECK(r->problem.find(at7.chain_hash) != std::string::npos);  // the hash found there
    Anchor wrong0 = at0;
    wrong0.chain_hash = at7.chain_hash;
    auto r0 = ledger->verify("s", {wrong0});
    REQUIRE(r0.ok());
    CHECK_FALSE(r0->ok);
    CHECK(r0->first_bad_step == 0);
    CHECK(r0->problem.find("configuration") != std::string::npos);
  }
  SUBCASE("a closing anchor on an open stream") {
    auto r = ledger->verify("s", {Anchor{0, true, at20.chain_hash}});
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->problem.find("not closed") != std::string::npos);
  }
}

// verify now checks the id index by counting instead of holding every id: both directions of a
// broken index are still found (an extra entry, and a duplicate id in the records).
TEST_CASE("Ledger verify: the id index is checked both ways without holding every id") {
  MemoryStore mem;
  auto ledger = stream_of(mem, 10);
  SUBCASE("an entry no record has") {
    put(mem, store::index_key("s", "ghost"), store::encode_step(4));
    auto r = open_over(mem)->verify("s");
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->first_bad_step == 0);
    CHECK(r->problem.find("'ghost', which no record has") != std::string::npos);
  }
  SUBCASE("an entry pointing past the last record") {
    put(mem, store::index_key("s", "late"), store::encode_step(99));
    auto r = open_over(mem)->verify("s");
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->problem.find("'late'") != std::string::npos);
  }
  SUBCASE("the same id in two records, chain rewritten consistently from there") {
    auto history = ledger->history("s").value();
    history[8].id = history[2].id;  // step 9 carries step 3's id
    store::Digest prev = record_hash(mem, "s", 8);
    WriteBatch w;
    w.erase(store::index_key("s", "t9"));
    for (std::size_t i = 8; i < history.size(); ++i)
      w.put(store::record_key("s", i + 1), store::encode_record(history[i], prev, &prev));
    store::StoredHead h = head_of(mem, "s");
    h.last_hash = prev;
    w.put(store::head_key("s"), store::encode_head(h));
    REQUIRE(mem.write(w).ok());
    auto r = open_over(mem)->verify("s");
    REQUIRE(r.ok());
    CHECK_FALSE(r->ok);
    CHECK(r->first_bad_step == 9);
    CHECK(r->problem.find("appears twice") != std::string::npos);
  }
}

// ---- paged and streamed history -----------------------------------------------------------

// The key blocks cover exactly the asked steps: checked against membership by brute force for
// every range in a window that crosses hex digit boundaries, and at the top of the u64 range
// (common practice, no source).
TEST_CASE("Ledger history: record_range_prefixes covers exactly the asked steps") {
  auto covered = [](const std::vector<std::string>& prefixes, std::uint64_t step) {
    const std::string key = store::record_key("s", step);
    int n = 0;
    for (const auto& p : prefixes) n += key.starts_with(p) ? 1 : 0;
    return n;
  };
  for (std::uint64_t lo = 1; lo <= 290; lo += 7) {
    for (std::uint64_t hi = lo; hi <= 600; hi += 13) {
      const auto prefixes = store::record_range_prefixes("s", lo, hi);
      CAPTURE(lo);
      CAPTURE(hi);
      REQUIRE(std::is_sorted(prefixes.begin(), prefixes.end()));
      for (std::uint64_t step = 1; step <= 700; ++step) {
        const int n = covered(prefixes, step);
        if (n != ((step >= lo && step <= hi) ? 1 : 0)) {
          CAPTURE(step);
          CHECK(n == ((step >= lo && step <= hi) ? 1 : 0));
        }
      }
    }
  }
  CHECK(store::record_range_prefixes("s", 1, 0xff) ==
        std::vector<std::string>{
            // 1..f singly, then 10..ff as 15 blocks of 16
            "r/s/0000000000000001", "r/s/0000000000000002", "r/s/0000000000000003", "r/s/0000000000000004",
            "r/s/0000000000000005", "r/s/0000000000000006", "r/s/0000000000000007", "r/s/0000000000000008",
            "r/s/0000000000000009", "r/s/000000000000000a", "r/s/000000000000000b", "r/s/000000000000000c",
            "r/s/000000000000000d", "r/s/000000000000000e", "r/s/000000000000000f", "r/s/000000000000001",
            "r/s/000000000000002",  "r/s/000000000000003",  "r/s/000000000000004",  "r/s/000000000000005",
            "r/s/000000000000006",  "r/s/000000000000007",  "r/s/000000000000008",  "r/s/000000000000009",
            "r/s/00000000000000a",  "r/s/00000000000000b",  "r/s/00000000000000c",  "r/s/00000000000000d",
            "r/s/00000000000000e",  "r/s/00000000000000f"});
  const std::uint64_t top = std::numeric_limits<std::uint64_t>::max();
  CHECK(store::record_range_prefixes("s", top - 2, top).size() == 3);
  CHECK(store::record_range_prefixes("s", 1, top).size() == 15 * 16);
  CHECK(store::record_range_prefixes("s", 5, 4).empty());
  CHECK(store::record_range_prefixes("s", 0, 4).empty());
}

// history_page returns the asked slice and reads only its records (counted at the store).
TEST_CASE("Ledger history: pages hold the asked steps and read only them") {
  MemoryStore mem;
  stream_of(mem, 300);
  CountingStore counting(mem);
  auto ledger = open_over(counting);
  const auto history = ledger->history("s").value();
  REQUIRE(history.size() == 300);

  struct Case {
    std::uint64_t from;
    std::size_t limit;
    std::uint64_t first, last, next;
  };
  const std::vector<Case> cases = {
      {40, 10, 40, 49, 50}, {250, 16, 250, 265, 266}, {1, 1, 1, 1, 2},
      {0, 5, 1, 5, 6},      {295, 10, 295, 300, 0},   {300, 1, 300, 300, 0},
      {15, 2, 15, 16, 17},  {1, 300, 1, 300, 0},      {7, std::numeric_limits<std::size_t>::max(), 7, 300, 0},
  };
  for (const auto& c : cases) {
    CAPTURE(c.from);
    CAPTURE(c.limit);
    counting.record_reads = 0;
    auto page = ledger->history_page("s", c.from, c.limit);
    REQUIRE(page.ok());
    CHECK(page->total == 300);
    CHECK(page->next_step == c.next);
    REQUIRE(page->records.size() == c.last - c.first + 1);
    for (std::size_t i = 0; i < page->records.size(); ++i) {
      const auto& want = history[c.first - 1 + i];
      CHECK(page->records[i].step == want.step);
      CHECK(page->records[i].id == want.id);
      CHECK(store_test::same_bits(page->records[i].level, want.level));
    }
    CHECK(counting.record_reads == page->records.size());
  }
  auto past = ledger->history_page("s", 301, 10);
  REQUIRE(past.ok());
  CHECK(past->records.empty());
  CHECK(past->next_step == 0);
  CHECK(past->total == 300);
  CHECK(ledger->history_page("s", 1, 0).error().kind == ErrorKind::kInvalidArgument);
  CHECK(ledger->history_page("nope", 1, 10).error().kind == ErrorKind::kNotFound);
  CHECK(ledger->history_page("a/b", 1, 10).error().kind == ErrorKind::kInvalidArgument);
}

// for_each_decision walks from a step in order, stops when asked, reads only what it visits, may
// call back into the ledger, and names a missing record as a storage error.
TEST_CASE("Ledger history: for_each_decision streams records one at a time") {
  MemoryStore mem;
  stream_of(mem, 100);
  CountingStore counting(mem);
  auto ledger = open_over(counting);
  std::vector<std::uint64_t> steps;
  counting.record_reads = 0;
  auto s = ledger->for_each_decision("s", 90, [&](const DecisionRecord& r) {
    steps.push_back(r.step);
    CHECK(ledger->status("s")->tests == 100);  // no lock is held while visiting
    return true;
  });
  REQUIRE(s.ok());
  CHECK(steps == std::vector<std::uint64_t>{90, 91, 92, 93, 94, 95, 96, 97, 98, 99, 100});
  CHECK(counting.record_reads == 11);

  steps.clear();
  counting.record_reads = 0;
  REQUIRE(ledger
              ->for_each_decision("s", 0,
                                  [&](const DecisionRecord& r) {
                                    steps.push_back(r.step);
                                    return r.step < 3;
                                  })
              .ok());
  CHECK(steps == std::vector<std::uint64_t>{1, 2, 3});
  CHECK(counting.record_reads == 3);
  CHECK(ledger->for_each_decision("s", 101, [](const DecisionRecord&) { return true; }).ok());
  CHECK(ledger->for_each_decision("nope", 1, [](const DecisionRecord&) { return true; }).error().kind ==
        ErrorKind::kNotFound);

  WriteBatch w;
  w.erase(store::record_key("s", 42));
  REQUIRE(mem.write(w).ok());
  steps.clear();
  auto broken = ledger->for_each_decision("s", 1, [&](const DecisionRecord& r) {
    steps.push_back(r.step);
    return true;
  });
  REQUIRE_FALSE(broken.ok());
  CHECK(broken.error().kind == ErrorKind::kCorruption);
  CHECK(broken.error().message.find("step 42 is missing") != std::string::npos);
  CHECK(steps.size() == 41);
  CHECK(ledger->history("s").error().kind == ErrorKind::kCorruption);
  CHECK(ledger->history_page("s", 40, 5).error().kind == ErrorKind::kCorruption);
  CHECK(ledger->history_page("s", 43, 5).ok());  // pages that do not touch step 42 still read
}

// ---- the stream cache ---------------------------------------------------------------------

// 50,000 calls with names of streams that do not exist, through every member that takes a name:
// each is refused and none stays in the cache (common practice, no source: a cache keyed by
// caller-chosen names must not grow with them).
TEST_CASE("Ledger cache: names of streams that do not exist are never kept") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("real", lord()).ok());
  REQUIRE(ledger->decide("real", "a", 0.01).ok());
  CHECK(ledger->cached_streams() == 1);
  const auto before = copy_contents(mem);
  for (std::size_t i = 0; i < 50000; ++i) {
    const std::string name = store_test::numbered("ghost-", i);
    auto kind_of = [](const auto& result) {
      return result.ok() ? std::optional<ErrorKind>{} : result.error().kind;
    };
    std::optional<ErrorKind> kind;
    switch (i % 8) {
      case 0:
        kind = kind_of(ledger->status(name));
        break;
      case 1:
        kind = kind_of(ledger->decide(name, "x", 0.5));
        break;
      case 2:
        kind = kind_of(ledger->next_level(name));
        break;
      case 3:
        kind = kind_of(ledger->history_page(name, 1, 10));
        break;
      case 4:
        kind = kind_of(ledger->close_stream(name));
        break;
      case 5:
        kind = kind_of(ledger->decide_batch(name, {{"x", 0.5}}));
        break;
      case 6:
        kind = kind_of(ledger->chain_hash_at(name, 1));
        break;
      default:
        kind = kind_of(ledger->verify(name));
        break;
    }
    if (kind != ErrorKind::kNotFound) {
      CAPTURE(i);
      REQUIRE(kind == ErrorKind::kNotFound);
    }
  }
  CHECK(ledger->cached_streams() == 1);
  CHECK(copy_contents(mem) == before);
  // A stream created after its name was asked for works normally and is then cached.
  CHECK(ledger->status("ghost-7").error().kind == ErrorKind::kNotFound);
  REQUIRE(ledger->create_stream("ghost-7", lord()).ok());
  CHECK(ledger->decide("ghost-7", "y", 0.01)->record.step == 1);
  CHECK(ledger->cached_streams() == 2);
  // A failed create does not leave its name behind either.
  auto faulty = std::make_unique<FaultyStore>(mem);
  FaultyStore* faults = faulty.get();
  auto second = std::move(Ledger::open(std::move(faulty), store_test::ticking_clock()).value());
  faults->fail_all_writes("No space left on device");
  CHECK(second->create_stream("never", lord()).error().kind == ErrorKind::kIOError);
  CHECK(second->cached_streams() == 0);
}

// Dropping unknown names from the cache must never give one stream two live states: six threads
// race on the same fresh names, each looking the name up, creating it with its own
// configuration, and deciding on it. Exactly one create wins per name, every decision gets its
// own step, and every history verifies (common practice, no source).
TEST_CASE("Ledger cache: racing creates, lookups and decisions keep one state per stream") {
  MemoryStore mem;
  SlowStore slow(mem);
  auto ledger = open_over(slow, system_clock_ms);
  constexpr int kThreads = 6;
  constexpr std::size_t kNames = 300;
  std::vector<std::atomic<int>> created(kNames);
  std::atomic<int> decided{0};
  std::vector<RuleConfig> configs;
  for (int t = 0; t < kThreads; ++t)
    configs.push_back(*resolve_config({.rule = "alpha-investing", .alpha = 0.01 * (t + 1)}));
  std::barrier start_together(kThreads);
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      const RuleConfig& config = configs[static_cast<std::size_t>(t)];
      for (std::size_t n = 0; n < kNames; ++n) {
        const std::string name = store_test::numbered("r", n);
        start_together.arrive_and_wait();  // all threads on the same fresh name at once
        (void)ledger->status(name);
        (void)ledger->next_level(name);
        auto c = ledger->create_stream(name, config);
        if (c.ok() && c->created) ++created[n];
        std::string id = store_test::numbered("w", static_cast<std::size_t>(t));
        if (ledger->decide(name, id, 0.3).ok()) ++decided;
        (void)ledger->status(store_test::numbered("missing-", n));
      }
    });
  }
  for (auto& th : threads) th.join();
  std::uint64_t total = 0;
  auto fresh = open_over(mem);
  for (std::size_t n = 0; n < kNames; ++n) {
    const std::string name = store_test::numbered("r", n);
    const int creates = created[n];
    if (creates != 1) {
      CAPTURE(name);
      CHECK(creates == 1);
    }
    auto report = fresh->verify(name);
    REQUIRE(report.ok());
    if (!report->ok) {
      CAPTURE(name);
      CHECK(report->problem == "");
    }
    total += report->steps;
  }
  CHECK(total == static_cast<std::uint64_t>(decided.load()));
  CHECK(ledger->cached_streams() == kNames);
}
