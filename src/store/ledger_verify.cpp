// Ledger::verify: one pass over a stream's records, replaying them through the rule, holding one
// record at a time; then the head, the closing entry, the id index and the anchors.
#include <algorithm>
#include <map>
#include <optional>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger {

namespace {

constexpr std::size_t kHashHexSize = 64;

bool is_hex(char c) { return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F'); }

}  // namespace

Result<Anchor> parse_anchor(std::string_view text) {
  const std::string accepted =
      " (an anchor is STEP:HASH, e.g. 12:<64 hex digits> as printed by verify, or closed:HASH for the "
      "closing of a closed stream)";
  const auto colon = text.find(':');
  if (colon == std::string_view::npos) {
    return invalid_input("anchor " + excerpt(text) + " has no ':'" + accepted);
  }
  const std::string_view where = text.substr(0, colon);
  const std::string_view hash = text.substr(colon + 1);
  Anchor a;
  if (where == "closed") {
    a.closing = true;
  } else {
    const auto step = read_whole_number(where);
    if (!step) {
      return invalid_input("anchor " + excerpt(text) + ": the part before ':' must be a step number (0 for " +
                           "the configuration) or the word closed, got " + excerpt(where, 24) + accepted);
    }
    a.step = *step;
  }
  if (hash.size() != kHashHexSize || !std::all_of(hash.begin(), hash.end(), is_hex)) {
    return invalid_input("anchor " + excerpt(text) +
                         ": the hash must be 64 hex digits (a SHA-256 chain hash), got " +
                         std::to_string(hash.size()) + " characters" + accepted);
  }
  a.chain_hash.reserve(kHashHexSize);
  for (char c : hash) a.chain_hash.push_back(c >= 'A' && c <= 'F' ? static_cast<char>(c - 'A' + 'a') : c);
  return a;
}

std::string anchor_text(const Anchor& anchor) {
  return (anchor.closing ? std::string("closed") : std::to_string(anchor.step)) + ":" + anchor.chain_hash;
}

namespace store {

Result<VerifyReport> verify_stream(Store& store, const std::string& where, std::string_view stream,
                                   const std::vector<Anchor>& anchors) {
  if (auto s = validate_stream_name(stream); !s) return s.error();
  VerifyReport report;
  auto fail = [&](std::uint64_t step, std::string problem) {
    report.ok = false;
    report.first_bad_step = step;
    report.problem = std::move(problem);
    return report;
  };
  auto config_bytes = store.get(config_key(stream));
  if (!config_bytes) return config_bytes.error();
  if (!*config_bytes) return unknown_stream(stream, where);
  auto config = decode_config(**config_bytes);
  if (!config) return fail(0, "the configuration cannot be read: " + config.error().message);
  if (config->name != stream) return fail(0, "the configuration names stream " + in_quotes(config->name));
  auto head_bytes = store.get(head_key(stream));
  if (!head_bytes) return head_bytes.error();
  if (!*head_bytes) return fail(0, "the stream has no head record");
  auto head = decode_head(**head_bytes);
  if (!head) return fail(0, "the head cannot be read: " + head.error().message);

  // Step anchors in step order, checked as the walk reaches their step; closing anchors last.
  std::vector<const Anchor*> step_anchors, closing_anchors;
  for (const auto& a : anchors) (a.closing ? closing_anchors : step_anchors).push_back(&a);
  std::stable_sort(step_anchors.begin(), step_anchors.end(),
                   [](const Anchor* x, const Anchor* y) { return x->step < y->step; });
  std::size_t next_anchor = 0;
  // The first anchor at `step` whose hash differs from `hash`, as a problem text; passed anchors
  // are consumed.
  auto anchor_problem = [&](std::uint64_t step, const Digest& hash) -> std::optional<std::string> {
    const std::string hex = to_hex(hash);
    for (; next_anchor < step_anchors.size() && step_anchors[next_anchor]->step == step; ++next_anchor) {
      const Anchor& a = *step_anchors[next_anchor];
      if (a.chain_hash != hex) {
        return "the chain hash " + std::string(step == 0 ? "of the configuration" : "at this step") + " is " +
               hex + ", but the anchor says " + a.chain_hash +
               " (a record up to this step, or the configuration, differs from when the anchor was noted, "
               "or the anchor is from another stream)";
      }
    }
    return std::nullopt;
  };

  Rule rule(config->config);
  Digest prev = genesis_hash(**config_bytes);
  if (auto p = anchor_problem(0, prev)) return fail(0, *p);
  std::uint64_t expected = 1;
  std::string expected_key = record_key(stream, 1);  // rewritten in place for each next step
  std::optional<VerifyReport> bad;
  std::optional<Error> io_error;
  // Tests launched and not yet finished or abandoned in the walk: their id, launch entry and time,
  // and where the id index points (memory: the running tests, not the history).
  struct Launched {
    std::string id;
    std::uint64_t entry = 0;
    std::int64_t at_ms = 0;
    std::optional<std::uint64_t> indexed;
  };
  std::map<std::uint64_t, Launched> running_ids;
  std::uint64_t launches = 0;  // tests launched: decision records and launch events (one id each)
  auto mismatch = [](const char* what, double got, double stored) {
    return "replaying the rule gives " + std::string(what) + " " + readable_number(got) +
           " but the record has " + readable_number(stored);
  };
  // Replays one entry through the rule; the problem text when it disagrees.
  auto replay_entry = [&](const ChainEntry& e) -> std::optional<std::string> {
    if (!e.is_event) {
      const DecisionRecord& r = e.record.record;
      if (auto v = validate_p_value(r.p_value); !v) return "the stored " + v.error().message;
      const Outcome o = rule.record(r.p_value);
      ++launches;
      if (o.step != r.step) {
        return "a decision record at step " + std::to_string(r.step) + " is launch " + std::to_string(o.step) +
               "; decision records are only written while each step is a launch";
      }
      if (!same_bits(o.level, r.level) || o.rejected != r.rejected || !same_bits(o.wealth, r.wealth)) {
        return "replaying the rule gives level " + readable_number(o.level) + ", rejected " +
               (o.rejected ? "1" : "0") + ", wealth " + readable_number(o.wealth) + " but the record has level " +
               readable_number(r.level) + ", rejected " + (r.rejected ? "1" : "0") + ", wealth " +
               readable_number(r.wealth);
      }
      return std::nullopt;
    }
    const EventRecord& ev = e.event.event;
    if (ev.kind == EventKind::kLaunch) {
      const Reservation r = rule.launch();
      ++launches;
      if (r.launch != ev.launch) {
        return "the launch event says launch " + std::to_string(ev.launch) + " but it is launch " +
               std::to_string(r.launch);
      }
      if (!same_bits(r.level, ev.level)) return mismatch("the reserved level", r.level, ev.level);
      if (!same_bits(r.wealth, ev.wealth)) return mismatch("wealth", r.wealth, ev.wealth);
      running_ids.emplace(ev.launch, Launched{ev.id, ev.entry, ev.at_ms, std::nullopt});
      return std::nullopt;
    }
    const std::string what(event_kind_name(ev.kind));
    auto it = running_ids.find(ev.launch);
    if (it == running_ids.end()) {
      return "the " + what + " event names launch " + std::to_string(ev.launch) +
             ", which is not a running launch event before it";
    }
    if (it->second.id != ev.id) {
      return "the " + what + " event names test " + in_quotes(excerpt(ev.id)) + " but launch " +
             std::to_string(ev.launch) + " is test " + in_quotes(excerpt(it->second.id));
    }
    if (ev.launched_at_ms != it->second.at_ms) {
      return "the " + what + " event says the test was launched at " + format_timestamp(ev.launched_at_ms) +
             " but its launch event says " + format_timestamp(it->second.at_ms);
    }
    if (ev.kind == EventKind::kFinish) {
      if (auto v = validate_p_value(ev.p_value); !v) return "the stored " + v.error().message;
      auto o = rule_takes_e_values(rule.config().kind) ? rule.finish_e(ev.launch, ev.p_value)
                                                       : rule.finish(ev.launch, ev.p_value);
      if (!o) return "the rule refuses the finish: " + o.error().message;
      if (!same_bits(o->level, ev.level) || o->rejected != ev.rejected || !same_bits(o->wealth, ev.wealth)) {
        return "replaying the rule gives reserved level " + readable_number(o->level) + ", rejected " +
               (o->rejected ? "1" : "0") + ", wealth " + readable_number(o->wealth) +
               " but the finish event has level " + readable_number(ev.level) + ", rejected " +
               (ev.rejected ? "1" : "0") + ", wealth " + readable_number(ev.wealth);
      }
    } else {
      const double reserved = [&] {
        for (const auto& t : rule.running())
          if (t.launch == ev.launch) return t.level;
        return 0.0;
      }();
      if (auto st = rule.abandon(ev.launch); !st) return "the rule refuses the abandon: " + st.error().message;
      if (!same_bits(reserved, ev.level)) return mismatch("the reserved level", reserved, ev.level);
      if (!same_bits(rule.wealth(), ev.wealth)) return mismatch("wealth", rule.wealth(), ev.wealth);
    }
    running_ids.erase(it);
    return std::nullopt;
  };
  auto s = store.scan(record_prefix(stream), [&](std::string_view key, std::string_view value) {
    const std::string step_text = "step " + std::to_string(expected);
    if (key != expected_key) {
      bad = fail(expected,
                 "the record for " + step_text + " is missing (next stored key is " + excerpt(key, 80) + ")");
      return false;
    }
    auto rec = decode_entry(value);
    if (!rec) {
      bad = fail(expected, "the record cannot be read: " + rec.error().message);
      return false;
    }
    if (rec->entry() != expected) {
      bad = fail(expected, "the record stored at " + step_text + " says step " + std::to_string(rec->entry()) +
                               " (records were moved or reordered)");
      return false;
    }
    if (recompute_record_hash(value) != rec->hash()) {
      bad = fail(expected, "the record's contents do not match its hash (the record was changed)");
      return false;
    }
    if (rec->prev_hash() != prev) {
      if (expected == 1) {
        bad = fail(1,
                   "the first record does not link to the stream's configuration (the configuration "
                   "or the first record was replaced)");
      } else {
        bad = fail(expected - 1, "the record does not match the hash stored in the record after it (step " +
                                     std::to_string(expected - 1) + " was replaced)");
      }
      return false;
    }
    if (auto problem = replay_entry(*rec)) {
      bad = fail(expected, *problem);
      return false;
    }
    const std::string& id = rec->id();
    // Each decided or abandoned test's id must point back to its own entry; a launch's id to the
    // launch while it runs, else to its finish or abandon (checked there, and for the tests still
    // running after the walk). With the count check below, this makes the index and the tests
    // agree one to one without holding every id in memory.
    auto index = store.get(index_key(stream, id));
    if (!index) {
      io_error = index.error();
      return false;
    }
    std::optional<std::uint64_t> indexed;
    if (*index) {
      if (auto st = decode_step(**index); st) indexed = *st;
    }
    const bool is_launch = rec->is_event && rec->event.event.kind == EventKind::kLaunch;
    if (is_launch) running_ids.at(rec->event.event.launch).indexed = indexed;
    if (!indexed || (is_launch ? *indexed < expected : *indexed != expected)) {
      std::string twice;
      if (indexed && *indexed < expected) {  // is it an earlier record with the same id?
        auto earlier = store.get(record_key(stream, *indexed));
        if (earlier && *earlier) {
          auto e = decode_entry(**earlier);
          if (e && e->id() == id) twice = " (the id appears twice in the history)";
        }
      }
      bad = fail(expected, "the test id index for " + in_quotes(excerpt(id)) + " points to " +
                               (indexed ? "step " + std::to_string(*indexed) : std::string("no valid step")) +
                               twice);
      return false;
    }
    if (auto p = anchor_problem(expected, rec->hash())) {
      bad = fail(expected, *p);
      return false;
    }
    prev = rec->hash();
    ++expected;
    set_record_key_step(expected_key, expected);
    return true;
  });
  if (!s) return s.error();
  if (io_error) return *io_error;
  if (bad) return *bad;
  const std::uint64_t steps = expected - 1;
  report.steps = steps;
  if (head->steps > steps) {
    return fail(steps + 1, "the record for step " + std::to_string(steps + 1) +
                               " is missing (the head counts " + std::to_string(head->steps) + " records)");
  }
  if (head->steps < steps) {
    return fail(head->steps + 1, "the history holds " + std::to_string(steps) +
                                     " records but the head counts " + std::to_string(head->steps));
  }
  if (head->closed_at_ms) {
    if (head->last_hash != closing_hash(steps, *head->closed_at_ms, prev)) {
      return fail(steps, "the head says the stream was closed at " + format_timestamp(*head->closed_at_ms) +
                             " but its hash does not match a closing after the last record (the closing time "
                             "or the last record was changed)");
    }
  } else if (head->last_hash != prev) {
    return fail(steps, steps == 0 ? "the head does not link to the configuration"
                                  : "the last record does not match the hash in the head (it was replaced, "
                                    "or a closing was removed from the head)");
  }
  if (head->rule_state != rule.encode_state()) {
    return fail(steps, "the stored rule state does not equal the state replayed from the history");
  }
  for (const auto& [launch, t] : running_ids) {
    if (t.indexed != t.entry) {
      return fail(t.entry, "the test id index for running test " + in_quotes(excerpt(t.id)) + " points to " +
                               (t.indexed ? "step " + std::to_string(*t.indexed) : std::string("no valid step")) +
                               ", not to its launch");
    }
  }
  // Every record's id points to its own step, so the ids are distinct and each has its entry:
  // the index agrees with the records exactly when it holds no more entries than there are records.
  const std::string index_prefix_text = index_prefix(stream);
  std::uint64_t entries = 0;
  s = store.scan(index_prefix_text, [&](std::string_view, std::string_view) {
    ++entries;
    return true;
  });
  if (!s) return s.error();
  if (entries != launches) {
    // Find the entry without a record, to name it.
    std::optional<VerifyReport> index_bad;
    s = store.scan(index_prefix_text, [&](std::string_view key, std::string_view value) {
      const std::string_view id = key.substr(index_prefix_text.size());
      auto step = decode_step(value);
      bool has_record = false;
      if (step && *step >= 1 && *step <= steps) {
        auto bytes = store.get(record_key(stream, *step));
        if (!bytes) {
          io_error = bytes.error();
          return false;
        }
        if (*bytes) {
          auto rec = decode_entry(**bytes);
          has_record = rec && rec->id() == id;
        }
      }
      if (!has_record) {
        index_bad = fail(0, "the test id index holds " + in_quotes(excerpt(id)) + ", which no record has");
        return false;
      }
      return true;
    });
    if (!s) return s.error();
    if (io_error) return *io_error;
    if (index_bad) return *index_bad;
    return fail(0, "the test id index holds " + std::to_string(entries) + " entries for " +
                       std::to_string(launches) + " tests");
  }
  // Anchors past the last record: the ledger lost its tail (or the anchor is not from here).
  if (next_anchor < step_anchors.size()) {
    const Anchor& a = *step_anchors[next_anchor];
    return fail(a.step, "the ledger holds only " + std::to_string(steps) +
                            " records, but an anchor was noted at step " + std::to_string(a.step) +
                            " (the records after step " + std::to_string(steps) +
                            " were lost, or the anchor is from another stream)");
  }
  for (const Anchor* a : closing_anchors) {
    if (!head->closed_at_ms) {
      return fail(steps,
                  "an anchor names the closing of this stream, but the stream is not closed (it was "
                  "reopened by hand, or the anchor is from another stream)");
    }
    if (to_hex(head->last_hash) != a->chain_hash) {
      return fail(steps, "the closing hash is " + to_hex(head->last_hash) + ", but the anchor says " +
                             a->chain_hash +
                             " (the history or the closing time changed since the anchor was noted)");
    }
  }
  report.chain_hash = to_hex(prev);
  if (head->closed_at_ms) {
    report.closed_at_ms = head->closed_at_ms;
    report.closing_hash = to_hex(head->last_hash);
  }
  report.anchors_checked = anchors.size();
  return report;
}

}  // namespace store
}  // namespace alphaledger
