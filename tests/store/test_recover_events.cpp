// recover_ledger over streams with launch-time events (include/alphaledger/recover.hpp; events in
// docs/ledger-format.md "Event record"): launches, finishes and abandons are copied and proven like
// decision records, the running tests and the id index are rebuilt from the kept entries, and
// damage in the middle of an event stream keeps the provable prefix. The expected values are what
// the source ledger itself holds (its verify, its running tests, its stored entries): a copy must
// equal its source up to the kept step (common practice, no source).
#include <doctest/doctest.h>

#include <functional>
#include <map>

#include "alphaledger/ledger.hpp"
#include "alphaledger/recover.hpp"
#include "alphaledger/store.hpp"
#include "store/codec.hpp"
#include "store_test_util.hpp"

namespace {

using namespace alphaledger;
using store_test::numbered;
using store_test::TempDir;

const std::vector<RuleSpec> kSpecs = {
    {.rule = "alpha-spending"},
    {.rule = "alpha-investing"},
    {.rule = "lond"},
    {.rule = "lord++"},
    {.rule = "saffron"},
    {.rule = "addis"},
    {.rule = "lord++", .evaluation = "fast"},
};

std::string spec_name(const RuleSpec& s) { return s.rule + (s.evaluation ? " " + *s.evaluation : ""); }

// Stream "s" under `spec`: decisions before any launch, a batch of launches, finishes and
// abandons in another order than the launches, a new id decided at once between them, and two
// tests (a5, a7) left running. Returns the chain entry of the launch of a4.
std::uint64_t make_event_ledger(const std::string& folder, const RuleSpec& spec) {
  auto ledger = Ledger::open(folder, store_test::ticking_clock());
  REQUIRE(ledger.ok());
  Ledger& l = **ledger;
  REQUIRE(l.create_stream("s", *resolve_config(spec)).ok());
  for (int k = 1; k <= 3; ++k) REQUIRE(l.decide("s", numbered("t", k), 0.0004 * k).ok());
  for (const char* id : {"a1", "a2", "a3"}) REQUIRE(l.launch("s", id).ok());
  REQUIRE(l.decide("s", "a2", 0.0004).ok());
  auto a4 = l.launch("s", "a4");
  REQUIRE(a4.ok());
  REQUIRE(l.abandon("s", "a1").ok());
  REQUIRE(l.decide("s", "b1", 0.3).ok());
  REQUIRE(l.launch("s", "a5").ok());
  REQUIRE(l.launch("s", "a6").ok());
  REQUIRE(l.decide("s", "a3", 0.5).ok());
  REQUIRE(l.decide("s", "a4", 0.001).ok());
  REQUIRE(l.launch("s", "a7").ok());
  REQUIRE(l.abandon("s", "a6").ok());
  return a4->step;
}

std::unique_ptr<Ledger> open_read_only(const std::string& folder) {
  auto l = Ledger::open(folder, RocksStoreOptions{.create_if_missing = false, .read_only = true});
  REQUIRE(l.ok());
  return std::move(*l);
}

// The stored chain entries 1..n of stream "s" of a ledger folder.
std::vector<store::ChainEntry> entries(const std::string& folder, std::uint64_t n) {
  auto st = open_rocksdb_store(folder, RocksStoreOptions{.create_if_missing = false, .read_only = true});
  REQUIRE(st.ok());
  std::vector<store::ChainEntry> out;
  for (std::uint64_t k = 1; k <= n; ++k) {
    auto bytes = (*st)->get(store::record_key("s", k));
    REQUIRE(bytes.ok());
    REQUIRE(bytes->has_value());
    auto e = store::decode_entry(**bytes);
    REQUIRE(e.ok());
    out.push_back(*e);
  }
  return out;
}

// The tests running after entries 1..n, from the stored events (launch number order).
std::vector<RunningEntry> running_after(const std::vector<store::ChainEntry>& chain, std::uint64_t n) {
  std::map<std::uint64_t, RunningEntry> running;
  for (std::uint64_t k = 0; k < n; ++k) {
    if (!chain[k].is_event) continue;
    const store::EventRecord& ev = chain[k].event.event;
    if (ev.kind == store::EventKind::kLaunch)
      running[ev.launch] = RunningEntry{ev.id, ev.launch, ev.level, ev.at_ms};
    else
      running.erase(ev.launch);
  }
  std::vector<RunningEntry> out;
  for (auto& [launch, r] : running) out.push_back(r);
  return out;
}

// Rewrites chain entry `step` of stream "s" with `edit` applied to its bytes.
void edit_entry(const std::string& folder, std::uint64_t step,
                const std::function<std::string(std::string)>& edit) {
  auto st = open_rocksdb_store(folder, RocksStoreOptions{.create_if_missing = false});
  REQUIRE(st.ok());
  auto bytes = (*st)->get(store::record_key("s", step));
  REQUIRE(bytes.ok());
  REQUIRE(bytes->has_value());
  WriteBatch b;
  b.put(store::record_key("s", step), edit(**bytes));
  REQUIRE((*st)->write(b).ok());
}

// The copy of a stream damaged at entry `bad`: steps 1..bad-1 kept, their running tests running,
// the copy verifies with the chain hash of entry bad-1, and takes new events.
void check_prefix_copy(const std::string& src, const std::string& dst, std::uint64_t bad,
                       const std::vector<store::ChainEntry>& chain, std::uint64_t total) {
  auto report = recover_ledger(src, dst);
  REQUIRE(report.ok());
  REQUIRE(report->streams.size() == 1);
  const StreamRecovery& s = report->streams[0];
  CHECK(s.kept_steps == bad - 1);
  CHECK(s.known_steps == total);
  CHECK(s.problem.find("step " + std::to_string(bad) + ": ") == 0);
  CHECK_FALSE(s.complete());
  CHECK_FALSE(report->complete());

  auto copy = open_read_only(dst);
  auto v = copy->verify("s");
  REQUIRE(v.ok());
  CHECK(v->ok);
  CHECK(v->steps == bad - 1);
  CHECK(v->chain_hash == store::to_hex(chain[bad - 2].hash()));
  auto running = copy->running("s");
  REQUIRE(running.ok());
  const auto expected = running_after(chain, bad - 1);
  CHECK_FALSE(expected.empty());  // the damage is chosen so that tests are running before it
  CHECK(*running == expected);
  auto status = copy->status("s");
  REQUIRE(status.ok());
  CHECK(status->running == expected.size());
  copy.reset();

  // The copy goes on: a test running in the prefix can be decided at its reserved level, and the
  // test whose launch was lost is new to it.
  auto writable = Ledger::open(dst, store_test::ticking_clock(1800000000000));
  REQUIRE(writable.ok());
  auto d = (*writable)->decide("s", expected.front().id, 0.2);
  REQUIRE(d.ok());
  CHECK(store_test::same_bits(d->record.level, expected.front().level));
  CHECK(d->record.launch == expected.front().launch);
  CHECK((*writable)->launch("s", "a4").ok());
  auto again = (*writable)->verify("s");
  REQUIRE(again.ok());
  CHECK(again->ok);
}

}  // namespace

TEST_CASE("Recover events: a stream with launches, finishes and abandons recovers complete, every rule") {
  for (const auto& spec : kSpecs) {
    INFO(spec_name(spec));
    TempDir dir;
    const std::string src = dir.sub("src");
    make_event_ledger(src, spec);
    auto report = recover_ledger(src, dir.sub("dst"));
    REQUIRE(report.ok());
    CHECK(report->complete());
    REQUIRE(report->streams.size() == 1);
    const StreamRecovery& s = report->streams[0];
    CHECK(s.problem == "");
    REQUIRE(s.known_steps.has_value());
    CHECK(s.kept_steps == *s.known_steps);

    auto a = open_read_only(src);
    auto b = open_read_only(dir.sub("dst"));
    auto va = a->verify("s");
    auto vb = b->verify("s");
    REQUIRE(va.ok());
    REQUIRE(vb.ok());
    CHECK(vb->ok);
    CHECK(vb->steps == va->steps);
    CHECK(vb->chain_hash == va->chain_hash);
    auto ra = a->running("s");
    auto rb = b->running("s");
    REQUIRE(ra.ok());
    REQUIRE(rb.ok());
    CHECK(*rb == *ra);
    REQUIRE(rb->size() == 2);
    CHECK((*rb)[0].id == "a5");
    CHECK((*rb)[1].id == "a7");
    auto sa = a->status("s");
    auto sb = b->status("s");
    REQUIRE(sa.ok());
    REQUIRE(sb.ok());
    CHECK(sb->running == 2);
    CHECK(store_test::same_bits(sb->reserved, sa->reserved));
    CHECK(store_test::same_bits(sb->next_level, sa->next_level));
    CHECK(store_test::same_bits(sb->wealth, sa->wealth));
    auto ha = a->history("s");
    auto hb = b->history("s");
    REQUIRE(ha.ok());
    REQUIRE(hb.ok());
    CHECK(hb->size() == ha->size());
  }
}

TEST_CASE("Recover events: a changed byte in a launch keeps the prefix and its running tests") {
  for (const auto& spec : {RuleSpec{.rule = "lord++"}, RuleSpec{.rule = "saffron"},
                           RuleSpec{.rule = "lord++", .evaluation = "fast"}}) {
    INFO(spec_name(spec));
    TempDir dir;
    const std::string src = dir.sub("src");
    const std::uint64_t bad = make_event_ledger(src, spec);
    const std::uint64_t total = open_read_only(src)->verify("s")->steps;
    const auto chain = entries(src, total);
    edit_entry(src, bad, [](std::string bytes) {
      bytes[bytes.size() / 2] = static_cast<char>(bytes[bytes.size() / 2] ^ 0x10);
      return bytes;
    });
    check_prefix_copy(src, dir.sub("dst"), bad, chain, total);
  }
}

// The launch event is rewritten with another reserved level and a hash that matches its new
// bytes: the chain up to it holds, the replay of the rule refuses it after the rule has launched,
// and the new ledger's state must still be the one after the kept entries only.
TEST_CASE("Recover events: a launch whose stored level was changed and rehashed is not kept") {
  for (const auto& spec : {RuleSpec{.rule = "lord++"}, RuleSpec{.rule = "addis"},
                           RuleSpec{.rule = "lord++", .evaluation = "fast"}}) {
    INFO(spec_name(spec));
    TempDir dir;
    const std::string src = dir.sub("src");
    const std::uint64_t bad = make_event_ledger(src, spec);
    const std::uint64_t total = open_read_only(src)->verify("s")->steps;
    const auto chain = entries(src, total);
    edit_entry(src, bad, [](std::string bytes) {
      auto ev = store::decode_event(bytes);
      REQUIRE(ev.ok());
      REQUIRE(ev->event.kind == store::EventKind::kLaunch);
      ev->event.level *= 2;
      return store::encode_event(ev->event, ev->prev_hash);
    });
    check_prefix_copy(src, dir.sub("dst"), bad, chain, total);
    // The problem names the replay, not the chain.
    auto report = recover_ledger(src, dir.sub("again"));
    REQUIRE(report.ok());
    CHECK(report->streams.at(0).problem.find("reserved level") != std::string::npos);
  }
}

// A finish whose launch is not running (its launch event was replaced by a decision of the same
// launch number) cannot be proven: here the finish of a2 is rewritten to name a launch number
// that never ran, and rehashed.
TEST_CASE("Recover events: a finish naming no running launch stops the copy there") {
  TempDir dir;
  const std::string src = dir.sub("src");
  make_event_ledger(src, RuleSpec{.rule = "lord++"});
  const std::uint64_t total = open_read_only(src)->verify("s")->steps;
  const auto chain = entries(src, total);
  std::uint64_t finish = 0;
  for (std::uint64_t k = 0; k < total && finish == 0; ++k)
    if (chain[k].is_event && chain[k].event.event.kind == store::EventKind::kFinish) finish = k + 1;
  REQUIRE(finish > 0);
  edit_entry(src, finish, [](std::string bytes) {
    auto ev = store::decode_event(bytes);
    REQUIRE(ev.ok());
    ev->event.launch = 1000;
    return store::encode_event(ev->event, ev->prev_hash);
  });
  check_prefix_copy(src, dir.sub("dst"), finish, chain, total);
  auto report = recover_ledger(src, dir.sub("again"));
  REQUIRE(report.ok());
  CHECK(report->streams.at(0).problem.find("names launch 1000, which is not running") != std::string::npos);
}
