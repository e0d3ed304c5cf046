// ChainReplay: the rule half of Ledger::verify (verify_replay.hpp).
#include "store/verify_replay.hpp"

#include "alphaledger/text.hpp"
#include "store/ledger_internal.hpp"
#include "store/ledger_look.hpp"

namespace alphaledger::store {

std::string replay_mismatch(const char* what, double got, double stored) {
  return "replaying the rule gives " + std::string(what) + " " + readable_number(got) +
         " but the record has " + readable_number(stored);
}

// The stored p-value (or e-value, for a rule that takes e-values) of a decision or finish.
std::optional<std::string> ChainReplay::evidence_problem(double x) const {
  auto v = rule_takes_e_values(rule_.config().kind) ? validate_e_value(x) : validate_p_value(x);
  if (!v) return "the stored " + v.error().message;
  return std::nullopt;
}

// A look event: recomputed from its stored summaries and the test's look before it.
std::optional<std::string> ChainReplay::replay_look(const EventRecord& ev, Launched& t) {
  const LookPayload& stored = ev.look;
  if (!same_bits(ev.level, running_level(ev.launch)))
    return replay_mismatch("the reserved level", running_level(ev.launch), ev.level);
  if (!same_bits(rule_.wealth(), ev.wealth)) return replay_mismatch("wealth", rule_.wealth(), ev.wealth);
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
  auto again = compute_look(rule_.config(), alternative_, ev.level, stored.data,
                            t.last_look ? &*t.last_look : nullptr);
  if (!again) return "the look's stored summaries are refused: " + again.error().message;
  again->previous_look = stored.previous_look;
  if (!(*again == stored)) {
    return "recomputing the look from its stored summaries gives anytime p-value " +
           readable_number(again->anytime_p_value) + ", running minimum " +
           readable_number(again->running_min) + ", " + (again->stop ? "stop" : "continue") +
           ", but the entry has " + readable_number(stored.anytime_p_value) + ", " +
           readable_number(stored.running_min) + ", " + (stored.stop ? "stop" : "continue") +
           " (the look was changed)";
  }
  t.last_look = stored;
  t.last_look_entry = ev.entry;
  if (stored.stop) {
    pending_stop_ = ev.launch;
    pending_value_ = rule_takes_e_values(rule_.config().kind) ? stored.e_value : stored.running_min;
  }
  return std::nullopt;
}

double ChainReplay::running_level(std::uint64_t launch) const {
  for (const auto& t : rule_.running())
    if (t.launch == launch) return t.level;
  return 0.0;
}

std::optional<std::string> ChainReplay::look_state_problem(const Launched& t) {
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
std::optional<std::string> ChainReplay::replay_decision(const DecisionRecord& r) {
  if (auto v = evidence_problem(r.p_value)) return v;
  const Outcome o = rule_.record(r.p_value);
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

std::optional<std::string> ChainReplay::replay_launch(const EventRecord& ev) {
  const Reservation r = rule_.launch();
  ++launches_;
  if (r.launch != ev.launch) {
    return "the launch event says launch " + std::to_string(ev.launch) + " but it is launch " +
           std::to_string(r.launch);
  }
  if (!same_bits(r.level, ev.level)) return replay_mismatch("the reserved level", r.level, ev.level);
  if (!same_bits(r.wealth, ev.wealth)) return replay_mismatch("wealth", r.wealth, ev.wealth);
  running_.emplace(ev.launch, Launched{ev.id, ev.entry, ev.at_ms, std::nullopt, std::nullopt, 0});
  return std::nullopt;
}

std::optional<std::string> ChainReplay::replay_finish(const EventRecord& ev) {
  if (auto v = evidence_problem(ev.p_value)) return v;
  auto o = rule_takes_e_values(rule_.config().kind) ? rule_.finish_e(ev.launch, ev.p_value)
                                                    : rule_.finish(ev.launch, ev.p_value);
  if (!o) return "the rule refuses the finish: " + o.error().message;
  if (!same_bits(o->level, ev.level) || o->rejected != ev.rejected || !same_bits(o->wealth, ev.wealth)) {
    return "replaying the rule gives reserved level " + readable_number(o->level) + ", rejected " +
           (o->rejected ? "1" : "0") + ", wealth " + readable_number(o->wealth) +
           " but the finish event has level " + readable_number(ev.level) + ", rejected " +
           (ev.rejected ? "1" : "0") + ", wealth " + readable_number(ev.wealth);
  }
  return std::nullopt;
}

std::optional<std::string> ChainReplay::replay_abandon(const EventRecord& ev) {
  double reserved = 0.0;
  for (const auto& t : rule_.running()) {
    if (t.launch == ev.launch) reserved = t.level;
  }
  if (auto st = rule_.abandon(ev.launch); !st) return "the rule refuses the abandon: " + st.error().message;
  if (!same_bits(reserved, ev.level)) return replay_mismatch("the reserved level", reserved, ev.level);
  if (!same_bits(rule_.wealth(), ev.wealth)) return replay_mismatch("wealth", rule_.wealth(), ev.wealth);
  return std::nullopt;
}

std::optional<std::string> ChainReplay::replay(const ChainEntry& e) {
  if (pending_stop_) {  // a look said stop: the next entry is that test's finish with its value
    const bool finishes = e.is_event && e.event.event.kind == EventKind::kFinish &&
                          e.event.event.launch == *pending_stop_ &&
                          same_bits(e.event.event.p_value, pending_value_);
    pending_stop_.reset();
    if (!finishes)
      return "the look before this entry said stop, but this entry is not that test's finish with its value";
  }
  if (!e.is_event) return replay_decision(e.record.record);
  const EventRecord& ev = e.event.event;
  if (ev.kind == EventKind::kLaunch) return replay_launch(ev);
  const std::string what(event_kind_name(ev.kind));
  auto it = running_.find(ev.launch);
  if (it == running_.end()) {
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
  if (!problem) running_.erase(it);
  return problem;
}

}  // namespace alphaledger::store
