// alphaledger pvalue / plan and summary columns, end to end through the executable
// (docs/cli.md "Experiment statistics"; docs/statistics.md, docs/formats.md "Summary columns").
#include <doctest/doctest.h>
#include <unistd.h>

#include <fstream>
#include <nlohmann/json.hpp>
#include <string>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

using alphaledger::test_support::run_alphaledger;

namespace {
std::string write_temp(const std::string& name, const std::string& text) {
  const std::string path = "/tmp/alphaledger-stats-test-" + std::to_string(getpid()) + "-" + name;
  std::ofstream(path, std::ios::binary) << text;
  return path;
}
}  // namespace

// Expected values: R 4.2.2 prop.test(x = c(130, 100), n = c(1000, 1000), correct = FALSE)
// (tests/data/stats_r_prop_test.csv, case 1): X-squared 4.421518054532056 = z^2, p-value 0.035488450466474711,
// interval 0.0020679344393763725 .. 0.057932065560623622.
TEST_CASE("Stats CLI: pvalue proportions --json gives R's prop.test values") {
  const auto r = run_alphaledger({"--json", "pvalue", "proportions", "--control", "1000:100", "--treatment", "1000:130"});
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["statistic"].get<double>() * j["statistic"].get<double>() == doctest::Approx(4.421518054532056).epsilon(1e-12));
  CHECK(j["p_value"].get<double>() == doctest::Approx(0.035488450466474711).epsilon(1e-9));
  CHECK(j["ci_low"].get<double>() == doctest::Approx(0.0020679344393763725).epsilon(1e-9));
  CHECK(j["ci_high"].get<double>() == doctest::Approx(0.057932065560623622).epsilon(1e-9));
  CHECK(j["relative_lift"].get<double>() == doctest::Approx(0.3).epsilon(1e-12));  // (0.13 - 0.1) / 0.1, by definition
}

// Expected value: R 4.2.2 power.t.test(delta = 1, sd = 1, power = 0.9) n = 22.021095570093962
// (tests/data/stats_r_power.csv): rounded up, 23 per arm.
TEST_CASE("Stats CLI: plan means gives R's power.t.test size, rounded up") {
  const auto r = run_alphaledger({"--json", "plan", "means", "--sd", "1", "--min-effect", "1", "--level", "0.05", "--power", "0.9"});
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["n_per_arm"].get<int>() == 23);
  CHECK(j["n_per_arm_exact"].get<double>() == doctest::Approx(22.021095570093962).epsilon(1e-8));
  CHECK(j["achieved_power"].get<double>() >= 0.9);
}

// Issue 5 part 4 (common practice, no source): bad input exits 2 naming the field.
TEST_CASE("Stats CLI: bad input exits 2 and names the field") {
  const struct { std::vector<std::string> args; std::string says; } kCases[] = {
      {{"pvalue", "proportions", "--control", "100:120", "--treatment", "100:10"}, "control_conversions"},
      {{"pvalue", "proportions", "--control", "1:0", "--treatment", "100:10"}, "control_n"},
      {{"pvalue", "means", "--control", "10:1:0", "--treatment", "10:2:1"}, "control_sd"},
      {{"pvalue", "proportions", "--control", "100:10", "--treatment", "100:12", "--confidence", "1"}, "confidence"},
      {{"plan", "means", "--sd", "1", "--min-effect", "0.5", "--level", "0.05", "--power", "1"}, "power"},
      {{"plan", "proportions", "--baseline", "0.1", "--min-effect", "0", "--level", "0.05"}, "min_effect"},
      {{"plan", "means", "--sd", "1", "--n-per-arm", "-5", "--level", "0.05"}, "--n-per-arm"},
  };
  for (const auto& c : kCases) {
    CAPTURE(c.says);
    const auto r = run_alphaledger(c.args);
    CHECK(r.exit_code == 2);
    CHECK(r.err.find(c.says) != std::string::npos);
    CHECK(r.out.empty());
  }
}

// Summary rows are decided with the p-value computed from them (R 4.2.2 prop.test, case 1, as above).
TEST_CASE("Stats CLI: replay decides a log of summaries with the computed p-values") {
  const std::string log = write_temp("summaries.csv",
                                     "id,p_value,control_n,control_conversions,treatment_n,treatment_conversions\n"
                                     "a,,1000,100,1000,130\n"
                                     "b,0.5,,,,\n");
  const auto r = run_alphaledger({"--json", "replay", log});
  std::remove(log.c_str());
  REQUIRE(r.exit_code == 0);
  const auto first = nlohmann::json::parse(r.out.substr(0, r.out.find('\n')));
  CHECK(first["id"] == "a");
  CHECK(first["p_value"].get<double>() == doctest::Approx(0.035488450466474711).epsilon(1e-9));
  const std::string bad = write_temp("bad.csv", "id,control_n,control_conversions\nx,100,3\n");
  const auto e = run_alphaledger({"replay", bad});
  std::remove(bad.c_str());
  CHECK(e.exit_code == 2);
  CHECK(e.err.find(":2: test 'x': missing treatment_n") != std::string::npos);
}

// The plan at a stream's next level uses exactly `alphaledger next`'s level and changes nothing.
TEST_CASE("Stats CLI: plan --stream uses the stream's next level and leaves the ledger unchanged") {
  const alphaledger::test_support::TempDir dir;
  const std::string ledger = dir.sub("db");
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "s1", "--rule", "lord++"}).exit_code == 0);
  const auto next = run_alphaledger({"--ledger", ledger, "--json", "next", "s1"});
  REQUIRE(next.exit_code == 0);
  const double level = nlohmann::json::parse(next.out)["level"].get<double>();
  const auto plan = run_alphaledger({"--ledger", ledger, "--json", "plan", "proportions", "--baseline", "0.1",
                                     "--min-effect", "0.01", "--stream", "s1"});
  REQUIRE(plan.exit_code == 0);
  const auto j = nlohmann::json::parse(plan.out);
  CHECK(j["level"].get<double>() == level);
  CHECK(j["step"].get<int>() == 1);
  CHECK(j["note"].get<std::string>().find("can differ") != std::string::npos);
  CHECK(run_alphaledger({"--ledger", ledger, "--json", "next", "s1"}).out == next.out);
  CHECK(run_alphaledger({"--ledger", ledger, "plan", "means", "--sd", "1", "--min-effect", "1", "--stream", "nope"}).exit_code == 3);
}

// Expected values: the closed form of docs/methods.md section 10.1 evaluated by hand with Python's
// math module (float64): estimate 0.009, variance 0.059*0.941/20000 + 0.05*0.95/20000 = 5.15095e-06,
// tau = 0.005 -> Lambda = 280.3022234548783, 1/Lambda = 0.0035675778367879243, 95% radius gives
// 0.00205754553244318 .. 0.015942454467556818. The core formula itself is checked against Boost.Math
// quadrature in tests/core/test_anytime.cpp.
TEST_CASE("Stats CLI: pvalue proportions --anytime adds the always-valid numbers") {
  const auto r = run_alphaledger({"--json", "pvalue", "proportions", "--control", "20000:1000", "--treatment",
                                  "20000:1180", "--anytime", "--mixture-sd", "0.005"});
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["anytime_p_value"].get<double>() == doctest::Approx(0.0035675778367879243).epsilon(1e-10));
  CHECK(j["e_value"].get<double>() == doctest::Approx(280.3022234548783).epsilon(1e-10));
  CHECK(j["cs_low"].get<double>() == doctest::Approx(0.00205754553244318).epsilon(1e-9));
  CHECK(j["cs_high"].get<double>() == doctest::Approx(0.015942454467556818).epsilon(1e-9));
  CHECK(j["mixture_sd"].get<double>() == 0.005);
  // The fixed-horizon p-value is still there and smaller: peeking costs evidence.
  CHECK(j["p_value"].get<double>() < j["anytime_p_value"].get<double>());
  // Text output labels the numbers.
  const auto t = run_alphaledger({"pvalue", "means", "--control", "500:10:2", "--treatment", "500:10.4:2",
                                  "--anytime", "--mixture-sd", "0.3"});
  REQUIRE(t.exit_code == 0);
  CHECK(t.out.find("anytime_p_value") != std::string::npos);
  CHECK(t.out.find("always valid") != std::string::npos);
  CHECK(t.out.find("confidence sequence") != std::string::npos);
}

// Common practice, no source: the mixing scale is required with --anytime and only there.
TEST_CASE("Stats CLI: --anytime and --mixture-sd refuse bad combinations with exit 2") {
  const struct { std::vector<std::string> args; std::string says; } kCases[] = {
      {{"pvalue", "proportions", "--control", "100:10", "--treatment", "100:12", "--anytime"}, "--anytime needs --mixture-sd"},
      {{"pvalue", "proportions", "--control", "100:10", "--treatment", "100:12", "--mixture-sd", "0.1"}, "--mixture-sd is used only with --anytime"},
      {{"pvalue", "means", "--control", "10:1:1", "--treatment", "10:2:1", "--anytime", "--mixture-sd", "0"}, "--mixture-sd must be a finite number > 0"},
      {{"pvalue", "means", "--control", "10:1:1", "--treatment", "10:2:1", "--anytime", "--mixture-sd", "-1"}, "--mixture-sd must be a finite number > 0"},
  };
  for (const auto& c : kCases) {
    CAPTURE(c.says);
    const auto r = run_alphaledger(c.args);
    CHECK(r.exit_code == 2);
    CHECK(r.err.find(c.says) != std::string::npos);
  }
}
