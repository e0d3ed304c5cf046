// The on-disk encodings of docs/ledger-format.md: round trips to identical bytes, the documented
// byte layout, and refusal of damaged or newer values.
#include <doctest/doctest.h>

#include <bit>
#include <cstring>

#include "alphaledger/rules.hpp"
#include "store/codec.hpp"

using namespace alphaledger;
using namespace alphaledger::store;

namespace {

std::vector<StoredConfig> sample_configs() {
  std::vector<StoredConfig> out;
  const std::vector<RuleSpec> specs = {
      {.rule = "alpha-spending"},
      {.rule = "alpha-investing", .alpha = 0.1, .initial_wealth = 0.05, .payout = 0.08},
      {.rule = "lond", .spending = "jm:0.07"},
      {.rule = "lord++"},
      {.rule = "lord++", .evaluation = "fast"},
      {.rule = "saffron", .candidate_threshold = 0.3},
      {.rule = "addis", .alpha = 0.2, .spending = "power:2.5", .evaluation = "fast"},
  };
  std::int64_t t = 1700000000000;
  int n = 0;
  for (const auto& spec : specs) {
    auto c = resolve_config(spec);
    REQUIRE(c.ok());
    // Every direction in turn (stats.hpp Alternative numbers 1..3).
    out.push_back(
        StoredConfig{"stream-" + std::to_string(++n), *c, t++, static_cast<Alternative>(1 + n % 3)});
  }
  return out;
}

}  // namespace

// Round trip (DEVELOPERS.md, leveldb version_edit_test's EncodeTo/DecodeFrom pattern): decoding
// and re-encoding gives identical bytes and an equal value. Property of our format, no outside
// reference needed beyond the byte-level comparison.
TEST_CASE("Codec: configurations round-trip to identical bytes") {
  for (const auto& c : sample_configs()) {
    CAPTURE(c.name);
    const std::string bytes = encode_config(c);
    auto back = decode_config(bytes);
    REQUIRE(back.ok());
    CHECK(*back == c);
    CHECK(encode_config(*back) == bytes);
  }
}

TEST_CASE("Codec: records and heads round-trip to identical bytes") {
  DecisionRecord r{
      42,           "exp-\xc3\xa9t\xc3\xa9/2025,\"q\"", 0.0004, 0.0013703860566622432, true, 0.0486296139433,
      1700000000123};
  Digest prev{};
  for (std::size_t i = 0; i < prev.size(); ++i) prev[i] = static_cast<std::uint8_t>(i * 3);
  Digest hash{};
  const std::string bytes = encode_record(r, prev, &hash);
  auto back = decode_record(bytes);
  REQUIRE(back.ok());
  CHECK(back->record.step == r.step);
  CHECK(back->record.id == r.id);
  CHECK(std::bit_cast<std::uint64_t>(back->record.p_value) == std::bit_cast<std::uint64_t>(r.p_value));
  CHECK(std::bit_cast<std::uint64_t>(back->record.level) == std::bit_cast<std::uint64_t>(r.level));
  CHECK(back->record.rejected == r.rejected);
  CHECK(std::bit_cast<std::uint64_t>(back->record.wealth) == std::bit_cast<std::uint64_t>(r.wealth));
  CHECK(back->record.decided_at_ms == r.decided_at_ms);
  CHECK(back->prev_hash == prev);
  CHECK(back->hash == hash);
  CHECK(recompute_record_hash(bytes) == hash);
  CHECK(encode_record(back->record, back->prev_hash) == bytes);

  // A head holding a real rule state (LORD++ after three tests).
  auto config = resolve_config({.rule = "lord++"});
  REQUIRE(config.ok());
  Rule rule(*config);
  for (double p : {0.0004, 0.36, 0.0012}) (void)rule.record(p);
  StoredHead h{3, hash, rule.encode_state()};
  const std::string head_bytes = encode_head(h);
  auto head_back = decode_head(head_bytes);
  REQUIRE(head_back.ok());
  CHECK(*head_back == h);
  CHECK(encode_head(*head_back) == head_bytes);
  CHECK(decode_step(encode_step(123456789012345)).value() == 123456789012345u);
}

// The byte layout written down in docs/ledger-format.md (so the document and the code agree).
TEST_CASE("Codec: record layout matches docs/ledger-format.md") {
  DecisionRecord r{1, "ab", 0.5, 0.25, false, 0.125, 2};
  Digest prev{};
  prev.fill(0xee);
  const std::string b = encode_record(r, prev);
  // version(1) step(8) id_len(2) id(2) p(8) level(8) rejected(1) wealth(8) decided_at(8) prev(32) hash(32)
  REQUIRE(b.size() == 1 + 8 + 2 + 2 + 8 + 8 + 1 + 8 + 8 + 32 + 32);
  CHECK(b[0] == 1);
  CHECK(b.substr(1, 8) == std::string("\x01\0\0\0\0\0\0\0", 8));
  CHECK(b.substr(9, 2) == std::string("\x02\0", 2));
  CHECK(b.substr(11, 2) == "ab");
  // IEEE 754 binary64 of 0.5 is 0x3FE0000000000000 (IEEE 754-2019 3.4), stored little-endian.
  CHECK(b.substr(13, 8) == std::string("\0\0\0\0\0\0\xe0\x3f", 8));
  CHECK(b[29] == 0);  // rejected
  CHECK(b.substr(46, 32) == std::string(32, '\xee'));
  CHECK(record_key("s", 1) == "r/s/0000000000000001");
  CHECK(record_key("s", 0x1f) == "r/s/000000000000001f");
  CHECK(index_key("s", "exp/1") == "i/s/exp/1");
  CHECK(config_key("s") == "c/s");
  CHECK(head_key("s") == "h/s");
  CHECK(encode_format_version(1) == std::string("\x01\0\0\0", 4));
}

// The keys and record bytes built in place (one allocation each) equal the plain definitions of
// docs/ledger-format.md; the record hash is SHA-256 of the bytes before it, computed with the
// portable code (FIPS 180-4) as well as the CPU path. Expected values: from the format document.
TEST_CASE("Codec: keys and records built in place match the layout, for any step and id") {
  CHECK(record_key("s", 0) == "r/s/0000000000000000");
  CHECK(record_key("s", 0xffffffffffffffffULL) == "r/s/ffffffffffffffff");
  CHECK(record_key("stream.name-1", 0xabcdef0123456789ULL) == "r/stream.name-1/abcdef0123456789");
  std::string key = record_key("s", 1);
  set_record_key_step(key, 0x10);
  CHECK(key == "r/s/0000000000000010");
  set_record_key_step(key, 0xfedcba9876543210ULL);
  CHECK(key == record_key("s", 0xfedcba9876543210ULL));
  std::string buffer = "left over from a longer key, to be replaced";
  assign_index_key(buffer, "s", "exp-7");
  CHECK(buffer == "i/s/exp-7");
  CHECK(buffer == index_key("s", "exp-7"));

  for (std::size_t id_size : {1u, 2u, 15u, 16u, 17u, 40u, 200u, 256u}) {
    CAPTURE(id_size);
    const std::string id(id_size, 'q');
    DecisionRecord r{0x0102030405060708ULL, id, 0.03, 0.0125, true, 0.25, -5};
    Digest prev{};
    prev.fill(0x5a);
    Digest hash{};
    const std::string b = encode_record(r, prev, &hash);
    REQUIRE(b.size() == 76 + id_size + 32);
    CHECK(b.substr(1, 8) == std::string("\x08\x07\x06\x05\x04\x03\x02\x01", 8));
    CHECK(static_cast<unsigned char>(b[9]) == (id_size & 0xff));
    CHECK(static_cast<unsigned char>(b[10]) == (id_size >> 8));
    CHECK(b.substr(11, id_size) == id);
    CHECK(b[11 + id_size + 16] == 1);  // rejected
    // decided_at -5 as a two's-complement u64.
    CHECK(b.substr(11 + id_size + 25, 8) == std::string("\xfb\xff\xff\xff\xff\xff\xff\xff", 8));
    CHECK(b.substr(11 + id_size + 33, 32) == std::string(32, '\x5a'));
    const Digest portable = sha256_portable(std::string_view(b).substr(0, b.size() - 32));
    CHECK(hash == portable);
    CHECK(b.substr(b.size() - 32) == std::string(as_bytes(portable)));
    auto back = decode_record(b);
    REQUIRE(back.ok());
    CHECK(back->record.id == id);
    CHECK(back->record.step == r.step);
    CHECK(back->record.decided_at_ms == -5);
    CHECK(back->hash == portable);
  }
}

TEST_CASE("Codec: damaged and newer values are refused with a storage error") {
  const auto c = sample_configs()[3];
  const std::string bytes = encode_config(c);
  for (std::size_t cut = 0; cut < bytes.size(); ++cut) {
    auto r = decode_config(bytes.substr(0, cut));
    CAPTURE(cut);
    CHECK_FALSE(r.ok());
  }
  std::string newer = bytes;
  newer[0] = 2;
  auto v = decode_config(newer);
  REQUIRE_FALSE(v.ok());
  CHECK(v.error().kind == ErrorKind::kCorruption);
  CHECK(v.error().message.find("version 2") != std::string::npos);
  std::string unknown_field = bytes + std::string("\x0c\x00", 2);
  CHECK(decode_config(unknown_field).error().message.find("unknown field number 12") != std::string::npos);
  std::string bad_alternative = bytes;
  bad_alternative.back() = 4;  // field 11, the last one written, holds the alternative
  CHECK(decode_config(bad_alternative).error().message.find("unknown alternative number 4") !=
        std::string::npos);
  // A configuration that breaks the rule's conditions (W0 > alpha) is refused, not trusted.
  StoredConfig bad = c;
  bad.config.initial_wealth = 0.9;
  CHECK_FALSE(decode_config(encode_config(bad)).ok());

  DecisionRecord r{1, "a", 0.5, 0.25, false, 0.125, 2};
  const std::string rec = encode_record(r, Digest{});
  for (std::size_t cut = 0; cut < rec.size(); ++cut) CHECK_FALSE(decode_record(rec.substr(0, cut)).ok());
  CHECK_FALSE(decode_record(rec + "x").ok());
  CHECK_FALSE(decode_head("").ok());
  CHECK_FALSE(decode_step("1234567").ok());
  CHECK_FALSE(decode_format_version("\x01").ok());
}

// Key-space isolation (issue 3, item 6): names that could reach another stream's keys or
// leave the key space are refused; the accepted ones cannot contain the separator '/'.
TEST_CASE("Codec: stream names that could escape their key space are refused") {
  using namespace std::string_view_literals;
  for (std::string_view bad : {""sv, "a/b"sv, "../x"sv, "."sv, ".."sv, "a b"sv, "tab\there"sv, "nul\0x"sv,
                               "\xc3\xa9t\xc3\xa9"sv, "a\\b"sv, "lord++"sv}) {
    CAPTURE(std::string(bad));
    auto s = validate_stream_name(bad);
    REQUIRE_FALSE(s.ok());
    CHECK(s.error().kind == ErrorKind::kInvalidArgument);
  }
  CHECK_FALSE(validate_stream_name(std::string(129, 'a')).ok());
  CHECK(validate_stream_name(std::string(128, 'a')).ok());
  CHECK(validate_stream_name("checkout-team_2025.q1").ok());
  CHECK(validate_stream_name("a/b").error().message.find("'/' at position 2") != std::string::npos);
}
