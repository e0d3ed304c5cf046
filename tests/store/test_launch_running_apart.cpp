// Running tests kept apart, one key each (docs/ledger-format.md "Running tests"): the bytes a
// launch, finish or abandon writes do not grow with the number of running tests; ledgers whose
// head lists the running tests inside its rule state (the form written before) still open,
// decide, list and verify, and move to the new form on their next write; verify checks the keys;
// a group of mixed events (Ledger::apply_events) gives the chain of the same events one by one,
// with one write. Levels are compared with the core Rule driven through the same events
// (docs/methods.md 9.1), bit for bit.
#include <doctest/doctest.h>

#include <functional>
#include <map>
#include <random>
#include <string>
#include <variant>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::numbered;
using store_test::same_bits;

namespace {

// A store that remembers how many bytes (keys and values) each write carried.
class SizedStore final : public Store {
 public:
  explicit SizedStore(Store& inner) : inner_(inner) {}
  Result<std::optional<std::string>> get(std::string_view key) override { return inner_.get(key); }
  Status write(const WriteBatch& batch, bool sync) override {
    std::size_t bytes = 0;
    for (const auto& op : batch.ops) bytes += op.key.size() + op.value.size();
    sizes.push_back(bytes);
    return inner_.write(batch, sync);
  }
  Status scan(std::string_view prefix, const Visitor& visit) override { return inner_.scan(prefix, visit); }
  std::string describe() const override { return inner_.describe(); }
  std::vector<std::size_t> sizes;

 private:
  Store& inner_;
};

RuleConfig config_of(const RuleSpec& spec) {
  auto c = resolve_config(spec);
  REQUIRE(c.ok());
  return *c;
}

std::unique_ptr<Ledger> open_over(Store& store, Clock clock = store_test::ticking_clock()) {
  auto l = Ledger::open(borrow_store(store), std::move(clock));
  REQUIRE(l.ok());
  return std::move(*l);
}

const std::vector<RuleSpec> kSpecs = {
    {.rule = "alpha-spending"},
    {.rule = "alpha-investing"},
    {.rule = "lond"},
    {.rule = "lord++"},
    {.rule = "saffron"},
    {.rule = "addis"},
    {.rule = "lord++", .evaluation = "fast"},
    {.rule = "saffron", .evaluation = "fast"},
};

std::string spec_name(const RuleSpec& s) { return s.rule + (s.evaluation ? " " + *s.evaluation : ""); }

// Rewrites stream `name`'s head into the form written before running tests were kept apart: head
// value version 1 (2 when closed) whose rule state (Rule::encode_state, version 2) lists the
// running tests, and no running keys. `rule` is the core Rule driven through the stream's events.
void make_older_form(MemoryStore& mem, const std::string& name, const Rule& rule) {
  auto bytes = mem.get(store::head_key(name));
  REQUIRE(bytes.ok());
  REQUIRE(bytes->has_value());
  auto head = store::decode_head(**bytes);
  REQUIRE(head.ok());
  head->running_apart = false;
  head->rule_state = rule.encode_state();
  WriteBatch batch;
  batch.put(store::head_key(name), store::encode_head(*head));
  REQUIRE(mem.scan(store::running_prefix(name),
                   [&](std::string_view key, std::string_view) {
                     batch.erase(std::string(key));
                     return true;
                   })
              .ok());
  REQUIRE(mem.write(batch, true).ok());
  auto again = mem.get(store::head_key(name));
  REQUIRE((*again)->front() == static_cast<char>(head->closed_at_ms ? 2 : 1));
}

std::size_t running_keys(MemoryStore& mem, const std::string& name) {
  std::size_t n = 0;
  REQUIRE(mem.scan(store::running_prefix(name),
                   [&](std::string_view, std::string_view) {
                     ++n;
                     return true;
                   })
              .ok());
  return n;
}

}  // namespace

// Issue 9, performance: an event's write must not carry the list of running tests. Ids have the
// same length, so the batches of the same event kind must have the same size at 5 and at 2,000
// running tests (before this change the head grew by 17 bytes per running test).
TEST_CASE("Running apart: a launch, finish or abandon writes the same bytes at 5 and 2000 running") {
  for (const auto& spec : {RuleSpec{.rule = "lord++", .evaluation = "fast"}, RuleSpec{.rule = "saffron"},
                           RuleSpec{.rule = "alpha-investing"}}) {
    INFO(spec_name(spec));
    MemoryStore mem;
    SizedStore sized(mem);
    auto ledger = open_over(sized);
    REQUIRE(ledger->create_stream("s", config_of(spec)).ok());
    auto id = [](std::size_t n) {
      std::string s = std::to_string(100000 + n);
      return "t" + s;
    };
    auto measure = [&](std::size_t next) {
      std::vector<std::size_t> out;
      REQUIRE(ledger->launch("s", id(next)).ok());
      out.push_back(sized.sizes.back());
      REQUIRE(ledger->launch("s", id(next + 1)).ok());
      REQUIRE(ledger->decide("s", id(next), 0.5).ok());
      out.push_back(sized.sizes.back());
      REQUIRE(ledger->abandon("s", id(next + 1)).ok());
      out.push_back(sized.sizes.back());
      return out;
    };
    for (std::size_t k = 0; k < 5; ++k) REQUIRE(ledger->launch("s", id(k)).ok());
    const auto few = measure(10);
    for (std::size_t k = 5; k < 2000; ++k) REQUIRE(ledger->launch("s", id(10000 + k)).ok());
    const auto many = measure(20);
    CHECK(few == many);
    auto v = ledger->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
  }
}

// Existing ledgers open and verify unchanged: a head of the older form (built with the encoders
// that wrote it: head version 1, Rule::encode_state listing the running tests) opens, lists its
// running tests from the chain, verifies, and its next write moves it to the new form with one
// key per running test; levels stay those of the core Rule bit for bit (docs/methods.md 9.1).
TEST_CASE("Running apart: an older-form head opens, decides, verifies and moves to the new form") {
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    MemoryStore mem;
    const RuleConfig config = config_of(spec);
    Rule rule(config);
    {
      auto ledger = open_over(mem);
      REQUIRE(ledger->create_stream("s", config).ok());
      for (std::size_t k = 1; k <= 6; ++k) {
        REQUIRE(ledger->launch("s", numbered("L", k)).ok());
        rule.launch();
      }
      REQUIRE(ledger->decide("s", "L2", 0.0001).ok());
      REQUIRE(rule.finish(2, 0.0001).ok());
      REQUIRE(ledger->abandon("s", "L4").ok());
      REQUIRE(rule.abandon(4).ok());
      REQUIRE(running_keys(mem, "s") == 4);
    }
    make_older_form(mem, "s", rule);
    REQUIRE(running_keys(mem, "s") == 0);
    auto ledger = open_over(mem, store_test::ticking_clock(1800000000000));
    auto v = ledger->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
    auto listed = ledger->running("s");
    REQUIRE(listed.ok());
    REQUIRE(listed->size() == 4);
    CHECK((*listed)[0].id == "L1");
    CHECK((*listed)[3].id == "L6");
    auto status = ledger->status("s");
    REQUIRE(status.ok());
    CHECK(same_bits(status->reserved, rule.reserved()));
    // The next write: a finish of one running test; the other three get their own keys.
    auto d = ledger->decide("s", "L3", 0.2);
    REQUIRE(d.ok());
    auto o = rule.finish(3, 0.2);
    CHECK(same_bits(d->record.level, o->level));
    CHECK(same_bits(d->record.wealth, o->wealth));
    CHECK(running_keys(mem, "s") == 3);
    auto head = store::decode_head(**mem.get(store::head_key("s")));
    REQUIRE(head.ok());
    CHECK(head->running_apart);
    const Reservation r = rule.launch();
    auto l = ledger->launch("s", "L7");
    REQUIRE(l.ok());
    CHECK(same_bits(l->level, r.level));
    CHECK(same_bits(ledger->next_level("s").value(), rule.next_level()));
    v = ledger->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
    // Reopened from the new form: the same state.
    ledger = open_over(mem);
    auto reopened = ledger->next_level("s");
    REQUIRE_MESSAGE(reopened.ok(), reopened.error().message);
    CHECK(same_bits(*reopened, rule.next_level()));
    CHECK(ledger->running("s").value().size() == 4);
    // Once nothing runs, the head is written in the older form again (nothing to keep apart).
    for (const char* id : {"L1", "L5", "L6", "L7"}) REQUIRE(ledger->abandon("s", id).ok());
    head = store::decode_head(**mem.get(store::head_key("s")));
    CHECK_FALSE(head->running_apart);
    CHECK(running_keys(mem, "s") == 0);
    v = ledger->verify("s");
    CHECK_MESSAGE(v->ok, v->problem);
  }
}

TEST_CASE("Running apart: verify finds a missing, an extra and an edited running key") {
  MemoryStore mem;
  {
    auto ledger = open_over(mem);
    REQUIRE(ledger->create_stream("s", config_of({.rule = "lord++"})).ok());
    for (std::size_t k = 1; k <= 3; ++k) REQUIRE(ledger->launch("s", numbered("L", k)).ok());
  }
  const auto original = copy_contents(mem);
  auto verify_after = [&](const std::function<void(WriteBatch&)>& edit) {
    WriteBatch restore;
    for (const auto& [k, v] : copy_contents(mem)) restore.erase(k);
    for (const auto& [k, v] : original) restore.put(k, v);
    REQUIRE(mem.write(restore, true).ok());
    WriteBatch batch;
    edit(batch);
    REQUIRE(mem.write(batch, true).ok());
    auto ledger = open_over(mem);
    auto v = ledger->verify("s");
    REQUIRE(v.ok());
    return *v;
  };
  auto missing = verify_after([](WriteBatch& b) { b.erase(store::running_key("s", 2)); });
  CHECK_FALSE(missing.ok);
  CHECK(missing.problem.find("'L2' (launch 2) has no key") != std::string::npos);
  auto extra = verify_after([](WriteBatch& b) {
    b.put(store::running_key("s", 9), store::encode_running({9, 0.001, 1, "ghost"}));
  });
  CHECK_FALSE(extra.ok);
  CHECK(extra.problem.find("launch 9 (test 'ghost') is running") != std::string::npos);
  auto edited = verify_after([&](WriteBatch& b) {
    auto t = store::decode_running(store::running_key("s", 1), original.at(store::running_key("s", 1)));
    REQUIRE(t.ok());
    t->level *= 2;
    b.put(store::running_key("s", 1), store::encode_running(*t));
  });
  CHECK_FALSE(edited.ok);
  CHECK(edited.problem.find("'L1' (launch 1) does not hold") != std::string::npos);
  auto clean = verify_after([](WriteBatch&) {});
  CHECK_MESSAGE(clean.ok, clean.problem);
}

// Group commit: a group of mixed events (launches, finishes, abandons, decides, repeats and
// refusals) through apply_events gives the same answers and the same stored bytes as the same
// events one at a time, with one write instead of one per new event.
TEST_CASE("Running apart: apply_events gives the chain of the same events one by one, in one write") {
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    MemoryStore one_mem, group_mem;
    FaultyStore group_counted(group_mem);
    auto one = open_over(one_mem);
    auto group = open_over(group_counted);
    const RuleConfig config = config_of(spec);
    REQUIRE(one->create_stream("s", config).ok());
    REQUIRE(group->create_stream("s", config).ok());
    // Some history first, so that the group starts with running tests of the stored kind.
    for (auto* l : {one.get(), group.get()}) {
      REQUIRE(l->launch("s", "old-1").ok());
      REQUIRE(l->launch("s", "old-2").ok());
      REQUIRE(l->decide("s", "done", 0.5).ok());
    }
    using T = EventType;
    const std::vector<EventInput> events = {
        {T::kLaunch, "a"},          {T::kLaunch, "b"},        {T::kDecide, "old-1", 0.0001},
        {T::kDecide, "a", 0.3},     {T::kAbandon, "old-2"},   {T::kLaunch, "b"},
        {T::kDecide, "c", 0.00001}, {T::kAbandon, "nobody"},  {T::kDecide, "a", 0.3},
        {T::kDecide, "a", 0.4},     {T::kLaunch, "a"},        {T::kAbandon, "b"},
        {T::kAbandon, "b"},         {T::kDecide, "b", 0.1},   {T::kLaunch, "d"},
        {T::kDecide, "done", 0.5},  {T::kDecide, "bad", 2.0}, {T::kLaunch, " x"},
        {T::kLaunch, "e"},          {T::kDecide, "d", 0.02},
    };
    std::vector<Result<EventOutcome>> singles;
    for (const auto& e : events) {
      switch (e.type) {
        case T::kDecide: {
          auto r = one->decide("s", e.id, e.p_value);
          singles.push_back(r ? Result<EventOutcome>(*r) : Result<EventOutcome>(r.error()));
          break;
        }
        case T::kLaunch: {
          auto r = one->launch("s", e.id);
          singles.push_back(r ? Result<EventOutcome>(*r) : Result<EventOutcome>(r.error()));
          break;
        }
        case T::kAbandon: {
          auto r = one->abandon("s", e.id);
          singles.push_back(r ? Result<EventOutcome>(*r) : Result<EventOutcome>(r.error()));
          break;
        }
      }
    }
    const std::uint64_t writes_before = group_counted.writes_attempted();
    auto grouped = group->apply_events("s", events);
    CHECK(group_counted.writes_attempted() == writes_before + 1);
    REQUIRE(grouped.size() == events.size());
    for (std::size_t k = 0; k < events.size(); ++k) {
      INFO("event " << k + 1 << " " << events[k].id);
      REQUIRE(grouped[k].ok() == singles[k].ok());
      if (!singles[k].ok()) {
        CHECK(grouped[k].error().message == singles[k].error().message);
        CHECK(grouped[k].error().kind == singles[k].error().kind);
        CHECK(grouped[k].error().code == singles[k].error().code);
        continue;
      }
      REQUIRE(grouped[k]->index() == singles[k]->index());
      if (const auto* d = std::get_if<DecideResult>(&*singles[k])) {
        const auto& g = std::get<DecideResult>(*grouped[k]);
        CHECK(g.repeat == d->repeat);
        CHECK(g.record.step == d->record.step);
        CHECK(same_bits(g.record.level, d->record.level));
        CHECK(same_bits(g.record.wealth, d->record.wealth));
      } else if (const auto* l = std::get_if<LaunchResult>(&*singles[k])) {
        const auto& g = std::get<LaunchResult>(*grouped[k]);
        CHECK(g.repeat == l->repeat);
        CHECK(g.step == l->step);
        CHECK(same_bits(g.level, l->level));
      } else {
        const auto& a = std::get<AbandonResult>(*singles[k]);
        const auto& g = std::get<AbandonResult>(*grouped[k]);
        CHECK(g.repeat == a.repeat);
        CHECK(g.step == a.step);
        CHECK(same_bits(g.wealth, a.wealth));
      }
    }
    // The same chain, index, running keys and head, byte for byte (both clocks ticked alike).
    CHECK(copy_contents(one_mem) == copy_contents(group_mem));
    auto v = group->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
    // A retry of the whole group writes nothing and answers repeats or the same refusals.
    const auto before = copy_contents(group_mem);
    auto again = group->apply_events("s", events);
    CHECK(copy_contents(group_mem) == before);
    std::size_t repeats = 0;
    for (const auto& r : again) {
      if (!r.ok()) continue;
      std::visit(
          [&](const auto& x) {
            repeats += x.repeat ? 1 : 0;
            CHECK(x.repeat);
          },
          *r);
    }
    CHECK(repeats >= 8);
  }
}

TEST_CASE("Running apart: a failed group write answers every event with the error and changes nothing") {
  MemoryStore mem;
  FaultyStore faulty(mem);
  auto ledger = open_over(faulty);
  REQUIRE(ledger->create_stream("s", config_of({.rule = "lord++"})).ok());
  REQUIRE(ledger->launch("s", "a").ok());
  const auto before = copy_contents(mem);
  faulty.fail_write_in(1);
  using T = EventType;
  const std::vector<EventInput> events = {{T::kLaunch, "b"}, {T::kDecide, "a", 0.01}, {T::kAbandon, "b"}};
  auto out = ledger->apply_events("s", events);
  REQUIRE(out.size() == 3);
  for (const auto& r : out) CHECK_FALSE(r.ok());
  CHECK(copy_contents(mem) == before);
  // The cached state was dropped: the same group now succeeds from the stored state.
  out = ledger->apply_events("s", events);
  for (const auto& r : out) CHECK(r.ok());
  CHECK(std::get<DecideResult>(*out[1]).record.launch == 1);
  auto v = ledger->verify("s");
  CHECK_MESSAGE(v->ok, v->problem);
}
