// Helpers shared by the store tests: seeded p-value streams, the docs/methods.md section 14 stream,
// the temporary folder, and bitwise comparisons.
#pragma once

#include <doctest/doctest.h>
#include <stdlib.h>

#include <bit>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <random>
#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "support/temp_dir.hpp"

namespace store_test {

// The p-value stream of docs/methods.md section 14, used by every check table there.
inline const std::vector<double> kTableStream = {0.0004, 0.0012, 0.36,   0.0009, 0.78,
                                                 0.0032, 0.17,   0.0011, 0.44,   0.0100};

// Seed for randomised tests: $ALPHALEDGER_TEST_SEED, else `fallback`. Tests INFO() it, so a
// failure prints the seed that reproduces it.
inline std::uint64_t test_seed(std::uint64_t fallback) {
  if (const char* s = std::getenv("ALPHALEDGER_TEST_SEED"); s != nullptr && *s != '\0')
    return std::strtoull(s, nullptr, 10);
  return fallback;
}

// A stream of p-values: about a fifth small (signals), the rest uniform. Uses only the raw
// 64-bit engine output, so the values are the same with every standard library.
inline std::vector<double> random_p_values(std::uint64_t seed, std::size_t n) {
  std::mt19937_64 gen(seed);
  auto unit = [&] { return static_cast<double>(gen() >> 11) * 0x1.0p-53; };
  std::vector<double> out(n);
  for (auto& p : out) {
    const double u = unit();
    p = unit() < 0.2 ? 0.01 * u * u * u : u;
  }
  return out;
}

// prefix + n, built by append: GCC 12 -Wrestrict misfires on "t" + std::to_string(n) (GCC PR 105651).
inline std::string numbered(std::string_view prefix, std::size_t n) {
  std::string out(prefix);
  out.append(std::to_string(n));
  return out;
}

inline bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

// What `replay` decides for p-values in order under `config` (the reference for the ledger).
inline std::vector<alphaledger::Decision> replay_decisions(const alphaledger::RuleConfig& config,
                                                           const std::vector<double>& p) {
  alphaledger::TestLog log;
  log.source = "memory";
  for (std::size_t i = 0; i < p.size(); ++i) {
    alphaledger::TestRecord r;
    r.id = numbered("t", i + 1);
    r.p_value = p[i];
    r.line = i + 2;
    log.records.push_back(r);
  }
  alphaledger::Procedure proc{std::string(alphaledger::rule_name(config.kind)), config};
  return alphaledger::replay(log, {proc}).decisions.at(0);
}

// The tests' one temporary-folder helper (tests/support/temp_dir.hpp).
using TempDir = alphaledger::test_support::TempDir;

// A clock that advances one millisecond per call from a fixed start (tests control time).
inline alphaledger::Clock ticking_clock(std::int64_t start = 1700000000000) {
  auto t = std::make_shared<std::int64_t>(start);
  return [t] { return (*t)++; };
}

}  // namespace store_test
