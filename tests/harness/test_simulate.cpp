// simulate: the generator, the model, exact reference values, determinism, the paired design and
// the output. Every check names its source; "4 SE" two-sided bands are common practice, no source
// (a false alarm has probability about 6e-5, and every seed is fixed and printed on failure).
#include <doctest/doctest.h>

#include <algorithm>
#include <boost/math/distributions/normal.hpp>
#include <cmath>
#include <sstream>

#include "alphaledger/offline.hpp"
#include "alphaledger/simulate.hpp"
#include "harness/simulate_report.hpp"
#include "harness/test_simulate_util.hpp"

using namespace alphaledger;
using simulate_test::row;
using simulate_test::scipy_value;
using simulate_test::simulate;

namespace {

const boost::math::normal kStdNormal;

// Kolmogorov–Smirnov statistic D_n = sup |F_n - F| of a sample against a CDF.
template <typename Cdf>
double ks_statistic(std::vector<double> x, Cdf cdf) {
  std::sort(x.begin(), x.end());
  const double n = static_cast<double>(x.size());
  double d = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double f = cdf(x[i]);
    d = std::max({d, static_cast<double>(i + 1) / n - f, f - static_cast<double>(i) / n});
  }
  return d;
}

// Normal p-value law: P(p <= x) when p = 1 - Phi(Z), Z ~ Normal(mean, sd^2):
// P(Z >= Phi^-1(1 - x)) (Boost.Math 1.74 normal quantile and cdf).
double p_value_cdf(double x, double mean, double sd) {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const double z = boost::math::quantile(boost::math::complement(kStdNormal, x));
  return boost::math::cdf(boost::math::complement(kStdNormal, (z - mean) / sd));
}

double sample_correlation(const std::vector<double>& a, const std::vector<double>& b) {
  const double n = static_cast<double>(a.size());
  double ma = 0, mb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    ma += a[i];
    mb += b[i];
  }
  ma /= n;
  mb /= n;
  double sab = 0, saa = 0, sbb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    sab += (a[i] - ma) * (b[i] - mb);
    saa += (a[i] - ma) * (a[i] - ma);
    sbb += (b[i] - mb) * (b[i] - mb);
  }
  return sab / std::sqrt(saa * sbb);
}

// The z of each test, read back from its p-value (Boost.Math 1.74 normal quantile).
std::vector<double> z_values(const SimulatedStream& s) {
  std::vector<double> z;
  z.reserve(s.p_value.size());
  for (double p : s.p_value) z.push_back(boost::math::quantile(boost::math::complement(kStdNormal, p)));
  return z;
}

}  // namespace

// ---------------------------------------------------------------------------------------------
// The generator.

TEST_CASE("RandomStream: splitmix64 gives the published first outputs for state 0") {
  // Reference outputs of splitmix64 from state 0 (Steele, Lea & Flood 2014 algorithm; the three
  // values are from memory of the reference implementation's output).
  std::uint64_t state = 0;
  CHECK(splitmix64_next(state) == 0xe220a8397b1dcdafULL);
  CHECK(splitmix64_next(state) == 0x6e789e6aa1b965f4ULL);
  CHECK(splitmix64_next(state) == 0x06c45d188009454fULL);
}

TEST_CASE("RandomStream: normals pass a Kolmogorov-Smirnov test against the normal CDF") {
  const std::uint64_t seed = 1;
  INFO("seed " << seed);
  RandomStream rng(seed, 0, 3);
  std::vector<double> x(1000000);
  double sum = 0, sum_sq = 0;
  for (double& v : x) {
    v = rng.normal();
    sum += v;
    sum_sq += v * v;
  }
  const double n = static_cast<double>(x.size());
  // CDF: Boost.Math 1.74 normal cdf. Critical value: SciPy 1.10.1 kstwo.isf(0.001, 1000000).
  const double d = ks_statistic(x, [](double v) { return boost::math::cdf(kStdNormal, v); });
  CHECK(d < scipy_value("ks_critical_1000000"));
  // Mean 0 and variance 1 within 4 standard errors (CLT; the variance of the sample variance of a
  // normal sample is 2/n: common practice, no source).
  CHECK(std::abs(sum / n) < 4.0 / std::sqrt(n));
  CHECK(std::abs(sum_sq / n - 1.0) < 4.0 * std::sqrt(2.0 / n));
}

TEST_CASE("RandomStream: uniforms lie strictly inside (0, 1) and distinct keys give distinct streams") {
  // By construction u = (k + 1/2) 2^-53 with 0 <= k < 2^53 (simulate.hpp); checked on draws.
  RandomStream a(1, 0, 1), b(1, 1, 1), c(2, 0, 1), d(1, 0, 2);
  int same_ab = 0, same_ac = 0, same_ad = 0;
  for (int i = 0; i < 1000; ++i) {
    const double u = a.uniform();
    CHECK(u > 0.0);
    CHECK(u < 1.0);
    const double vb = b.uniform(), vc = c.uniform(), vd = d.uniform();
    same_ab += u == vb;
    same_ac += u == vc;
    same_ad += u == vd;
  }
  CHECK(same_ab == 0);
  CHECK(same_ac == 0);
  CHECK(same_ad == 0);
}

TEST_CASE("Simulate: p = 1 - Phi(z) stays accurate far in the tail") {
  // Reference: Boost.Math 1.74 cdf(complement(normal, z)). Tolerance: 1 - Phi has relative
  // condition number about z^2 in z, so rounding z alone moves it by z^2 * 1.1e-16 (derived); we
  // allow 4e-16 (1 + z^2) relative.
  for (double z : {-3.0, 0.0, 1.0, 3.0, 8.0, 15.0, 25.0, 37.0}) {
    CAPTURE(z);
    const double ref = boost::math::cdf(boost::math::complement(kStdNormal, z));
    CHECK(upper_tail_p_value(z) > 0.0);
    CHECK(std::abs(upper_tail_p_value(z) - ref) <= 4e-16 * (1 + z * z) * ref);
  }
}

TEST_CASE("Simulate: null p-values are uniform and conservative nulls follow the normal law") {
  const std::uint64_t seed = 77;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 20000;
  m.nonnull_fraction = 0;
  // Uniform nulls: CDF x. Critical value: SciPy 1.10.1 kstwo.isf(0.001, 20000).
  auto uniform = generate_stream(m, seed, 0);
  CHECK(uniform.nonnulls == 0);
  CHECK(ks_statistic(uniform.p_value, [](double x) { return std::clamp(x, 0.0, 1.0); }) <
        scipy_value("ks_critical_20000"));
  // Conservative nulls, null mean -1: P(p <= x) = P(Z >= Phi^-1(1-x)), Z ~ N(-1, 1) (Boost.Math).
  m.null_mean = -1;
  auto conservative = generate_stream(m, seed, 0);
  CHECK(ks_statistic(conservative.p_value, [](double x) { return p_value_cdf(x, -1.0, 1.0); }) <
        scipy_value("ks_critical_20000"));
  // ...and the uniform law is rejected for them (the same check can fail).
  CHECK(ks_statistic(conservative.p_value, [](double x) { return std::clamp(x, 0.0, 1.0); }) >
        scipy_value("ks_critical_20000"));
}

TEST_CASE("Simulate: non-null z has mean effect and variance 1 + effect_sd^2") {
  // The model of docs/simulate.md: mu ~ N(effect, sd^2), z = mu + e, so z ~ N(effect, 1 + sd^2).
  // CDF through Boost.Math 1.74; critical value SciPy 1.10.1 kstwo.isf(0.001, 20000).
  const std::uint64_t seed = 5;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 20000;
  m.nonnull_fraction = 1;
  m.effect = 2;
  m.effect_sd = 1;
  auto s = generate_stream(m, seed, 3);
  CHECK(s.nonnulls == m.tests);
  CHECK(ks_statistic(s.p_value, [](double x) { return p_value_cdf(x, 2.0, std::sqrt(2.0)); }) <
        scipy_value("ks_critical_20000"));
  CHECK(ks_statistic(s.p_value, [](double x) { return p_value_cdf(x, 2.0, 1.0); }) >
        scipy_value("ks_critical_20000"));
}

TEST_CASE("Simulate: AR(1) and block correlation have the intended correlations") {
  // AR(1) with coefficient rho has lag-k autocorrelation rho^k (Box & Jenkins, Time Series
  // Analysis, AR(1) autocorrelation function). Blocks: correlation rho inside a block, 0 across.
  // Tolerance 0.015: about 5 standard errors of a sample correlation from 200000 pairs
  // (Bartlett's variance (1 + rho^2)/n bound, from memory).
  const std::uint64_t seed = 9;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 200000;
  m.nonnull_fraction = 0;
  m.correlation = *parse_correlation("ar1:0.6");
  const auto z = z_values(generate_stream(m, seed, 0));
  std::vector<double> a(z.begin(), z.end() - 2), lag1(z.begin() + 1, z.end() - 1),
      lag2(z.begin() + 2, z.end());
  CHECK(std::abs(sample_correlation(a, lag1) - 0.6) < 0.015);
  CHECK(std::abs(sample_correlation(a, lag2) - 0.36) < 0.015);

  m.correlation = *parse_correlation("blocks:4:0.5");
  const auto zb = z_values(generate_stream(m, seed, 0));
  std::vector<double> first, second, across_a, across_b;
  for (std::size_t i = 0; i + 4 < zb.size(); i += 4) {
    first.push_back(zb[i]);
    second.push_back(zb[i + 1]);  // same block
    across_a.push_back(zb[i + 3]);
    across_b.push_back(zb[i + 4]);  // next block
  }
  CHECK(std::abs(sample_correlation(first, second) - 0.5) < 0.02);
  CHECK(std::abs(sample_correlation(across_a, across_b)) < 0.02);
}

TEST_CASE("Simulate: share patterns keep the average share and move it where they say") {
  // Expected counts from the pattern definitions (simulate.hpp, docs/simulate.md); bands of 4
  // binomial standard errors (common practice, no source).
  const std::uint64_t seed = 31;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 100000;
  m.nonnull_fraction = 0.2;
  const auto count = [](const SimulatedStream& s, std::size_t from, std::size_t to) {
    double c = 0;
    for (std::size_t i = from; i < to; ++i) c += s.is_null[i] == 0;
    return c;
  };
  m.pattern = *parse_nonnull_pattern("rising");
  auto rising = generate_stream(m, seed, 0);
  // First half: mean share f/2 = 0.1; second half 3f/2 = 0.3.
  CHECK(std::abs(count(rising, 0, 50000) - 5000) < 4 * std::sqrt(50000 * 0.1 * 0.9));
  CHECK(std::abs(count(rising, 50000, 100000) - 15000) < 4 * std::sqrt(50000 * 0.3 * 0.7));
  m.pattern = *parse_nonnull_pattern("falling");
  auto falling = generate_stream(m, seed, 0);
  CHECK(count(falling, 0, 50000) > count(falling, 50000, 100000) * 2);

  m.pattern = *parse_nonnull_pattern("bursts:50:0.8");
  auto bursts = generate_stream(m, seed, 0);
  // Blocks of 50 are bursts with probability 0.25: share 0.8 inside, none outside.
  std::size_t empty_blocks = 0, burst_blocks = 0;
  for (std::size_t b = 0; b < 2000; ++b) {
    const double c = count(bursts, b * 50, b * 50 + 50);
    if (c == 0) ++empty_blocks;
    if (c >= 25) ++burst_blocks;
  }
  CHECK(empty_blocks + burst_blocks == 2000);
  CHECK(std::abs(static_cast<double>(burst_blocks) - 500) < 4 * std::sqrt(2000 * 0.25 * 0.75));
  // Total: sum over burst blocks of Binomial(50, 0.8); mean 20000, variance 375 * 40^2 + 500 * 8.
  CHECK(std::abs(count(bursts, 0, 100000) - 20000) < 4 * std::sqrt(375.0 * 40 * 40 + 500.0 * 8));
}

// ---------------------------------------------------------------------------------------------
// Input checks.

TEST_CASE("Simulate: bad model input is refused with the field, the value and the accepted range") {
  SimulationModel m;
  m.nonnull_fraction = 1.5;
  auto s = validate_model(m);
  REQUIRE(!s.ok());
  CHECK(s.error().kind == ErrorKind::kInvalidArgument);
  CHECK(s.error().message == "nonnull_fraction must be in [0, 1], got 1.5");

  m = {};
  m.effect_sd = -1;
  CHECK(validate_model(m).error().message == "effect_sd must be in [0, 40], got -1");
  m = {};
  m.tests = 0;
  CHECK(validate_model(m).error().message.find("tests must be a whole number in [1, 100000000], got 0") ==
        0);
  m = {};
  m.nonnull_fraction = 0.6;
  m.pattern = *parse_nonnull_pattern("rising");
  CHECK(validate_model(m).error().message.find("needs a non-null fraction <= 0.5, got 0.6") !=
        std::string::npos);
  m = {};
  m.nonnull_fraction = 0.6;
  m.pattern = *parse_nonnull_pattern("bursts:10:0.5");
  CHECK(validate_model(m).error().message.find("the share inside a burst (0.5), got 0.6") !=
        std::string::npos);

  auto bad_pattern = parse_nonnull_pattern("waves");
  REQUIRE(!bad_pattern.ok());
  CHECK(bad_pattern.error().message.find(
            "nonnull_pattern is not a known pattern, got 'waves'; accepted:") == 0);
  CHECK(parse_nonnull_pattern("bursts:0").error().message.find("LENGTH a whole number") != std::string::npos);
  CHECK(parse_nonnull_pattern("bursts:10:1.5").error().message.find("SHARE in (0, 1]") != std::string::npos);
  CHECK(parse_correlation("ar1:1").error().message.find("correlation needs RHO in [0, 1), got 'ar1:1'") ==
        0);
  CHECK(parse_correlation("ar1:-0.2").error().message.find("RHO in [0, 1)") != std::string::npos);
  CHECK(parse_correlation("blocks:0:0.3").error().message.find("SIZE a whole number") != std::string::npos);
  CHECK(parse_correlation("wiggly").error().message.find("is not a known form") != std::string::npos);

  auto procs = resolve_procedures({"lord++"}, RuleSpec{}, true);
  REQUIRE(procs.ok());
  const SimulationPlan plan(*procs);
  auto r = run_simulation(plan, SimulationModel{}, {.runs = 0});
  REQUIRE(!r.ok());
  CHECK(r.error().message == "runs must be a whole number in [1, 100000000], got 0");
  r = run_simulation(plan, SimulationModel{}, {.runs = 5, .threads = 0});
  CHECK(r.error().message == "threads must be a whole number in [1, 1024], got 0");
}

TEST_CASE("Simulate: pattern and correlation texts read back to the same specification") {
  for (const char* text : {"constant", "rising", "falling", "bursts:100:0.5", "bursts:7:0.25"}) {
    auto p = parse_nonnull_pattern(text);
    REQUIRE(p.ok());
    CHECK(pattern_text(*p) == text);
  }
  CHECK(pattern_text(*parse_nonnull_pattern("bursts")) == "bursts:100:0.5");
  CHECK(pattern_text(*parse_nonnull_pattern("bursts:20")) == "bursts:20:0.5");
  for (const char* text : {"none", "ar1:0.5", "blocks:10:0.3", "ar1:0"}) {
    auto c = parse_correlation(text);
    REQUIRE(c.ok());
    CHECK(correlation_text(*c) == text);
  }
}

// ---------------------------------------------------------------------------------------------
// Exact reference values: the whole pipeline (generator, z -> p, rules, counting) against
// probabilities computed independently with SciPy.

TEST_CASE("Simulate: global-null FWER of alpha-spending and LOND matches 1 - prod(1 - a_t)") {
  // Reference: tests/data/simulate_scipy.csv (SciPy 1.10.1), the product over independent uniform
  // nulls of the levels before the first rejection (union of independent events). 4 SE band.
  const std::uint64_t seed = 101;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 1000;
  m.nonnull_fraction = 0;
  const auto r = simulate({"alpha-spending", "lond"}, RuleSpec{}, m, 20000, seed);
  const auto& spending = row(r, "alpha-spending");
  const auto& lond = row(r, "lond");
  CHECK(std::abs(spending.fwer - scipy_value("spending_global_null_fwer")) < 4 * spending.fwer_se);
  CHECK(std::abs(lond.fwer - scipy_value("lond_global_null_fwer")) < 4 * lond.fwer_se);
  CHECK(std::isnan(spending.power));  // no non-null anywhere: power is undefined, not 0
}

TEST_CASE("Simulate: alpha-spending power matches the normal tail average") {
  // Reference: tests/data/simulate_scipy.csv (SciPy 1.10.1 norm.sf / norm.isf), the mean over t of
  // P(Z > Phi^-1(1 - alpha gamma_t)), Z ~ N(effect, 1 + sd^2). 4 SE band.
  const std::uint64_t seed = 202;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 1000;
  m.nonnull_fraction = 0.1;
  const auto a = simulate({"alpha-spending"}, RuleSpec{}, m, 4000, seed);
  CHECK(std::abs(a.summaries[0].power - scipy_value("spending_power_effect3")) < 4 * a.summaries[0].power_se);
  m.effect = 2;
  m.effect_sd = 1;
  const auto b = simulate({"alpha-spending"}, RuleSpec{}, m, 4000, seed);
  CHECK(std::abs(b.summaries[0].power - scipy_value("spending_power_effect2_sd1")) <
        4 * b.summaries[0].power_se);
}

TEST_CASE("Simulate: BH's realized FDR equals pi0 times alpha under independence") {
  // Benjamini & Hochberg (1995), JRSS-B 57(1); equality FDR = (m0/m) alpha for independent
  // continuous nulls (Benjamini & Yekutieli 2001, Ann. Statist. 29(4); docs/methods.md section 11).
  // With each test non-null with probability f, E[m0/m] = 1 - f. 4 SE band, both sides.
  const std::uint64_t seed = 303;
  INFO("seed " << seed);
  SimulationModel m;
  m.tests = 1000;
  m.nonnull_fraction = 0.2;
  m.effect = 2.5;
  const auto r = simulate({"bh"}, RuleSpec{}, m, 6000, seed);
  CHECK(std::abs(r.summaries[0].fdr - 0.05 * 0.8) < 4 * r.summaries[0].fdr_se);
}

// ---------------------------------------------------------------------------------------------
// Determinism and the paired design.

TEST_CASE("Simulate: output is bit-identical for any thread count and repeatable") {
  const std::uint64_t seed = 4242;
  INFO("seed " << seed);
  auto procs = resolve_procedures(
      {"alpha-spending", "alpha-investing", "lond", "lord++", "saffron", "addis", "bh", "storey-bh"},
      RuleSpec{.evaluation = "fast"}, true);
  REQUIRE(procs.ok());
  const SimulationPlan plan(*procs);
  SimulationModel m;
  m.tests = 500;
  m.nonnull_fraction = 0.2;
  m.effect_sd = 1;
  m.correlation = *parse_correlation("ar1:0.3");
  std::vector<std::string> outputs;
  for (unsigned threads : {1u, 2u, 3u, 1u}) {
    auto r = run_simulation(plan, m, {.runs = 101, .seed = seed, .threads = threads});
    REQUIRE(r.ok());
    std::ostringstream csv;
    write_simulation_csv(csv, r->summaries);
    write_simulation_json(csv, r->summaries);
    outputs.push_back(csv.str());
  }
  CHECK(outputs[0] == outputs[1]);
  CHECK(outputs[0] == outputs[2]);
  CHECK(outputs[0] == outputs[3]);
  auto other = run_simulation(plan, m, {.runs = 101, .seed = seed + 1, .threads = 2});
  std::ostringstream csv;
  write_simulation_csv(csv, other->summaries);
  write_simulation_json(csv, other->summaries);
  CHECK(csv.str() != outputs[0]);  // the seed matters
}

TEST_CASE("Simulate: every procedure decides the identical stream (paired design, same rules as replay)") {
  // Each run's tallies are recomputed through replay() (replay.hpp, the same Rule and offline code)
  // on a log built from the regenerated stream: R and V must agree for every procedure.
  const std::uint64_t seed = 8;
  INFO("seed " << seed);
  const std::vector<std::string> names = {"alpha-spending", "alpha-investing", "lond", "lord++",
                                          "saffron",        "addis",           "bh",   "storey-bh"};
  SimulationModel m;
  m.tests = 400;
  m.nonnull_fraction = 0.3;
  m.null_mean = -0.5;
  m.pattern = *parse_nonnull_pattern("bursts:40:0.6");
  const auto r = simulate(names, RuleSpec{}, m, 24, seed, /*keep_runs=*/true);
  REQUIRE(r.runs.size() == 24);
  auto procs = resolve_procedures(names, RuleSpec{}, true);
  REQUIRE(procs.ok());
  for (std::uint64_t run : {0u, 5u, 17u, 23u}) {
    CAPTURE(run);
    const SimulatedStream s = generate_stream(m, seed, run);
    TestLog log;
    log.has_truth = true;
    for (std::size_t i = 0; i < s.p_value.size(); ++i) {
      TestRecord rec;
      rec.id = "t";
      rec.id += std::to_string(i + 1);
      rec.p_value = s.p_value[i];
      rec.is_null = s.is_null[i] == 1;
      log.records.push_back(rec);
    }
    const auto summary = summarize(replay(log, *procs), log);
    REQUIRE(summary.size() == names.size());
    for (std::size_t k = 0; k < names.size(); ++k) {
      CAPTURE(names[k]);
      CHECK(r.runs[run][k].rejections == summary[k].rejections);
      CHECK(r.runs[run][k].false_discoveries == *summary[k].false_discoveries);
      CHECK(r.runs[run][k].nonnulls == s.nonnulls);
    }
  }
  // The same p-values for all: a procedure listed twice under different rule lists gets the same tallies.
  const auto again = simulate({"saffron"}, RuleSpec{}, m, 24, seed, true);
  for (std::uint64_t run = 0; run < 24; ++run) CHECK(again.runs[run][0] == r.runs[run][4]);
}

// ---------------------------------------------------------------------------------------------
// Metrics and output.

TEST_CASE("Simulate: metrics follow the contract's definitions on hand-made tallies") {
  // docs/cli.md "Simulate": fdr = mean V/max(R,1); mfdr = sum V / sum max(R,1); power = mean share of
  // non-nulls rejected; fwer = share of runs with V >= 1; se = sample sd / sqrt(n).
  MetricTotals t;
  t.add({.rejections = 4, .false_discoveries = 1, .nonnulls = 6});  // fdp 0.25, power 0.5
  t.add({.rejections = 0, .false_discoveries = 0, .nonnulls = 5});  // fdp 0, power 0
  t.add({.rejections = 2, .false_discoveries = 2, .nonnulls = 0});  // fdp 1, no power
  Procedure p{"lord++", *resolve_config({.rule = "lord++"})};
  const ProcedureSummary s = summarize_totals(p, t, 10);
  CHECK(s.runs == 3);
  CHECK(s.mean_rejections == doctest::Approx(2.0));
  CHECK(s.fdr == doctest::Approx(1.25 / 3));
  const double mean = 1.25 / 3;
  const double sd = std::sqrt((std::pow(0.25 - mean, 2) + std::pow(0 - mean, 2) + std::pow(1 - mean, 2)) / 2);
  CHECK(s.fdr_se == doctest::Approx(sd / std::sqrt(3.0)));
  CHECK(s.mfdr == doctest::Approx(3.0 / 7.0));
  CHECK(s.power == doctest::Approx(0.25));
  CHECK(s.power_se == doctest::Approx(0.25));  // sd of {0.5, 0} is 0.3536, over sqrt(2)
  CHECK(s.fwer == doctest::Approx(2.0 / 3.0));
  CHECK(s.fwer_se == doctest::Approx(std::sqrt((2.0 / 3.0) * (1.0 / 3.0) / 2.0)));
  CHECK(s.metric == ErrorMetric::kFdr);
  CHECK_FALSE(s.exceeds_target);  // 0.417 < 0.05 + 3 * 0.300
  // mFDR delta-method SE against a direct evaluation of its formula.
  const double m = 3.0 / 7.0;
  const double resid = std::pow(1 - m * 4, 2) + std::pow(0 - m * 1, 2) + std::pow(2 - m * 2, 2);
  CHECK(s.mfdr_se == doctest::Approx(std::sqrt(resid / 6.0) / (7.0 / 3.0)));
  CHECK(s.promised == s.fdr);
  CHECK(s.promised_se == s.fdr_se);

  // alpha-investing promises Foster & Stine's (2008) mFDR_eta = E[V] / (E[R] + eta), eta = W0/alpha.
  Procedure ai{"alpha-investing", *resolve_config({.rule = "alpha-investing"})};
  const ProcedureSummary a = summarize_totals(ai, t, 10);
  CHECK(a.metric == ErrorMetric::kMfdrEta);
  CHECK(a.eta == doctest::Approx(0.95));
  const double d = 2.0 + 0.95;  // mean R + eta
  const double me = 1.0 / d;    // mean V = 1
  CHECK(a.promised == doctest::Approx(me));
  const double resid_eta =
      std::pow(1 - me * 4.95, 2) + std::pow(0 - me * 0.95, 2) + std::pow(2 - me * 2.95, 2);
  CHECK(a.promised_se == doctest::Approx(std::sqrt(resid_eta / 6.0) / d));
  Procedure spending{"alpha-spending", *resolve_config({.rule = "alpha-spending"})};
  CHECK(summarize_totals(spending, t, 10).promised == s.fwer);
}

TEST_CASE("Simulate: CSV has exactly the contract's columns; JSON one object per rule") {
  const auto r = simulate({"alpha-spending", "lord++", "bh"}, RuleSpec{}, SimulationModel{}, 20, 1);
  std::ostringstream csv;
  write_simulation_csv(csv, r.summaries);
  std::istringstream lines(csv.str());
  std::string header;
  std::getline(lines, header);
  CHECK(header == "rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer");  // docs/cli.md
  int n = 0;
  for (std::string line; std::getline(lines, line); ++n)
    CHECK(std::count(line.begin(), line.end(), ',') == 9);
  CHECK(n == 3);
  std::ostringstream json;
  write_simulation_json(json, r.summaries);
  const std::string js = json.str();
  CHECK(std::count(js.begin(), js.end(), '\n') == 3);
  CHECK(js.find("{\"rule\":\"lord++\",\"runs\":20,\"tests\":1000,\"mean_rejections\":") != std::string::npos);
  CHECK(js.find("\"evaluation\":\"exact\"") != std::string::npos);
  CHECK(js.find("\"promised\":\"FWER\",\"promised_value\":") != std::string::npos);
}

TEST_CASE("Simulate: the table flags a rule above its target by more than 3 SE, in plain words") {
  ProcedureSummary ok_row;
  ok_row.rule = "lond";
  ok_row.runs = 100;
  ok_row.fdr = ok_row.promised = 0.04;
  ok_row.fdr_se = ok_row.promised_se = 0.005;
  ProcedureSummary bad = ok_row;
  bad.rule = "broken";
  bad.fdr = bad.promised = 0.09;
  bad.exceeds_target = exceeds_by_three_se(bad.promised, bad.promised_se, bad.target);
  CHECK(bad.exceeds_target);
  CHECK_FALSE(exceeds_by_three_se(0.064, 0.005, 0.05));  // within 3 SE: not flagged
  CHECK_FALSE(exceeds_by_three_se(0.9, std::nan(""), 0.05));
  std::ostringstream table;
  SimulationSettings st;
  st.runs = 100;
  st.model.correlation = *parse_correlation("ar1:0.5");
  write_simulation_table(table, {ok_row, bad}, st);
  const std::string t = table.str();
  CHECK(exceedance_note(bad) ==
        "broken: realized FDR 0.0900 is above its target 0.05 by more than 3 standard errors (SE 0.0050)");
  CHECK(exceedance_note(ok_row).empty());
  CHECK(t.find("ABOVE TARGET  broken: realized FDR 0.0900 is above its target 0.05") != std::string::npos);
  CHECK(t.find("lond") != std::string::npos);
  CHECK(t.find("correlated tests (ar1:0.5)") != std::string::npos);
  CHECK(t.find("Still covered: lond (positive regression dependence).") != std::string::npos);
}

TEST_CASE("Simulate: chunking keeps memory bounded and progress reaches the total") {
  // Definitions in simulate.hpp (ours): at least 16 runs per chunk, at most 4096 chunks.
  CHECK(runs_per_chunk(1) == 16);
  CHECK(runs_per_chunk(1000) == 16);
  CHECK(runs_per_chunk(65536) == 16);
  CHECK(runs_per_chunk(65537) == 17);
  CHECK(runs_per_chunk(100000000) == 24415);
  CHECK((100000000 + runs_per_chunk(100000000) - 1) / runs_per_chunk(100000000) <= kMaxChunks);

  auto procs = resolve_procedures({"lond"}, RuleSpec{}, true);
  REQUIRE(procs.ok());
  const SimulationPlan plan(*procs);
  SimulationModel m;
  m.tests = 50;
  std::vector<std::uint64_t> seen;
  SimulationOptions opts{.runs = 70, .seed = 3, .threads = 2};
  opts.progress = [&seen](std::uint64_t done) { seen.push_back(done); };  // called one at a time
  auto r = run_simulation(plan, m, opts);
  REQUIRE(r.ok());
  CHECK(r->summaries[0].runs == 70);
  REQUIRE(!seen.empty());
  CHECK(std::is_sorted(seen.begin(), seen.end()));
  CHECK(seen.back() == 70);
  CHECK(seen.size() == 5);  // chunks of 16, 16, 16, 16, 6
}
