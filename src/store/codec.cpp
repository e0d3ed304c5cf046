// Encodings of docs/ledger-format.md.
#include "store/codec.hpp"

#include <bit>
#include <cstring>

#include "core/bytes.hpp"

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
using bytes::put_u16;
using bytes::put_u32;
using bytes::put_u64;
using bytes::put_u8;
void put_text16(std::string& out, std::string_view s) {
  put_u16(out, static_cast<std::uint16_t>(s.size()));
  out.append(s);
}

// bytes::Reader, and the 32 bytes of a hash.
struct Reader : bytes::Reader {
  Digest digest() {
    Digest d{};
    auto s = bytes(32);
    if (ok) std::memcpy(d.data(), s.data(), 32);
    return d;
  }
};

std::string hex16(std::uint64_t v) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out(16, '0');
  for (int i = 15; i >= 0; --i, v >>= 4) out[static_cast<std::size_t>(i)] = kHex[v & 15];
  return out;
}

constexpr std::size_t kRecordHashSize = 32;
// An encoded record without its id bytes: version, step, id length, p-value, level, rejected,
// wealth, time, previous hash, hash.
constexpr std::size_t kRecordFixedSize = 1 + 8 + 2 + 8 + 8 + 1 + 8 + 8 + 32 + kRecordHashSize;
// An encoded event without its id bytes: version, entry, kind, launch, id length, level, p-value,
// rejected, wealth, time, launch time, previous hash, hash.
constexpr std::size_t kEventFixedSize = 1 + 8 + 1 + 8 + 2 + 8 + 8 + 1 + 8 + 8 + 8 + 32 + kRecordHashSize;

}  // namespace

std::string config_key(std::string_view stream) { return "c/" + std::string(stream); }
std::string head_key(std::string_view stream) { return "h/" + std::string(stream); }
std::string record_prefix(std::string_view stream) { return "r/" + std::string(stream) + "/"; }
// The keys written for every decision are built in one allocation each.
std::string record_key(std::string_view stream, std::uint64_t step) {
  std::string out;
  out.reserve(stream.size() + 3 + 16);
  out.append("r/").append(stream).push_back('/');
  out.append(16, '0');
  set_record_key_step(out, step);
  return out;
}
void set_record_key_step(std::string& key, std::uint64_t step) {
  static constexpr char kHex[] = "0123456789abcdef";
  char* end = key.data() + key.size();
  for (int i = 1; i <= 16; ++i, step >>= 4) end[-i] = kHex[step & 15];
}
std::string look_key(std::string_view stream, std::string_view id) {
  return "l/" + std::string(stream) + "/" + std::string(id);
}
std::string index_prefix(std::string_view stream) { return "i/" + std::string(stream) + "/"; }
std::string running_prefix(std::string_view stream) { return "t/" + std::string(stream) + "/"; }
std::string running_key(std::string_view stream, std::uint64_t launch) {
  std::string out;
  out.reserve(stream.size() + 3 + 16);
  out.append("t/").append(stream).push_back('/');
  out.append(16, '0');
  set_record_key_step(out, launch);
  return out;
}
std::string index_key(std::string_view stream, std::string_view id) {
  std::string out;
  assign_index_key(out, stream, id);
  return out;
}
void assign_index_key(std::string& out, std::string_view stream, std::string_view id) {
  out.clear();
  out.reserve(stream.size() + 3 + id.size());
  out.append("i/").append(stream).push_back('/');
  out.append(id);
}

std::string encode_format_version(std::uint32_t version) {
  std::string out;
  put_u32(out, version);
  return out;
}

Result<std::uint32_t> decode_format_version(std::string_view bytes) {
  Reader r{{bytes}};
  const auto v = r.u32();
  if (!r.ok || !r.in.empty())
    return corruption("the format version key holds " + std::to_string(bytes.size()) +
                         " bytes, expected 4");
  return v;
}

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

std::string encode_record(const DecisionRecord& rec, const Digest& prev_hash, Digest* hash) {
  // Written field by field into a buffer of the exact size (the layout of docs/ledger-format.md),
  // then hashed in place: one allocation per record.
  const std::size_t size = kRecordFixedSize + rec.id.size();
  std::string out(size, '\0');
  char* p = out.data();
  auto put = [&p](std::uint64_t v, int bytes) {
    for (int i = 0; i < bytes; ++i) *p++ = static_cast<char>(v >> (8 * i));
  };
  put(kRecordVersion, 1);
  put(rec.step, 8);
  put(rec.id.size(), 2);
  std::memcpy(p, rec.id.data(), rec.id.size());
  p += rec.id.size();
  put(std::bit_cast<std::uint64_t>(rec.p_value), 8);
  put(std::bit_cast<std::uint64_t>(rec.level), 8);
  put(rec.rejected ? 1 : 0, 1);
  put(std::bit_cast<std::uint64_t>(rec.wealth), 8);
  put(static_cast<std::uint64_t>(rec.decided_at_ms), 8);
  std::memcpy(p, prev_hash.data(), prev_hash.size());
  p += prev_hash.size();
  const Digest h = sha256(std::string_view(out.data(), size - kRecordHashSize));
  std::memcpy(p, h.data(), h.size());
  if (hash != nullptr) *hash = h;
  return out;
}

Result<StoredRecord> decode_record(std::string_view bytes) {
  Reader r{{bytes}};
  const auto version = r.u8();
  if (!r.ok) return corruption("decision record is empty");
  if (version != kRecordVersion) {
    return corruption("decision record has version " + std::to_string(version) +
                         ", this build reads version " + std::to_string(kRecordVersion));
  }
  StoredRecord s;
  s.record.step = r.u64();
  s.record.id = std::string(r.bytes(r.u16()));
  s.record.p_value = r.f64();
  s.record.level = r.f64();
  const auto rejected = r.u8();
  s.record.wealth = r.f64();
  s.record.decided_at_ms = static_cast<std::int64_t>(r.u64());
  s.prev_hash = r.digest();
  s.hash = r.digest();
  if (!r.ok || !r.in.empty()) return corruption("decision record is truncated or has trailing bytes");
  if (rejected > 1)
    return corruption("decision record has rejected = " + std::to_string(rejected) + ", expected 0 or 1");
  s.record.rejected = rejected == 1;
  return s;
}

Digest recompute_record_hash(std::string_view encoded) {
  if (encoded.size() < kRecordHashSize) return sha256(encoded);
  return sha256(encoded.substr(0, encoded.size() - kRecordHashSize));
}

std::string_view event_kind_name(EventKind kind) {
  switch (kind) {
    case EventKind::kLaunch:
      return "launch";
    case EventKind::kFinish:
      return "finish";
    case EventKind::kAbandon:
      return "abandon";
    case EventKind::kLook:
      return "look";
  }
  return "unknown";
}

bool operator==(const LookPayload& a, const LookPayload& b) {
  auto bits = [](double x) { return std::bit_cast<std::uint64_t>(x); };
  return a.look == b.look && a.previous_look == b.previous_look && same_look_data(a.data, b.data) &&
         bits(a.estimate) == bits(b.estimate) && bits(a.variance) == bits(b.variance) &&
         bits(a.anytime_p_value) == bits(b.anytime_p_value) && bits(a.running_min) == bits(b.running_min) &&
         bits(a.e_value) == bits(b.e_value) && bits(a.cs_low) == bits(b.cs_low) &&
         bits(a.cs_high) == bits(b.cs_high) && a.stop == b.stop;
}

namespace {

void put_mean_arm(std::string& out, const MeanArm& a) {
  put_u64(out, a.n);
  put_f64(out, a.mean);
  put_f64(out, a.sd);
}

MeanArm get_mean_arm(Reader& r) {
  MeanArm a;
  a.n = r.u64();
  a.mean = r.f64();
  a.sd = r.f64();
  return a;
}

// The look payload, after the event fields: look, previous look, summary kind, the two arms
// (proportions: n, conversions; means: n, mean, sd), mixture_sd, then the answer.
void put_look(std::string& out, const LookPayload& l) {
  put_u64(out, l.look);
  put_u64(out, l.previous_look);
  put_u8(out, static_cast<std::uint8_t>(l.data.summary));
  if (l.data.summary == LookSummary::kProportions) {
    for (const ProportionArm* a : {&l.data.control_proportions, &l.data.treatment_proportions}) {
      put_u64(out, a->n);
      put_u64(out, a->conversions);
    }
  } else {
    put_mean_arm(out, l.data.control_means);
    put_mean_arm(out, l.data.treatment_means);
  }
  put_f64(out, l.data.mixture_sd.value_or(0.0));
  for (double x : {l.estimate, l.variance, l.anytime_p_value, l.running_min, l.e_value,
                   l.cs_low, l.cs_high})
    put_f64(out, x);
  put_u8(out, l.stop ? 1 : 0);
}

Status get_look(Reader& r, LookPayload& l) {
  l.look = r.u64();
  l.previous_look = r.u64();
  const auto summary = r.u8();
  if (summary == static_cast<std::uint8_t>(LookSummary::kProportions)) {
    for (ProportionArm* a : {&l.data.control_proportions, &l.data.treatment_proportions}) {
      a->n = r.u64();
      a->conversions = r.u64();
    }
  } else if (summary == static_cast<std::uint8_t>(LookSummary::kMeans)) {
    l.data.control_means = get_mean_arm(r);
    l.data.treatment_means = get_mean_arm(r);
  } else if (r.ok) {
    return corruption("look event has summary kind " + std::to_string(summary) + ", expected 1 or 2");
  }
  l.data.summary = static_cast<LookSummary>(summary);
  l.data.mixture_sd = r.f64();
  for (double* x : {&l.estimate, &l.variance, &l.anytime_p_value, &l.running_min,
                    &l.e_value, &l.cs_low, &l.cs_high})
    *x = r.f64();
  const auto stop = r.u8();
  if (r.ok && stop > 1) return corruption("look event has stop = " + std::to_string(stop) + ", expected 0 or 1");
  l.stop = stop == 1;
  if (r.ok && l.look == 0) return corruption("look event has look number 0; looks count from 1");
  return {};
}

}  // namespace

std::string encode_event(const EventRecord& e, const Digest& prev_hash, Digest* hash) {
  std::string out;
  out.reserve(kEventFixedSize + e.id.size());
  put_u8(out, kEventVersion);
  put_u64(out, e.entry);
  put_u8(out, static_cast<std::uint8_t>(e.kind));
  put_u64(out, e.launch);
  put_text16(out, e.id);
  put_f64(out, e.level);
  put_f64(out, e.p_value);
  put_u8(out, e.rejected ? 1 : 0);
  put_f64(out, e.wealth);
  put_u64(out, static_cast<std::uint64_t>(e.at_ms));
  put_u64(out, static_cast<std::uint64_t>(e.launched_at_ms));
  if (e.kind == EventKind::kLook) put_look(out, e.look);
  out.append(reinterpret_cast<const char*>(prev_hash.data()), prev_hash.size());
  const Digest h = sha256(out);
  out.append(reinterpret_cast<const char*>(h.data()), h.size());
  if (hash != nullptr) *hash = h;
  return out;
}

Result<StoredEvent> decode_event(std::string_view bytes) {
  Reader r{{bytes}};
  const auto version = r.u8();
  if (!r.ok) return corruption("event record is empty");
  if (version != kEventVersion) {
    return corruption("event record has version " + std::to_string(version) + ", expected " +
                      std::to_string(kEventVersion));
  }
  StoredEvent s;
  s.event.entry = r.u64();
  const auto kind = r.u8();
  s.event.launch = r.u64();
  s.event.id = std::string(r.bytes(r.u16()));
  s.event.level = r.f64();
  s.event.p_value = r.f64();
  const auto rejected = r.u8();
  s.event.wealth = r.f64();
  s.event.at_ms = static_cast<std::int64_t>(r.u64());
  s.event.launched_at_ms = static_cast<std::int64_t>(r.u64());
  if (kind == static_cast<std::uint8_t>(EventKind::kLook)) {
    if (auto st = get_look(r, s.event.look); !st) return st.error();
  }
  s.prev_hash = r.digest();
  s.hash = r.digest();
  if (!r.ok || !r.in.empty()) return corruption("event record is truncated or has trailing bytes");
  if (kind < 1 || kind > 4)
    return corruption("event record has kind " + std::to_string(kind) + ", expected 1, 2, 3 or 4");
  s.event.kind = static_cast<EventKind>(kind);
  if (rejected > 1)
    return corruption("event record has rejected = " + std::to_string(rejected) + ", expected 0 or 1");
  s.event.rejected = rejected == 1;
  if (s.event.entry == 0 || s.event.launch == 0)
    return corruption("event record has entry or launch number 0; both count from 1");
  if (s.event.kind != EventKind::kFinish &&
      (s.event.rejected || std::bit_cast<std::uint64_t>(s.event.p_value) != 0)) {
    return corruption("a " + std::string(event_kind_name(s.event.kind)) +
                      " event record carries a p-value or a rejection; only a finish does");
  }
  if (s.event.kind == EventKind::kLaunch && s.event.launched_at_ms != s.event.at_ms)
    return corruption("a launch event record has a launch time other than its own time");
  return s;
}

Result<std::uint8_t> entry_version(std::string_view bytes) {
  if (bytes.empty()) return corruption("chain entry is empty");
  return static_cast<std::uint8_t>(bytes[0]);
}

Result<ChainEntry> decode_entry(std::string_view bytes) {
  auto version = entry_version(bytes);
  if (!version) return version.error();
  ChainEntry e;
  if (*version == kEventVersion) {
    auto ev = decode_event(bytes);
    if (!ev) return ev.error();
    e.is_event = true;
    e.event = std::move(*ev);
    return e;
  }
  if (*version != kRecordVersion) {
    return corruption("chain entry has version " + std::to_string(*version) + ", this build reads versions " +
                      std::to_string(kRecordVersion) + " and " + std::to_string(kEventVersion));
  }
  auto rec = decode_record(bytes);
  if (!rec) return rec.error();
  e.record = std::move(*rec);
  return e;
}

std::optional<DecisionRecord> history_row(const ChainEntry& e) {
  if (!e.is_event) {
    DecisionRecord r = e.record.record;
    r.launch = r.step;
    r.launched_at_ms = r.decided_at_ms;
    return r;
  }
  if (e.event.event.kind == EventKind::kLaunch || e.event.event.kind == EventKind::kLook) return std::nullopt;
  return event_row(e.event.event);
}

DecisionRecord event_row(const EventRecord& ev) {
  DecisionRecord r;
  r.step = ev.entry;
  r.id = ev.id;
  r.p_value = ev.p_value;
  r.level = ev.level;
  r.rejected = ev.rejected;
  r.wealth = ev.wealth;
  r.decided_at_ms = ev.at_ms;
  r.launch = ev.launch;
  r.launched_at_ms = ev.launched_at_ms;
  r.abandoned = ev.kind == EventKind::kAbandon;
  return r;
}

std::string encode_step(std::uint64_t step) {
  std::string out;
  put_u64(out, step);
  return out;
}

Result<std::uint64_t> decode_step(std::string_view bytes) {
  Reader r{{bytes}};
  const auto v = r.u64();
  if (!r.ok || !r.in.empty())
    return corruption("test id index entry holds " + std::to_string(bytes.size()) + " bytes, expected 8");
  return v;
}

Digest genesis_hash(std::string_view encoded_config) { return sha256(encoded_config); }

std::string encode_closing(std::uint64_t steps, std::int64_t closed_at_ms, const Digest& last_record_hash) {
  std::string out;
  put_u8(out, kClosingVersion);
  put_u64(out, steps);
  put_u64(out, static_cast<std::uint64_t>(closed_at_ms));
  out.append(as_bytes(last_record_hash));
  return out;
}

Digest closing_hash(std::uint64_t steps, std::int64_t closed_at_ms, const Digest& last_record_hash) {
  return sha256(encode_closing(steps, closed_at_ms, last_record_hash));
}

std::vector<std::string> record_range_prefixes(std::string_view stream, std::uint64_t lo, std::uint64_t hi) {
  std::vector<std::string> out;
  if (lo == 0 || lo > hi) return out;
  const std::string base = record_prefix(stream);
  while (true) {
    // The widest block of 16^k steps that starts at lo and ends at or before hi: its keys are
    // exactly those sharing the first 16 - k hex digits of lo.
    int k = 0;
    while (k < 15) {
      const std::uint64_t size = std::uint64_t{1} << (4 * (k + 1));
      if (lo % size != 0 || hi - lo < size - 1) break;
      ++k;
    }
    out.push_back(base + hex16(lo).substr(0, static_cast<std::size_t>(16 - k)));
    const std::uint64_t size = std::uint64_t{1} << (4 * k);
    if (hi - lo < size) break;
    lo += size;
  }
  return out;
}

}  // namespace alphaledger::store
