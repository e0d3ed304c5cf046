// The gamma table a SpendingSequence fills lazily: parsing computes only its first lags; past them
// gamma_j comes from the formula for a while, then the rest of the table up to lag 65,536 is filled. Whatever is filled when, gamma(j) keeps the bits of the
// closed form (the table(n) snapshots are computed from it independently, so they are the reference
// here; test_evaluation.cpp checks them against the formula and test_levels_golden.cpp pins whole
// streams). No outside source: these are self-consistency checks of our own caching.
#include <doctest/doctest.h>

#include <bit>
#include <cstdint>
#include <thread>
#include <vector>

#include "alphaledger/spending.hpp"

using namespace alphaledger;

namespace {

bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

// The lags on both sides of the eagerly computed part (4,096), of the lazily filled table
// (65,536), and some in between.
const std::vector<std::uint64_t> kLags = {1,     2,     4095,  4096,  4097,  4098,  8191,
                                          8192,  30000, 65535, 65536, 65537, 70000};

}  // namespace

TEST_CASE("SpendingSequence::gamma: the same bits before and after the lazy part of the table is filled") {
  for (const char* spec : {"jm", "jm:0.07", "power:1.6", "power-shift:2"}) {
    const std::string name = spec;
    CAPTURE(name);
    auto reference = SpendingSequence::parse(spec);
    REQUIRE(reference.ok());
    const auto table = reference->table(70000);  // grown from the eager part, never the lazy one
    REQUIRE(table->size() >= 70000);

    // Past the eager part first: this call fills the lazy table.
    auto seq = SpendingSequence::parse(spec);
    REQUIRE(seq.ok());
    for (auto it = kLags.rbegin(); it != kLags.rend(); ++it) {
      const std::uint64_t j = *it;
      CAPTURE(j);
      REQUIRE(same_bits(seq->gamma(j), (*table)[j - 1]));
    }
    // Every lag of the lazy part: the first calls compute gamma_j from the formula, later ones
    // fill the table and read it.
    for (std::uint64_t j = 4097; j <= 65536; ++j) {
      if (!same_bits(seq->gamma(j), (*table)[j - 1])) {
        CAPTURE(j);
        REQUIRE(false);
      }
    }
    // And again, now served from the filled table.
    for (const std::uint64_t j : kLags) {
      CAPTURE(j);
      REQUIRE(same_bits(seq->gamma(j), (*table)[j - 1]));
    }
    CHECK(seq->gamma(0) == 0.0);
  }
}

TEST_CASE("SpendingSequence::gamma: threads that fill the lazy table at once all read the same bits") {
  auto seq = SpendingSequence::parse("jm");
  REQUIRE(seq.ok());
  const auto table = seq->table(65536);
  std::vector<std::vector<double>> got(4);
  std::vector<std::thread> threads;
  for (std::size_t t = 0; t < got.size(); ++t) {
    threads.emplace_back([&, t] {
      for (std::uint64_t j = 4097 + t; j <= 65536; j += 97) got[t].push_back(seq->gamma(j));
    });
  }
  for (auto& th : threads) th.join();
  for (std::size_t t = 0; t < got.size(); ++t) {
    std::size_t k = 0;
    for (std::uint64_t j = 4097 + t; j <= 65536; j += 97, ++k) REQUIRE(same_bits(got[t][k], (*table)[j - 1]));
  }
}
