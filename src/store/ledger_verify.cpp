// Ledger::verify: one pass over a stream's records, replaying them through the rule, holding one
// record at a time; then the head, the closing entry, the id index and the anchors.
#include <algorithm>
#include <map>
#include <optional>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"
#include "store/ledger_look.hpp"

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

namespace {

std::string mismatch(const char* what, double got, double stored) {
  return "replaying the rule gives " + std::string(what) + " " + readable_number(got) + " but the record has " +
         readable_number(stored);
}

std::string index_target(const std::optional<std::uint64_t>& indexed) {
  return indexed ? "step " + std::to_string(*indexed) : std::string("no valid step");
}

// One verification of one stream: the configuration and head, then one pass over the chain that
// replays every entry through the rule and checks each hash, link, id index entry and step anchor,
// then the head against the walk, the id index's size, and the anchors left over. Holds one record
// at a time, plus the tests that are running at that point of the walk.
class StreamVerifier {
 public:
  StreamVerifier(Store& store, const std::string& where, std::string_view stream, const std::vector<Anchor>& anchors)
      : store_(store), where_(where), stream_(stream), anchors_(anchors) {
    // Step anchors in step order, checked as the walk reaches their step; closing anchors last.
    for (const auto& a : anchors) (a.closing ? closing_anchors_ : step_anchors_).push_back(&a);
    std::stable_sort(step_anchors_.begin(), step_anchors_.end(),
                     [](const Anchor* x, const Anchor* y) { return x->step < y->step; });
  }

  Result<VerifyReport> run() {
    if (auto s = validate_stream_name(stream_); !s) return s.error();
    auto config_bytes = store_.get(config_key(stream_));
    if (!config_bytes) return config_bytes.error();
    if (!*config_bytes) return unknown_stream(stream_, where_);
    auto config = decode_config(**config_bytes);
    if (!config) return fail(0, "the configuration cannot be read: " + config.error().message);
    if (config->name != stream_) return fail(0, "the configuration names stream " + in_quotes(config->name));
    auto head_bytes = store_.get(head_key(stream_));
    if (!head_bytes) return head_bytes.error();
    if (!*head_bytes) return fail(0, "the stream has no head record");
    auto head = decode_head(**head_bytes);
    if (!head) return fail(0, "the head cannot be read: " + head.error().message);

    rule_.emplace(config->config);
    alternative_ = config->alternative;
    prev_ = genesis_hash(**config_bytes);
    if (auto p = anchor_problem(0, prev_)) return fail(0, *p);
    expected_key_ = record_key(stream_, 1);
    auto s = store_.scan(record_prefix(stream_),
                         [&](std::string_view key, std::string_view value) { return check_record(key, value); });
    if (!s) return s.error();
    if (io_error_) return *io_error_;
    if (bad_) return *bad_;
    const std::uint64_t steps = expected_ - 1;
    report_.steps = steps;
    if (auto b = check_head(*head, steps)) return *b;
    auto running_bad = check_running_keys(*head, steps);
    if (!running_bad) return running_bad.error();
    if (*running_bad) return **running_bad;
    auto index_bad = check_index(steps);
    if (!index_bad) return index_bad.error();
    if (*index_bad) return **index_bad;
    if (auto b = check_remaining_anchors(*head, steps)) return *b;
    report_.chain_hash = to_hex(prev_);
    if (head->closed_at_ms) {
      report_.closed_at_ms = head->closed_at_ms;
      report_.closing_hash = to_hex(head->last_hash);
    }
    report_.anchors_checked = anchors_.size();
    return report_;
  }

 private:
  // Tests launched and not yet finished or abandoned in the walk: their id, launch entry and time,
  // and where the id index points (memory: the running tests, not the history).
  struct Launched {
    std::string id;
    std::uint64_t entry = 0;
    std::int64_t at_ms = 0;
    std::optional<std::uint64_t> indexed;
    std::optional<LookPayload> last_look;  // the test's last look so far, and its entry
    std::uint64_t last_look_entry = 0;
  };

  VerifyReport fail(std::uint64_t step, std::string problem) {
    report_.ok = false;
    report_.first_bad_step = step;
    report_.problem = std::move(problem);
    return report_;
  }

  // The first anchor at `step` whose hash differs from `hash`, as a problem text; passed anchors
  // are consumed.
  std::optional<std::string> anchor_problem(std::uint64_t step, const Digest& hash) {
    const std::string hex = to_hex(hash);
    for (; next_anchor_ < step_anchors_.size() && step_anchors_[next_anchor_]->step == step; ++next_anchor_) {
      const Anchor& a = *step_anchors_[next_anchor_];
      if (a.chain_hash != hex) {
        return "the chain hash " + std::string(step == 0 ? "of the configuration" : "at this step") + " is " +
               hex + ", but the anchor says " + a.chain_hash +
               " (a record up to this step, or the configuration, differs from when the anchor was noted, "
               "or the anchor is from another stream)";
      }
    }
    return std::nullopt;
  }

  // The stored p-value (or e-value, for a rule that takes e-values) of a decision or finish.
  std::optional<std::string> evidence_problem(double x) const {
    auto v = rule_takes_e_values(rule_->config().kind) ? validate_e_value(x) : validate_p_value(x);
    if (!v) return "the stored " + v.error().message;
    return std::nullopt;
  }

  // A look event: recomputed from its stored summaries and the test's look before it.
  std::optional<std::string> replay_look(const EventRecord& ev, Launched& t) {
    const LookPayload& stored = ev.look;
    if (!same_bits(ev.level, running_level(ev.launch)))
      return mismatch("the reserved level", running_level(ev.launch), ev.level);
    if (!same_bits(rule_->wealth(), ev.wealth)) return mismatch("wealth", rule_->wealth(), ev.wealth);
    if (stored.previous_look != t.last_look_entry) {
      return "look " + std::to_string(stored.look) + " links to the look at step " +
             std::to_string(stored.previous_look) + " but the test's look before it is at step " +
             std::to_string(t.last_look_entry);
    }
    if (!stored.data.mixture_sd) return "the look has no mixing scale";
    if (t.last_look) {
      if (t.last_look->data.summary != stored.data.summary ||
          !same_bits(*t.last_look->data.mixture_sd, *stored.data.mixture_sd))
        return "the look changes the kind of summary or the mixing scale of the test's first look";
    }
    auto again = compute_look(rule_->config(), alternative_, ev.level, stored.data,
                              t.last_look ? &*t.last_look : nullptr);
    if (!again) return "the look's stored summaries are refused: " + again.error().message;
    again->previous_look = stored.previous_look;
    if (!(*again == stored)) {
      return "recomputing the look from its stored summaries gives anytime p-value " +
             readable_number(again->anytime_p_value) + ", running minimum " + readable_number(again->running_min) +
             ", " + (again->stop ? "stop" : "continue") + ", but the entry has " +
             readable_number(stored.anytime_p_value) + ", " + readable_number(stored.running_min) + ", " +
             (stored.stop ? "stop" : "continue") + " (the look was changed)";
    }
    t.last_look = stored;
    t.last_look_entry = ev.entry;
    if (stored.stop) {
      pending_stop_ = ev.launch;
      pending_value_ = rule_takes_e_values(rule_->config().kind) ? stored.e_value : stored.running_min;
    }
    return std::nullopt;
  }

  double running_level(std::uint64_t launch) const {
    for (const auto& t : rule_->running())
      if (t.launch == launch) return t.level;
    return 0.0;
  }

  // The look state key of a test that was looked at must point to its last look.
  std::optional<std::string> look_state_problem(const Launched& t) {
    if (t.last_look_entry == 0) return std::nullopt;
    auto state = store_.get(look_key(stream_, t.id));
    if (!state) {
      io_error_ = state.error();
      return "the look state cannot be read";
    }
    auto entry = *state ? decode_step(**state) : Result<std::uint64_t>(corruption("absent"));
    if (!entry || *entry != t.last_look_entry) {
      return "the look state of test " + in_quotes(excerpt(t.id)) + " does not point to its last look (step " +
             std::to_string(t.last_look_entry) + ")";
    }
    return std::nullopt;
  }

  // A version-1 decision record: a launch and a finish at once.
  std::optional<std::string> replay_decision(const DecisionRecord& r) {
    if (auto v = evidence_problem(r.p_value)) return v;
    const Outcome o = rule_->record(r.p_value);
    ++launches_;
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

  std::optional<std::string> replay_launch(const EventRecord& ev) {
    const Reservation r = rule_->launch();
    ++launches_;
    if (r.launch != ev.launch) {
      return "the launch event says launch " + std::to_string(ev.launch) + " but it is launch " +
             std::to_string(r.launch);
    }
    if (!same_bits(r.level, ev.level)) return mismatch("the reserved level", r.level, ev.level);
    if (!same_bits(r.wealth, ev.wealth)) return mismatch("wealth", r.wealth, ev.wealth);
    running_ids_.emplace(ev.launch, Launched{ev.id, ev.entry, ev.at_ms, std::nullopt, std::nullopt, 0});
    return std::nullopt;
  }

  std::optional<std::string> replay_finish(const EventRecord& ev) {
    Rule& rule = *rule_;
    if (auto v = evidence_problem(ev.p_value)) return v;
    auto o = rule_takes_e_values(rule.config().kind) ? rule.finish_e(ev.launch, ev.p_value)
                                                     : rule.finish(ev.launch, ev.p_value);
    if (!o) return "the rule refuses the finish: " + o.error().message;
    if (!same_bits(o->level, ev.level) || o->rejected != ev.rejected || !same_bits(o->wealth, ev.wealth)) {
      return "replaying the rule gives reserved level " + readable_number(o->level) + ", rejected " +
             (o->rejected ? "1" : "0") + ", wealth " + readable_number(o->wealth) +
             " but the finish event has level " + readable_number(ev.level) + ", rejected " +
             (ev.rejected ? "1" : "0") + ", wealth " + readable_number(ev.wealth);
    }
    return std::nullopt;
  }

  std::optional<std::string> replay_abandon(const EventRecord& ev) {
    Rule& rule = *rule_;
    double reserved = 0.0;
    for (const auto& t : rule.running()) {
      if (t.launch == ev.launch) reserved = t.level;
    }
    if (auto st = rule.abandon(ev.launch); !st) return "the rule refuses the abandon: " + st.error().message;
    if (!same_bits(reserved, ev.level)) return mismatch("the reserved level", reserved, ev.level);
    if (!same_bits(rule.wealth(), ev.wealth)) return mismatch("wealth", rule.wealth(), ev.wealth);
    return std::nullopt;
  }

  // Replays one entry through the rule; the problem text when it disagrees.
  std::optional<std::string> replay_entry(const ChainEntry& e) {
    if (pending_stop_) {  // a look said stop: the next entry is that test's finish with its value
      const bool finishes = e.is_event && e.event.event.kind == EventKind::kFinish &&
                            e.event.event.launch == *pending_stop_ && same_bits(e.event.event.p_value, pending_value_);
      pending_stop_.reset();
      if (!finishes)
        return "the look before this entry said stop, but this entry is not that test's finish with its value";
    }
    if (!e.is_event) return replay_decision(e.record.record);
    const EventRecord& ev = e.event.event;
    if (ev.kind == EventKind::kLaunch) return replay_launch(ev);
    const std::string what(event_kind_name(ev.kind));
    auto it = running_ids_.find(ev.launch);
    if (it == running_ids_.end()) {
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
    if (ev.kind == EventKind::kLook) return replay_look(ev, it->second);
    auto problem = ev.kind == EventKind::kFinish ? replay_finish(ev) : replay_abandon(ev);
    if (!problem) problem = look_state_problem(it->second);
    if (!problem) running_ids_.erase(it);
    return problem;
  }

  // The stored record at the expected step: its key, hash, link and replay. False stops the walk
  // with bad_ (or io_error_) set.
  bool check_record(std::string_view key, std::string_view value) {
    const std::string step_text = "step " + std::to_string(expected_);
    if (key != expected_key_) {
      bad_ = fail(expected_,
                  "the record for " + step_text + " is missing (next stored key is " + excerpt(key, 80) + ")");
      return false;
    }
    auto rec = decode_entry(value);
    if (!rec) {
      bad_ = fail(expected_, "the record cannot be read: " + rec.error().message);
      return false;
    }
    if (rec->entry() != expected_) {
      bad_ = fail(expected_, "the record stored at " + step_text + " says step " + std::to_string(rec->entry()) +
                                 " (records were moved or reordered)");
      return false;
    }
    if (recompute_record_hash(value) != rec->hash()) {
      bad_ = fail(expected_, "the record's contents do not match its hash (the record was changed)");
      return false;
    }
    if (rec->prev_hash() != prev_) {
      bad_ = expected_ == 1 ? fail(1,
                                   "the first record does not link to the stream's configuration (the "
                                   "configuration or the first record was replaced)")
                            : fail(expected_ - 1, "the record does not match the hash stored in the record after "
                                                  "it (step " +
                                                      std::to_string(expected_ - 1) + " was replaced)");
      return false;
    }
    if (auto problem = replay_entry(*rec)) {
      bad_ = fail(expected_, *problem);
      return false;
    }
    const bool is_look = rec->is_event && rec->event.event.kind == EventKind::kLook;
    if (io_error_) return false;
    if (!is_look && !check_index_entry(*rec)) return false;
    if (auto p = anchor_problem(expected_, rec->hash())) {
      bad_ = fail(expected_, *p);
      return false;
    }
    prev_ = rec->hash();
    ++expected_;
    set_record_key_step(expected_key_, expected_);
    return true;
  }

  // Each decided or abandoned test's id must point back to its own entry; a launch's id to the
  // launch while it runs, else to its finish or abandon (checked there, and for the tests still
  // running after the walk). With the count check of check_index, this makes the index and the
  // tests agree one to one without holding every id in memory.
  bool check_index_entry(const ChainEntry& rec) {
    const std::string& id = rec.id();
    auto index = store_.get(index_key(stream_, id));
    if (!index) {
      io_error_ = index.error();
      return false;
    }
    std::optional<std::uint64_t> indexed;
    if (*index) {
      if (auto st = decode_step(**index); st) indexed = *st;
    }
    const bool is_launch = rec.is_event && rec.event.event.kind == EventKind::kLaunch;
    if (is_launch) running_ids_.at(rec.event.event.launch).indexed = indexed;
    if (indexed && (is_launch ? *indexed >= expected_ : *indexed == expected_)) return true;
    std::string twice;
    if (indexed && *indexed < expected_) {  // is it an earlier record with the same id?
      auto earlier = store_.get(record_key(stream_, *indexed));
      if (earlier && *earlier) {
        auto e = decode_entry(**earlier);
        if (e && e->id() == id) twice = " (the id appears twice in the history)";
      }
    }
    bad_ = fail(expected_, "the test id index for " + in_quotes(excerpt(id)) + " points to " +
                               index_target(indexed) + twice);
    return false;
  }

  // The head against the walk: the record count, the last hash (or the closing), the rule state,
  // and the index entries of the tests still running.
  std::optional<VerifyReport> check_head(const StoredHead& head, std::uint64_t steps) {
    if (head.steps > steps) {
      return fail(steps + 1, "the record for step " + std::to_string(steps + 1) + " is missing (the head counts " +
                                 std::to_string(head.steps) + " records)");
    }
    if (head.steps < steps) {
      return fail(head.steps + 1, "the history holds " + std::to_string(steps) +
                                      " records but the head counts " + std::to_string(head.steps));
    }
    if (head.closed_at_ms) {
      if (head.last_hash != closing_hash(steps, *head.closed_at_ms, prev_)) {
        return fail(steps, "the head says the stream was closed at " + format_timestamp(*head.closed_at_ms) +
                               " but its hash does not match a closing after the last record (the closing time "
                               "or the last record was changed)");
      }
    } else if (head.last_hash != prev_) {
      return fail(steps, steps == 0 ? "the head does not link to the configuration"
                                    : "the last record does not match the hash in the head (it was replaced, "
                                      "or a closing was removed from the head)");
    }
    if (head.rule_state !=
        (head.running_apart ? rule_->encode_state_without_running() : rule_->encode_state())) {
      return fail(steps, "the stored rule state does not equal the state replayed from the history");
    }
    if (pending_stop_) return fail(steps, "the last look said stop, but the test's finish is missing");
    for (const auto& [launch, t] : running_ids_) {
      if (auto p = look_state_problem(t)) return fail(t.last_look_entry, *p);
      if (t.indexed != t.entry) {
        return fail(t.entry, "the test id index for running test " + in_quotes(excerpt(t.id)) + " points to " +
                                 index_target(t.indexed) + ", not to its launch");
      }
    }
    return std::nullopt;
  }

  // The running tests kept apart (one key each) against the tests running after the walk; none
  // under an older-form head, which lists them in its rule state.
  Result<std::optional<VerifyReport>> check_running_keys(const StoredHead& head, std::uint64_t steps) {
    std::vector<StoredRunning> expected;
    if (head.running_apart) {
      for (const auto& t : rule_->running()) {
        const Launched& l = running_ids_.at(t.launch);
        expected.push_back({t.launch, t.level, l.at_ms, l.id});
      }
    }
    auto problem = running_keys_problem(store_, stream_, expected);
    if (!problem) return problem.error();
    if (!*problem) return std::optional<VerifyReport>{};
    return std::optional<VerifyReport>{fail(steps, **problem)};
  }

  // Every record's id points to its own step, so the ids are distinct and each has its entry:
  // the index agrees with the records exactly when it holds no more entries than there are tests.
  Result<std::optional<VerifyReport>> check_index(std::uint64_t steps) {
    const std::string prefix = index_prefix(stream_);
    std::uint64_t entries = 0;
    auto s = store_.scan(prefix, [&](std::string_view, std::string_view) {
      ++entries;
      return true;
    });
    if (!s) return s.error();
    if (entries == launches_) return std::optional<VerifyReport>{};
    // Find the entry without a record, to name it.
    std::optional<VerifyReport> index_bad;
    s = store_.scan(prefix, [&](std::string_view key, std::string_view value) {
      const std::string_view id = key.substr(prefix.size());
      auto step = decode_step(value);
      bool has_record = false;
      if (step && *step >= 1 && *step <= steps) {
        auto bytes = store_.get(record_key(stream_, *step));
        if (!bytes) {
          io_error_ = bytes.error();
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
    if (io_error_) return *io_error_;
    if (index_bad) return index_bad;
    return std::optional<VerifyReport>{fail(0, "the test id index holds " + std::to_string(entries) +
                                                   " entries for " + std::to_string(launches_) + " tests")};
  }

  // Step anchors past the last record (the ledger lost its tail, or the anchor is not from here),
  // and closing anchors.
  std::optional<VerifyReport> check_remaining_anchors(const StoredHead& head, std::uint64_t steps) {
    if (next_anchor_ < step_anchors_.size()) {
      const Anchor& a = *step_anchors_[next_anchor_];
      return fail(a.step, "the ledger holds only " + std::to_string(steps) +
                              " records, but an anchor was noted at step " + std::to_string(a.step) +
                              " (the records after step " + std::to_string(steps) +
                              " were lost, or the anchor is from another stream)");
    }
    for (const Anchor* a : closing_anchors_) {
      if (!head.closed_at_ms) {
        return fail(steps,
                    "an anchor names the closing of this stream, but the stream is not closed (it was "
                    "reopened by hand, or the anchor is from another stream)");
      }
      if (to_hex(head.last_hash) != a->chain_hash) {
        return fail(steps, "the closing hash is " + to_hex(head.last_hash) + ", but the anchor says " +
                               a->chain_hash +
                               " (the history or the closing time changed since the anchor was noted)");
      }
    }
    return std::nullopt;
  }

  Store& store_;
  const std::string& where_;
  std::string_view stream_;
  const std::vector<Anchor>& anchors_;
  VerifyReport report_;
  std::vector<const Anchor*> step_anchors_, closing_anchors_;
  std::size_t next_anchor_ = 0;
  std::optional<Rule> rule_;
  Digest prev_{};
  std::uint64_t expected_ = 1;
  std::string expected_key_;  // rewritten in place for each next step
  std::optional<VerifyReport> bad_;
  std::optional<Error> io_error_;
  std::map<std::uint64_t, Launched> running_ids_;
  Alternative alternative_ = Alternative::kTwoSided;
  std::optional<std::uint64_t> pending_stop_;  // a look said stop: its launch, and the value to finish with
  double pending_value_ = 0;
  std::uint64_t launches_ = 0;  // tests launched: decision records and launch events (one id each)
};

}  // namespace

Result<VerifyReport> verify_stream(Store& store, const std::string& where, std::string_view stream,
                                   const std::vector<Anchor>& anchors) {
  return StreamVerifier(store, where, stream, anchors).run();
}

}  // namespace store
}  // namespace alphaledger
