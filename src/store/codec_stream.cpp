// Encodings of docs/ledger-format.md, a stream's own values: the configuration ("Configuration"),
// the head ("Head") and a running test ("Running test"). The keys are in codec.cpp, the chain
// entries in codec_chain.cpp (store/codec_internal.hpp: what they share).
#include <string>

#include "core/bytes.hpp"
#include "store/codec.hpp"
#include "store/codec_internal.hpp"

namespace alphaledger::store {
namespace {

// Config field numbers. Stored on disk: do not change or reuse.
enum class ConfigField : std::uint8_t {
  kName = 1,
  kRule = 2,
  kAlpha = 3,
  kInitialWealth = 4,
  kCandidateThreshold = 5,
  kDiscardThreshold = 6,
  kPayout = 7,
  kSpending = 8,
  kEvaluation = 9,
  kCreatedAt = 10,
  kAlternative = 11,
};
constexpr int kConfigFieldCount = 11;

using bytes::put_f64;
using bytes::put_u32;
using bytes::put_u64;
using bytes::put_u8;
using codec_detail::put_text16;
using codec_detail::Reader;

}  // namespace

std::string encode_config(const StoredConfig& c) {
  std::string out;
  put_u8(out, kConfigVersion);
  auto field = [&](ConfigField f) { put_u8(out, static_cast<std::uint8_t>(f)); };
  field(ConfigField::kName);
  put_text16(out, c.name);
  field(ConfigField::kRule);
  put_u8(out, static_cast<std::uint8_t>(c.config.kind));
  field(ConfigField::kAlpha);
  put_f64(out, c.config.alpha);
  field(ConfigField::kInitialWealth);
  put_f64(out, c.config.initial_wealth);
  field(ConfigField::kCandidateThreshold);
  put_f64(out, c.config.candidate_threshold);
  field(ConfigField::kDiscardThreshold);
  put_f64(out, c.config.discard_threshold);
  field(ConfigField::kPayout);
  put_f64(out, c.config.payout);
  field(ConfigField::kSpending);
  put_text16(out, c.config.spending);
  field(ConfigField::kEvaluation);
  put_u8(out, static_cast<std::uint8_t>(c.config.evaluation));
  field(ConfigField::kCreatedAt);
  put_u64(out, static_cast<std::uint64_t>(c.created_at_ms));
  field(ConfigField::kAlternative);
  put_u8(out, static_cast<std::uint8_t>(c.alternative));
  return out;
}

namespace {

// The configuration must be exactly one that resolve_config() produces: rebuild it from the
// parameters the rule takes and compare.
Status check_canonical(const RuleConfig& config) {
  RuleSpec spec;
  spec.rule = std::string(rule_name(config.kind));
  spec.alpha = config.alpha;
  if (rule_takes(config.kind, "initial_wealth")) spec.initial_wealth = config.initial_wealth;
  if (rule_takes(config.kind, "candidate_threshold")) spec.candidate_threshold = config.candidate_threshold;
  if (rule_takes(config.kind, "discard_threshold")) spec.discard_threshold = config.discard_threshold;
  if (rule_takes(config.kind, "payout")) spec.payout = config.payout;
  if (rule_takes(config.kind, "spending")) spec.spending = config.spending;
  if (rule_takes(config.kind, "evaluation")) spec.evaluation = std::string(evaluation_name(config.evaluation));
  auto resolved = resolve_config(spec);
  if (!resolved) return corruption("stream configuration is not valid: " + resolved.error().message);
  if (!(*resolved == config)) return corruption("stream configuration is not in canonical form");
  return {};
}

}  // namespace

Result<StoredConfig> decode_config(std::string_view bytes) {
  Reader r{{bytes}};
  const auto version = r.u8();
  if (!r.ok) return corruption("stream configuration is empty");
  if (version != kConfigVersion) {
    return corruption("stream configuration has version " + std::to_string(version) +
                         ", this build reads version " + std::to_string(kConfigVersion));
  }
  StoredConfig c;
  bool seen[kConfigFieldCount + 1] = {};
  std::uint8_t kind = 0, evaluation = 0, alternative = 0;
  while (r.ok && !r.in.empty()) {
    const auto f = r.u8();
    if (f == 0 || f > kConfigFieldCount) {
      return corruption("stream configuration has unknown field number " + std::to_string(f));
    }
    if (seen[f]) return corruption("stream configuration repeats field number " + std::to_string(f));
    seen[f] = true;
    switch (static_cast<ConfigField>(f)) {
      case ConfigField::kName:
        c.name = std::string(r.bytes(r.u16()));
        break;
      case ConfigField::kRule:
        kind = r.u8();
        break;
      case ConfigField::kAlpha:
        c.config.alpha = r.f64();
        break;
      case ConfigField::kInitialWealth:
        c.config.initial_wealth = r.f64();
        break;
      case ConfigField::kCandidateThreshold:
        c.config.candidate_threshold = r.f64();
        break;
      case ConfigField::kDiscardThreshold:
        c.config.discard_threshold = r.f64();
        break;
      case ConfigField::kPayout:
        c.config.payout = r.f64();
        break;
      case ConfigField::kSpending:
        c.config.spending = std::string(r.bytes(r.u16()));
        break;
      case ConfigField::kEvaluation:
        evaluation = r.u8();
        break;
      case ConfigField::kCreatedAt:
        c.created_at_ms = static_cast<std::int64_t>(r.u64());
        break;
      case ConfigField::kAlternative:
        alternative = r.u8();
        break;
    }
  }
  if (!r.ok) return corruption("stream configuration is truncated");
  for (int f = 1; f <= kConfigFieldCount; ++f) {
    if (!seen[f]) return corruption("stream configuration lacks field number " + std::to_string(f));
  }
  if (kind < 1 || kind > 7)
    return corruption("stream configuration has unknown rule number " + std::to_string(kind));
  if (evaluation < 1 || evaluation > 2) {
    return corruption("stream configuration has unknown evaluation number " + std::to_string(evaluation));
  }
  if (alternative < 1 || alternative > 3) {
    return corruption("stream configuration has unknown alternative number " +
                         std::to_string(alternative));
  }
  c.alternative = static_cast<Alternative>(alternative);
  c.config.kind = static_cast<RuleKind>(kind);
  c.config.evaluation = static_cast<Evaluation>(evaluation);
  if (auto canonical = check_canonical(c.config); !canonical) return canonical.error();
  if (validate_stream_name(c.name).ok() == false)
    return corruption("stream configuration holds a bad name");
  return c;
}

std::string encode_head(const StoredHead& h) {
  std::string out;
  if (h.running_apart) {
    put_u8(out, h.closed_at_ms ? kClosedApartHeadVersion : kApartHeadVersion);
  } else {
    put_u8(out, h.closed_at_ms ? kClosedHeadVersion : kHeadVersion);
  }
  put_u64(out, h.steps);
  out.append(as_bytes(h.last_hash));
  if (h.closed_at_ms) put_u64(out, static_cast<std::uint64_t>(*h.closed_at_ms));
  put_u32(out, static_cast<std::uint32_t>(h.rule_state.size()));
  out.append(h.rule_state);
  return out;
}

Result<StoredHead> decode_head(std::string_view bytes) {
  Reader r{{bytes}};
  const auto version = r.u8();
  if (!r.ok) return corruption("stream head is empty");
  if (version < kHeadVersion || version > kClosedApartHeadVersion) {
    return corruption("stream head has version " + std::to_string(version) + ", this build reads versions " +
                      std::to_string(kHeadVersion) + " to " + std::to_string(kClosedApartHeadVersion));
  }
  StoredHead h;
  h.running_apart = version == kApartHeadVersion || version == kClosedApartHeadVersion;
  h.steps = r.u64();
  h.last_hash = r.digest();
  if (version == kClosedHeadVersion || version == kClosedApartHeadVersion)
    h.closed_at_ms = static_cast<std::int64_t>(r.u64());
  const auto n = r.u32();
  h.rule_state = std::string(r.bytes(n));
  if (!r.ok || !r.in.empty()) return corruption("stream head is truncated or has trailing bytes");
  return h;
}

std::string encode_running(const StoredRunning& t) {
  std::string out;
  out.reserve(1 + 8 + 8 + t.id.size());
  put_u8(out, kRunningVersion);
  put_f64(out, t.level);
  put_u64(out, static_cast<std::uint64_t>(t.launched_at_ms));
  out.append(t.id);
  return out;
}

Result<StoredRunning> decode_running(std::string_view key, std::string_view value) {
  StoredRunning t;
  if (key.size() < 16) return corruption("running test key is too short");
  for (char c : key.substr(key.size() - 16)) {
    const int digit = c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
    if (digit < 0) return corruption("running test key does not end in 16 hex digits");
    t.launch = (t.launch << 4) | static_cast<std::uint64_t>(digit);
  }
  Reader r{{value}};
  const auto version = r.u8();
  t.level = r.f64();
  t.launched_at_ms = static_cast<std::int64_t>(r.u64());
  if (!r.ok) return corruption("running test " + std::to_string(t.launch) + " is truncated");
  if (version != kRunningVersion) {
    return corruption("running test " + std::to_string(t.launch) + " has version " + std::to_string(version) +
                      ", this build reads version " + std::to_string(kRunningVersion));
  }
  t.id = std::string(r.in);
  if (t.launch == 0 || !(t.level >= 0.0 && t.level <= 1.0) || !validate_test_id(t.id).ok()) {
    return corruption("running test " + std::to_string(t.launch) + " has an impossible launch number, level or id");
  }
  return t;
}

}  // namespace alphaledger::store
