// Hindsight baselines: Benjamini–Hochberg and Storey-BH.
#include <doctest/doctest.h>

#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/offline.hpp"

using namespace alphaledger;

TEST_CASE("BenjaminiHochberg: the worked example of Benjamini & Hochberg (1995)") {
  // Benjamini & Hochberg (1995), JRSS-B 57(1), section 4 example: 15 p-values, q = 0.05,
  // 4 rejections. The p-values are recalled from memory (not verified against the paper).
  const std::vector<double> p = {0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
                                 0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0000};
  const OfflineDecisions d = benjamini_hochberg(p, 0.05);
  CHECK(d.rejections == 4);
  for (std::size_t i = 0; i < p.size(); ++i) CHECK(d.rejected[i] == (i < 4));
  // The step-up line at i = 4 is 4 * 0.05 / 15 (BH 1995 procedure definition).
  CHECK(d.threshold == doctest::Approx(4 * 0.05 / 15).epsilon(1e-15));
}

TEST_CASE("BenjaminiHochberg: decisions match R's p.adjust(method = \"BH\")") {
  // tests/data/bh_reference.csv: made by tests/data/make_bh_reference.R (R 4.2.2, stats::p.adjust).
  // BH at level q rejects exactly the hypotheses whose BH-adjusted p-value is <= q.
  std::ifstream in(std::string(ALPHALEDGER_TEST_DATA) + "/bh_reference.csv");
  REQUIRE(in.good());
  std::map<int, std::vector<std::pair<double, double>>> cases;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line.rfind("case", 0) == 0) continue;
    std::stringstream ss(line);
    std::string c, p, adj;
    std::getline(ss, c, ',');
    std::getline(ss, p, ',');
    std::getline(ss, adj, ',');
    cases[std::stoi(c)].emplace_back(std::stod(p), std::stod(adj));
  }
  REQUIRE(cases.size() == 40);
  std::size_t total_rejections = 0;
  for (const auto& [id, rows] : cases) {
    std::vector<double> p;
    for (const auto& r : rows) p.push_back(r.first);
    for (double q : {0.01, 0.05, 0.1, 0.2}) {
      CAPTURE(id);
      CAPTURE(q);
      const OfflineDecisions d = benjamini_hochberg(p, q);
      for (std::size_t i = 0; i < rows.size(); ++i) {
        // Ties within 1e-12 of q are skipped: R and we may round the product differently.
        if (std::abs(rows[i].second - q) < 1e-12) continue;
        REQUIRE(d.rejected[i] == (rows[i].second <= q));
      }
      total_rejections += d.rejections;
    }
  }
  CHECK(total_rejections > 100);  // the reference exercises real rejections
}

TEST_CASE("StoreyBh: follows the estimator of Storey, Taylor & Siegmund (2004)") {
  // STS (2004) JRSS-B 66(1): pi0 = (1 + #{p > lambda}) / (m (1 - lambda)); BH at alpha / pi0,
  // rejecting only p <= lambda. Here m = 10, lambda = 0.5, #{p > 0.5} = 3, so pi0 = 0.8 and the
  // BH line is i * 0.05 / (10 * 0.8) = i * 0.00625 (arithmetic from the formula).
  const std::vector<double> p = {0.001, 0.008, 0.012, 0.019, 0.03, 0.2, 0.4, 0.6, 0.8, 0.9};
  const OfflineDecisions s = storey_bh(p, 0.05, 0.5);
  CHECK(s.null_proportion == doctest::Approx(0.8));
  // Sorted p against the line: 0.03 <= 5 * 0.00625 = 0.03125 and 0.2 > 6 * 0.00625, so k = 5.
  CHECK(s.rejections == 5);
  // Plain BH on the same data, line i * 0.005: 0.019 <= 0.02 (i = 4) and 0.03 > 0.025 (i = 5), so
  // k = 4. Storey-BH rejects more because pi0 < 1.
  CHECK(benjamini_hochberg(p, 0.05).rejections == 4);
  // pi0 is capped at 1: with every p above lambda, Storey-BH is at most as liberal as BH.
  const OfflineDecisions all_null = storey_bh({0.6, 0.7, 0.8, 0.9}, 0.05, 0.5);
  CHECK(all_null.null_proportion == 1.0);
  CHECK(all_null.rejections == 0);
}

TEST_CASE("BenjaminiHochberg: empty input and all-rejected input") {
  CHECK(benjamini_hochberg({}, 0.05).rejections == 0);
  const OfflineDecisions d = benjamini_hochberg({0.0, 0.0, 0.0}, 0.05);
  CHECK(d.rejections == 3);
}
