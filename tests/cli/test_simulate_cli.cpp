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
  const auto share =
      run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--nonnull-fraction", "1.5"});
  CHECK(share.exit_code == 2);
  CHECK(share.err.find("--nonnull-fraction must be in [0, 1], got 1.5") != std::string::npos);
  const auto missing = run_alphaledger({"simulate", "--runs", "5"});
  CHECK(missing.exit_code == 2);
  CHECK(missing.err.find("--tests is required") != std::string::npos);
  const auto rule = run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--rules", "lord++,nope"});
  CHECK(rule.exit_code == 2);
  CHECK(rule.err.find("unknown rule 'nope'") != std::string::npos);
}

TEST_CASE("SimulateCli: a list of durations runs a sweep with a mean_duration column; bad ones exit 2") {
  const auto sweep = run_alphaledger({"simulate", "--tests", "200", "--runs", "20", "--rules",
                                      "lord++,saffron", "--mean-duration", "0,4,16", "--threads", "1"});
  REQUIRE(sweep.exit_code == 0);
  CHECK(sweep.out.rfind("mean_duration,rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer\n",
                        0) == 0);
  CHECK(std::count(sweep.out.begin(), sweep.out.end(), '\n') == 7);  // header + 3 values x 2 rules
  CHECK(sweep.out.find("\n16,saffron,20,200,") != std::string::npos);
  // The value 0 of the sweep equals a run without the flag (the synchronous rules).
  const auto plain = run_alphaledger(
      {"simulate", "--tests", "200", "--runs", "20", "--rules", "lord++,saffron", "--threads", "1"});
  REQUIRE(plain.exit_code == 0);
  const std::string first_row = plain.out.substr(plain.out.find('\n') + 1);
  CHECK(sweep.out.find("\n0," + first_row.substr(0, first_row.find('\n'))) != std::string::npos);

  const auto negative =
      run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--mean-duration", "-1"});
  CHECK(negative.exit_code == 2);
  CHECK(negative.err.find("--mean-duration must be a number of launches in [0, 1000000], got -1") !=
        std::string::npos);
  const auto two = run_alphaledger(
      {"simulate", "--tests", "10", "--runs", "5", "--mean-duration", "1,2", "--effect", "2,3"});
  CHECK(two.exit_code == 2);
  CHECK(two.err.find("a sweep varies one parameter at a time") != std::string::npos);
}

TEST_CASE("SimulateCli: --peeking adds rows per rule, e-lond and e-bh run beside p-value rules") {
  const auto peek = run_alphaledger({"simulate", "--tests", "100", "--runs", "10", "--rules",
                                     "lord++,e-lond,bh,e-bh", "--peeking", "20", "--threads", "1"});
  REQUIRE(peek.exit_code == 0);
  for (const char* name : {"\nlord++,", "\nlord++:peek-fixed,", "\nlord++:peek-anytime,", "\ne-lond,",
                           "\ne-lond:peek-mixture,", "\nbh,", "\ne-bh,"}) {
    CAPTURE(name);
    CHECK(peek.out.find(name) != std::string::npos);
  }
  CHECK(std::count(peek.out.begin(), peek.out.end(), '\n') == 8);
  const auto lone_sd = run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--mixture-sd", "2"});
  CHECK(lone_sd.exit_code == 2);
  CHECK(lone_sd.err.find("--mixture-sd is used only with --peeking") != std::string::npos);
  const auto many = run_alphaledger({"simulate", "--tests", "10", "--runs", "5", "--peeking", "100001"});
  CHECK(many.exit_code == 2);
  CHECK(many.err.find("--peeking must be a whole number in [0, 100000]") != std::string::npos);
}
