// Launch-time events in the Ledger: launch, finish (decide of a running id), abandon, running tests,
// their history rows, verification, reopening, idempotence and refusals (docs/ledger.md
// "Launch-time levels"). Every level is compared with the core Rule driven through the same
// events (docs/methods.md 9.1, Zrnic, Ramdas & Jordan 2021, JMLR 22(1):1-48), bit for bit.
#include <doctest/doctest.h>

#include <functional>
#include <random>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::kTableStream;
using store_test::numbered;
using store_test::same_bits;

namespace {

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
    {.rule = "alpha-spending"}, {.rule = "alpha-investing"}, {.rule = "lond"},
    {.rule = "lord++"},         {.rule = "saffron"},         {.rule = "addis"},
    {.rule = "lord++", .evaluation = "fast"},
};

template <typename T>
Status status_of(const Result<T>& r) {
  if (r) return {};
  return r.error();
}

std::string spec_name(const RuleSpec& s) { return s.rule + (s.evaluation ? " " + *s.evaluation : ""); }

}  // namespace

// Synchronous equivalence (docs/methods.md 9.1: "each test finishes before the next launches"
// gives back the synchronous rules; Rule::record is launch then finish): launching each test and
// deciding it before the next launch gives the levels, decisions and wealth of deciding it at
// once, bit for bit, on the docs/methods.md section 14 stream, for every rule.
TEST_CASE("Ledger launch: launch-then-decide equals decide-only bit for bit (docs/methods.md 9.1)") {
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    MemoryStore plain_store, launched_store;
    auto plain = open_over(plain_store);
    auto launched = open_over(launched_store);
    REQUIRE(plain->create_stream("s", config_of(spec)).ok());
    REQUIRE(launched->create_stream("s", config_of(spec)).ok());
    for (std::size_t i = 0; i < kTableStream.size(); ++i) {
      const std::string id = numbered("t", i + 1);
      auto d = plain->decide("s", id, kTableStream[i]);
      REQUIRE(d.ok());
      auto l = launched->launch("s", id);
      REQUIRE(l.ok());
      CHECK(same_bits(l->level, d->record.level));
      CHECK(l->launch == i + 1);
      auto f = launched->decide("s", id, kTableStream[i]);
      REQUIRE(f.ok());
      CHECK_FALSE(f->repeat);
      CHECK(same_bits(f->record.level, d->record.level));
      CHECK(f->record.rejected == d->record.rejected);
      CHECK(same_bits(f->record.wealth, d->record.wealth));
      CHECK(f->record.launch == i + 1);
      CHECK(d->record.launch == i + 1);
    }
    auto a = plain->status("s");
    auto b = launched->status("s");
    REQUIRE(a.ok());
    REQUIRE(b.ok());
    CHECK(same_bits(a->wealth, b->wealth));
    CHECK(same_bits(a->next_level, b->next_level));
    CHECK(b->running == 0);
    CHECK(launched->verify("s")->ok);
    // The decide-only stream writes only version-1 decision records, as before launches existed.
    for (std::uint64_t step = 1; step <= kTableStream.size(); ++step) {
      auto bytes = plain_store.get(store::record_key("s", step));
      REQUIRE(bytes.ok());
      REQUIRE(bytes->has_value());
      CHECK(*store::entry_version(**bytes) == store::kRecordVersion);
    }
  }
}

// An overlapping sequence: every reserved level and decision equals the core Rule driven through
// the same events (docs/methods.md 9.1 defines the events; the Rule implements them and has its own
// hand-worked checks in tests/core/test_launch.cpp), and verify replays it.
TEST_CASE("Ledger launch: overlapping events match Rule::launch/finish/abandon and verify") {
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    MemoryStore mem;
    auto ledger = open_over(mem);
    const RuleConfig config = config_of(spec);
    REQUIRE(ledger->create_stream("s", config).ok());
    Rule rule(config);

    const Reservation r1 = rule.launch();
    const Reservation r2 = rule.launch();
    auto l1 = ledger->launch("s", "a1");
    auto l2 = ledger->launch("s", "a2");
    REQUIRE(l1.ok());
    REQUIRE(l2.ok());
    CHECK(same_bits(l1->level, r1.level));
    CHECK(same_bits(l2->level, r2.level));
    CHECK(same_bits(l2->wealth, r2.wealth));

    auto o1 = rule.finish(r1.launch, 0.0004);
    auto d1 = ledger->decide("s", "a1", 0.0004);
    REQUIRE(d1.ok());
    CHECK(same_bits(d1->record.level, o1->level));
    CHECK(d1->record.rejected == o1->rejected);
    CHECK(same_bits(d1->record.wealth, o1->wealth));
    CHECK(d1->record.step == 3);  // entries: launch a1, launch a2, finish a1
    CHECK(d1->record.launch == 1);

    const Reservation r3 = rule.launch();
    auto l3 = ledger->launch("s", "a3");
    REQUIRE(l3.ok());
    CHECK(same_bits(l3->level, r3.level));

    REQUIRE(rule.abandon(r2.launch).ok());
    auto ab = ledger->abandon("s", "a2");
    REQUIRE(ab.ok());
    CHECK(same_bits(ab->level, r2.level));
    CHECK(same_bits(ab->wealth, rule.wealth()));

    // A new id in a stream with finish events: launched and decided at once (two entries).
    const Outcome o4 = rule.record(0.0011);
    auto d4 = ledger->decide("s", "n4", 0.0011);
    REQUIRE(d4.ok());
    CHECK(same_bits(d4->record.level, o4.level));
    CHECK(d4->record.rejected == o4.rejected);
    CHECK(same_bits(d4->record.wealth, o4.wealth));
    CHECK(d4->record.launch == 4);

    auto o3 = rule.finish(r3.launch, 0.36);
    auto d3 = ledger->decide("s", "a3", 0.36);
    REQUIRE(d3.ok());
    CHECK(same_bits(d3->record.level, o3->level));
    CHECK(same_bits(d3->record.level, l3->level));  // decided at the level reserved at launch

    auto info = ledger->status("s");
    REQUIRE(info.ok());
    CHECK(info->running == 0);
    CHECK(info->tests == 4);
    CHECK(same_bits(info->wealth, rule.wealth()));
    CHECK(same_bits(info->next_level, rule.next_level()));

    auto v = ledger->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);

    auto h = ledger->history("s");
    REQUIRE(h.ok());
    REQUIRE(h->size() == 4);  // a1, a2 (abandoned), n4, a3; the launch entries give no row
    CHECK((*h)[0].id == "a1");
    CHECK((*h)[1].id == "a2");
    CHECK((*h)[1].abandoned);
    CHECK((*h)[1].launch == 2);
    CHECK((*h)[2].id == "n4");
    CHECK((*h)[3].id == "a3");
    CHECK((*h)[3].launch == 3);
    CHECK((*h)[3].launched_at_ms < (*h)[3].decided_at_ms);
    std::vector<std::string> decided;
    REQUIRE(ledger->for_each_decision("s", 1, [&](const DecisionRecord& r) {
      decided.push_back(r.id);
      return true;
    }).ok());
    CHECK(decided == std::vector<std::string>{"a1", "n4", "a3"});  // abandoned tests are not decisions
  }
}

TEST_CASE("Ledger launch: retries of launch, finish and abandon are idempotent and write nothing") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("s", config_of({.rule = "lord++"})).ok());
  auto first = ledger->launch("s", "x");
  REQUIRE(first.ok());
  CHECK_FALSE(first->repeat);
  auto before = copy_contents(mem);
  auto again = ledger->launch("s", "x");
  REQUIRE(again.ok());
  CHECK(again->repeat);
  CHECK(same_bits(again->level, first->level));
  CHECK(again->launch == first->launch);
  CHECK(again->launched_at_ms == first->launched_at_ms);
  CHECK(copy_contents(mem) == before);

  auto d = ledger->decide("s", "x", 0.0001);
  REQUIRE(d.ok());
  before = copy_contents(mem);
  auto d2 = ledger->decide("s", "x", 0.0001);
  REQUIRE(d2.ok());
  CHECK(d2->repeat);
  CHECK(same_bits(d2->record.level, d->record.level));
  CHECK(d2->record.launch == 1);
  auto other = ledger->decide("s", "x", 0.5);
  REQUIRE_FALSE(other.ok());
  CHECK(other.error().kind == ErrorKind::kConflict);
  CHECK(copy_contents(mem) == before);

  REQUIRE(ledger->launch("s", "y").ok());
  auto ab = ledger->abandon("s", "y");
  REQUIRE(ab.ok());
  CHECK_FALSE(ab->repeat);
  before = copy_contents(mem);
  auto ab2 = ledger->abandon("s", "y");
  REQUIRE(ab2.ok());
  CHECK(ab2->repeat);
  CHECK(ab2->abandoned_at_ms == ab->abandoned_at_ms);
  CHECK(same_bits(ab2->level, ab->level));
  CHECK(copy_contents(mem) == before);
  CHECK(ledger->verify("s")->ok);
}

// The "Bad input" list at the ledger level: each refused with its kind, naming the id,
// and the store byte for byte as before.
TEST_CASE("Ledger launch: refusals name the id and leave the ledger unchanged") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("s", config_of({.rule = "saffron"})).ok());
  REQUIRE(ledger->decide("s", "done", 0.2).ok());
  REQUIRE(ledger->launch("s", "gone").ok());
  REQUIRE(ledger->abandon("s", "gone").ok());
  REQUIRE(ledger->launch("s", "live").ok());
  const auto before = copy_contents(mem);

  struct Case {
    const char* what;
    std::function<Status()> call;
    ErrorKind kind;
    const char* id;
  };
  const std::vector<Case> cases = {
      {"abandon of an unknown id", [&] { return status_of(ledger->abandon("s", "nope")); }, ErrorKind::kNotFound,
       "nope"},
      {"decide after abandon", [&] { return status_of(ledger->decide("s", "gone", 0.1)); }, ErrorKind::kConflict,
       "gone"},
      {"abandon after decide", [&] { return status_of(ledger->abandon("s", "done")); }, ErrorKind::kConflict,
       "done"},
      {"launch of a decided id", [&] { return status_of(ledger->launch("s", "done")); }, ErrorKind::kConflict,
       "done"},
      {"launch of an abandoned id", [&] { return status_of(ledger->launch("s", "gone")); },
       ErrorKind::kConflict, "gone"},
      {"launch with a bad id", [&] { return status_of(ledger->launch("s", "")); }, ErrorKind::kInvalidArgument,
       ""},
      {"launch in an unknown stream", [&] { return status_of(ledger->launch("t", "z")); }, ErrorKind::kNotFound,
       "t"},
      {"running_test of an unknown id", [&] { return status_of(ledger->running_test("s", "nope")); },
       ErrorKind::kNotFound, "nope"},
      {"running_test of a decided id", [&] { return status_of(ledger->running_test("s", "done")); },
       ErrorKind::kConflict, "done"},
      {"a batch holding a running id",
       [&]() -> Status {
         auto b = ledger->decide_batch("s", {{"new1", 0.3}, {"live", 0.2}});
         if (!b) return b.error();
         if (b->error) {
           CHECK(b->stopped_at == 1);
           CHECK(b->error->message.find("test 2 of the batch") != std::string::npos);
           return *b->error;
         }
         return {};
       },
       ErrorKind::kConflict, "live"},
  };
  for (const auto& c : cases) {
    INFO(c.what);
    const Status s = c.call();
    REQUIRE_FALSE(s.ok());
    CHECK(s.error().kind == c.kind);
    CHECK(s.error().message.find(c.id) != std::string::npos);
    CHECK(copy_contents(mem) == before);
  }
  REQUIRE(ledger->close_stream("s").ok());
  auto closed = ledger->launch("s", "late");
  REQUIRE_FALSE(closed.ok());
  CHECK(closed.error().kind == ErrorKind::kConflict);
  CHECK(closed.error().message.find("closed") != std::string::npos);
  auto closed_abandon = ledger->abandon("s", "live");
  REQUIRE_FALSE(closed_abandon.ok());
  CHECK(closed_abandon.error().kind == ErrorKind::kConflict);
}

TEST_CASE("Ledger launch: running tests survive reopening, with status and running()") {
  MemoryStore mem;
  std::vector<LaunchResult> launched;
  {
    auto ledger = open_over(mem);
    REQUIRE(ledger->create_stream("s", config_of({.rule = "addis"})).ok());
    REQUIRE(ledger->decide("s", "d0", 0.01).ok());
    for (const char* id : {"r1", "r2", "r3"}) launched.push_back(*ledger->launch("s", id));
    REQUIRE(ledger->decide("s", "r2", 0.0001).ok());
  }
  auto ledger = open_over(mem);
  auto running = ledger->running("s");
  REQUIRE(running.ok());
  REQUIRE(running->size() == 2);
  CHECK((*running)[0] == RunningEntry{"r1", launched[0].launch, launched[0].level, launched[0].launched_at_ms});
  CHECK((*running)[1] == RunningEntry{"r3", launched[2].launch, launched[2].level, launched[2].launched_at_ms});
  auto info = ledger->status("s");
  REQUIRE(info.ok());
  CHECK(info->running == 2);
  // Rule::reserved sums the reserved levels in launch order (rules.hpp).
  CHECK(same_bits(info->reserved, launched[0].level + launched[2].level));
  auto one = ledger->running_test("s", "r3");
  REQUIRE(one.ok());
  CHECK(same_bits(one->level, launched[2].level));
  auto f = ledger->decide("s", "r1", 0.9);
  REQUIRE(f.ok());
  CHECK(same_bits(f->record.level, launched[0].level));
  CHECK(ledger->verify("s")->ok);
}

// Tampering: a launch event rewritten with another reserved level and a correct hash (the head
// rehashed too) is caught by replaying the rule.
TEST_CASE("Ledger launch: verify detects an edited reserved level") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("s", config_of({.rule = "lord++"})).ok());
  REQUIRE(ledger->decide("s", "d1", 0.0004).ok());
  REQUIRE(ledger->launch("s", "x").ok());
  REQUIRE(ledger->verify("s")->ok);

  auto bytes = mem.get(store::record_key("s", 2));
  REQUIRE(bytes.ok());
  REQUIRE(bytes->has_value());
  auto ev = store::decode_event(**bytes);
  REQUIRE(ev.ok());
  store::EventRecord edited = ev->event;
  edited.level *= 2;
  store::Digest hash{};
  const std::string rewritten = store::encode_event(edited, ev->prev_hash, &hash);
  auto head = store::decode_head(**mem.get(store::head_key("s")));
  REQUIRE(head.ok());
  head->last_hash = hash;
  WriteBatch batch;
  batch.put(store::record_key("s", 2), rewritten);
  batch.put(store::head_key("s"), store::encode_head(*head));
  REQUIRE(mem.write(batch, true).ok());

  auto fresh = open_over(mem);
  auto v = fresh->verify("s");
  REQUIRE(v.ok());
  CHECK_FALSE(v->ok);
  CHECK(v->first_bad_step == 2);
  CHECK(v->problem.find("reserved level") != std::string::npos);
}

// Random mixes of launches, finishes, abandons and plain decisions, with reopenings: every
// answer equals the core Rule through the same events (docs/methods.md 9.1), and verify passes.
TEST_CASE("Ledger launch: random event mixes match the Rule and verify") {
  const std::uint64_t seed = store_test::test_seed(20261202);
  INFO("seed " << seed);
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    std::mt19937_64 gen(seed);
    auto unit = [&] { return static_cast<double>(gen() >> 11) * 0x1.0p-53; };
    MemoryStore mem;
    auto ledger = open_over(mem);
    const RuleConfig config = config_of(spec);
    REQUIRE(ledger->create_stream("s", config).ok());
    Rule rule(config);
    std::vector<std::pair<std::string, std::uint64_t>> running;  // id, launch
    std::size_t next_id = 0;
    for (int step = 0; step < 300; ++step) {
      const double u = unit();
      if (u < 0.35) {
        const std::string id = numbered("L", ++next_id);
        const Reservation r = rule.launch();
        auto l = ledger->launch("s", id);
        REQUIRE(l.ok());
        CHECK(same_bits(l->level, r.level));
        running.emplace_back(id, r.launch);
      } else if (u < 0.65 && !running.empty()) {
        const std::size_t k = static_cast<std::size_t>(gen() % running.size());
        const double p = unit() < 0.3 ? 0.001 * unit() : unit();
        auto o = rule.finish(running[k].second, p);
        auto d = ledger->decide("s", running[k].first, p);
        REQUIRE(d.ok());
        CHECK(same_bits(d->record.level, o->level));
        CHECK(d->record.rejected == o->rejected);
        CHECK(same_bits(d->record.wealth, o->wealth));
        running.erase(running.begin() + static_cast<std::ptrdiff_t>(k));
      } else if (u < 0.75 && !running.empty()) {
        const std::size_t k = static_cast<std::size_t>(gen() % running.size());
        REQUIRE(rule.abandon(running[k].second).ok());
        REQUIRE(ledger->abandon("s", running[k].first).ok());
        running.erase(running.begin() + static_cast<std::ptrdiff_t>(k));
      } else {
        const double p = unit() < 0.3 ? 0.001 * unit() : unit();
        const Outcome o = rule.record(p);
        auto d = ledger->decide("s", numbered("D", ++next_id), p);
        REQUIRE(d.ok());
        CHECK(same_bits(d->record.level, o.level));
        CHECK(same_bits(d->record.wealth, o.wealth));
      }
      if (step % 50 == 49) ledger = open_over(mem);
    }
    auto info = ledger->status("s");
    REQUIRE(info.ok());
    CHECK(info->running == running.size());
    CHECK(same_bits(info->reserved, rule.reserved()));
    CHECK(same_bits(info->next_level, rule.next_level()));
    auto listed = ledger->running("s");
    REQUIRE(listed.ok());
    REQUIRE(listed->size() == running.size());
    auto v = ledger->verify("s");
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, v->problem);
  }
}
