// Benchmark: how long `simulate` takes (docs/simulate.md; issue goal: 1,000 runs of 10,000 tests
// for all six online rules in well under a minute on 2 cores).
//
// What it measures (each case: wall time for the whole simulation, then per run and per decision):
//   1. "six online, fast": the six online rules, lord++/saffron/addis in fast evaluation (simulate's
//      default), 1,000 runs x 10,000 tests, on every core; then on one thread.
//   2. "all eight, fast": the same plus the hindsight baselines bh and storey-bh (simulate's default
//      rule list).
//   3. "three deposit rules, exact": lord++, saffron and addis in exact evaluation, on fewer runs,
//      to show why simulate defaults to fast (exact cost per test grows with the rejections).
// Model: simulate's defaults (non-null share 0.1, effect 3, uniform nulls, independent), seed 1.
//
// Usage: simulate_bench [runs] [tests]   (defaults 1000 and 10000)
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/replay.hpp"
#include "alphaledger/simulate.hpp"

using namespace alphaledger;
using Clock = std::chrono::steady_clock;

namespace {

void run_case(const char* label, const std::vector<std::string>& rules, const char* evaluation,
              std::uint64_t runs, std::uint64_t tests, unsigned threads) {
  auto procs = resolve_procedures(rules, RuleSpec{.evaluation = evaluation}, true);
  if (!procs) {
    std::fprintf(stderr, "%s\n", procs.error().message.c_str());
    std::exit(1);
  }
  const SimulationPlan plan(*procs);
  SimulationModel model;
  model.tests = tests;
  const auto start = Clock::now();
  auto r = run_simulation(plan, model, {.runs = runs, .seed = 1, .threads = threads});
  const double seconds = std::chrono::duration<double>(Clock::now() - start).count();
  if (!r) {
    std::fprintf(stderr, "%s\n", r.error().message.c_str());
    std::exit(1);
  }
  const double decisions =
      static_cast<double>(runs) * static_cast<double>(tests) * static_cast<double>(rules.size());
  std::printf(
      "%-28s %2u thread%s %6llu runs x %6llu tests x %zu rules: %8.2f s  %8.2f ms/run  %6.1f ns/decision  "
      "%.3g decisions/s\n",
      label, threads, threads == 1 ? " " : "s", static_cast<unsigned long long>(runs),
      static_cast<unsigned long long>(tests), rules.size(), seconds,
      1e3 * seconds / static_cast<double>(runs), 1e9 * seconds / decisions, decisions / seconds);
}

}  // namespace

int main(int argc, char** argv) {
  const std::uint64_t runs = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 1000;
  const std::uint64_t tests = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 10000;
  const unsigned cores = std::max(1u, std::thread::hardware_concurrency());
  std::printf(
      "simulate_bench: model = simulate defaults (share 0.1, effect 3, uniform nulls, independent), seed 1, "
      "%u cores\n",
      cores);
  const std::vector<std::string> online = {"alpha-spending", "alpha-investing", "lond",
                                           "lord++",         "saffron",         "addis"};
  std::vector<std::string> all = online;
  all.push_back("bh");
  all.push_back("storey-bh");
  run_case("six online, fast", online, "fast", runs, tests, cores);
  run_case("six online, fast", online, "fast", runs, tests, 1);
  run_case("all eight, fast", all, "fast", runs, tests, cores);
  const std::uint64_t exact_runs = std::max<std::uint64_t>(1, runs / 50);
  run_case("three deposit rules, exact", {"lord++", "saffron", "addis"}, "exact", exact_runs, tests, cores);
  run_case("three deposit rules, fast", {"lord++", "saffron", "addis"}, "fast", exact_runs, tests, cores);
  return 0;
}
