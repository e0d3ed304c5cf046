// Looks at running tests in the Ledger (docs/ledger.md "Watching a running test"): the always-valid
// p-value and its running minimum, stop decides the test exactly as decide would, repeats,
// refusals with the ledger unchanged, the looks list, and verify recomputing each look.
// The numbers of each look come from anytime_evidence (alphaledger/anytime.hpp: the normal-mixture
// likelihood ratio of Robbins 1970 as used by Johari, Koomen, Pekelis & Walsh 2022, checked against
// quadrature in tests/core); here the ledger must give the same numbers, bit for bit.
#include <doctest/doctest.h>

#include <cmath>

#include "alphaledger/anytime.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"

using namespace alphaledger;
using store_test::same_bits;

namespace {

std::unique_ptr<Ledger> open_over(Store& store) {
  auto l = Ledger::open(borrow_store(store), store_test::ticking_clock());
  REQUIRE(l.ok());
  return std::move(*l);
}

LookData proportions(std::uint64_t n, std::uint64_t c, std::uint64_t t, std::optional<double> sd = 0.005) {
  LookData d;
  d.summary = LookSummary::kProportions;
  d.control_proportions = {n, c};
  d.treatment_proportions = {n, t};
  d.mixture_sd = sd;
  return d;
}

struct Fixture {
  MemoryStore mem;
  std::unique_ptr<Ledger> ledger = open_over(mem);
  Fixture() {
    REQUIRE(ledger->create_stream("s", *resolve_config({.rule = "lord++"})).ok());
    REQUIRE(ledger->decide("s", "first", 0.0004).ok());  // one rejection: later levels are larger
    REQUIRE(ledger->launch("s", "t").ok());
  }
};

}  // namespace

TEST_CASE("look: the always-valid p-value, its running minimum, continue then stop") {
  Fixture f;
  auto running = f.ledger->running_test("s", "t");
  REQUIRE(running.ok());
  const double level = running->level;

  // Look 1: little data, continue. The numbers are anytime_evidence's at the stream's alpha.
  const LookData d1 = proportions(2000, 100, 104);
  auto l1 = f.ledger->look("s", "t", d1);
  REQUIRE(l1.ok());
  auto e1 = anytime_evidence(*effect_of_proportions({2000, 100}, {2000, 104}), {.mixture_sd = 0.005, .alpha = 0.05});
  REQUIRE(e1.ok());
  CHECK(l1->look == 1);
  CHECK(same_bits(l1->e_value, e1->e_value));
  CHECK(same_bits(l1->running_min, e1->p_value));
  CHECK(same_bits(l1->cs_low, e1->cs_low));
  CHECK(same_bits(l1->level, level));
  CHECK_FALSE(l1->stop);
  CHECK_FALSE(l1->decision);
  CHECK_FALSE(l1->repeat);

  // Look 2: more data, still not enough (mixture_sd left out: the first look's is kept).
  auto l2 = f.ledger->look("s", "t", proportions(8000, 400, 430, std::nullopt));
  REQUIRE(l2.ok());
  CHECK(l2->look == 2);
  CHECK(*l2->data.mixture_sd == 0.005);
  CHECK(l2->running_min <= l1->running_min);
  CHECK_FALSE(l2->stop);

  // Look 3: a clear effect: stop, and the test is decided with p = the running minimum.
  auto l3 = f.ledger->look("s", "t", proportions(40000, 2000, 2400));
  REQUIRE(l3.ok());
  CHECK(l3->stop);
  CHECK(l3->running_min <= level);
  REQUIRE(l3->decision);
  CHECK(l3->decision->rejected);
  CHECK(same_bits(l3->decision->p_value, l3->running_min));
  CHECK(same_bits(l3->decision->level, level));
  CHECK(l3->decision->step == l3->step + 1);

  // Exactly as decide would: the same stream with decide(p = running minimum) instead.
  Fixture g;
  auto d = g.ledger->decide("s", "t", l3->running_min);
  REQUIRE(d.ok());
  CHECK(same_bits(d->record.level, l3->decision->level));
  CHECK(d->record.rejected == l3->decision->rejected);
  CHECK(same_bits(d->record.wealth, l3->decision->wealth));
  auto sf = f.ledger->status("s");
  auto sg = g.ledger->status("s");
  REQUIRE((sf.ok() && sg.ok()));
  CHECK(same_bits(sf->next_level, sg->next_level));
  CHECK(sf->rejections == sg->rejections);

  // The looks list, oldest first; history shows the decision only; verify recomputes every look.
  auto list = f.ledger->looks("s", "t");
  REQUIRE(list.ok());
  REQUIRE(list->size() == 3);
  CHECK((*list)[0].look == 1);
  CHECK((*list)[2].stop);
  CHECK(same_bits((*list)[1].running_min, l2->running_min));
  auto h = f.ledger->history("s");
  REQUIRE(h.ok());
  CHECK(h->size() == 2);
  auto v = f.ledger->verify("s");
  REQUIRE(v.ok());
  CHECK(v->ok);
}

TEST_CASE("look: the same data again is a repeat, before and after a stop, with the ledger unchanged") {
  Fixture f;
  auto l1 = f.ledger->look("s", "t", proportions(2000, 100, 104));
  REQUIRE(l1.ok());
  auto before = copy_contents(f.mem);
  auto again = f.ledger->look("s", "t", proportions(2000, 100, 104, std::nullopt));
  REQUIRE(again.ok());
  CHECK(again->repeat);
  CHECK(again->look == 1);
  CHECK(same_bits(again->running_min, l1->running_min));
  CHECK(copy_contents(f.mem) == before);

  auto stop = f.ledger->look("s", "t", proportions(40000, 2000, 2400));
  REQUIRE(stop.ok());
  REQUIRE(stop->stop);
  before = copy_contents(f.mem);
  auto retry = f.ledger->look("s", "t", proportions(40000, 2000, 2400));
  REQUIRE(retry.ok());
  CHECK(retry->repeat);
  REQUIRE(retry->decision);
  CHECK(retry->decision->step == stop->decision->step);
  CHECK(copy_contents(f.mem) == before);
  // Other data after the stop: the test is decided.
  auto late = f.ledger->look("s", "t", proportions(50000, 2500, 3000));
  REQUIRE_FALSE(late.ok());
  CHECK(late.error().kind == ErrorKind::kConflict);
  CHECK(copy_contents(f.mem) == before);
}

TEST_CASE("look: refusals name what is wrong and leave the ledger unchanged") {
  Fixture f;
  REQUIRE(f.ledger->look("s", "t", proportions(8000, 400, 420)).ok());
  REQUIRE(f.ledger->launch("s", "gone").ok());
  REQUIRE(f.ledger->abandon("s", "gone").ok());
  const auto before = copy_contents(f.mem);
  auto refused = [&](const Result<LookResult>& r, ErrorKind kind, const std::string& words) {
    REQUIRE_FALSE(r.ok());
    CHECK(r.error().kind == kind);
    INFO(r.error().message);
    CHECK(r.error().message.find(words) != std::string::npos);
    CHECK(copy_contents(f.mem) == before);
  };
  refused(f.ledger->look("nope", "t", proportions(8000, 400, 420)), ErrorKind::kNotFound, "nope");
  refused(f.ledger->look("s", "never", proportions(8000, 400, 420)), ErrorKind::kNotFound, "never launched");
  refused(f.ledger->look("s", "first", proportions(8000, 400, 420)), ErrorKind::kConflict, "decided");
  refused(f.ledger->look("s", "gone", proportions(8000, 400, 420)), ErrorKind::kConflict, "abandoned");
  refused(f.ledger->look("s", "t", proportions(7000, 400, 420)), ErrorKind::kInvalidArgument, "control.n went down");
  refused(f.ledger->look("s", "t", proportions(8000, 400, 410)), ErrorKind::kInvalidArgument,
          "treatment.conversions went down");
  refused(f.ledger->look("s", "t", proportions(9000, 450, 480, 0.01)), ErrorKind::kInvalidArgument, "mixture_sd");
  refused(f.ledger->look("s", "t", proportions(9000, 450, 480, 0.0)), ErrorKind::kInvalidArgument, "mixture_sd");
  refused(f.ledger->look("s", "t", proportions(9000, 450, 480, -1.0)), ErrorKind::kInvalidArgument, "mixture_sd");
  refused(f.ledger->look("s", "t", proportions(9000, 9500, 480)), ErrorKind::kInvalidArgument, "control");
  LookData means;
  means.summary = LookSummary::kMeans;
  means.control_means = {9000, 1.0, 2.0};
  means.treatment_means = {9000, 1.1, 2.0};
  refused(f.ledger->look("s", "t", means), ErrorKind::kInvalidArgument, "cannot switch to means");
  REQUIRE(f.ledger->launch("s", "fresh").ok());
  const auto with_launch = copy_contents(f.mem);
  auto first = f.ledger->look("s", "fresh", proportions(8000, 400, 420, std::nullopt));
  REQUIRE_FALSE(first.ok());
  CHECK(first.error().message.find("first look needs mixture_sd") != std::string::npos);
  CHECK(copy_contents(f.mem) == with_launch);
}

TEST_CASE("look: means, and verify catches an edited look even when the chain is rehashed") {
  MemoryStore mem;
  auto ledger = open_over(mem);
  REQUIRE(ledger->create_stream("m", *resolve_config({.rule = "lond"})).ok());
  REQUIRE(ledger->launch("m", "t").ok());
  LookData d;
  d.summary = LookSummary::kMeans;
  d.control_means = {500, 12.0, 4.0};
  d.treatment_means = {500, 12.3, 4.1};
  d.mixture_sd = 0.5;
  REQUIRE(ledger->look("m", "t", d).ok());
  d.control_means.n = 1500;
  d.treatment_means.n = 1500;
  auto l2 = ledger->look("m", "t", d);
  REQUIRE(l2.ok());
  REQUIRE(ledger->verify("m")->ok);

  // 1. A changed byte: the entry no longer matches its hash.
  const std::string key = store::record_key("m", l2->step);
  auto bytes = *mem.get(key);
  REQUIRE(bytes);
  {
    std::string edited = *bytes;
    edited[edited.size() - 80] ^= 1;
    WriteBatch b;
    b.put(key, edited);
    REQUIRE(mem.write(b).ok());
    auto v = ledger->verify("m");
    REQUIRE(v.ok());
    CHECK_FALSE(v->ok);
    CHECK(v->first_bad_step == l2->step);
  }
  // 2. A forged running minimum with the hash, the chain and the head made consistent: verify
  // recomputes the look from its summaries and names it.
  auto e = store::decode_entry(*bytes);
  REQUIRE(e.ok());
  store::EventRecord forged = e->event.event;
  forged.look.running_min = forged.look.running_min / 2;
  store::Digest hash{};
  WriteBatch b;
  b.put(key, store::encode_event(forged, e->event.prev_hash, &hash));
  auto head = store::decode_head(**mem.get(store::head_key("m")));
  REQUIRE(head.ok());
  REQUIRE(head->steps == l2->step);
  head->last_hash = hash;
  b.put(store::head_key("m"), store::encode_head(*head));
  REQUIRE(mem.write(b).ok());
  auto reopened = open_over(mem);
  auto v = reopened->verify("m");
  REQUIRE(v.ok());
  CHECK_FALSE(v->ok);
  CHECK(v->first_bad_step == l2->step);
  CHECK(v->problem.find("recomputing the look") != std::string::npos);
}

TEST_CASE("look event codec: proportions and means round-trip; truncated or bad looks are refused") {
  for (auto summary : {LookSummary::kProportions, LookSummary::kMeans}) {
    store::EventRecord e;
    e.kind = store::EventKind::kLook;
    e.entry = 7;
    e.launch = 3;
    e.id = "exp-1";
    e.level = 0.001;
    e.wealth = 0.04;
    e.at_ms = 1700000000123;
    e.launched_at_ms = 1700000000000;
    e.look.look = 2;
    e.look.previous_look = 5;
    e.look.data.summary = summary;
    e.look.data.control_proportions = {8000, 400};
    e.look.data.treatment_proportions = {8000, 430};
    e.look.data.control_means = {500, 12.5, 4.25};
    e.look.data.treatment_means = {510, 12.75, 4.5};
    if (summary == LookSummary::kProportions) {
      e.look.data.control_means = {};
      e.look.data.treatment_means = {};
    } else {
      e.look.data.control_proportions = {};
      e.look.data.treatment_proportions = {};
    }
    e.look.data.mixture_sd = 0.005;
    e.look.estimate = 0.00375;
    e.look.variance = 1.2e-5;
    e.look.anytime_p_value = 0.5;
    e.look.running_min = 0.25;
    e.look.e_value = 2.0;
    e.look.cs_low = -0.01;
    e.look.cs_high = 0.02;
    e.look.stop = true;
    const std::string bytes = store::encode_event(e, store::Digest{});
    auto back = store::decode_event(bytes);
    REQUIRE(back.ok());
    CHECK(back->event == e);
    for (std::size_t cut = 0; cut < bytes.size(); cut += 7) CHECK_FALSE(store::decode_event(bytes.substr(0, cut)).ok());
    std::string bad_summary = bytes;
    bad_summary[61 + e.id.size() + 16] = 3;  // the summary kind after look and previous look
    CHECK_FALSE(store::decode_event(bad_summary).ok());
  }
}
