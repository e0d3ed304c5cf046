// Ledger::verify: one pass over a stream's records, replaying them through the rule, holding one
// record at a time; then the head, the closing entry, the id index and the anchors.
#include <algorithm>
#include <optional>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"
#include "store/verify_replay.hpp"

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

    replay_.emplace(store_, stream_, config->config, config->alternative);
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
  using Launched = ChainReplay::Launched;

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
    if (auto problem = replay_->replay(*rec)) {
      if (replay_->io_error()) {
        io_error_ = replay_->io_error();
      } else {
        bad_ = fail(expected_, *problem);
      }
      return false;
    }
    const bool is_look = rec->is_event && rec->event.event.kind == EventKind::kLook;
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
    if (is_launch) replay_->running().at(rec.event.event.launch).indexed = indexed;
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
    const Rule& rule = replay_->rule();
    if (head.rule_state != (head.running_apart ? rule.encode_state_without_running() : rule.encode_state())) {
      return fail(steps, "the stored rule state does not equal the state replayed from the history");
    }
    if (replay_->stop_pending())
      return fail(steps, "the last look said stop, but the test's finish is missing");
    for (const auto& [launch, t] : replay_->running()) {
      if (auto p = replay_->look_state_problem(t)) return fail(t.last_look_entry, *p);
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
      for (const auto& t : replay_->rule().running()) {
        const Launched& l = replay_->running().at(t.launch);
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
    if (entries == replay_->launches()) return std::optional<VerifyReport>{};
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
                                                   " entries for " + std::to_string(replay_->launches()) +
                                                   " tests")};
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
  std::optional<ChainReplay> replay_;
  Digest prev_{};
  std::uint64_t expected_ = 1;
  std::string expected_key_;  // rewritten in place for each next step
  std::optional<VerifyReport> bad_;
  std::optional<Error> io_error_;
};

}  // namespace

Result<VerifyReport> verify_stream(Store& store, const std::string& where, std::string_view stream,
                                   const std::vector<Anchor>& anchors) {
  return StreamVerifier(store, where, stream, anchors).run();
}

}  // namespace store
}  // namespace alphaledger
