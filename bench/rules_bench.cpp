// Benchmark: tests decided per second by each online rule, exact and fast evaluation.
//
// What it measures:
//   1. "signals": a stream of N p-values (default 10^7), 10% signals with z ~ N(3, 1), nulls
//      uniform; each rule decides the whole stream (fast mode), or as much of it as fits in the
//      time budget (exact mode, whose cost per test grows with the number of rejections).
//   2. "rejection-heavy": a stream where every 5th test is a strong signal (p = 1e-12), so exact
//      mode accumulates 10^5+ deposits; reports the rate over time as the deposit list grows.
// Prints the set-up, then per rule and mode: tests decided, rejections, ns per test, tests/s.
//
// Usage: rules_bench [N] [seconds-per-exact-run]   (defaults 10000000 and 20)
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "alphaledger/rules.hpp"

using namespace alphaledger;
using Clock = std::chrono::steady_clock;

namespace {

std::vector<double> signal_stream(std::size_t n) {
  std::mt19937_64 gen(42);
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    const double kind = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    if (kind < 0.1) {
      // z = 3 + N(0,1) via the inverse of a uniform through erfc (approximate is fine here).
      const double v = static_cast<double>(gen() >> 11) * 0x1.0p-53;
      const double z = 3.0 + std::sqrt(-2.0 * std::log(1.0 - u)) * std::cos(6.283185307179586 * v);
      x = 0.5 * std::erfc(z / std::sqrt(2.0));
    } else {
      x = u;
    }
  }
  return p;
}

void run(const char* label, const std::string& rule, const char* eval, const std::vector<double>& p,
         double seconds) {
  RuleSpec spec{.rule = rule};
  if (eval != nullptr) spec.evaluation = eval;
  auto config = resolve_config(spec);
  if (!config) {
    std::fprintf(stderr, "%s\n", config.error().message.c_str());
    std::exit(2);
  }
  Rule r(*config);
  const auto start = Clock::now();
  std::size_t i = 0;
  double sink = 0;
  for (; i < p.size(); ++i) {
    sink += r.record(p[i]).level;
    if ((i & 0x3fff) == 0 && std::chrono::duration<double>(Clock::now() - start).count() > seconds) break;
  }
  const double elapsed = std::chrono::duration<double>(Clock::now() - start).count();
  std::printf("%-16s %-16s %-6s %12zu %10llu %10.1f %14.0f%s\n", label, rule.c_str(), eval ? eval : "-", i,
              static_cast<unsigned long long>(r.rejections()), 1e9 * elapsed / static_cast<double>(i),
              static_cast<double>(i) / elapsed, sink < 0 ? "!" : "");
}

}  // namespace

int main(int argc, char** argv) {
  const std::size_t n = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 10000000;
  const double seconds = argc > 2 ? std::atof(argv[2]) : 20.0;
  std::printf("rules_bench: N = %zu, exact runs capped at %.0f s, alpha = 0.05, default parameters\n", n, seconds);
  const auto p = signal_stream(n);
  std::printf("%-16s %-16s %-6s %12s %10s %10s %14s\n", "stream", "rule", "mode", "tests", "rejections", "ns/test", "tests/s");
  for (const char* rule : {"alpha-spending", "alpha-investing", "lond"}) run("signals", rule, nullptr, p, 1e9);
  for (const char* rule : {"lord++", "saffron", "addis"}) {
    run("signals", rule, "fast", p, 1e9);
    run("signals", rule, "exact", p, seconds);
  }
  std::vector<double> heavy(std::min<std::size_t>(n, 2000000));
  for (std::size_t i = 0; i < heavy.size(); ++i) heavy[i] = i % 5 == 0 ? 1e-12 : 0.7;
  for (const char* rule : {"lord++", "saffron", "addis"}) {
    run("rejection-heavy", rule, "fast", heavy, 1e9);
    run("rejection-heavy", rule, "exact", heavy, seconds);
  }
  return 0;
}
