// The ledger's on-disk layout: keys and value encodings (docs/ledger-format.md is the contract;
// keep the two in step). Every integer is little-endian, every double its IEEE 754 binary64 bit
// pattern, little-endian. Internal to the store.
//
// Thread-safety: free functions, no shared state.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/stats.hpp"
#include "store/sha256.hpp"

namespace alphaledger::store {

// Stored on disk under kFormatKey: bump only with a migration (docs/ledger-format.md).
inline constexpr std::uint32_t kFormatVersion = 1;
// Value versions, stored on disk as the first byte of each value: do not change.
inline constexpr std::uint8_t kConfigVersion = 1;
inline constexpr std::uint8_t kHeadVersion = 1;
inline constexpr std::uint8_t kRecordVersion = 1;

inline constexpr std::string_view kFormatKey = "m/format";

// Stream names: 1..128 bytes of ASCII letters, digits, '-', '_' and '.', not "." or "..".
// None of these is '/', the key separator, so a name cannot reach another stream's keys.
inline constexpr std::size_t kMaxStreamName = 128;
Status validate_stream_name(std::string_view name);

std::string config_key(std::string_view stream);                      // "c/<stream>"
std::string head_key(std::string_view stream);                        // "h/<stream>"
std::string record_prefix(std::string_view stream);                   // "r/<stream>/"
std::string record_key(std::string_view stream, std::uint64_t step);  // "r/<stream>/<16 hex digits>"
std::string index_prefix(std::string_view stream);                    // "i/<stream>/"
std::string index_key(std::string_view stream, std::string_view id);  // "i/<stream>/<id bytes>"
inline constexpr std::string_view kConfigPrefix = "c/";

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
// Checks every field, and that the configuration is one resolve_config() accepts. Errors: kStorage.
Result<StoredConfig> decode_config(std::string_view bytes);

// The stream's head: how many records, the hash of the last one (or of the configuration when
// there is none), and the rule's state after the last record.
struct StoredHead {
  std::uint64_t steps = 0;
  Digest last_hash{};
  std::string rule_state;
  friend bool operator==(const StoredHead&, const StoredHead&) = default;
};
std::string encode_head(const StoredHead& h);
Result<StoredHead> decode_head(std::string_view bytes);

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

std::string encode_step(std::uint64_t step);  // the id index value
Result<std::uint64_t> decode_step(std::string_view bytes);

// The hash a stream's first record links to: SHA-256 of the encoded configuration.
Digest genesis_hash(std::string_view encoded_config);

}  // namespace alphaledger::store
