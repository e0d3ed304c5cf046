// Shared helpers of the simulate tests: SciPy reference values and a one-call simulation.
#pragma once

#include <doctest/doctest.h>

#include <algorithm>
#include <fstream>
#include <map>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/replay.hpp"
#include "alphaledger/simulate.hpp"

namespace simulate_test {

// tests/data/simulate_scipy.csv (made by tests/data/make_simulate_reference.py, SciPy 1.10.1).
inline double scipy_value(const std::string& name) {
  static const std::map<std::string, double> values = [] {
    std::map<std::string, double> out;
    std::ifstream in(std::string(ALPHALEDGER_TEST_DATA) + "/simulate_scipy.csv");
    std::string line;
    while (std::getline(in, line)) {
      if (line.empty() || line[0] == '#' || line.rfind("name,", 0) == 0) continue;
      const auto c1 = line.find(',');
      const auto c2 = line.find(',', c1 + 1);
      out[line.substr(0, c1)] = std::stod(line.substr(c1 + 1, c2 - c1 - 1));
    }
    return out;
  }();
  const auto it = values.find(name);
  REQUIRE_MESSAGE(it != values.end(), "missing reference value " << name << " in simulate_scipy.csv");
  return it->second;
}

inline unsigned test_threads() { return std::max(2u, std::thread::hardware_concurrency()); }

// Resolves the procedures (REQUIRE on failure) and runs the simulation.
inline alphaledger::SimulationResult simulate(const std::vector<std::string>& rules,
                                              const alphaledger::RuleSpec& flags,
                                              const alphaledger::SimulationModel& model, std::uint64_t runs,
                                              std::uint64_t seed, bool keep_runs = false) {
  auto procs = alphaledger::resolve_procedures(rules, flags, true);
  REQUIRE_MESSAGE(procs.ok(), (procs.ok() ? "" : procs.error().message));
  const alphaledger::SimulationPlan plan(*procs);
  alphaledger::SimulationOptions opts;
  opts.runs = runs;
  opts.seed = seed;
  opts.threads = test_threads();
  opts.keep_runs = keep_runs;
  auto r = alphaledger::run_simulation(plan, model, opts);
  REQUIRE_MESSAGE(r.ok(), (r.ok() ? "" : r.error().message));
  return std::move(r).value();
}

inline const alphaledger::ProcedureSummary& row(const alphaledger::SimulationResult& r,
                                                const std::string& rule) {
  for (const auto& s : r.summaries) {
    if (s.rule == rule) return s;
  }
  FAIL("no row for " << rule);
  return r.summaries.front();
}

}  // namespace simulate_test
