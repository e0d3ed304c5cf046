// copy_stream (alphaledger/copy_stream.hpp): a stream copied key for key between stores verifies
// and reads the same; refusals change nothing; an interrupted copy leaves no stream and can be run
// again; a writer during the copy is detected.
#include <doctest/doctest.h>

#include <functional>

#include "alphaledger/copy_stream.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "store_test_util.hpp"
#include "support/text.hpp"

using namespace alphaledger;

namespace {

std::unique_ptr<Ledger> open_over(Store& store) {
  auto l = Ledger::open(borrow_store(store), store_test::ticking_clock());
  REQUIRE(l.ok());
  return std::move(*l);
}

LookData a_look() {
  LookData d;
  d.summary = LookSummary::kProportions;
  d.control_proportions = {2000, 100};
  d.treatment_proportions = {2000, 104};
  d.mixture_sd = 0.005;
  return d;
}

// Stream "s" with every key family (records, index, a look, a running test), and two neighbours
// whose names share its prefix ("s.b", "s2") that must not be copied.
void fill(Ledger& ledger) {
  const auto config = *resolve_config({.rule = "lord++"});
  for (const char* name : {"s", "s.b", "s2"}) REQUIRE(ledger.create_stream(name, config).ok());
  const auto p = store_test::random_p_values(store_test::test_seed(14), 40);
  for (std::size_t i = 0; i < p.size(); ++i) {
    REQUIRE(ledger.decide("s", store_test::numbered("t", i), p[i]).ok());
    REQUIRE(ledger.decide("s.b", store_test::numbered("u", i), p[i]).ok());
  }
  REQUIRE(ledger.launch("s", "watched").ok());
  REQUIRE(ledger.look("s", "watched", a_look()).ok());
  REQUIRE(ledger.launch("s", "waiting").ok());
}

// Every key of `m` whose key names stream `stream` (family letter, '/', stream, then '/' or end).
std::map<std::string, std::string> keys_of(const std::map<std::string, std::string>& m,
                                           const std::string& stream) {
  std::map<std::string, std::string> out;
  for (const auto& [k, v] : m) {
    if (k.size() < 2 + stream.size() || k.compare(2, stream.size(), stream) != 0) continue;
    if (k.size() == 2 + stream.size() || k[2 + stream.size()] == '/') out.emplace(k, v);
  }
  return out;
}

// A MemoryStore that runs `hook` once, at its first scan of a prefix starting with `trigger`.
class HookedStore final : public Store {
 public:
  HookedStore(MemoryStore& inner, std::string trigger) : inner_(inner), trigger_(std::move(trigger)) {}
  std::function<void()> hook;
  Result<std::optional<std::string>> get(std::string_view key) override { return inner_.get(key); }
  Status write(const WriteBatch& batch, bool sync) override { return inner_.write(batch, sync); }
  Status scan(std::string_view prefix, const Visitor& visit) override {
    if (hook && prefix.starts_with(trigger_)) std::exchange(hook, nullptr)();
    return inner_.scan(prefix, visit);
  }
  std::string describe() const override { return "hooked store"; }

 private:
  MemoryStore& inner_;
  std::string trigger_;
};

}  // namespace

TEST_CASE("copy_stream: every key of the stream, byte for byte, in small writes; the copy verifies") {
  MemoryStore from_mem, to_mem;
  auto from = open_over(from_mem);
  fill(*from);
  auto copied = copy_stream(from_mem, to_mem, "s", CopyOptions{.keys_per_write = 7});
  REQUIRE_MESSAGE(copied.ok(), (copied.ok() ? "" : copied.error().message));

  const auto source = copy_contents(from_mem);
  const auto target = copy_contents(to_mem);
  auto expected = keys_of(source, "s");
  expected.emplace("m/format", source.at("m/format"));
  CHECK(target == expected);         // nothing of "s.b" or "s2", nothing else
  CHECK(copied->records == 40 + 3);  // 40 decisions, 2 launches, 1 look
  CHECK(copied->keys == expected.size() - 1);
  // The format key alone, then ceil(families' keys / 7), then the configuration and head.
  CHECK(copied->writes == 1 + (copied->keys - 2 + 6) / 7 + 1);
  CHECK(copied->leftovers_removed == 0);

  auto to = open_over(to_mem);
  auto report = to->verify("s");
  REQUIRE(report.ok());
  CHECK(report->ok);
  CHECK(report->chain_hash == from->verify("s")->chain_hash);
  auto a = from->history("s");
  auto b = to->history("s");
  REQUIRE(a.ok());
  REQUIRE(b.ok());
  REQUIRE(a->size() == b->size());
  for (std::size_t i = 0; i < a->size(); ++i) {
    CHECK((*a)[i].id == (*b)[i].id);
    CHECK(store_test::same_bits((*a)[i].level, (*b)[i].level));
  }
  CHECK(to->running("s")->size() == 2);
  CHECK(to->streams()->size() == 1);
}

TEST_CASE("copy_stream: into a ledger that has other streams; refused when the stream is there") {
  MemoryStore from_mem, to_mem;
  auto from = open_over(from_mem);
  fill(*from);
  {
    auto to = open_over(to_mem);
    REQUIRE(to->create_stream("s2", *resolve_config({.rule = "saffron"})).ok());
  }
  REQUIRE(copy_stream(from_mem, to_mem, "s").ok());
  const auto before = copy_contents(to_mem);
  for (const char* name : {"s", "s2"}) {
    auto again = copy_stream(from_mem, to_mem, name);
    REQUIRE_FALSE(again.ok());
    CHECK(again.error().kind == ErrorKind::kConflict);
    CHECK(again.error().code == "stream_exists");
    CHECK(again.error().message.find(alphaledger::test_support::concat("already has a stream named '", name,
                                                                       "'")) != std::string::npos);
    CHECK(copy_contents(to_mem) == before);
  }
  CHECK(open_over(to_mem)->verify("s")->ok);
}

TEST_CASE("copy_stream: bad name, unknown stream, a target that is not a ledger: nothing written") {
  MemoryStore from_mem, to_mem;
  fill(*open_over(from_mem));
  auto bad = copy_stream(from_mem, to_mem, "a/b");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.error().kind == ErrorKind::kInvalidArgument);
  auto missing = copy_stream(from_mem, to_mem, "nope");
  REQUIRE_FALSE(missing.ok());
  CHECK(missing.error().kind == ErrorKind::kNotFound);
  CHECK(missing.error().code == "unknown_stream");
  CHECK(copy_contents(to_mem).empty());

  WriteBatch other;
  other.put("something", "else");
  REQUIRE(to_mem.write(other).ok());
  auto not_ledger = copy_stream(from_mem, to_mem, "s");
  REQUIRE_FALSE(not_ledger.ok());
  CHECK(not_ledger.error().code == "not_a_ledger");
  CHECK(copy_contents(to_mem).size() == 1);

  auto zero = copy_stream(from_mem, to_mem, "s", CopyOptions{.keys_per_write = 0});
  REQUIRE_FALSE(zero.ok());
  CHECK(zero.error().kind == ErrorKind::kInvalidArgument);
}

TEST_CASE("copy_stream: a copy that stops half-way leaves no stream, and a second run completes it") {
  MemoryStore from_mem, to_mem;
  fill(*open_over(from_mem));
  FaultyStore faulty(to_mem);
  SUBCASE("fails in the middle") { faulty.fail_write_in(4); }
  SUBCASE("fails at the last write, the configuration and head") {
    auto dry =
        copy_stream(from_mem, *std::make_unique<MemoryStore>(), "s", CopyOptions{.keys_per_write = 10});
    REQUIRE(dry.ok());
    faulty.fail_write_in(dry->writes);
  }
  auto failed = copy_stream(from_mem, faulty, "s", CopyOptions{.keys_per_write = 10});
  REQUIRE_FALSE(failed.ok());
  CHECK(failed.error().message.find("writing to memory store") != std::string::npos);
  CHECK(open_over(to_mem)->streams()->empty());  // half a copy is not a stream
  CHECK(copy_contents(to_mem).size() > 1);       // but some keys were written

  auto again = copy_stream(from_mem, to_mem, "s", CopyOptions{.keys_per_write = 10});
  REQUIRE(again.ok());
  CHECK(again->leftovers_removed > 0);
  auto expected = keys_of(copy_contents(from_mem), "s");
  expected.emplace("m/format", copy_contents(from_mem).at("m/format"));
  CHECK(copy_contents(to_mem) == expected);
  CHECK(open_over(to_mem)->verify("s")->ok);
}

TEST_CASE("copy_stream: a decision made in the source while copying fails the copy, no stream written") {
  MemoryStore from_mem, to_mem;
  auto from = open_over(from_mem);
  fill(*from);
  HookedStore hooked(from_mem, "i/");
  hooked.hook = [&] { REQUIRE(from->decide("s", "late", 0.5).ok()); };
  auto copied = copy_stream(hooked, to_mem, "s");
  REQUIRE_FALSE(copied.ok());
  CHECK(copied.error().kind == ErrorKind::kConflict);
  CHECK(copied.error().code == "changed_during_copy");
  CHECK(open_over(to_mem)->streams()->empty());
  auto again = copy_stream(from_mem, to_mem, "s");  // the writer has stopped: the copy goes through
  REQUIRE(again.ok());
  CHECK(open_over(to_mem)->verify("s")->steps == from->verify("s")->steps);
}
