// Recover's copy of one stream (include/alphaledger/recover.hpp; docs/ledger-format.md): every
// chain entry is read, checked against its hash and link, and replayed through the rule as verify
// would; the copy stops at the first step that cannot be proven, and the head is rebuilt (closed
// again when the source was closed). The whole-ledger steps are in recover.cpp.
#include <bit>
#include <map>
#include <set>

#include "alphaledger/rules.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/recover_internal.hpp"

namespace alphaledger::recover_detail {
namespace {

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

// What one proven chain entry did to the rule.
struct Replayed {
  store::EventKind kind = store::EventKind::kLaunch;
  bool record = false;       // a decision record: launch and finish at once
  std::uint64_t launch = 0;  // finish and abandon: which launch
  double p_value = 0;        // a decision record or a finish
};

void apply(Rule& rule, const Replayed& r) {
  if (r.record) {
    rule.record(r.p_value);
  } else if (r.kind == store::EventKind::kLaunch) {
    rule.launch();
  } else if (r.kind == store::EventKind::kFinish) {
    (void)(rule_takes_e_values(rule.config().kind) ? rule.finish_e(r.launch, r.p_value)
                                                   : rule.finish(r.launch, r.p_value));
  } else if (r.kind == store::EventKind::kAbandon) {
    (void)rule.abandon(r.launch);
  }  // a look changes nothing in the rule
}

// A stored p-value, or e-value for a rule that takes e-values (e-lond).
Status validate_evidence(const Rule& rule, double x) {
  return rule_takes_e_values(rule.config().kind) ? validate_e_value(x) : validate_p_value(x);
}

// Replays one chain entry through the rule, checking what verify checks of it (the rule gives
// its level, decision and wealth bit for bit; a finish or abandon names a running launch of the
// same test and launch time; a new test's id is new). The problem as an error's message when it
// cannot be proven; `touched` is set when the rule was changed before a mismatch was found.
Result<Replayed> replay(Rule& rule, const store::ChainEntry& e, std::set<std::string>& ids,
                        std::map<std::uint64_t, std::pair<std::string, std::int64_t>>& running,
                        bool& touched) {
  auto refuse = [](std::string why) { return corruption(std::move(why)); };
  Replayed out;
  if (!e.is_event) {
    const DecisionRecord& r = e.record.record;
    if (ids.count(r.id)) return refuse("the test id was decided before");
    if (!validate_evidence(rule, r.p_value)) return refuse("the stored p-value is invalid");
    touched = true;
    const Outcome o = rule.record(r.p_value);
    if (o.step != r.step || !same_bits(o.level, r.level) || o.rejected != r.rejected ||
        !same_bits(o.wealth, r.wealth)) {
      return refuse("a replay of the rule does not give the stored level, decision and wealth");
    }
    ids.insert(r.id);
    out.record = true;
    out.p_value = r.p_value;
    return out;
  }
  const store::EventRecord& ev = e.event.event;
  out.kind = ev.kind;
  out.launch = ev.launch;
  const std::string what(store::event_kind_name(ev.kind));
  if (ev.kind == store::EventKind::kLaunch) {
    if (ids.count(ev.id)) return refuse("the test id of the launch was used before");
    touched = true;
    const Reservation r = rule.launch();
    if (r.launch != ev.launch || !same_bits(r.level, ev.level) || !same_bits(r.wealth, ev.wealth)) {
      return refuse(
          "a replay of the rule does not give the launch number, reserved level and wealth stored "
          "in the launch event");
    }
    ids.insert(ev.id);
    running.emplace(ev.launch, std::make_pair(ev.id, ev.at_ms));
    return out;
  }
  auto it = running.find(ev.launch);
  if (it == running.end())
    return refuse("the " + what + " event names launch " + std::to_string(ev.launch) +
                  ", which is not running");
  if (it->second.first != ev.id || it->second.second != ev.launched_at_ms)
    return refuse("the " + what + " event does not name the test and launch time of launch " +
                  std::to_string(ev.launch));
  if (ev.kind == store::EventKind::kLook) return out;  // verify recomputes looks; the rule is unchanged
  if (ev.kind == store::EventKind::kFinish) {
    if (!validate_evidence(rule, ev.p_value)) return refuse("the stored p-value is invalid");
    auto o = rule_takes_e_values(rule.config().kind) ? rule.finish_e(ev.launch, ev.p_value)
                                                     : rule.finish(ev.launch, ev.p_value);
    if (!o) return refuse("the rule refuses the finish: " + o.error().message);
    touched = true;
    if (!same_bits(o->level, ev.level) || o->rejected != ev.rejected || !same_bits(o->wealth, ev.wealth))
      return refuse(
          "a replay of the rule does not give the level, decision and wealth stored in the finish event");
    out.p_value = ev.p_value;
  } else {
    double reserved = 0;
    for (const auto& t : rule.running())
      if (t.launch == ev.launch) reserved = t.level;
    if (!same_bits(reserved, ev.level))
      return refuse("the abandon event's level is not the level reserved at the launch");
    if (auto st = rule.abandon(ev.launch); !st)
      return refuse("the rule refuses the abandon: " + st.error().message);
    touched = true;
    if (!same_bits(rule.wealth(), ev.wealth))
      return refuse("a replay of the rule does not give the wealth stored in the abandon event");
  }
  running.erase(it);
  return out;
}

// The source's head: how many steps it counted, and whether (and when) the stream was closed;
// nothing (and out.head_problem says why) when it cannot be read.
std::optional<store::StoredHead> read_source_head(Store& from, const std::string& name, StreamRecovery& out) {
  std::optional<store::StoredHead> source_head;
  if (auto head_bytes = from.get(store::head_key(name)); !head_bytes) {
    out.head_problem = "the head cannot be read: " + head_bytes.error().message;
  } else if (!*head_bytes) {
    out.head_problem = "the head is missing";
  } else if (auto head = store::decode_head(**head_bytes); !head) {
    out.head_problem = "the head cannot be read: " + head.error().message;
  } else {
    source_head = *head;
    out.known_steps = head->steps;
  }
  if (!out.head_problem.empty())
    out.head_problem +=
        " (how many steps it held and whether it was closed are unknown; it is open in the "
        "new ledger)";
  return source_head;
}

// Reads and checks the entry at `step` of the source: present, readable, at its own step, its
// hash right and linked to `prev`. Nothing when the chain ends there (out.problem empty) or the
// entry cannot be proven (out.problem says why, prefixed with the step).
std::optional<store::ChainEntry> read_proven_entry(Store& from, const std::string& name, std::uint64_t step,
                                                   const store::Digest& prev, std::string& bytes_out,
                                                   StreamRecovery& out) {
  const std::string at = "step " + std::to_string(step) + ": ";
  auto bytes = from.get(store::record_key(name, step));
  if (!bytes) {
    out.problem = at + bytes.error().message;
    return std::nullopt;
  }
  if (!*bytes) {
    if (out.known_steps && *out.known_steps >= step) out.problem = at + "the record is missing";
    return std::nullopt;
  }
  auto rec = store::decode_entry(**bytes);
  if (!rec) {
    out.problem = at + "the record cannot be read: " + rec.error().message;
  } else if (rec->entry() != step) {
    out.problem = at + "the record stored there says step " + std::to_string(rec->entry());
  } else if (store::recompute_record_hash(**bytes) != rec->hash()) {
    out.problem = at + "the record's contents do not match its hash";
  } else if (rec->prev_hash() != prev) {
    out.problem = at + "the record does not link to the one before it";
  } else {
    bytes_out = std::move(**bytes);
    return std::move(*rec);
  }
  return std::nullopt;
}

// A closed stream stays closed. Its closing entry is proven when it covers exactly the kept steps
// and hashes to what the source's head holds; otherwise it is closed again over the kept steps, at
// the same time, and the report says the old closing hash no longer applies.
void close_like_source(const store::StoredHead& source_head, store::StoredHead& head, StreamRecovery& out) {
  const std::int64_t closed_at = *source_head.closed_at_ms;
  const store::Digest closing = store::closing_hash(out.kept_steps, closed_at, head.last_hash);
  if (source_head.steps != out.kept_steps) {
    out.closing_problem = "the closing covered " + std::to_string(source_head.steps) + " step(s) but only " +
                          std::to_string(out.kept_steps) + " were kept";
  } else if (closing != source_head.last_hash) {
    out.closing_problem =
        "the closing entry rebuilt from the kept steps and the closing time does not hash to the "
        "closing hash in the head (the head or its closing time was changed)";
  } else {
    out.closing_proven = true;
  }
  if (!out.closing_proven)
    out.closing_problem +=
        "; closed again at the same time with a new closing hash (an anchor "
        "closed:HASH noted before no longer matches)";
  out.closed_at_ms = closed_at;
  out.closing_hash = store::to_hex(closing);
  head.last_hash = closing;
  head.closed_at_ms = closed_at;
}

}  // namespace

// Writes `batch` when it has grown, or always with `force`.
Status flush(Store& store, WriteBatch& batch, bool force) {
  if (batch.empty() || (!force && batch.ops.size() < 4096)) return {};
  auto s = store.write(batch, false);
  batch.ops.clear();
  return s;
}

// Copies one stream, stopping at its first unproven step.
Status copy_stream(Store& from, Store& to, const std::string& name, const std::string& config_bytes,
                   StreamRecovery& out) {
  auto config = store::decode_config(config_bytes);
  if (!config || config->name != name) {
    out.problem = "the configuration cannot be read" +
                  (config ? std::string(" (it names another stream)") : ": " + config.error().message);
    return {};
  }
  const std::optional<store::StoredHead> source_head = read_source_head(from, name, out);
  WriteBatch batch;
  batch.put(store::config_key(name), config_bytes);
  Rule rule(config->config);  // replays the entries as they are read
  store::Digest prev = store::genesis_hash(config_bytes);
  // Every test id seen in the kept entries (a decision, a launch) and the tests still running:
  // launch number -> (id, launch time).
  std::set<std::string> ids;
  std::map<std::uint64_t, std::pair<std::string, std::int64_t>> running;
  // What the kept entries did to the rule, to rebuild its state when the replay of the unproven
  // entry that stopped the copy had already changed it.
  std::vector<Replayed> kept;
  bool rule_touched = false;
  for (std::uint64_t step = 1;; ++step) {
    std::string bytes;
    auto rec = read_proven_entry(from, name, step, prev, bytes, out);
    if (!rec) break;
    const std::string at = "step " + std::to_string(step) + ": ";
    bool touched = false;
    auto done = replay(rule, *rec, ids, running, touched);
    if (!done) {
      rule_touched = touched;
      out.problem = at + done.error().message;
      break;
    }
    kept.push_back(*done);
    prev = rec->hash();
    out.kept_steps = step;
    // A test's id points to its last entry: a running test's to its launch, a finished or
    // abandoned one's to its finish or abandon (a later put of the same key wins in the batch).
    // A look moves the test's look state key instead (ledger_look.cpp).
    const bool is_look = rec->is_event && rec->event.event.kind == store::EventKind::kLook;
    batch.put(is_look ? store::look_key(name, rec->id()) : store::index_key(name, rec->id()),
              store::encode_step(step));
    batch.put(store::record_key(name, step), std::move(bytes));
    if (auto s = flush(to, batch, false); !s) return s;
  }
  // The rule's state after the kept entries only (the loop may have fed it one unproven entry).
  Rule kept_rule(config->config);
  if (rule_touched) {
    for (const Replayed& r : kept) apply(kept_rule, r);
  } else {
    kept_rule = std::move(rule);
  }
  store::StoredHead head;
  head.steps = out.kept_steps;
  head.last_hash = prev;
  head.rule_state = kept_rule.encode_state();
  if (source_head && source_head->closed_at_ms) close_like_source(*source_head, head, out);
  batch.put(store::head_key(name), store::encode_head(head));
  return flush(to, batch, true);
}

}  // namespace alphaledger::recover_detail
