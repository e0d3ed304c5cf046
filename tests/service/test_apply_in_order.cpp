// apply_in_order (the pipe's group commit): mixed decide, launch and abandon events are answered
// as the single Ledger calls answer them, with one synced write per group of at most max_group.
#include <doctest/doctest.h>

#include <variant>

#include "alphaledger/ledger.hpp"
#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"

using namespace alphaledger;

TEST_CASE("apply_in_order: mixed events, one synced write per group, answers of the single calls") {
  MemoryStore mem;
  FaultyStore counted(mem);
  auto opened = Ledger::open(borrow_store(counted));
  REQUIRE(opened.ok());
  auto& ledger = **opened;
  REQUIRE(ledger.create_stream("s", *resolve_config({.rule = "lord++"})).ok());
  using T = EventType;
  const std::vector<EventInput> events = {{T::kLaunch, "a"},
                                          {T::kLaunch, "b"},
                                          {T::kDecide, "a", 0.001},
                                          {T::kAbandon, "b"},
                                          {T::kAbandon, "zz"}};
  const auto before = counted.writes_attempted();
  auto out = apply_in_order(ledger, "s", events, 2);
  CHECK(counted.writes_attempted() == before + 2);  // groups {a, b}, {a, b}; {zz} writes nothing
  REQUIRE(out.size() == 5);
  for (std::size_t k = 0; k < 4; ++k) REQUIRE(out[k]->ok());
  CHECK(std::get<LaunchResult>(out[0]->value()).launch == 1);
  CHECK(std::get<DecideResult>(out[2]->value()).record.launch == 1);
  CHECK(std::get<AbandonResult>(out[3]->value()).launch == 2);
  REQUIRE_FALSE(out[4]->ok());
  auto alone = ledger.abandon("s", "zz");
  REQUIRE_FALSE(alone.ok());
  CHECK(out[4]->error().message == alone.error().message);
  CHECK(out[4]->error().code == alone.error().code);
  // A storage failure stops the run: its group answers the error, later groups are not tried.
  counted.fail_write_in(1);
  const std::vector<EventInput> more = {{T::kLaunch, "c"}, {T::kLaunch, "d"}, {T::kLaunch, "e"}};
  out = apply_in_order(ledger, "s", more, 2);
  REQUIRE(out.size() == 3);
  CHECK_FALSE(out[0]->ok());
  CHECK_FALSE(out[1]->ok());
  CHECK_FALSE(out[2].has_value());
  CHECK(ledger.running("s").value().empty());
}
