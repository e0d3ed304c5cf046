// The ledger's on-disk layout: keys and value encodings (docs/ledger-format.md is the contract;
// keep the two in step). Every integer is little-endian, every double its IEEE 754 binary64 bit
// pattern, little-endian. Internal to the store.
//
// Thread-safety: free functions, no shared state.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "store/sha256.hpp"

namespace alphaledger::store {

// Stored on disk under kFormatKey: bump only with a migration (docs/ledger-format.md).
inline constexpr std::uint32_t kFormatVersion = 1;
// Value versions, stored on disk as the first byte of each value: do not change.
inline constexpr std::uint8_t kConfigVersion = 1;
inline constexpr std::uint8_t kHeadVersion = 1;        // an open stream's head
inline constexpr std::uint8_t kClosedHeadVersion = 2;  // a closed stream's head (adds the closing time)
// Versions 3 and 4: as 1 and 2, with the running tests kept apart, one key each (running_key),
// and the rule state of version 3 (Rule::encode_state_without_running). Written while tests run.
inline constexpr std::uint8_t kApartHeadVersion = 3;
inline constexpr std::uint8_t kClosedApartHeadVersion = 4;
inline constexpr std::uint8_t kRunningVersion = 1;  // a running test's value
inline constexpr std::uint8_t kClosingVersion = 1;     // the closing entry hashed into the chain
inline constexpr std::uint8_t kRecordVersion = 1;
inline constexpr std::uint8_t kEventVersion = 2;  // a launch-time event in the chain (EventRecord)

inline constexpr std::string_view kFormatKey = "m/format";

// Stream names (alphaledger/text.hpp): ASCII letters, digits, '-', '_' and '.', so none holds '/',
// the key separator, and a name cannot reach another stream's keys.
using alphaledger::kMaxStreamName;
using alphaledger::validate_stream_name;

std::string config_key(std::string_view stream);                      // "c/<stream>"
std::string head_key(std::string_view stream);                        // "h/<stream>"
std::string record_prefix(std::string_view stream);                   // "r/<stream>/"
std::string record_key(std::string_view stream, std::uint64_t step);  // "r/<stream>/<16 hex digits>"
// Rewrites the last 16 characters of a record key (one record_key() made) for another step.
void set_record_key_step(std::string& key, std::uint64_t step);
std::string index_prefix(std::string_view stream);                    // "i/<stream>/"
std::string index_key(std::string_view stream, std::string_view id);  // "i/<stream>/<id bytes>"
// index_key() into `out`, reusing its storage.
void assign_index_key(std::string& out, std::string_view stream, std::string_view id);
inline constexpr std::string_view kConfigPrefix = "c/";
// A test's look state: the chain entry of its last look (8 bytes, encode_step).
std::string look_key(std::string_view stream, std::string_view id);  // "l/<stream>/<id bytes>"
std::string running_prefix(std::string_view stream);                     // "t/<stream>/"
std::string running_key(std::string_view stream, std::uint64_t launch);  // "t/<stream>/<16 hex digits>"

std::string encode_format_version(std::uint32_t version);
Result<std::uint32_t> decode_format_version(std::string_view bytes);

// A stream's frozen configuration.
struct StoredConfig {
  std::string name;
  RuleConfig config;
  std::int64_t created_at_ms = 0;
  Alternative alternative = Alternative::kTwoSided;  // direction for summary rows (docs/formats.md)
  friend bool operator==(const StoredConfig&, const StoredConfig&) = default;
};
std::string encode_config(const StoredConfig& c);
// Checks every field, and that the configuration is one resolve_config() accepts. Errors: kCorruption.
Result<StoredConfig> decode_config(std::string_view bytes);

// The stream's head: how many records, the hash of the last entry of the chain, and the rule's
// state after the last record. The last entry is the last record (the configuration when there is
// none); once the stream is closed it is the closing entry (closing_hash below), and the head
// also holds the closing time. An open stream's head is written as value version 1, exactly as
// before closing existed; a closed stream's head as version 2.
struct StoredHead {
  StoredHead() = default;
  // Not an aggregate, so {steps, hash, state} (an open head) needs no closing time spelled out.
  StoredHead(std::uint64_t steps_in, const Digest& last_hash_in, std::string rule_state_in,
             std::optional<std::int64_t> closed_at_ms_in = std::nullopt)
      : steps(steps_in),
        last_hash(last_hash_in),
        rule_state(std::move(rule_state_in)),
        closed_at_ms(closed_at_ms_in) {}
  std::uint64_t steps = 0;
  Digest last_hash{};
  std::string rule_state;
  std::optional<std::int64_t> closed_at_ms;  // set once the stream is closed
  // The running tests are stored apart under running_key() and rule_state is of version 3
  // (head value versions 3 and 4). False: rule_state holds them itself, as ledgers written before
  // running tests were kept apart do (versions 1 and 2), or none is running.
  bool running_apart = false;
  friend bool operator==(const StoredHead&, const StoredHead&) = default;
};
std::string encode_head(const StoredHead& h);
Result<StoredHead> decode_head(std::string_view bytes);

// A running test as stored under running_key(stream, launch): what restoring the rule needs (the
// level) and what listing the running tests shows (id, launch time).
struct StoredRunning {
  std::uint64_t launch = 0;  // from the key
  double level = 0;
  std::int64_t launched_at_ms = 0;
  std::string id;
  friend bool operator==(const StoredRunning&, const StoredRunning&) = default;
};
// u8 version (1), f64 level, i64 launch time (ms), then the id's bytes (the rest of the value).
std::string encode_running(const StoredRunning& r);
// `key` is the full key (the launch number is its last 16 hex digits). Errors: kCorruption.
Result<StoredRunning> decode_running(std::string_view key, std::string_view value);

// One decision as stored: the fields, the hash of the previous record (the chain link), and this
// record's own hash, SHA-256 over every byte before it.
struct StoredRecord {
  DecisionRecord record;
  Digest prev_hash{};
  Digest hash{};
};
// Encodes and fills in the record's hash (returned in `hash` when not null).
std::string encode_record(const DecisionRecord& r, const Digest& prev_hash, Digest* hash = nullptr);
// Decodes the fields; does not check the hash (verify does, to name the step).
Result<StoredRecord> decode_record(std::string_view bytes);
// SHA-256 of the bytes of an encoded record before its hash field.
Digest recompute_record_hash(std::string_view encoded);

// Launch-time events (docs/ledger-format.md "Event record"): a chain entry of value version 2 that
// records one launch, finish or abandon of a test. A version-1 decision record is a launch and
// its finish at once. The numbers of the kinds never change meaning.
enum class EventKind : std::uint8_t { kLaunch = 1, kFinish = 2, kAbandon = 3, kLook = 4 };
std::string_view event_kind_name(EventKind kind);  // "launch", "finish", "abandon", "look"

// What a look event carries besides the event fields (docs/ledger-format.md "Look event"): the
// summaries it was computed from and everything it answered, so verify can recompute it.
struct LookPayload {
  std::uint64_t look = 0;           // 1-based, this test's looks
  std::uint64_t previous_look = 0;  // chain entry of the test's look before, 0 for the first
  LookData data;
  double estimate = 0;
  double variance = 0;
  double anytime_p_value = 1;
  double running_min = 1;
  double e_value = 1;
  double cs_low = 0;
  double cs_high = 0;
  bool stop = false;
  friend bool operator==(const LookPayload& a, const LookPayload& b);
};

struct EventRecord {
  EventKind kind = EventKind::kLaunch;
  std::uint64_t entry = 0;   // position in the stream's chain (the number in its record key)
  std::uint64_t launch = 0;  // the test's launch number (Rule::launch)
  std::string id;
  double level = 0;          // the level reserved at launch (repeated in the finish and abandon)
  double p_value = 0;        // finish only; 0 in a launch or abandon
  bool rejected = false;     // finish only; false in a launch or abandon
  double wealth = 0;         // alpha-wealth right after the event
  std::int64_t at_ms = 0;    // when the event happened, milliseconds since the Unix epoch
  // When the test was launched (equal to at_ms in a launch), so a finish alone gives a history row.
  std::int64_t launched_at_ms = 0;
  LookPayload look;  // kLook only (a look has p_value 0, rejected false, the wealth unchanged)
  friend bool operator==(const EventRecord&, const EventRecord&) = default;
};
struct StoredEvent {
  EventRecord event;
  Digest prev_hash{};
  Digest hash{};
};
// Encodes and fills in the event's hash (returned in `hash` when not null).
std::string encode_event(const EventRecord& e, const Digest& prev_hash, Digest* hash = nullptr);
// Decodes and checks the fields (kind known, entry and launch numbers at least 1, a launch or
// abandon without p-value or rejection, a launch's launched_at equal to its time); does not check the hash. Errors: kCorruption.
Result<StoredEvent> decode_event(std::string_view bytes);
// The value version of a chain entry (its first byte): kRecordVersion or kEventVersion, which tells
// decode_record from decode_event. Empty bytes: kCorruption.
Result<std::uint8_t> entry_version(std::string_view bytes);

// One chain entry of either version, decoded (decode_record or decode_event by its first byte).
struct ChainEntry {
  bool is_event = false;  // value version 2 (event) rather than 1 (decision record)
  StoredRecord record;    // when !is_event
  StoredEvent event;      // when is_event
  std::uint64_t entry() const { return is_event ? event.event.entry : record.record.step; }
  const std::string& id() const { return is_event ? event.event.id : record.record.id; }
  const Digest& hash() const { return is_event ? event.hash : record.hash; }
  const Digest& prev_hash() const { return is_event ? event.prev_hash : record.prev_hash; }
};
// Errors: kCorruption (empty, unknown version, or what the decoder of its version refuses).
Result<ChainEntry> decode_entry(std::string_view bytes);
// The history row an entry gives: a decision record (launch = step, launched_at = decided_at), a
// finish, or an abandon (abandoned set, decided_at = the abandon's time); none for a launch or a look.
std::optional<DecisionRecord> history_row(const ChainEntry& e);
// The history row of a finish or abandon event.
DecisionRecord event_row(const EventRecord& e);

std::string encode_step(std::uint64_t step);  // the id index value
Result<std::uint64_t> decode_step(std::string_view bytes);

// The hash a stream's first record links to: SHA-256 of the encoded configuration.
Digest genesis_hash(std::string_view encoded_config);

// The closing entry, the chain's last link once a stream is closed: SHA-256 of u8 version (1),
// u64 record count, i64 closing time (ms), and the hash of the last record (the genesis hash when
// there is none). 49 bytes, so it can never be read as a record (at least 109 bytes).
std::string encode_closing(std::uint64_t steps, std::int64_t closed_at_ms, const Digest& last_record_hash);
Digest closing_hash(std::uint64_t steps, std::int64_t closed_at_ms, const Digest& last_record_hash);

// Splits the steps lo..hi (1 <= lo <= hi) into the fewest key prefixes under record_prefix(stream)
// whose keys are exactly the record keys of those steps, in ascending order. Scanning them in turn
// reads the records lo..hi and nothing else.
std::vector<std::string> record_range_prefixes(std::string_view stream, std::uint64_t lo, std::uint64_t hi);

}  // namespace alphaledger::store
