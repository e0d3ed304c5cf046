// Looks at running tests in the Ledger over a Store (docs/ledger.md "Watching a running test";
// the look event in docs/ledger-format.md). A look computes the always-valid p-value
// (alphaledger/anytime.hpp) from cumulative summaries, keeps the running minimum over the test's
// looks, and records itself as a chain entry; a look that says stop also finishes the test in the
// same write. The test's look state is its own key, "l/<stream>/<id>": the chain entry of its last
// look, whose payload links to the look before.
#include "store/ledger_look.hpp"

#include <algorithm>
#include <bit>
#include <cmath>
#include <string>

#include "alphaledger/anytime.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_impl.hpp"

namespace alphaledger {

bool same_look_data(const LookData& a, const LookData& b) {
  auto bits = [](double x) { return std::bit_cast<std::uint64_t>(x); };
  auto same_mean = [&](const MeanArm& x, const MeanArm& y) {
    return x.n == y.n && bits(x.mean) == bits(y.mean) && bits(x.sd) == bits(y.sd);
  };
  auto same_prop = [](const ProportionArm& x, const ProportionArm& y) {
    return x.n == y.n && x.conversions == y.conversions;
  };
  if (a.summary != b.summary || a.mixture_sd.has_value() != b.mixture_sd.has_value()) return false;
  if (a.mixture_sd && bits(*a.mixture_sd) != bits(*b.mixture_sd)) return false;
  if (a.summary == LookSummary::kProportions) {
    return same_prop(a.control_proportions, b.control_proportions) &&
           same_prop(a.treatment_proportions, b.treatment_proportions);
  }
  return same_mean(a.control_means, b.control_means) && same_mean(a.treatment_means, b.treatment_means);
}

namespace store {
namespace {

std::string_view summary_name(LookSummary s) { return s == LookSummary::kMeans ? "means" : "proportions"; }

// A count that went down since the last look: the field and both values, else nothing.
std::optional<std::string> count_went_down(const LookData& before, const LookData& now) {
  auto check = [](const char* field, std::uint64_t was, std::uint64_t is) -> std::optional<std::string> {
    if (is >= was) return std::nullopt;
    return std::string(field) + " went down from " + std::to_string(was) + " to " + std::to_string(is);
  };
  std::optional<std::string> out;
  if (now.summary == LookSummary::kProportions) {
    const auto &c0 = before.control_proportions, &c1 = now.control_proportions;
    const auto &t0 = before.treatment_proportions, &t1 = now.treatment_proportions;
    if (!out) out = check("control.n", c0.n, c1.n);
    if (!out) out = check("control.conversions", c0.conversions, c1.conversions);
    if (!out) out = check("treatment.n", t0.n, t1.n);
    if (!out) out = check("treatment.conversions", t0.conversions, t1.conversions);
  } else {
    if (!out) out = check("control.n", before.control_means.n, now.control_means.n);
    if (!out) out = check("treatment.n", before.treatment_means.n, now.treatment_means.n);
  }
  return out;
}

LookResult result_of(std::string_view stream, const EventRecord& e) {
  LookResult r;
  r.stream = std::string(stream);
  r.id = e.id;
  r.look = e.look.look;
  r.launch = e.launch;
  r.step = e.entry;
  r.level = e.level;
  r.estimate = e.look.estimate;
  r.anytime_p_value = e.look.anytime_p_value;
  r.running_min = e.look.running_min;
  r.e_value = e.look.e_value;
  r.cs_low = e.look.cs_low;
  r.cs_high = e.look.cs_high;
  r.stop = e.look.stop;
  r.looked_at_ms = e.at_ms;
  r.data = e.look.data;
  return r;
}

}  // namespace

Result<EffectEstimate> look_effect(const LookData& data) {
  return data.summary == LookSummary::kProportions
             ? effect_of_proportions(data.control_proportions, data.treatment_proportions)
             : effect_of_means(data.control_means, data.treatment_means);
}

Result<LookPayload> compute_look(const RuleConfig& config, Alternative alternative, double level,
                                 const LookData& data, const LookPayload* previous) {
  auto effect = look_effect(data);
  if (!effect) return effect.error();
  MixtureSettings settings{.mixture_sd = data.mixture_sd.value_or(0.0),
                           .null_value = 0.0,
                           .alpha = config.alpha,
                           .alternative = alternative};
  auto ev = anytime_evidence(*effect, settings, previous ? previous->running_min : 1.0);
  if (!ev) return ev.error();
  LookPayload l;
  l.look = previous ? previous->look + 1 : 1;
  l.data = data;
  l.estimate = ev->estimate;
  l.variance = ev->variance;
  l.e_value = ev->e_value;
  l.anytime_p_value = std::min(1.0, 1.0 / ev->e_value);
  l.running_min = ev->p_value;
  l.cs_low = ev->cs_low;
  l.cs_high = ev->cs_high;
  l.stop = rule_takes_e_values(config.kind) ? l.e_value >= 1.0 / level : l.running_min <= level;
  return l;
}

Result<LookResult> StoreLedger::stored_look(std::string_view stream, std::string_view id,
                                            std::uint64_t entry) {
  const std::string where =
      "ledger " + location() + ", stream " + in_quotes(stream) + ", test " + in_quotes(id) + ": ";
  auto damaged = [&](const std::string& what) {
    return with_reason(corruption(where + what), "damaged_record", std::string(stream));
  };
  auto bytes = store_->get(record_key(stream, entry));
  if (!bytes) return bytes.error();
  if (!*bytes)
    return damaged("its look state points to step " + std::to_string(entry) + ", which has no record");
  auto e = decode_entry(**bytes);
  if (!e) return damaged(e.error().message);
  if (!e->is_event || e->event.event.kind != EventKind::kLook || e->event.event.id != id)
    return damaged("its look state points to step " + std::to_string(entry) + ", which is not a look at it");
  LookResult out = result_of(stream, e->event.event);
  if (out.stop) {  // the finish the look made is the next entry
    auto next = store_->get(record_key(stream, entry + 1));
    if (!next) return next.error();
    auto f = *next ? decode_entry(**next) : Result<ChainEntry>(corruption("missing"));
    if (!f || !f->is_event || f->event.event.kind != EventKind::kFinish || f->event.event.id != id)
      return damaged("the look at step " + std::to_string(entry) +
                     " said stop, but the next entry is not its finish");
    out.decision = event_row(f->event.event);
  }
  return out;
}

Result<std::optional<LookResult>> StoreLedger::last_look(std::string_view stream, std::string_view id) {
  auto state = store_->get(look_key(stream, id));
  if (!state) return state.error();
  if (!*state) return std::optional<LookResult>{};
  auto entry = decode_step(**state);
  if (!entry) {
    return with_reason(corruption("ledger " + location() + ", stream " + in_quotes(stream) + ", test " +
                                  in_quotes(id) + ": its look state " + entry.error().message),
                       "damaged_record", std::string(stream));
  }
  auto r = stored_look(stream, id, *entry);
  if (!r) return r.error();
  return std::optional<LookResult>{std::move(*r)};
}

Result<LookResult> StoreLedger::write_look(std::string_view stream, StreamSlot& slot,
                                           const EventRecord& launched, LookData data,
                                           const std::optional<LookResult>& previous) {
  LookPayload before;
  if (previous) {
    before.look = previous->look;
    before.running_min = previous->running_min;
  }
  auto look = compute_look(slot.config.config, slot.config.alternative, launched.level, data,
                           previous ? &before : nullptr);
  if (!look) return invalid_input("test " + in_quotes(launched.id) + ": " + look.error().message);
  if (previous) look->previous_look = previous->step;
  EventRecord e;
  e.kind = EventKind::kLook;
  e.launch = launched.launch;
  e.id = launched.id;
  e.level = launched.level;
  e.wealth = slot.rule->wealth();
  e.at_ms = clock_();
  e.launched_at_ms = launched.launched_at_ms;
  e.look = std::move(*look);
  // As in decide(): the cached state advances in place and is trusted again only after the write.
  slot.loaded = false;
  StoredHead& head = slot.head;
  WriteBatch batch;
  e.entry = head.steps + 1;
  Digest hash{};
  batch.put(record_key(stream, e.entry), encode_event(e, head.last_hash, &hash));
  batch.put(look_key(stream, e.id), encode_step(e.entry));
  head.steps = e.entry;
  head.last_hash = hash;
  LookResult out = result_of(stream, e);
  if (e.look.stop) {
    const double x = rule_takes_e_values(slot.config.config.kind) ? e.look.e_value : e.look.running_min;
    auto finished = finish_into(stream, *slot.rule, head, launched, x, batch);
    if (!finished) return finished.error();  // reloaded on next use
    batch.erase(running_key(stream, launched.launch));
    out.decision = finished->record;
    out.decision->e_value = rule_takes_e_values(slot.config.config.kind);
  }
  put_head(stream, slot, batch);
  if (auto s = commit(stream, slot, batch); !s) return s.error();
  slot.loaded = true;
  return out;
}

namespace {

// The checks a look's data must pass before the ledger is read.
Status check_look_input(std::string_view id, const LookData& data) {
  const std::string test = "test " + in_quotes(id) + ": ";
  if (data.mixture_sd && !(std::isfinite(*data.mixture_sd) && *data.mixture_sd > 0)) {
    return invalid_input(test +
                         "mixture_sd must be a finite number > 0 (the effect you hope to detect, on the " +
                         "scale of the estimate), got " + format_number(*data.mixture_sd));
  }
  if (data.summary != LookSummary::kProportions && data.summary != LookSummary::kMeans)
    return invalid_input(test + "the summary must be proportions or means");
  if (auto effect = look_effect(data); !effect) return invalid_input(test + effect.error().message);
  return {};
}

// The data of a later look against the test's first and last looks; fills a missing mixture_sd.
Status fit_previous(std::string_view id, LookData& data, const LookResult& last) {
  const std::string test = "test " + in_quotes(id) + ": ";
  if (data.summary != last.data.summary) {
    return invalid_input(test + "its looks give " + std::string(summary_name(last.data.summary)) +
                         "; a look cannot switch to " + std::string(summary_name(data.summary)));
  }
  if (!data.mixture_sd) data.mixture_sd = last.data.mixture_sd;
  if (std::bit_cast<std::uint64_t>(*data.mixture_sd) != std::bit_cast<std::uint64_t>(*last.data.mixture_sd)) {
    return invalid_input(test + "mixture_sd " + format_number(*data.mixture_sd) + " differs from the " +
                         format_number(*last.data.mixture_sd) +
                         " of its first look; the mixing scale is chosen once, before the data are seen");
  }
  if (auto down = count_went_down(last.data, data)) {
    return invalid_input(test + *down + " since look " + std::to_string(last.look) +
                         "; a look takes the cumulative summaries so far, which never go down");
  }
  return {};
}

}  // namespace

Result<LookResult> StoreLedger::look_once(std::string_view stream, std::string_view id, const LookData& input) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  if (auto s = check_look_input(id, input); !s)
    return with_message(s.error(), s.error().message + " (the ledger is unchanged)");
  SlotGuard slot(*this, stream);
  if (auto s = load_existing(stream, *slot); !s) return s.error();
  if (slot->head.closed_at_ms) return closed_stream(stream, *slot->head.closed_at_ms);
  std::string key;
  auto found = look_up(stream, id, key);
  if (!found) return found.error();
  using Phase = TestLookup::Phase;
  if (found->phase == Phase::kNone) {
    return with_reason(
        not_found("test " + in_quotes(id) + " was never launched in stream " + in_quotes(stream) +
                      "; only a running test can be looked at: launch it first (the ledger is "
                      "unchanged)",
                  "unknown_test"),
        "not_launched", std::string(stream));
  }
  auto last = last_look(stream, id);
  if (!last) return last.error();
  LookData data = input;
  if (*last) {
    LookData resolved = data;
    if (!resolved.mixture_sd) resolved.mixture_sd = (*last)->data.mixture_sd;
    if (same_look_data(resolved, (*last)->data)) {
      (*last)->repeat = true;
      if ((*last)->decision) (*last)->decision->e_value = rule_takes_e_values(slot->config.config.kind);
      return std::move(**last);
    }
  }
  if (found->phase != Phase::kRunning) {
    const DecisionRecord& r = found->row;
    return conflict("test " + in_quotes(id) + " in stream " + in_quotes(stream) + " is not running: it was " +
                        (r.abandoned ? "abandoned" : "decided") + " at step " + std::to_string(r.step) +
                        "; only a running test can be looked at (the ledger is unchanged)",
                    r.abandoned ? "abandoned_test" : "decided_test");
  }
  if (*last) {
    if (auto s = fit_previous(id, data, **last); !s)
      return with_message(s.error(), s.error().message + " (the ledger is unchanged)");
  } else if (!data.mixture_sd) {
    return invalid_input(
        "test " + in_quotes(id) + ": its first look needs mixture_sd (the effect you hope to " +
        "detect, on the scale of the estimate); later looks reuse it (the ledger is unchanged)");
  }
  return write_look(stream, *slot, found->event, std::move(data), *last);
}

Result<std::vector<LookResult>> StoreLedger::looks(std::string_view stream, std::string_view id) {
  if (auto s = store::validate_stream_name(stream); !s) return s.error();
  if (auto s = validate_test_id(id); !s) return s.error();
  SlotGuard slot(*this, stream);
  if (auto found = launched_test(stream, id, *slot); !found) return found.error();
  std::vector<LookResult> out;
  auto last = last_look(stream, id);
  if (!last) return last.error();
  if (!*last) return out;
  std::uint64_t previous = 0;
  out.push_back(std::move(**last));
  while (out.back().look > 1) {
    auto bytes = store_->get(record_key(stream, out.back().step));
    if (!bytes) return bytes.error();
    auto e = *bytes ? decode_entry(**bytes) : Result<ChainEntry>(corruption("missing"));
    previous = e ? e->event.event.look.previous_look : 0;
    if (previous == 0 || previous >= out.back().step) {
      return with_reason(
          corruption("ledger " + location() + ", stream " + in_quotes(stream) + ", test " + in_quotes(id) +
                     ": look " + std::to_string(out.back().look) + " does not link to the look before it"),
          "damaged_record", std::string(stream));
    }
    auto r = stored_look(stream, id, previous);
    if (!r) return r.error();
    out.push_back(std::move(*r));
  }
  std::reverse(out.begin(), out.end());
  for (auto& r : out)
    if (r.decision) r.decision->e_value = rule_takes_e_values(slot->config.config.kind);
  return out;
}

}  // namespace store
}  // namespace alphaledger
