// Deciding tests in arrival order with group commit (pipe) and across concurrent callers (HTTP).
#include <algorithm>
#include <span>
#include <variant>
#include <condition_variable>
#include <deque>
#include <unordered_set>

#include "alphaledger/service.hpp"

namespace alphaledger {

namespace {

// decide_in_order's state: the answers so far, and the inputs not yet answered in arrival order.
class InOrder {
 public:
  InOrder(Ledger& ledger, std::string_view stream, const std::vector<TestInput>& tests)
      : ledger_(ledger), stream_(stream), tests_(tests), out_(tests.size()) {
    for (std::size_t k = 0; k < tests.size(); ++k) pending_.push_back(k);
  }

  // Decides every input. Stops after a storage failure: nothing more is tried.
  std::vector<std::optional<Result<DecideResult>>> run(std::size_t max_group) {
    while (!pending_.empty()) {
      const std::vector<std::size_t> group = next_group(max_group);
      if (group.size() == 1) {
        if (!one_by_one(group, 0)) break;
        continue;
      }
      std::vector<TestInput> inputs;
      inputs.reserve(group.size());
      for (std::size_t k : group) inputs.push_back(tests_[k]);
      auto batch = ledger_.decide_batch(stream_, inputs, inputs.size());
      // The whole batch failed before deciding anything (e.g. one invalid input): decide one by
      // one so that only the guilty input is answered with the error. Or a launched test, which
      // decide() alone finishes (a batch does not finish launched tests): the group goes one by
      // one, in order, so every level stays the one of arrival order.
      if (!batch || (batch->error && batch->decided.empty() && batch->error->code == "running_test")) {
        if (!one_by_one(group, 0)) break;
        continue;
      }
      if (!take_batch(group, *batch)) break;
    }
    return std::move(out_);
  }

 private:
  // Returns false after a storage failure: nothing more is tried.
  bool decide_one(std::size_t k) {
    out_[k] = tests_[k].e_value ? ledger_.decide_e(stream_, tests_[k].id, tests_[k].p_value)
                                : ledger_.decide(stream_, tests_[k].id, tests_[k].p_value);
    return out_[k]->ok() || !is_storage_failure(out_[k]->error().kind);
  }

  // The longest run of pending inputs without a repeated id, at most max_group: a retry inside
  // one batch must see the first decision, so it waits for the next batch.
  std::vector<std::size_t> next_group(std::size_t max_group) const {
    std::vector<std::size_t> group;
    std::unordered_set<std::string_view> ids;
    for (std::size_t k : pending_) {
      if (group.size() == max_group || !ids.insert(tests_[k].id).second) break;
      group.push_back(k);
    }
    return group;
  }

  // The group leaves the front of `pending_`; its inputs from `from` on are decided one by one.
  bool one_by_one(const std::vector<std::size_t>& group, std::size_t from) {
    for (std::size_t k = 0; k < group.size(); ++k) pending_.pop_front();
    for (std::size_t k = from; k < group.size(); ++k) {
      if (!decide_one(group[k])) return false;
    }
    return true;
  }

  // Answers what the batch of `group` decided. Returns false after a storage failure.
  bool take_batch(const std::vector<std::size_t>& group, Ledger::BatchResult& batch) {
    // Decided inputs (a prefix of the group) are answered; the ledger may also have refused one
    // input (a conflict), which decides nothing and so does not depend on its neighbours: it is
    // answered with the error and the rest of the group is batched again.
    const std::size_t done = std::min(batch.decided.size(), group.size());
    for (std::size_t k = 0; k < done; ++k) out_[group[k]] = std::move(batch.decided[k]);
    std::optional<std::size_t> refused_at;
    if (batch.error) {
      // Outside the contract: one by one for the undecided rest.
      if (batch.stopped_at < done || batch.stopped_at >= group.size()) return one_by_one(group, done);
      refused_at = batch.stopped_at;
      out_[group[*refused_at]] = *batch.error;
      if (is_storage_failure(batch.error->kind)) return false;
    } else if (done < group.size()) {
      // Outside the contract (no error, yet not everything decided): one by one.
      return one_by_one(group, done);
    }
    // Drop the answered inputs from the front part of `pending_` that this group came from.
    std::deque<std::size_t> rest;
    for (std::size_t k = 0; k < group.size(); ++k) {
      const bool answered = k < done || (refused_at && k == *refused_at);
      if (!answered) rest.push_back(group[k]);
    }
    for (std::size_t k = 0; k < group.size(); ++k) pending_.pop_front();
    pending_.insert(pending_.begin(), rest.begin(), rest.end());
    return true;
  }

  Ledger& ledger_;
  std::string_view stream_;
  const std::vector<TestInput>& tests_;
  std::vector<std::optional<Result<DecideResult>>> out_;
  std::deque<std::size_t> pending_;  // inputs not yet answered, in arrival order
};

}  // namespace

std::vector<std::optional<Result<DecideResult>>> decide_in_order(Ledger& ledger, std::string_view stream,
                                                                 const std::vector<TestInput>& tests,
                                                                 std::size_t max_group) {
  if (max_group == 0) max_group = 1;
  return InOrder(ledger, stream, tests).run(max_group);
}

std::vector<std::optional<Result<EventOutcome>>> apply_in_order(Ledger& ledger, std::string_view stream,
                                                                const std::vector<EventInput>& events,
                                                                std::size_t max_group) {
  std::vector<std::optional<Result<EventOutcome>>> out(events.size());
  if (max_group == 0) max_group = 1;
  for (std::size_t from = 0; from < events.size(); from += max_group) {
    const std::size_t n = std::min(max_group, events.size() - from);
    auto answers = ledger.apply_events(stream, std::span<const EventInput>(events.data() + from, n));
    bool failed = false;
    for (std::size_t k = 0; k < n && k < answers.size(); ++k) {
      failed = failed || (!answers[k].ok() && is_storage_failure(answers[k].error().kind));
      out[from + k] = std::move(answers[k]);
    }
    if (failed) break;  // later groups are not tried
  }
  return out;
}

struct DecisionQueue::Lane {
  struct Pending {
    const EventInput* event;
    std::optional<Result<EventOutcome>> result;
  };
  std::mutex mutex;
  std::condition_variable done;
  std::deque<Pending*> waiting;
  bool busy = false;
  std::size_t users = 0;  // calls holding this lane; guarded by lanes_mutex_
};

DecisionQueue::DecisionQueue(Ledger& ledger, std::size_t max_group)
    : ledger_(ledger), max_group_(max_group == 0 ? 1 : max_group) {}

DecisionQueue::~DecisionQueue() = default;

DecisionQueue::Lane& DecisionQueue::acquire(const std::string& stream) {
  std::lock_guard<std::mutex> lock(lanes_mutex_);
  auto& slot = lanes_[stream];
  if (!slot) slot = std::make_unique<Lane>();
  ++slot->users;
  return *slot;
}

// The last user of a lane removes it: a lane lives only while someone waits on it, so a stream
// name (an unknown one too) leaves nothing behind.
void DecisionQueue::release(const std::string& stream) {
  std::lock_guard<std::mutex> lock(lanes_mutex_);
  auto it = lanes_.find(stream);
  if (it == lanes_.end()) return;
  if (--it->second->users == 0) lanes_.erase(it);
}

std::size_t DecisionQueue::lane_count() const {
  std::lock_guard<std::mutex> lock(lanes_mutex_);
  return lanes_.size();
}

namespace {

template <typename T>
Result<T> as(Result<EventOutcome>&& r) {
  if (!r) return r.error();
  return std::get<T>(std::move(*r));
}

}  // namespace

Result<DecideResult> DecisionQueue::decide(const std::string& stream, const std::string& id, double p_value,
                                           bool e_value) {
  return as<DecideResult>(submit(stream, EventInput{EventType::kDecide, id, p_value, e_value}));
}

Result<LaunchResult> DecisionQueue::launch(const std::string& stream, const std::string& id) {
  return as<LaunchResult>(submit(stream, EventInput{EventType::kLaunch, id, 0}));
}

Result<AbandonResult> DecisionQueue::abandon(const std::string& stream, const std::string& id) {
  return as<AbandonResult>(submit(stream, EventInput{EventType::kAbandon, id, 0}));
}

Result<EventOutcome> DecisionQueue::submit(const std::string& stream, const EventInput& event) {
  Lane& lane = acquire(stream);
  struct Release {
    DecisionQueue* queue;
    const std::string& stream;
    ~Release() { queue->release(stream); }
  } release_on_return{this, stream};
  Lane::Pending me{&event, std::nullopt};
  std::unique_lock<std::mutex> lock(lane.mutex);
  lane.waiting.push_back(&me);
  while (!me.result) {
    if (lane.busy) {
      lane.done.wait(lock);
      continue;
    }
    // This thread applies everything queued so far (up to max_group), in arrival order, with one
    // synced write (Ledger::apply_events).
    lane.busy = true;
    std::vector<Lane::Pending*> group;
    while (!lane.waiting.empty() && group.size() < max_group_) {
      group.push_back(lane.waiting.front());
      lane.waiting.pop_front();
    }
    lock.unlock();
    std::vector<EventInput> inputs;
    inputs.reserve(group.size());
    for (const auto* p : group) inputs.push_back(*p->event);
    std::vector<std::optional<Result<EventOutcome>>> results;
    try {
      results = apply_in_order(ledger_, stream, inputs, max_group_);
    } catch (...) {
      results.assign(group.size(), std::nullopt);
      // The library's own text is not shown; whether anything was written is unknown, and a
      // resend is safe (a decided, launched or abandoned test comes back as a repeat).
      results[0].emplace(io_error(
          "the ledger failed unexpectedly while deciding; send the tests again (a decided one comes back "
          "as a repeat)"));
    }
    lock.lock();
    std::optional<Error> storage_failure;
    for (std::size_t k = 0; k < group.size(); ++k) {
      if (results[k]) {
        if (!results[k]->ok() && is_storage_failure(results[k]->error().kind))
          storage_failure = results[k]->error();
        group[k]->result = std::move(results[k]);
      } else {
        // Not attempted after a storage failure: not done, and the caller is told so.
        group[k]->result = Result<EventOutcome>(
            storage_failure ? *storage_failure
                            : io_error("not decided: the ledger failed earlier in the same group"));
      }
    }
    lane.busy = false;
    lane.done.notify_all();
  }
  return std::move(*me.result);
}

}  // namespace alphaledger
