// The Ledger over a Store (include/alphaledger/ledger.hpp; layout in docs/ledger-format.md).
//
// Each stream has an in-memory copy of its configuration, rule and head, loaded on first use and
// guarded by the stream's mutex. A decision advances that copy, is written as one synced batch
// (record, id index entry, head with the rule's new state), and only then is the copy trusted
// again; if the write fails, the copy is marked stale and the stream is reloaded from the store
// on next use, so the store is always the truth. Only streams that exist keep a copy: a name that
// turns out not to exist is dropped from the cache before the call returns (SlotGuard).
//
// Reading records in ranges is in ledger_history.cpp, verification in ledger_verify.cpp.
#include "alphaledger/ledger.hpp"

#include <algorithm>
#include <bit>
#include <charconv>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <map>
#include <mutex>
#include <unordered_map>

#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger {

std::int64_t system_clock_ms() {
  using namespace std::chrono;
  return duration_cast<milliseconds>(system_clock::now().time_since_epoch()).count();
}

std::string format_timestamp(std::int64_t ms) {
  using namespace std::chrono;
  const sys_time<milliseconds> tp{milliseconds{ms}};
  const auto day = floor<days>(tp);
  const year_month_day ymd{day};
  const hh_mm_ss<milliseconds> t{tp - day};
  char buf[40];
  std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02d:%02d:%02d.%03dZ", static_cast<int>(ymd.year()),
                static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()),
                static_cast<int>(t.hours().count()), static_cast<int>(t.minutes().count()),
                static_cast<int>(t.seconds().count()), static_cast<int>(t.subseconds().count()));
  return buf;
}

using store::readable_number;

std::string describe_config(const RuleConfig& c) {
  std::string out(rule_name(c.kind));
  out += " alpha=" + readable_number(c.alpha);
  if (rule_takes(c.kind, "initial_wealth")) out += " initial_wealth=" + readable_number(c.initial_wealth);
  if (rule_takes(c.kind, "candidate_threshold"))
    out += " candidate_threshold=" + readable_number(c.candidate_threshold);
  if (rule_takes(c.kind, "discard_threshold"))
    out += " discard_threshold=" + readable_number(c.discard_threshold);
  if (rule_takes(c.kind, "payout")) out += " payout=" + readable_number(c.payout);
  if (rule_takes(c.kind, "spending")) out += " spending=" + c.spending;
  if (rule_takes(c.kind, "evaluation")) out += " evaluation=" + std::string(evaluation_name(c.evaluation));
  return out;
}

Error store::unknown_stream(std::string_view name, const std::string& where) {
  return not_found("no stream named " + in_quotes(name) + " in ledger " + where +
                 " (create it first: alphaledger new " + std::string(name) + " --rule RULE)",
                   "unknown_stream");
}

namespace {

using store::Digest;
using store::in_quotes;
using store::StoredConfig;
using store::StoredHead;
using store::unknown_stream;

Error closed_stream(std::string_view name, std::int64_t closed_at_ms) {
  return conflict("stream " + in_quotes(name) + " is closed since " + format_timestamp(closed_at_ms) +
                 "; it takes no more tests (its history stays readable: alphaledger history " +
                 std::string(name) + "; for new tests create a new stream)");
}

// One stream's cached state. `mu` serialises every decision on the stream. A slot is in the
// cache only while a call works on it or while it holds a stream that exists; `retired` marks a
// slot dropped from the cache, which a caller still holding it must not use.
struct StreamSlot {
  std::mutex mu;
  bool retired = false;
  bool loaded = false;
  bool exists = false;
  StoredConfig config;
  std::string encoded_config;
  std::optional<Rule> rule;
  StoredHead head;
};

class StoreLedger final : public Ledger {
 public:
  using Ledger::verify;

  StoreLedger(std::unique_ptr<Store> store, Clock clock)
      : store_(std::move(store)), clock_(std::move(clock)) {}

  std::string location() const override { return store_->describe(); }

  std::size_t cached_streams() const override {
    std::lock_guard lock(slots_mu_);
    return slots_.size();
  }

  Result<Created> create_stream(std::string_view name, const RuleConfig& config) override {
    return create_stream_directed(name, config, Alternative::kTwoSided);
  }

  Result<Created> create_stream_directed(std::string_view name, const RuleConfig& config,
                                         Alternative alternative) override {
    if (auto s = store::validate_stream_name(name); !s) return s.error();
    // The configuration must be one resolve_config() produces (a Rule is only defined for those).
    StoredConfig candidate{std::string(name), config, 0, alternative};
    if (auto check = store::decode_config(store::encode_config(candidate)); !check) {
      return invalid_input("the rule configuration is not valid: " + check.error().message);
    }
    SlotGuard slot(*this, name);
    if (auto s = load(name, *slot); !s) return s.error();
    if (slot->exists) {
      if (slot->config.config == config && slot->config.alternative == alternative) {
        return Created{info_of(*slot), false};
      }
      auto described = [](const RuleConfig& c, Alternative a) {
        std::string out = describe_config(c);
        if (a != Alternative::kTwoSided) out += " alternative=" + std::string(alternative_name(a));
        return out;
      };
      return conflict("stream " + in_quotes(name) + " already exists with another configuration: it has " +
                     described(slot->config.config, slot->config.alternative) + "; asked for " +
                     described(config, alternative) +
                     " (a stream's configuration is frozen at creation; use a new name)");
    }
    candidate.created_at_ms = clock_();
    const std::string encoded = store::encode_config(candidate);
    Rule rule(config);
    StoredHead head{0, store::genesis_hash(encoded), rule.encode_state()};
    WriteBatch batch;
    batch.put(store::config_key(name), encoded);
    batch.put(store::head_key(name), store::encode_head(head));
    if (auto s = store_->write(batch, true); !s) {
      slot->loaded = false;
      return s.error();
    }
    slot->loaded = true;
    slot->exists = true;
    slot->config = std::move(candidate);
    slot->encoded_config = encoded;
    slot->rule.emplace(std::move(rule));
    slot->head = std::move(head);
    return Created{info_of(*slot), true};
  }

  Result<DecideResult> decide(std::string_view stream, std::string_view id, double p_value) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    if (auto s = validate_test_id(id); !s) return s.error();
    if (auto s = validate_p_value(p_value); !s)
      return invalid_input("test " + in_quotes(id) + ": " + s.error().message);
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
    auto prior = find_decided(stream, id);
    if (!prior) return prior.error();
    if (*prior) {
      auto r = repeat_or_conflict(stream, **prior, p_value);
      if (!r) return Error{r.error().kind, r.error().message + " (the ledger is unchanged)", r.error().code};
      return r;
    }

    // The cached rule and head advance in place (no copy of a long exact-mode state); until the
    // write succeeds the slot counts as not loaded, so a failure (or an exception) makes the next
    // call reload the stream from the store, which is the truth.
    slot->loaded = false;
    Rule& rule = *slot->rule;
    StoredHead& head = slot->head;
    WriteBatch batch;
    DecideResult result = decide_into(stream, rule, head, std::string(id), p_value, batch);
    head.rule_state = rule.encode_state();
    batch.put(store::head_key(stream), store::encode_head(head));
    if (auto s = store_->write(batch, true); !s) return s.error();
    slot->loaded = true;
    return result;
  }

  Result<BatchResult> decide_batch(std::string_view stream, const std::vector<TestInput>& tests,
                                   std::size_t group_size) override {
    return decide_batch_streamed(stream, tests, group_size, nullptr);
  }

  Result<BatchResult> decide_batch_streamed(std::string_view stream, const std::vector<TestInput>& tests,
                                            std::size_t group_size,
                                            const GroupCallback& on_durable) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    for (std::size_t i = 0; i < tests.size(); ++i) {
      const auto& t = tests[i];
      if (auto s = validate_test_id(t.id); !s) {
        return invalid_input("test " + std::to_string(i + 1) + " of the batch: " + s.error().message);
      }
      if (auto s = validate_p_value(t.p_value); !s) {
        return invalid_input("test " + std::to_string(i + 1) + " of the batch (" + in_quotes(t.id) +
                             "): " + s.error().message);
      }
    }
    if (group_size == 0) group_size = 1;
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);

    BatchResult out;
    // First pass, before anything is written: every id is looked up, so a conflict (with the
    // ledger, or between two rows of the batch) refuses the batch with the ledger unchanged.
    // first_row[i] is i for a row that decides a new id, the first such row for a later row with
    // the same new id, and kStoredRow for an id the ledger already holds (its record in `stored`).
    constexpr std::size_t kStoredRow = static_cast<std::size_t>(-1);
    std::vector<std::size_t> first_row(tests.size());
    std::unordered_map<std::size_t, DecisionRecord> stored;  // row -> record already in the ledger
    {
      std::unordered_map<std::string_view, std::size_t> first_new;  // id -> first index, new ids
      first_new.reserve(tests.size());
      std::string key;  // the index key, built in one reused buffer
      for (std::size_t i = 0; i < tests.size(); ++i) {
        const auto& t = tests[i];
        if (auto it = first_new.find(t.id); it != first_new.end()) {
          const double first_p = tests[it->second].p_value;
          if (first_p != t.p_value) {
            out.error =
                conflict("test " + in_quotes(t.id) + " appears twice in the batch with different p-values (" +
                        readable_number(first_p) + " at position " + std::to_string(it->second + 1) + ", " +
                        readable_number(t.p_value) + " at position " + std::to_string(i + 1) +
                        "); a test id is decided once (the ledger is unchanged)");
            out.stopped_at = i;
            return out;
          }
          first_row[i] = it->second;
          continue;
        }
        auto found = find_decided(stream, t.id, key);
        if (!found) return found.error();
        if (*found) {
          if (auto r = repeat_or_conflict(stream, **found, t.p_value); !r) {
            out.error = Error{r.error().kind, r.error().message + " (the ledger is unchanged)", r.error().code};
            out.stopped_at = i;
            return out;
          }
          first_row[i] = kStoredRow;
          stored.emplace(i, std::move(**found));
        } else {
          first_new.emplace(t.id, i);
          first_row[i] = i;
        }
      }
    }

    // As in decide(): the cached state advances in place and counts as loaded only after each
    // successful write. Every row gives one result, in input order, so row j's result is
    // out.decided[j] once its group is durable and group[j - out.decided.size()] before.
    Rule& rule = *slot->rule;
    StoredHead& head = slot->head;
    const std::size_t group_capacity = std::min(group_size, tests.size());
    WriteBatch batch;
    batch.ops.reserve(2 * group_capacity + 1);
    std::vector<DecideResult> group;
    group.reserve(group_capacity);
    out.decided.reserve(tests.size());
    std::size_t group_start = 0;

    // Writes the group (if it decided anything), then publishes it. Returns false on failure,
    // having recorded the error in `out`.
    auto flush = [&]() -> bool {
      if (!batch.empty()) {
        head.rule_state = rule.encode_state();
        batch.put(store::head_key(stream), store::encode_head(head));
        if (auto s = store_->write(batch, true); !s) {
          out.error = s.error();
          out.stopped_at = group_start;
          return false;  // the slot stays not loaded: the next call reloads from the store
        }
        slot->loaded = true;
      }
      if (on_durable && !group.empty()) on_durable(group);
      for (auto& d : group) out.decided.push_back(std::move(d));
      group.clear();
      batch.ops.clear();  // keeps the capacity for the next group
      return true;
    };

    for (std::size_t i = 0; i < tests.size(); ++i) {
      const auto& t = tests[i];
      const std::size_t first = first_row[i];
      if (first == kStoredRow) {
        group.push_back(DecideResult{std::string(stream), stored.at(i), true});
      } else if (first != i) {
        const DecisionRecord& earlier =
            first < out.decided.size() ? out.decided[first].record : group[first - out.decided.size()].record;
        group.push_back(DecideResult{std::string(stream), earlier, true});
      } else {
        slot->loaded = false;
        group.push_back(decide_into(stream, rule, head, t.id, t.p_value, batch));
      }
      if (group.size() >= group_size) {
        if (!flush()) return out;
        group_start = i + 1;
      }
    }
    flush();
    return out;
  }

  Result<Closing> close_stream(std::string_view stream) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    if (slot->head.closed_at_ms) return Closing{info_of(*slot), false, store::to_hex(slot->head.last_hash)};
    // The closing entry links to the last record and becomes the chain's last link: the head
    // carries its hash from now on (docs/ledger-format.md "Closing").
    StoredHead head = slot->head;
    head.closed_at_ms = clock_();
    head.last_hash = store::closing_hash(head.steps, *head.closed_at_ms, slot->head.last_hash);
    WriteBatch batch;
    batch.put(store::head_key(stream), store::encode_head(head));
    if (auto s = store_->write(batch, true); !s) {
      slot->loaded = false;  // the write may have reached the disk: reload on next use
      return s.error();
    }
    slot->head = std::move(head);
    return Closing{info_of(*slot), true, store::to_hex(slot->head.last_hash)};
  }

  Result<double> next_level(std::string_view stream) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
    return slot->rule->next_level();
  }

  Result<StreamInfo> status(std::string_view stream) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    SlotGuard slot(*this, stream);
    if (auto s = load(stream, *slot); !s) return s.error();
    if (!slot->exists) return unknown_stream(stream, location());
    return info_of(*slot);
  }

  Result<std::vector<StreamInfo>> streams() override {
    std::vector<std::string> names;
    auto s = store_->scan(store::kConfigPrefix, [&](std::string_view key, std::string_view) {
      names.emplace_back(key.substr(store::kConfigPrefix.size()));
      return true;
    });
    if (!s) return s.error();
    std::vector<StreamInfo> out;
    for (const auto& n : names) {
      auto info = status(n);
      if (!info) {
        if (info.error().kind == ErrorKind::kInvalidArgument) {
          return corruption("ledger " + location() +
                               " holds a stream with a bad name: " + info.error().message);
        }
        return info.error();
      }
      out.push_back(std::move(*info));
    }
    return out;
  }

  Result<std::vector<DecisionRecord>> history(std::string_view stream) override {
    std::vector<DecisionRecord> out;
    auto s = for_each_decision(stream, 1, [&](const DecisionRecord& r) {
      out.push_back(r);
      return true;
    });
    if (!s) return s.error();
    return out;
  }

  Result<HistoryPage> history_page(std::string_view stream, std::uint64_t from_step,
                                   std::size_t limit) override {
    if (auto s = store::validate_stream_name(stream); !s) return s.error();
    if (limit == 0)
      return invalid_input("a history page holds at least 1 record: limit must be at least 1, got 0");
    auto info = status(stream);
    if (!info) return info.error();
    HistoryPage page;
    page.total = info->tests;
    if (from_step == 0) from_step = 1;
    if (from_step > info->tests) return page;
    // The last step of the page, without overflow for any limit.
    const std::uint64_t last = info->tests - from_step < limit - 1 ? info->tests : from_step + (limit - 1);
    page.records.reserve(static_cast<std::size_t>(std::min<std::uint64_t>(last - from_step + 1, 4096)));
    auto s = store::visit_records(*store_, location(), stream, from_step, last, [&](const DecisionRecord& r) {
      page.records.push_back(r);
      return true;
    });
    if (!s) return s.error();
    page.next_step = last < info->tests ? last + 1 : 0;
    return page;
  }

  Status for_each_decision(std::string_view stream, std::uint64_t from_step,
                           const DecisionVisitor& visit) override {
    // The record count comes from the head (through the cache); the records themselves are
    // immutable once written, so they are read without holding the stream's lock.
    auto info = status(stream);
    if (!info) return info.error();
    return store::visit_records(*store_, location(), stream, from_step == 0 ? 1 : from_step, info->tests,
                                visit);
  }

  Result<VerifyReport> verify(std::string_view stream, const std::vector<Anchor>& anchors) override {
    return store::verify_stream(*store_, location(), stream, anchors);
  }

  Result<std::string> chain_hash_at(std::string_view stream, std::uint64_t step) override {
    auto info = status(stream);
    if (!info) return info.error();
    if (step < 1 || step > info->tests) {
      return invalid_input("step must be between 1 and " + std::to_string(info->tests) +
                           " (the records of stream " + in_quotes(stream) + "), got " + std::to_string(step));
    }
    auto bytes = store_->get(store::record_key(stream, step));
    if (!bytes) return bytes.error();
    if (!*bytes)
      return corruption("ledger " + location() + ": the record for step " + std::to_string(step) +
                           " is missing");
    auto rec = store::decode_record(**bytes);
    if (!rec)
      return corruption("ledger " + location() + ": step " + std::to_string(step) + ": " +
                           rec.error().message);
    return store::to_hex(rec->hash);
  }

  Status check_format() {
    auto v = store_->get(store::kFormatKey);
    if (!v) return v.error();
    if (!*v) {
      bool has_data = false;
      auto s = store_->scan("", [&](std::string_view, std::string_view) {
        has_data = true;
        return false;
      });
      if (!s) return s.error();
      if (has_data) {
        return corruption("ledger " + location() + " holds data but no format version key " +
                             std::string(store::kFormatKey) +
                             ": it is not an alphaledger ledger, or it is corrupt");
      }
      if (store_->read_only()) return {};  // an empty ledger; a read-only open writes nothing
      WriteBatch batch;
      batch.put(std::string(store::kFormatKey), store::encode_format_version(store::kFormatVersion));
      return store_->write(batch, true);
    }
    auto version = store::decode_format_version(**v);
    if (!version) return corruption("ledger " + location() + " is corrupt: " + version.error().message);
    if (*version > store::kFormatVersion) {
      return corruption("ledger " + location() + " has format version " + std::to_string(*version) +
                           ", newer than this build of alphaledger reads (version " +
                           std::to_string(store::kFormatVersion) + "); use a newer alphaledger");
    }
    if (*version != store::kFormatVersion) {
      return corruption("ledger " + location() + " has format version " + std::to_string(*version) +
                           ", which this build does not read (it reads version " +
                           std::to_string(store::kFormatVersion) + ")");
    }
    return {};
  }

 private:
  // The locked slot of one stream: while it is held, no other call works on the stream. On
  // release, a slot that does not hold an existing stream (an unknown name, a failed load or
  // create) is dropped from the cache and retired, so names that do not exist never stay in
  // memory. A caller that fetched a slot which was retired before it got the lock takes a fresh
  // one, so a name never has two live slots. Lock order: a slot's mu, then slots_mu_.
  class SlotGuard {
   public:
    SlotGuard(StoreLedger& ledger, std::string_view name) : ledger_(ledger), name_(name) {
      while (true) {
        slot_ = ledger_.slot_for(name);
        lock_ = std::unique_lock(slot_->mu);
        if (!slot_->retired) break;
        lock_.unlock();
      }
    }
    ~SlotGuard() {
      if (slot_->exists) return;
      std::lock_guard lock(ledger_.slots_mu_);
      auto it = ledger_.slots_.find(name_);
      if (it != ledger_.slots_.end() && it->second == slot_) ledger_.slots_.erase(it);
      slot_->retired = true;
    }
    SlotGuard(const SlotGuard&) = delete;
    SlotGuard& operator=(const SlotGuard&) = delete;
    StreamSlot& operator*() { return *slot_; }
    StreamSlot* operator->() { return slot_.get(); }

   private:
    StoreLedger& ledger_;
    std::string_view name_;
    std::shared_ptr<StreamSlot> slot_;
    std::unique_lock<std::mutex> lock_;
  };

  std::shared_ptr<StreamSlot> slot_for(std::string_view name) {
    std::lock_guard lock(slots_mu_);
    auto it = slots_.find(name);
    if (it == slots_.end()) it = slots_.emplace(std::string(name), std::make_shared<StreamSlot>()).first;
    return it->second;
  }

  // REQUIRES: slot.mu held.
  Status load(std::string_view name, StreamSlot& slot) {
    if (slot.loaded) return {};
    auto config_bytes = store_->get(store::config_key(name));
    if (!config_bytes) return config_bytes.error();
    if (!*config_bytes) {
      slot.exists = false;
      slot.loaded = true;
      return {};
    }
    const std::string where = "ledger " + location() + ", stream " + in_quotes(name) + ": ";
    auto config = store::decode_config(**config_bytes);
    if (!config) return corruption(where + config.error().message);
    auto head_bytes = store_->get(store::head_key(name));
    if (!head_bytes) return head_bytes.error();
    if (!*head_bytes) return corruption(where + "the head record is missing");
    auto head = store::decode_head(**head_bytes);
    if (!head) return corruption(where + head.error().message);
    Rule rule(config->config);
    if (auto s = rule.restore_state(head->rule_state); !s) return corruption(where + s.error().message);
    if (rule.tests() != head->steps) {
      return corruption(where + "the rule state counts " + std::to_string(rule.tests()) +
                           " tests but the head counts " + std::to_string(head->steps));
    }
    slot.config = std::move(*config);
    slot.encoded_config = std::move(**config_bytes);
    slot.rule.emplace(std::move(rule));
    slot.head = std::move(*head);
    slot.exists = true;
    slot.loaded = true;
    return {};
  }

  StreamInfo info_of(const StreamSlot& slot) const {
    StreamInfo info;
    info.name = slot.config.name;
    info.config = slot.config.config;
    info.alternative = slot.config.alternative;
    info.created_at_ms = slot.config.created_at_ms;
    info.tests = slot.rule->tests();
    info.rejections = slot.rule->rejections();
    info.wealth = slot.rule->wealth();
    info.next_level = slot.rule->next_level();
    info.closed_at_ms = slot.head.closed_at_ms;
    return info;
  }

  // The stored decision for `id`, if any.
  Result<std::optional<DecisionRecord>> find_decided(std::string_view stream, std::string_view id) {
    std::string key;
    return find_decided(stream, id, key);
  }
  // The same, building the index key in `key` (a buffer the caller reuses across calls).
  Result<std::optional<DecisionRecord>> find_decided(std::string_view stream, std::string_view id,
                                                     std::string& key) {
    store::assign_index_key(key, stream, id);
    auto index = store_->get(key);
    if (!index) return index.error();
    if (!*index) return std::optional<DecisionRecord>{};
    const std::string where =
        "ledger " + location() + ", stream " + in_quotes(stream) + ", test " + in_quotes(id) + ": ";
    auto step = store::decode_step(**index);
    if (!step) return corruption(where + step.error().message);
    auto bytes = store_->get(store::record_key(stream, *step));
    if (!bytes) return bytes.error();
    if (!*bytes)
      return corruption(where + "the index points to step " + std::to_string(*step) +
                           ", which has no record");
    auto rec = store::decode_record(**bytes);
    if (!rec) return corruption(where + rec.error().message);
    if (rec->record.id != id) return corruption(where + "the index points to a record of another test");
    return std::optional<DecisionRecord>{std::move(rec->record)};
  }

  Result<DecideResult> repeat_or_conflict(std::string_view stream, const DecisionRecord& prior,
                                          double p_value) {
    if (prior.p_value == p_value) return DecideResult{std::string(stream), prior, true};
    return conflict("test " + in_quotes(prior.id) + " was already decided in stream " + in_quotes(stream) +
                   " at step " + std::to_string(prior.step) + " with p_value " +
                   readable_number(prior.p_value) + "; a test id is decided once, so p_value " +
                   readable_number(p_value) + " is refused");
  }

  // Decides one new test on `rule` / `head` and adds its record and index entry to `batch`.
  DecideResult decide_into(std::string_view stream, Rule& rule, StoredHead& head, std::string id,
                           double p_value, WriteBatch& batch) {
    const Outcome o = rule.record(p_value);
    DecisionRecord rec;
    rec.step = o.step;
    rec.id = std::move(id);
    rec.p_value = p_value;
    rec.level = o.level;
    rec.rejected = o.rejected;
    rec.wealth = o.wealth;
    rec.decided_at_ms = clock_();
    Digest hash{};
    batch.put(store::record_key(stream, rec.step), store::encode_record(rec, head.last_hash, &hash));
    batch.put(store::index_key(stream, rec.id), store::encode_step(rec.step));
    head.steps = rec.step;
    head.last_hash = hash;  // head.rule_state is filled when the batch is written
    return DecideResult{std::string(stream), std::move(rec), false};
  }

  std::unique_ptr<Store> store_;
  Clock clock_;
  mutable std::mutex slots_mu_;
  std::map<std::string, std::shared_ptr<StreamSlot>, std::less<>> slots_;
};

}  // namespace

Result<std::unique_ptr<Ledger>> Ledger::open(std::unique_ptr<Store> store, Clock clock) {
  auto ledger =
      std::make_unique<StoreLedger>(std::move(store), clock ? std::move(clock) : Clock(system_clock_ms));
  if (auto s = ledger->check_format(); !s) return s.error();
  return std::unique_ptr<Ledger>(std::move(ledger));
}

Result<std::unique_ptr<Ledger>> Ledger::open(const std::string& path, const RocksStoreOptions& options,
                                             Clock clock) {
  auto store = open_rocksdb_store(path, options);
  if (!store) return store.error();
  return open(std::move(*store), std::move(clock));
}

Result<std::unique_ptr<Ledger>> Ledger::open(const std::string& path, Clock clock) {
  return open(path, RocksStoreOptions{}, std::move(clock));
}

}  // namespace alphaledger
