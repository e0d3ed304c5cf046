// Where a spending sequence's first values come from (src/core/spending.cpp): shared() fills a
// table of the first 4,096 values, parse() alone fills none (a specification checked by
// resolve_config() is dropped at once; building its table was a third of a read command's
// instructions, docs/benchmarks.md "CLI fixed cost after lazy start"). Either way gamma_j and
// table() must give the same bits (determinism: common practice, no source).
#include <doctest/doctest.h>

#include <bit>
#include <cstdint>

#include "alphaledger/spending.hpp"

using alphaledger::SpendingSequence;

TEST_CASE("a parsed sequence without a table gives the same bits as the shared one with it") {
  for (const char* spec : {"jm", "jm:0.07", "power:1.6", "power-shift:2.5"}) {
    CAPTURE(spec);
    auto parsed = SpendingSequence::parse(spec);
    REQUIRE(parsed.ok());
    auto shared = SpendingSequence::shared(spec);
    REQUIRE(shared.ok());
    // Past 1,024 direct computations parse()'s copy fills its table: cover both sides of that.
    for (std::uint64_t j = 1; j <= 5000; ++j) {
      REQUIRE(std::bit_cast<std::uint64_t>(parsed->gamma(j)) ==
              std::bit_cast<std::uint64_t>((*shared)->gamma(j)));
    }
    const auto from_parsed = parsed->table(3);
    const auto from_shared = (*shared)->table(3);
    REQUIRE(from_parsed->size() >= 3);
    REQUIRE(from_shared->size() >= 3);
    for (std::size_t i = 0; i < 3; ++i)
      CHECK(std::bit_cast<std::uint64_t>((*from_parsed)[i]) ==
            std::bit_cast<std::uint64_t>((*from_shared)[i]));
  }
}
