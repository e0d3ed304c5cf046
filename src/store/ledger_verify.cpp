// Ledger::verify: one pass over a stream's records, replaying them through the rule, holding one
// record at a time; then the head, the closing entry, the id index and the anchors.
#include <algorithm>
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
  auto s = store.scan(record_prefix(stream), [&](std::string_view key, std::string_view value) {
    const std::string step_text = "step " + std::to_string(expected);
    if (key != expected_key) {
      bad = fail(expected,
                 "the record for " + step_text + " is missing (next stored key is " + excerpt(key, 80) + ")");
      return false;
    }
    auto rec = decode_record(value);
    if (!rec) {
      bad = fail(expected, "the record cannot be read: " + rec.error().message);
      return false;
    }
    const DecisionRecord& r = rec->record;
    if (r.step != expected) {
      bad = fail(expected, "the record stored at " + step_text + " says step " + std::to_string(r.step) +
                               " (records were moved or reordered)");
      return false;
    }
    if (recompute_record_hash(value) != rec->hash) {
      bad = fail(expected, "the record's contents do not match its hash (the record was changed)");
      return false;
    }
    if (rec->prev_hash != prev) {
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
    if (auto v = validate_p_value(r.p_value); !v) {
      bad = fail(expected, "the stored " + v.error().message);
      return false;
    }
    const Outcome o = rule.record(r.p_value);
    if (!same_bits(o.level, r.level) || o.rejected != r.rejected || !same_bits(o.wealth, r.wealth)) {
      bad = fail(expected, "replaying the rule gives level " + readable_number(o.level) + ", rejected " +
                               (o.rejected ? "1" : "0") + ", wealth " + readable_number(o.wealth) +
                               " but the record has level " + readable_number(r.level) + ", rejected " +
                               (r.rejected ? "1" : "0") + ", wealth " + readable_number(r.wealth));
      return false;
    }
    // Each record's id must point back to its own step. With the count check below, this makes
    // the index and the records agree one to one without holding every id in memory.
    auto index = store.get(index_key(stream, r.id));
    if (!index) {
      io_error = index.error();
      return false;
    }
    std::optional<std::uint64_t> indexed;
    if (*index) {
      if (auto st = decode_step(**index); st) indexed = *st;
    }
    if (!indexed || *indexed != expected) {
      std::string twice;
      if (indexed && *indexed < expected) {  // is it an earlier record with the same id?
        auto earlier = store.get(record_key(stream, *indexed));
        if (earlier && *earlier) {
          auto e = decode_record(**earlier);
          if (e && e->record.id == r.id) twice = " (the id appears twice in the history)";
        }
      }
      bad = fail(expected, "the test id index for " + in_quotes(excerpt(r.id)) + " points to " +
                               (indexed ? "step " + std::to_string(*indexed) : std::string("no valid step")) +
                               twice);
      return false;
    }
    if (auto p = anchor_problem(expected, rec->hash)) {
      bad = fail(expected, *p);
      return false;
    }
    prev = rec->hash;
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
  // Every record's id points to its own step, so the ids are distinct and each has its entry:
  // the index agrees with the records exactly when it holds no more entries than there are records.
  const std::string index_prefix_text = index_prefix(stream);
  std::uint64_t entries = 0;
  s = store.scan(index_prefix_text, [&](std::string_view, std::string_view) {
    ++entries;
    return true;
  });
  if (!s) return s.error();
  if (entries != steps) {
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
          auto rec = decode_record(**bytes);
          has_record = rec && rec->record.id == id;
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
                       std::to_string(steps) + " records");
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
