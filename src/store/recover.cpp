// Recovering a damaged ledger into a new folder (include/alphaledger/recover.hpp).
#include "alphaledger/recover.hpp"

#include <stdlib.h>

#include <bit>
#include <filesystem>
#include <map>
#include <set>

#include "alphaledger/ledger.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"

namespace alphaledger {
namespace {

namespace fs = std::filesystem;

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

// A scratch folder removed with everything in it at scope exit.
class Scratch {
 public:
  explicit Scratch(std::string path) : path_(std::move(path)) {}
  ~Scratch() {
    std::error_code ec;
    if (!path_.empty()) fs::remove_all(path_, ec);
  }
  Scratch(const Scratch&) = delete;
  Scratch& operator=(const Scratch&) = delete;
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

// Copies the regular files of `from` (not LOCK) into the existing folder `to`.
Status copy_files(const std::string& from, const std::string& to) {
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(from, ec)) {
    if (!entry.is_regular_file(ec)) continue;
    const auto name = entry.path().filename();
    if (name == "LOCK") continue;
    fs::copy_file(entry.path(), fs::path(to) / name, fs::copy_options::overwrite_existing, ec);
    if (ec) {
      return io_error("cannot copy " + entry.path().string() + " to the scratch folder " + to + ": " +
                      ec.message());
    }
  }
  if (ec) return io_error("cannot list ledger folder " + from + ": " + ec.message());
  return {};
}

// Writes `batch` when it has grown, or always with `force`.
Status flush(Store& store, WriteBatch& batch, bool force) {
  if (batch.empty() || (!force && batch.ops.size() < 4096)) return {};
  auto s = store.write(batch, false);
  batch.ops.clear();
  return s;
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

}  // namespace

// Step 3 of recover_ledger: the new ledger at `target`, every stream copied from `from` up to its
// first unproven step, other keys copied as they were; what happened is added to `report`.
Status write_recovered(Store& from, const std::string& target, RecoveryReport& report) {
  auto to = open_rocksdb_store(target, RocksStoreOptions{.create_if_missing = true});
  if (!to) return to.error();
  WriteBatch batch;
  batch.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion));
  if (auto s = (*to)->write(batch, true); !s) return s.error();

  std::vector<std::pair<std::string, std::string>> configs;
  auto s = from.scan(store::kConfigPrefix, [&](std::string_view key, std::string_view value) {
    configs.emplace_back(std::string(key.substr(store::kConfigPrefix.size())), std::string(value));
    return true;
  });
  if (!s) {
    report.source_problem += std::string(report.source_problem.empty() ? "" : "; ") +
                             "the list of streams could not be read to the end: " + s.error().message;
  }
  for (const auto& [name, bytes] : configs) {
    StreamRecovery sr;
    sr.stream = name;
    if (auto st = copy_stream(from, **to, name, bytes, sr); !st) return st.error();
    report.streams.push_back(std::move(sr));
  }
  // Keys outside the six stream prefixes (c, h, r, i, t for running tests, l for look state) and the format
  // key: no part of the format, so they are copied as they were and named in the report as not verified. Keys
  // under a stream prefix whose stream has no configuration cannot be proven and are not copied; their
  // streams are named.
  std::set<std::string> with_config;
  for (const auto& c : configs) with_config.insert(c.first);
  std::set<std::string> orphans;
  WriteBatch other;
  s = from.scan("", [&](std::string_view key, std::string_view value) {
    if (key == store::kFormatKey) return true;
    if (key.starts_with("c/") || key.starts_with("h/") || key.starts_with("r/") || key.starts_with("i/") ||
        key.starts_with("t/") || key.starts_with("l/")) {
      std::string_view rest = key.substr(2);
      const std::string stream(rest.substr(0, rest.find('/')));
      if (!with_config.count(stream) && orphans.size() < 1000) orphans.insert(stream);
      return true;
    }
    other.put(std::string(key), std::string(value));
    if (report.other_key_names.size() < RecoveryReport::kShownKeys)
      report.other_key_names.push_back(excerpt(key, 40));
    ++report.other_keys_copied;
    return true;
  });
  for (const auto& o : orphans) report.streams_without_configuration.push_back(excerpt(o, 128));
  if (!s) {
    report.source_problem += std::string(report.source_problem.empty() ? "" : "; ") +
                             "some ledger-level keys could not be read: " + s.error().message;
  }
  if (auto st = flush(**to, other, true); !st) return st.error();
  WriteBatch none;
  none.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion));
  if (auto st = (*to)->write(none, true); !st) return st.error();  // a synced write covers all before it
  return {};
}

// Step 4 of recover_ledger: the new ledger must pass verify, stream by stream.
Status verify_recovered(const std::string& target, const RecoveryReport& report) {
  auto check = Ledger::open(
      target, RocksStoreOptions{.create_if_missing = false, .read_only = true, .check_all_files = true});
  if (!check) return check.error();
  for (const auto& sr : report.streams) {
    if (!sr.problem.empty() && sr.problem.starts_with("the configuration")) continue;
    // A proven closing must still be the source's: the closing hash is checked as an anchor.
    std::vector<Anchor> anchors;
    if (sr.closing_proven) anchors.push_back(Anchor{0, true, sr.closing_hash});
    auto v = (*check)->verify(sr.stream, anchors);
    if (!v) return v.error();
    if (!v->ok || v->steps != sr.kept_steps) {
      return corruption("the recovered ledger " + target + " fails verify for stream " + sr.stream + ": " +
                        v->problem + " (this is a bug; the source is unchanged)");
    }
  }
  return {};
}

Result<RecoveryReport> recover_ledger(const std::string& source, const std::string& target) {
  std::error_code ec;
  RecoveryReport report;
  report.source = source;
  report.target = target;
  if (fs::exists(target, ec)) {
    if (!fs::is_directory(target, ec) || !fs::is_empty(target, ec)) {
      return invalid_input("the target folder " + target +
                           " exists and is not an empty folder (give a new or empty folder; "
                           "recover never writes over anything)");
    }
  }
  if (fs::exists(source, ec) && fs::exists(target, ec) && fs::equivalent(source, target, ec)) {
    return invalid_input("the target folder " + target + " is the damaged ledger itself");
  }
  if (!fs::is_directory(source, ec)) {
    return not_found("no ledger at " + source, "no_ledger");  // the CLI adds which flag names it
  }

  // 1. The strict, read-only open: what damage is there? Writes nothing.
  {
    auto strict = open_rocksdb_store(source, RocksStoreOptions{
                                                 .create_if_missing = false,
                                                 .read_only = true,
                                                 .check_all_files = true,
                                             });
    if (!strict) {
      if (strict.error().kind == ErrorKind::kNotFound) return strict.error();
      report.source_problem = strict.error().message;
    }
  }

  // 2. A scratch copy beside the target, salvaged there.
  const fs::path target_path = fs::absolute(fs::path(target), ec);
  const fs::path parent = target_path.parent_path();
  fs::create_directories(parent, ec);
  std::string tmpl = (parent / ".alphaledger-recover-XXXXXX").string();
  if (::mkdtemp(tmpl.data()) == nullptr) {
    return io_error("cannot make a scratch folder in " + parent.string() +
                    " for the copy of the damaged ledger (is the folder writable?)");
  }
  Scratch scratch(tmpl);
  if (auto s = copy_files(source, scratch.path()); !s) return s.error();
  auto from =
      open_rocksdb_store(scratch.path(), RocksStoreOptions{.create_if_missing = false, .salvage_copy = true});
  if (!from) {
    Error e = from.error();
    e.message = "cannot read anything from ledger " + source +
                " (a copy was tried, the source is unchanged): " + e.message;
    return e;
  }

  // 3. The new ledger.
  if (auto st = write_recovered(**from, target, report); !st) return st.error();
  // 4. The new ledger must pass verify, stream by stream.
  if (auto st = verify_recovered(target, report); !st) return st.error();
  return report;
}

}  // namespace alphaledger
