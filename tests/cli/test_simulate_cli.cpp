// alphaledger simulate, end to end through the executable (docs/cli.md "Simulate").
#include <doctest/doctest.h>

#include <algorithm>
#include <string>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

using alphaledger::test_support::run_alphaledger;

TEST_CASE("SimulateCli: the CSV header is the contract's and output is identical for any thread count") {
  const std::vector<std::string> base = {"simulate", "--tests", "500", "--runs", "40", "--seed", "3"};
  auto one = base;
  one.insert(one.end(), {"--threads", "1"});
  auto two = base;
  two.insert(two.end(), {"--threads", "2"});
  const auto a = run_alphaledger(one);
  const auto b = run_alphaledger(two);
  REQUIRE(a.exit_code == 0);
  CHECK(a.out.rfind("rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer\n", 0) == 0);
  CHECK(a.out == b.out);
  // Default: the six online rules and the two hindsight baselines, one row each.
  CHECK(std::count(a.out.begin(), a.out.end(), '\n') == 9);
  CHECK(a.err.find("progress") == std::string::npos);  // stderr is not a terminal here: no progress
}

TEST_CASE("SimulateCli: bad parameters exit 2 naming the flag") {
  const auto zero = run_alphaledger({"simulate", "--tests", "0", "--runs", "5"});
  CHECK(zero.exit_code == 2);
  CHECK(zero.err.find("--tests must be a whole number in [1, 100000000], got '0'") != std::string::npos);
  const auto share = run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--nonnull-fraction", "1.5"});
  CHECK(share.exit_code == 2);
  CHECK(share.err.find("--nonnull-fraction must be in [0, 1], got 1.5") != std::string::npos);
  const auto missing = run_alphaledger({"simulate", "--runs", "5"});
  CHECK(missing.exit_code == 2);
  CHECK(missing.err.find("--tests is required") != std::string::npos);
  const auto rule = run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--rules", "lord++,nope"});
  CHECK(rule.exit_code == 2);
  CHECK(rule.err.find("unknown rule 'nope'") != std::string::npos);
}
