// The experiment statistics against reference libraries. Every expected value below comes from a
// file in tests/data produced by a committed script, which records the exact call of each row and
// the library versions in the file's first line:
//   tests/data/make_stats_reference.R   -> stats_r_*.csv      (R 4.2.2 stats, Debian r-base-core)
//   tests/data/make_stats_reference.py  -> stats_scipy_*.csv  (SciPy 1.10.1, Debian python3-scipy)
// Each failing check prints the call that produced its expected value.
#include <doctest/doctest.h>

#include <cmath>
#include <fstream>
#include <map>
#include <string>
#include <vector>

#include "alphaledger/stats.hpp"

namespace alphaledger {
namespace {

using Row = std::map<std::string, std::string>;

// Reads a reference CSV: '#' lines are comments (the versions), then a header, then rows; fields
// may be double-quoted (RFC 4180).
std::vector<Row> read_reference(const std::string& name) {
  const std::string path = std::string(ALPHALEDGER_TEST_DATA) + "/" + name;
  std::ifstream in(path);
  REQUIRE_MESSAGE(in.good(), "cannot open " << path);
  auto split = [](const std::string& line) {
    std::vector<std::string> out;
    std::string cur;
    bool quoted = false;
    for (std::size_t i = 0; i < line.size(); ++i) {
      const char c = line[i];
      if (quoted) {
        if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
          cur.push_back('"');
          ++i;
        } else if (c == '"')
          quoted = false;
        else
          cur.push_back(c);
      } else if (c == '"') {
        quoted = true;
      } else if (c == ',') {
        out.push_back(cur);
        cur.clear();
      } else {
        cur.push_back(c);
      }
    }
    out.push_back(cur);
    return out;
  };
  std::vector<Row> rows;
  std::vector<std::string> header;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    auto cells = split(line);
    if (header.empty()) {
      header = cells;
      continue;
    }
    REQUIRE_MESSAGE(cells.size() == header.size(), path << ": bad row " << line);
    Row r;
    for (std::size_t i = 0; i < header.size(); ++i) r[header[i]] = cells[i];
    rows.push_back(std::move(r));
  }
  REQUIRE_MESSAGE(!rows.empty(), path << " has no rows");
  return rows;
}

double num(const Row& r, const std::string& key) {
  const std::string& s = r.at(key);
  if (s == "inf") return INFINITY;
  if (s == "-inf") return -INFINITY;
  return std::stod(s);
}
std::uint64_t count(const Row& r, const std::string& key) { return std::stoull(r.at(key)); }

// |actual - expected| <= abs_tol + rel_tol * |expected| (infinities must match exactly).
bool close(double actual, double expected, double rel_tol, double abs_tol = 0.0) {
  if (std::isinf(expected)) return actual == expected;
  return std::fabs(actual - expected) <= abs_tol + rel_tol * std::fabs(expected);
}

Alternative alt(const Row& r) { return *parse_alternative(r.at("alternative")); }

#define CHECK_CLOSE(actual, expected, rel, abs)            \
  CHECK_MESSAGE(close((actual), (expected), (rel), (abs)), \
                #actual " = " << (actual) << ", expected " << (expected))

}  // namespace

// Source: R 4.2.2 prop.test(correct = FALSE), tests/data/stats_r_prop_test.csv. R's X-squared is the
// square of the pooled z; its interval is the Wald interval of the difference, clipped to [-1, 1].
TEST_CASE("compare_proportions: pooled z-test matches R prop.test(correct = FALSE)") {
  for (const Row& r : read_reference("stats_r_prop_test.csv")) {
    INFO("R: " << r.at("call"));
    const double conf = num(r, "confidence");
    auto c = compare_proportions({count(r, "control_n"), count(r, "control_x")},
                                 {count(r, "treatment_n"), count(r, "treatment_x")},
                                 ProportionMethod::kPooled, alt(r), conf);
    REQUIRE(c.ok());
    CHECK_CLOSE(c->statistic * c->statistic, num(r, "x_squared"), 1e-12, 1e-300);
    CHECK((c->statistic >= 0) == (num(r, "estimate") >= 0));
    CHECK_CLOSE(c->p_value, num(r, "p_value"), 1e-9, 0.0);
    CHECK_CLOSE(*c->estimate, num(r, "estimate"), 1e-14, 1e-17);
    CHECK_CLOSE(*c->ci_low, num(r, "ci_low"), 1e-10, 1e-14);
    CHECK_CLOSE(*c->ci_high, num(r, "ci_high"), 1e-10, 1e-14);
    // The unpooled method reports the same Wald interval (R's prop.test interval).
    auto u = compare_proportions({count(r, "control_n"), count(r, "control_x")},
                                 {count(r, "treatment_n"), count(r, "treatment_x")},
                                 ProportionMethod::kUnpooled, alt(r), conf);
    if (u.ok()) {
      CHECK_CLOSE(*u->ci_low, num(r, "ci_low"), 1e-10, 1e-14);
      CHECK_CLOSE(*u->ci_high, num(r, "ci_high"), 1e-10, 1e-14);
    }
  }
}

// Source: SciPy 1.10.1 scipy.stats.chi2_contingency(correction=False), tests/data/stats_scipy_chi2.csv.
TEST_CASE("compare_proportions: pooled z-test matches SciPy chi2_contingency(correction=False)") {
  for (const Row& r : read_reference("stats_scipy_chi2.csv")) {
    INFO("SciPy: " << r.at("call"));
    auto c = compare_proportions({count(r, "control_n"), count(r, "control_x")},
                                 {count(r, "treatment_n"), count(r, "treatment_x")});
    REQUIRE(c.ok());
    CHECK_CLOSE(c->statistic * c->statistic, num(r, "chi2"), 1e-12, 0.0);
    CHECK_CLOSE(c->p_value, num(r, "p_value"), 1e-9, 0.0);
  }
}

// Sources: R 4.2.2 fisher.test (tests/data/stats_r_fisher.csv) and SciPy 1.10.1
// scipy.stats.fisher_exact (tests/data/stats_scipy_fisher.csv). Both count, for the two-sided
// p-value, the tables whose probability is at most the observed one's times (1 + 1e-7).
TEST_CASE("compare_proportions: Fisher's exact test matches R fisher.test and SciPy fisher_exact") {
  for (const char* file : {"stats_r_fisher.csv", "stats_scipy_fisher.csv"}) {
    for (const Row& r : read_reference(file)) {
      INFO(std::string(file) << ": " << r.at("call"));
      auto c = compare_proportions({count(r, "control_n"), count(r, "control_x")},
                                   {count(r, "treatment_n"), count(r, "treatment_x")},
                                   ProportionMethod::kFisher, alt(r));
      REQUIRE(c.ok());
      CHECK_CLOSE(c->p_value, num(r, "p_value"), 1e-9, 0.0);
      CHECK(c->statistic == static_cast<double>(count(r, "treatment_x")));
    }
  }
}

// Source: R 4.2.2 one-sample prop.test(correct = FALSE)$conf.int, the Wilson score interval
// (tests/data/stats_r_wilson.csv). Newcombe's interval for the difference (method fisher) combines
// the arms' Wilson intervals: with two identical arms (estimate 0) its ends are
// -/+ sqrt((p - l)^2 + (u - p)^2), l and u the arm's Wilson ends, so R's ends determine ours. A
// one-sided interval at confidence c uses both Wilson ends at the one-sided quantile: R's "greater"
// row gives that l, its "less" row that u.
TEST_CASE(
    "compare_proportions: the Fisher interval is built from Wilson intervals as R's prop.test gives them") {
  std::map<std::string, Row> by_key;
  const auto rows = read_reference("stats_r_wilson.csv");
  for (const Row& r : rows)
    by_key[r.at("n") + "/" + r.at("x") + "/" + r.at("confidence") + "/" + r.at("alternative")] = r;
  for (const Row& r : rows) {
    const std::string key = r.at("n") + "/" + r.at("x") + "/" + r.at("confidence") + "/";
    const Row& greater = by_key.at(key + "greater");
    const Row& less = by_key.at(key + "less");
    INFO("R: " << r.at("call") << " | " << greater.at("call") << " | " << less.at("call"));
    const std::uint64_t n = count(r, "n"), x = count(r, "x");
    const Alternative a = alt(r);
    auto same = compare_proportions({n, x}, {n, x}, ProportionMethod::kFisher, a, num(r, "confidence"));
    REQUIRE(same.ok());
    const double p = static_cast<double>(x) / static_cast<double>(n);
    const double l = a == Alternative::kTwoSided ? num(r, "ci_low") : num(greater, "ci_low");
    const double u = a == Alternative::kTwoSided ? num(r, "ci_high") : num(less, "ci_high");
    const double half = std::sqrt((p - l) * (p - l) + (u - p) * (u - p));
    CHECK_CLOSE(*same->ci_low, a == Alternative::kLess ? -1.0 : -half, 1e-10, 1e-14);
    CHECK_CLOSE(*same->ci_high, a == Alternative::kGreater ? 1.0 : half, 1e-10, 1e-14);
  }
}

// Source: R 4.2.2 t.test(var.equal = FALSE / TRUE) on the generated data of each row's call
// (tests/data/stats_r_t_test.csv); the summaries were written with 17 significant digits.
TEST_CASE("compare_means: Welch and pooled t-tests match R t.test") {
  for (const Row& r : read_reference("stats_r_t_test.csv")) {
    INFO("R: " << r.at("call"));
    auto c = compare_means({count(r, "control_n"), num(r, "control_mean"), num(r, "control_sd")},
                           {count(r, "treatment_n"), num(r, "treatment_mean"), num(r, "treatment_sd")},
                           r.at("var_equal") == "1", alt(r), num(r, "confidence"));
    REQUIRE(c.ok());
    CHECK_CLOSE(c->statistic, num(r, "statistic"), 1e-12, 0.0);
    CHECK_CLOSE(*c->df, num(r, "df"), 1e-12, 0.0);
    CHECK_CLOSE(c->p_value, num(r, "p_value"), 1e-9, 0.0);
    CHECK_CLOSE(*c->estimate, num(r, "estimate"), 1e-12, 1e-14);
    CHECK_CLOSE(*c->ci_low, num(r, "ci_low"), 1e-10, 1e-12);
    CHECK_CLOSE(*c->ci_high, num(r, "ci_high"), 1e-10, 1e-12);
  }
}

// Source: SciPy 1.10.1 scipy.stats.ttest_ind_from_stats (tests/data/stats_scipy_ttest.csv).
TEST_CASE("compare_means: Welch and pooled t-tests match SciPy ttest_ind_from_stats") {
  for (const Row& r : read_reference("stats_scipy_ttest.csv")) {
    INFO("SciPy: " << r.at("call"));
    auto c = compare_means({count(r, "control_n"), num(r, "control_mean"), num(r, "control_sd")},
                           {count(r, "treatment_n"), num(r, "treatment_mean"), num(r, "treatment_sd")},
                           r.at("var_equal") == "1", alt(r));
    REQUIRE(c.ok());
    CHECK_CLOSE(c->statistic, num(r, "statistic"), 1e-12, 0.0);
    CHECK_CLOSE(c->p_value, num(r, "p_value"), 1e-9, 0.0);
  }
}

// Source: SciPy 1.10.1 scipy.stats norm.sf, norm.isf, t.sf and nct.sf (tests/data/stats_scipy_tails.csv).
TEST_CASE("test_from_z, test_from_t, normal_quantile and means_power match SciPy") {
  for (const Row& r : read_reference("stats_scipy_tails.csv")) {
    INFO("SciPy: " << r.at("call"));
    const std::string& f = r.at("function");
    const double expected = num(r, "value");
    if (f == "normal_upper") {
      CHECK_CLOSE(test_from_z(num(r, "a"), Alternative::kGreater)->p_value, expected, 1e-12, 0.0);
    } else if (f == "normal_upper_quantile") {
      CHECK_CLOSE(-normal_quantile(num(r, "a")), expected, 1e-13, 1e-15);
    } else if (f == "t_upper") {
      CHECK_CLOSE(test_from_t(num(r, "a"), num(r, "b"), Alternative::kGreater)->p_value, expected, 1e-9, 0.0);
    } else if (f == "means_power") {
      // SciPy's nct.sf (cdflib's cumtnc) is accurate to about 1e-8 relative, so the check is
      // looser here; R's power.t.test values below are checked at 1e-9.
      const Alternative a = r.at("d").ends_with("/1") ? Alternative::kGreater : Alternative::kTwoSided;
      const double level = std::stod(r.at("d").substr(0, r.at("d").find('/')));
      CHECK_CLOSE(means_power(num(r, "c"), num(r, "b"), num(r, "a"), level, a), expected, 1e-7, 0.0);
    } else {
      FAIL("unknown function " << f);
    }
  }
}

// Source: R 4.2.2 qnorm (tests/data/stats_r_qnorm.csv).
TEST_CASE("normal_quantile matches R qnorm") {
  for (const Row& r : read_reference("stats_r_qnorm.csv")) {
    INFO("R: " << r.at("call"));
    CHECK_CLOSE(normal_quantile(num(r, "p")), num(r, "quantile"), 1e-14, 1e-15);
  }
}

// Source: R 4.2.2 power.prop.test and power.t.test with tol = 1e-12 (tests/data/stats_r_power.csv).
TEST_CASE("plan_proportions and plan_means match R power.prop.test and power.t.test") {
  for (const Row& r : read_reference("stats_r_power.csv")) {
    INFO("R: " << r.at("call"));
    const std::string& solve = r.at("solve_for");
    const double expected = num(r, "result");
    PlanRequest q;
    q.level = num(r, "sig_level");
    q.alternative = alt(r);
    if (!r.at("power").empty()) q.power = num(r, "power");
    if (!r.at("n").empty()) q.n_per_arm = count(r, "n");
    if (r.at("design") == "proportions") {
      const double p1 = num(r, "p1");
      if (!r.at("p2").empty()) q.min_effect = num(r, "p2") - p1;
      // R solves p2 above p1 for the smallest effect; ours does too for two-sided and greater.
      auto plan = plan_proportions(p1, q);
      REQUIRE(plan.ok());
      if (solve == "n") {
        CHECK_CLOSE(plan->n_exact, expected, 1e-9, 0.0);
        CHECK(plan->n_per_arm == static_cast<std::uint64_t>(std::ceil(expected)));
      } else if (solve == "power") {
        CHECK_CLOSE(plan->power, expected, 1e-9, 0.0);
      } else {
        CHECK_CLOSE(p1 + plan->min_effect, expected, 1e-9, 0.0);
      }
    } else {
      const double sd = num(r, "sd");
      if (!r.at("delta").empty()) q.min_effect = num(r, "delta");
      auto plan = plan_means(sd, q);
      REQUIRE(plan.ok());
      // R's pnt (AS 243) stops at an absolute error of 1e-12; a root in n or delta inherits that
      // divided by the slope of the power, hence 1e-8 relative for solved values.
      if (solve == "n") {
        CHECK_CLOSE(plan->n_exact, expected, 1e-8, 0.0);
        CHECK(plan->n_per_arm == std::max<std::uint64_t>(2, static_cast<std::uint64_t>(std::ceil(expected))));
      } else if (solve == "power") {
        CHECK_CLOSE(plan->power, expected, 1e-9, 1e-12);
      } else {
        CHECK_CLOSE(std::fabs(plan->min_effect), expected, 1e-8, 0.0);
      }
    }
  }
}

}  // namespace alphaledger
