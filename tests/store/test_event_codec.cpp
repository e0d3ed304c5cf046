// The launch-time event record of docs/ledger-format.md ("Event record"): round trip, the
// documented byte layout and size, the chain hash over the bytes before it, and refusal of damaged
// or inconsistent events. Layout and sizes are our own format (docs/ledger-format.md), no outside
// source; SHA-256 is the FIPS 180-4 function already checked in test_sha256.cpp.
#include <doctest/doctest.h>

#include <bit>
#include <cstring>
#include <string>

#include "store/codec.hpp"
#include "store/sha256.hpp"

using namespace alphaledger;
using namespace alphaledger::store;

namespace {

EventRecord sample_finish() {
  EventRecord e;
  e.kind = EventKind::kFinish;
  e.entry = 7;
  e.launch = 3;
  e.id = "exp-0150";
  e.level = 0.00093;
  e.p_value = 0.0007;
  e.rejected = true;
  e.wealth = 0.048;
  e.at_ms = 1700000000123;
  e.launched_at_ms = 1699000000000;
  return e;
}

Digest digest_of(char fill) {
  Digest d{};
  d.fill(static_cast<std::uint8_t>(fill));
  return d;
}

}  // namespace

TEST_CASE("Event codec: every kind round-trips to the same fields and bytes") {
  for (auto kind : {EventKind::kLaunch, EventKind::kFinish, EventKind::kAbandon}) {
    EventRecord e = sample_finish();
    e.kind = kind;
    if (kind != EventKind::kFinish) {
      e.p_value = 0;
      e.rejected = false;
    }
    if (kind == EventKind::kLaunch) e.launched_at_ms = e.at_ms;
    CAPTURE(event_kind_name(kind));
    Digest h{};
    const std::string bytes = encode_event(e, digest_of('\x11'), &h);
    auto back = decode_event(bytes);
    REQUIRE(back.ok());
    CHECK(back->event == e);
    CHECK(back->prev_hash == digest_of('\x11'));
    CHECK(back->hash == h);
    CHECK(encode_event(back->event, back->prev_hash) == bytes);
    REQUIRE(entry_version(bytes).ok());
    CHECK(*entry_version(bytes) == kEventVersion);
  }
}

TEST_CASE("Event codec: the documented layout, 125 + L bytes, hash over the bytes before it") {
  const EventRecord e = sample_finish();
  Digest h{};
  const std::string bytes = encode_event(e, digest_of('\x22'), &h);
  const std::size_t L = e.id.size();
  REQUIRE(bytes.size() == 125 + L);
  auto u64_at = [&](std::size_t off) {
    std::uint64_t v = 0;
    for (int i = 7; i >= 0; --i)
      v = (v << 8) | static_cast<unsigned char>(bytes[off + static_cast<std::size_t>(i)]);
    return v;
  };
  CHECK(static_cast<unsigned char>(bytes[0]) == 2);   // value version
  CHECK(u64_at(1) == 7);                              // entry
  CHECK(static_cast<unsigned char>(bytes[9]) == 2);   // kind: finish
  CHECK(u64_at(10) == 3);                             // launch number
  CHECK(static_cast<unsigned char>(bytes[18]) == L);  // id length, low byte
  CHECK(bytes.substr(20, L) == "exp-0150");
  CHECK(u64_at(20 + L) == std::bit_cast<std::uint64_t>(0.00093));
  CHECK(u64_at(28 + L) == std::bit_cast<std::uint64_t>(0.0007));
  CHECK(static_cast<unsigned char>(bytes[36 + L]) == 1);
  CHECK(u64_at(37 + L) == std::bit_cast<std::uint64_t>(0.048));
  CHECK(u64_at(45 + L) == 1700000000123u);
  CHECK(u64_at(53 + L) == 1699000000000u);
  CHECK(static_cast<unsigned char>(bytes[61 + L]) == 0x22);  // previous hash
  const Digest expect = sha256(std::string_view(bytes).substr(0, 93 + L));
  CHECK(h == expect);
  CHECK(std::memcmp(bytes.data() + 93 + L, expect.data(), 32) == 0);
  CHECK(recompute_record_hash(bytes) == expect);
}

TEST_CASE("Event codec: a version-1 decision record and an event are told apart by their first byte") {
  DecisionRecord r{1, "a", 0.5, 0.25, false, 0.125, 2};
  const std::string rec = encode_record(r, Digest{});
  REQUIRE(entry_version(rec).ok());
  CHECK(*entry_version(rec) == kRecordVersion);
  CHECK_FALSE(entry_version("").ok());
  // Each decoder refuses the other's value rather than misreading it.
  CHECK_FALSE(decode_event(rec).ok());
  CHECK_FALSE(decode_record(encode_event(sample_finish(), Digest{})).ok());
}

TEST_CASE("Event codec: damaged or inconsistent events are refused with a storage error") {
  const std::string bytes = encode_event(sample_finish(), Digest{});
  for (std::size_t cut = 0; cut < bytes.size(); ++cut) {
    CAPTURE(cut);
    CHECK_FALSE(decode_event(bytes.substr(0, cut)).ok());
  }
  CHECK_FALSE(decode_event(bytes + "x").ok());

  std::string bad_kind = bytes;
  bad_kind[9] = 5;  // 4 is a look (ledger_look.cpp)
  auto k = decode_event(bad_kind);
  REQUIRE_FALSE(k.ok());
  CHECK(k.error().kind == ErrorKind::kCorruption);
  CHECK(k.error().message.find("kind 5") != std::string::npos);

  std::string bad_rejected = bytes;
  bad_rejected[36 + 8] = 2;
  CHECK(decode_event(bad_rejected).error().message.find("rejected = 2") != std::string::npos);

  EventRecord launch = sample_finish();
  launch.kind = EventKind::kLaunch;  // keeps the finish's p-value: inconsistent
  auto l = decode_event(encode_event(launch, Digest{}));
  REQUIRE_FALSE(l.ok());
  CHECK(l.error().message.find("only a finish") != std::string::npos);

  EventRecord late = sample_finish();
  late.kind = EventKind::kAbandon;
  late.p_value = 0;
  late.rejected = false;
  REQUIRE(decode_event(encode_event(late, Digest{})).ok());  // an abandon keeps its launch time
  late.kind = EventKind::kLaunch;                            // a launch must have launched_at == its own time
  CHECK(decode_event(encode_event(late, Digest{})).error().message.find("launch time") != std::string::npos);

  EventRecord zero = sample_finish();
  zero.launch = 0;
  CHECK_FALSE(decode_event(encode_event(zero, Digest{})).ok());
}
