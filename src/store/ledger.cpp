// The Ledger over a Store (include/alphaledger/ledger.hpp; layout in docs/ledger-format.md): opening,
// streams, status and reading. The class and its caching are described in ledger_impl.hpp;
// decisions are in ledger_decide.cpp, reading records in ranges in ledger_history.cpp,
// verification in ledger_verify.cpp.
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
#include "store/ledger_impl.hpp"

namespace alphaledger {

std::int64_t system_clock_ms() {
  using namespace std::chrono;
  return duration_cast<milliseconds>(system_clock::now().time_since_epoch()).count();
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
  // The command line adds how to create it (src/cli/cli_errors.cpp).
  return with_reason(not_found("no stream named " + in_quotes(name) + " in ledger " + where, "unknown_stream"),
                     "unknown_stream", std::string(name));
}
namespace store {

Error closed_stream(std::string_view name, std::int64_t closed_at_ms) {
  // The command line adds how to read its history (src/cli/cli_errors.cpp).
  return with_reason(conflict("stream " + in_quotes(name) + " is closed since " + format_timestamp(closed_at_ms) +
                              "; it takes no more tests (for new tests create a new stream)"),
                     "closed_stream", std::string(name));
}

std::size_t StoreLedger::cached_streams() const {
  std::lock_guard lock(slots_mu_);
  return slots_.size();
}

Result<Ledger::Created> StoreLedger::create_stream(std::string_view name, const RuleConfig& config) {
  return create_stream_directed(name, config, Alternative::kTwoSided);
}

Result<Ledger::Created> StoreLedger::create_stream_once(std::string_view name, const RuleConfig& config,
                                                        Alternative alternative) {
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
  if (auto s = commit(name, *slot, batch); !s) {
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

Result<Ledger::Closing> StoreLedger::close_stream_once(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  if (slot->head.closed_at_ms) return Closing{info_of(*slot), false, store::to_hex(slot->head.last_hash)};
  // The closing entry links to the last record and becomes the chain's last link: the head
  // carries its hash from now on (docs/ledger-format.md "Closing").
  StoredHead head = slot->head;
  head.closed_at_ms = clock_();
  head.last_hash = store::closing_hash(head.steps, *head.closed_at_ms, slot->head.last_hash);
  WriteBatch batch;
  batch.put(store::head_key(stream), store::encode_head(head));
  if (auto s = commit(stream, *slot, batch); !s) {
    slot->loaded = false;  // the write may have reached the disk: reload on next use
    return s.error();
  }
  slot->head = std::move(head);
  return Closing{info_of(*slot), true, store::to_hex(slot->head.last_hash)};
}

Result<double> StoreLedger::next_level(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  return slot->rule->next_level();
}

Result<StreamInfo> StoreLedger::status(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  return info_of(*slot);
}

Result<std::vector<StreamInfo>> StoreLedger::streams() {
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

Result<std::uint64_t> StoreLedger::entries(std::string_view stream) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  return slot->head.steps;
}

Result<std::vector<DecisionRecord>> StoreLedger::history(std::string_view stream) {
  auto count = entries(stream);
  if (!count) return count.error();
  std::vector<DecisionRecord> out;
  auto s = store::visit_records(*store_, location(), stream, 1, *count, [&](const DecisionRecord& r) {
    out.push_back(r);
    return true;
  });
  if (!s) return s.error();
  return out;
}

Result<HistoryPage> StoreLedger::history_page(std::string_view stream, std::uint64_t from_step,
                                              std::size_t limit) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (limit == 0)
    return invalid_input("a history page holds at least 1 record: limit must be at least 1, got 0");
  auto count = entries(stream);
  if (!count) return count.error();
  const std::uint64_t total = *count;
  HistoryPage page;
  page.total = total;
  if (from_step == 0) from_step = 1;
  if (from_step > total) return page;
  // The last step of the page, without overflow for any limit.
  const std::uint64_t last = total - from_step < limit - 1 ? total : from_step + (limit - 1);
  page.records.reserve(static_cast<std::size_t>(std::min<std::uint64_t>(last - from_step + 1, 4096)));
  auto s = store::visit_records(*store_, location(), stream, from_step, last, [&](const DecisionRecord& r) {
    page.records.push_back(r);
    return true;
  });
  if (!s) return s.error();
  page.next_step = last < total ? last + 1 : 0;
  return page;
}

Status StoreLedger::for_each_decision(std::string_view stream, std::uint64_t from_step,
                                      const DecisionVisitor& visit) {
  // The entry count comes from the head (through the cache); the entries themselves are
  // immutable once written, so they are read without holding the stream's lock.
  auto count = entries(stream);
  if (!count) return count.error();
  return store::visit_records(*store_, location(), stream, from_step == 0 ? 1 : from_step, *count, visit,
                              false);
}

Result<VerifyReport> StoreLedger::verify(std::string_view stream, const std::vector<Anchor>& anchors) {
  auto report = store::verify_stream(*store_, location(), stream, anchors);
  if (!report || !report->ok) return report;
  // A store that keeps a readable copy (PostgreSQL's tables) checks it against the entries just verified.
  auto problem = store_->check_projection(stream);
  if (!problem) return problem.error();
  if (*problem) {
    report->ok = false;
    report->first_bad_step = (*problem)->step;
    report->problem = (*problem)->problem;
    report->chain_hash.clear();
    report->closed_at_ms.reset();
    report->closing_hash.clear();
    report->anchors_checked = 0;
  }
  return report;
}

Result<std::string> StoreLedger::chain_hash_at(std::string_view stream, std::uint64_t step) {
  auto count = entries(stream);
  if (!count) return count.error();
  if (step < 1 || step > *count) {
    return invalid_input("step must be between 1 and " + std::to_string(*count) +
                         " (the records of stream " + in_quotes(stream) + "), got " + std::to_string(step));
  }
  auto bytes = store_->get(store::record_key(stream, step));
  if (!bytes) return bytes.error();
  if (!*bytes)
    return corruption("ledger " + location() + ": the record for step " + std::to_string(step) +
                      " is missing");
  auto rec = store::decode_entry(**bytes);
  if (!rec)
    return corruption("ledger " + location() + ": step " + std::to_string(step) + ": " + rec.error().message);
  return store::to_hex(rec->hash());
}

Status StoreLedger::check_format() {
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

std::shared_ptr<StreamSlot> StoreLedger::slot_for(std::string_view name) {
  std::lock_guard lock(slots_mu_);
  auto it = slots_.find(name);
  if (it == slots_.end()) it = slots_.emplace(std::string(name), std::make_shared<StreamSlot>()).first;
  return it->second;
}

// REQUIRES: slot.mu held.
Status StoreLedger::load_now(std::string_view name, StreamSlot& slot) {
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
  slot.head_bytes = **head_bytes;
  auto head = store::decode_head(**head_bytes);
  if (!head) return corruption(where + head.error().message);
  Rule rule(config->config);
  std::vector<StoredRunning> legacy;
  if (head->running_apart) {
    // The running tests are kept apart, one key each (docs/ledger-format.md "Running tests").
    auto stored = stored_running(name);
    if (!stored) {
      if (stored.error().kind != ErrorKind::kCorruption) return stored.error();
      return corruption(where + stored.error().message);
    }
    std::vector<RunningTest> tests;
    tests.reserve(stored->size());
    for (const auto& t : *stored) tests.push_back({t.launch, t.level});
    if (auto s = rule.restore_state_without_running(head->rule_state, tests); !s)
      return corruption(where + s.error().message);
  } else if (auto s = rule.restore_state(head->rule_state); !s) {
    return corruption(where + s.error().message);
  }
  // Every test has one launch (a decision record or a launch event) in the chain, and a finish
  // or abandon adds one more entry: never fewer entries than tests.
  if (rule.tests() > head->steps) {
    return corruption(where + "the rule state counts " + std::to_string(rule.tests()) +
                      " tests but the head counts " + std::to_string(head->steps) + " chain entries");
  }
  if (!head->running_apart && rule.running_count() > 0) {
    // An older-form head (its rule state lists the running tests): their ids and launch times
    // come from the chain, once; the next write stores them apart (put_head).
    auto found = running_from_chain(name, rule, head->steps);
    if (!found) return found.error();
    legacy = std::move(*found);
  }
  slot.legacy_running = std::move(legacy);
  slot.config = std::move(*config);
  slot.encoded_config = std::move(**config_bytes);
  slot.rule.emplace(std::move(rule));
  slot.head = std::move(*head);
  slot.exists = true;
  slot.loaded = true;
  return {};
}

StreamInfo StoreLedger::info_of(const StreamSlot& slot) const {
  StreamInfo info;
  info.name = slot.config.name;
  info.config = slot.config.config;
  info.alternative = slot.config.alternative;
  info.created_at_ms = slot.config.created_at_ms;
  info.tests = slot.rule->tests();
  info.rejections = slot.rule->rejections();
  info.wealth = slot.rule->wealth();
  info.next_level = slot.rule->next_level();
  info.running = slot.rule->running_count();
  info.reserved = slot.rule->reserved();
  info.closed_at_ms = slot.head.closed_at_ms;
  return info;
}

}  // namespace store

Result<std::unique_ptr<Ledger>> Ledger::open(std::unique_ptr<Store> store, Clock clock) {
  auto ledger = std::make_unique<store::StoreLedger>(std::move(store),
                                                     clock ? std::move(clock) : Clock(system_clock_ms));
  if (auto s = ledger->check_format(); !s) return s.error();
  return std::unique_ptr<Ledger>(std::move(ledger));
}

Result<std::unique_ptr<Ledger>> Ledger::open(const std::string& path, const RocksStoreOptions& options,
                                             Clock clock) {
  auto store = open_store_at(path, options);  // a PostgreSQL URI or a RocksDB folder
  if (!store) return store.error();
  return open(std::move(*store), std::move(clock));
}

Result<std::unique_ptr<Ledger>> Ledger::open(const std::string& path, Clock clock) {
  return open(path, RocksStoreOptions{}, std::move(clock));
}

}  // namespace alphaledger
