// Check tables of docs/methods.md section 14 (alpha = 0.05, p-value stream P below). The values there
// were computed by the literal transcriptions in docs/methods.md Appendix A of each paper's display;
// each TEST_CASE names the paper and display it follows. Levels to 1e-9 relative, decisions exact.
#include <doctest/doctest.h>

#include <array>
#include <cmath>
#include <vector>

#include "alphaledger/rules.hpp"

using namespace alphaledger;

namespace {

const std::vector<double> kStream = {0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100};

struct Row {
  double level;
  bool rejected;
};

void check_table(const RuleSpec& spec, const std::vector<Row>& rows) {
  auto config = resolve_config(spec);
  REQUIRE(config.ok());
  Rule rule(*config);
  for (std::size_t i = 0; i < rows.size(); ++i) {
    CAPTURE(i + 1);
    const Outcome o = rule.record(kStream[i]);
    CHECK(o.step == i + 1);
    CHECK(std::abs(o.level - rows[i].level) <= 1e-9 * rows[i].level);
    CHECK(o.rejected == rows[i].rejected);
  }
}

}  // namespace

// Online alpha-spending, level alpha*gamma_t (Foster & Stine 2008 contrast; Tian & Ramdas 2021),
// gamma_j = j^-1.6 / zeta(1.6): docs/methods.md 14.1.
TEST_CASE("AlphaSpending: docs/methods.md 14.1 check table") {
  check_table({.rule = "alpha-spending"},
              {{0.02187450829, true}, {0.007215896683, true}, {0.003771762097, false},
               {0.002380358189, true}, {0.001665659754, false}, {0.001244217481, false},
               {0.0009722577987, false}, {0.0007852253652, false}, {0.0006503547017, false},
               {0.0005494628057, false}});
}

// LOND, Javanmard & Montanari (2018) Annals of Statistics 46(2), alpha_t = beta_t (D(t-1)+1),
// beta_t = alpha * gamma^JM_t with C = 0.079081966722: docs/methods.md 14.2.
TEST_CASE("Lond: docs/methods.md 14.2 check table") {
  check_table({.rule = "lond"},
              {{0.002740772113, true}, {0.001192062575, false}, {0.001015304167, false},
               {0.0008443650547, false}, {0.0007158465982, false}, {0.0006192613932, false},
               {0.0005448529171, false}, {0.0004860376032, false}, {0.0004384832784, false},
               {0.0003992849318, false}});
}

// LORD++, Ramdas, Yang, Wainwright & Jordan (2017) NeurIPS, the LORD++ display (docs/methods.md 5.2),
// W0 = alpha/2, JM gamma: docs/methods.md 14.3.
TEST_CASE("LordPlusPlus: docs/methods.md 14.3 check table") {
  check_table({.rule = "lord++"},
              {{0.001370386057, true}, {0.0016684017, true}, {0.003292613799, false},
               {0.001060948593, true}, {0.00363847711, false}, {0.001351990812, false},
               {0.00115660396, false}, {0.000989535854, false}, {0.0008614799781, false},
               {0.0007620915508, false}});
}

// SAFFRON, Ramdas, Zrnic, Wainwright & Jordan (2018) ICML, constant-lambda display (docs/methods.md 6),
// W0 = alpha/2, lambda = 1/2, gamma_j = j^-1.6/zeta(1.6): docs/methods.md 14.4.
TEST_CASE("Saffron: docs/methods.md 14.4 check table") {
  check_table({.rule = "saffron"},
              {{0.005468627072, true}, {0.01093725414, true}, {0.02187450829, false},
               {0.02187450829, true}, {0.03281176243, false}, {0.01082384502, true},
               {0.02176109917, false}, {0.02176109917, true}, {0.03269835331, false},
               {0.03269835331, true}});
}

// ADDIS, Tian & Ramdas (2019) NeurIPS, the ADDIS display (docs/methods.md 7), W0 = alpha/2,
// lambda = 1/4, tau = 1/2, gamma_j = (j+1)^-1.6/(zeta(1.6)-1): docs/methods.md 14.5.
TEST_CASE("Addis: docs/methods.md 14.5 check table") {
  check_table({.rule = "addis"},
              {{0.001603504562, true}, {0.003207009124, true}, {0.006414018248, false},
               {0.003352618805, true}, {0.006559627929, false}, {0.006559627929, true},
               {0.009766637053, false}, {0.009766637053, true}, {0.01297364618, false},
               {0.007144765162, false}});
}

// ADDIS with tau = 1 reduces to SAFFRON (Tian & Ramdas 2019, section on special cases; docs/methods.md
// 7 "Consistency check"): identical levels, bit for bit, with the same gamma.
TEST_CASE("Addis: tau = 1 reproduces SAFFRON exactly") {
  auto a = resolve_config({.rule = "addis", .candidate_threshold = 0.5, .discard_threshold = 1.0,
                           .spending = "power:1.6"});
  auto s = resolve_config({.rule = "saffron"});
  REQUIRE(a.ok());
  REQUIRE(s.ok());
  Rule ra(*a), rs(*s);
  for (double p : kStream) {
    const Outcome oa = ra.record(p), os = rs.record(p);
    CHECK(oa.level == os.level);
    CHECK(oa.rejected == os.rejected);
  }
}

// Alpha-investing, Foster & Stine (2008) JRSS-B 70(2) wealth dynamics (docs/methods.md 2), W(0) =
// alpha(1-alpha), payout alpha, policy W/(1+j-k*): docs/methods.md 14.6 (levels and wealth).
TEST_CASE("AlphaInvesting: docs/methods.md 14.6 check table with wealth") {
  auto config = resolve_config({.rule = "alpha-investing"});
  REQUIRE(config.ok());
  Rule rule(*config);
  const std::vector<std::array<double, 2>> level_wealth = {
      {0.02375, 0.0975},          {0.04875, 0.1475},          {0.07375, 0.06787786775},
      {0.02262595592, 0.1178778677}, {0.05893893387, 0.05524757095}, {0.01841585698, 0.105247571},
      {0.05262378548, 0.04970069879}, {0.0165668996, 0.09970069879}, {0.0498503494, 0.04723491157},
      {0.01574497052, 0.09723491157}};
  const std::vector<bool> rejected = {true, true, false, true, false, true, false, true, false, true};
  for (std::size_t i = 0; i < kStream.size(); ++i) {
    CAPTURE(i + 1);
    const Outcome o = rule.record(kStream[i]);
    CHECK(std::abs(o.level - level_wealth[i][0]) <= 1e-9 * level_wealth[i][0]);
    CHECK(std::abs(o.wealth - level_wealth[i][1]) <= 1e-9 * level_wealth[i][1]);
    CHECK(o.rejected == rejected[i]);
  }
}

// docs/methods.md 14.7: a more aggressive gamma_j = j^-1.6/zeta(1.6) for LORD++ (Ramdas et al. 2017)
// and LOND (Javanmard & Montanari 2018), exercising many rejection terms.
TEST_CASE("LordPlusPlus and Lond: docs/methods.md 14.7 regression vectors") {
  check_table({.rule = "lord++", .spending = "power:1.6"},
              {{0.01093725414, true}, {0.01454520249, true}, {0.02736833768, false},
               {0.01029195683, true}, {0.02766927936, false}, {0.01105119349, true},
               {0.02842016778, false}, {0.01171921393, true}, {0.02900197797, false},
               {0.01222560647, true}});
  check_table({.rule = "lond", .spending = "power:1.6"},
              {{0.02187450829, true}, {0.01443179337, true}, {0.01131528629, false},
               {0.007141074567, true}, {0.006662639018, false}, {0.004976869924, true},
               {0.004861288993, false}, {0.003926126826, true}, {0.00390212821, false},
               {0.003296776834, false}});
}
