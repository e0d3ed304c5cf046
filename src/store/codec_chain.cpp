// Encodings of docs/ledger-format.md, the hash chain's entries: decision records ("Decision
// record"), events ("Event record") with their look payload ("Look event"), decoding either, the
// history row an entry gives, and the chain's ends ("The hash chain", "Closing"). The keys are in
// codec.cpp, a stream's configuration and head in codec_stream.cpp (store/codec_internal.hpp:
// what they share).
#include <bit>
#include <cstring>

#include "core/bytes.hpp"
#include "store/codec.hpp"
#include "store/codec_internal.hpp"

namespace alphaledger::store {
namespace {

using bytes::put_f64;
using bytes::put_u64;
using bytes::put_u8;
using codec_detail::put_text16;
using codec_detail::Reader;

constexpr std::size_t kRecordHashSize = 32;
// An encoded record without its id bytes: version, step, id length, p-value, level, rejected,
// wealth, time, previous hash, hash.
constexpr std::size_t kRecordFixedSize = 1 + 8 + 2 + 8 + 8 + 1 + 8 + 8 + 32 + kRecordHashSize;
// An encoded event without its id bytes: version, entry, kind, launch, id length, level, p-value,
// rejected, wealth, time, launch time, previous hash, hash.
constexpr std::size_t kEventFixedSize = 1 + 8 + 1 + 8 + 2 + 8 + 8 + 1 + 8 + 8 + 8 + 32 + kRecordHashSize;

}  // namespace

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

}  // namespace alphaledger::store
