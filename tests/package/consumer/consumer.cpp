// Uses the installed public rules API and version header; prints what the package test checks.
#include <alphaledger/rules.hpp>
#include <alphaledger/version.hpp>

#include <cmath>
#include <cstdio>

int main() {
  std::printf("version %s %d.%d.%d\n", ALPHALEDGER_VERSION_STRING, ALPHALEDGER_VERSION_MAJOR,
              ALPHALEDGER_VERSION_MINOR, ALPHALEDGER_VERSION_PATCH);
  auto config = alphaledger::resolve_config(alphaledger::RuleSpec{.rule = "lord++", .alpha = 0.05});
  if (!config) {
    std::printf("resolve_config failed\n");
    return 1;
  }
  alphaledger::Rule rule(*config);
  // docs/methods.md 14.3 (LORD++, W0 = alpha/2, JM sequence), rows 1-3: p-values and levels.
  const double p_values[] = {0.0004, 0.0012, 0.36};
  for (int t = 0; t < 3; ++t) {
    const double level = rule.next_level();
    const alphaledger::Outcome outcome = rule.record(p_values[t]);
    std::printf("level %d %.10g %s\n", t + 1, level, outcome.rejected ? "R" : ".");
  }
  return 0;
}
