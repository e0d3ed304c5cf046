// Benchmark: exact and fast evaluation of the deposit rules (LORD++, SAFFRON, ADDIS) on one long
// stream, the figures scripts/bench.sh sets beside the NumPy loop (bench/exact_numpy.py).
//
// The stream is rules_bench's "signals" stream (seed 42): 10% signals with z ~ N(3, 1), uniform
// nulls. For each rule and mode it prints the tests decided, rejections, seconds, tests/s, and for
// exact mode the deposit-terms (sum over tests of the deposits a direct sum would visit: the
// rejections so far plus the initial wealth) and ns per deposit-term. A level hash (FNV-1a over
// the bit patterns) shows that repeated runs give the same bits. Rates are per CPU second of the
// deciding thread (wall seconds are printed too): the machine may be shared. cpu_seconds counts
// the Rule's construction (setup_seconds: the first Rule of a configuration computes its gamma
// table or fits its mixture); tests_per_s, ns_per_test and ns_per_term count the deciding only.
//
// Usage: evaluation_bench [--tests N] [--rules lord++,saffron,addis] [--modes exact,fast]
//                         [--repeat R] [--write-stream FILE] [--write-levels FILE]
//   --repeat: run each case R times and report the fastest run (least CPU time; default 1), the
//             usual way to see through other work on a shared machine
//   --write-stream: the p-values as little-endian float64, for bench/exact_numpy.py
//   --write-levels: LORD++ exact levels as float64 (to compare with the NumPy loop's levels)
// Output lines start with "result" and are key=value pairs, easy to read from a script.
#include <time.h>

#include <algorithm>
#include <bit>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/rules.hpp"

using namespace alphaledger;
using Clock = std::chrono::steady_clock;

namespace {

// The same stream as rules_bench's signal_stream().
std::vector<double> signal_stream(std::size_t n) {
  std::mt19937_64 gen(42);
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    const double kind = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    if (kind < 0.1) {
      const double v = static_cast<double>(gen() >> 11) * 0x1.0p-53;
      const double z = 3.0 + std::sqrt(-2.0 * std::log(1.0 - u)) * std::cos(6.283185307179586 * v);
      x = 0.5 * std::erfc(z / std::sqrt(2.0));
    } else {
      x = u;
    }
  }
  return p;
}

// CPU time of this thread: on a machine shared with other work, wall time overstates the cost.
double cpu_seconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

std::vector<std::string> split(const std::string& s) {
  std::vector<std::string> out;
  std::stringstream in(s);
  std::string item;
  while (std::getline(in, item, ',')) out.push_back(item);
  return out;
}

void write_doubles(const std::string& path, const std::vector<double>& v) {
  std::ofstream f(path, std::ios::binary);
  f.write(reinterpret_cast<const char*>(v.data()), static_cast<std::streamsize>(v.size() * sizeof(double)));
}

}  // namespace

int main(int argc, char** argv) {
  std::size_t n = 100000;
  std::vector<std::string> rules = {"lord++", "saffron", "addis"};
  std::vector<std::string> modes = {"exact", "fast"};
  int repeat = 1;
  std::string stream_file, levels_file;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string flag = argv[i];
    const std::string value = argv[i + 1];
    if (flag == "--tests")
      n = std::strtoull(value.c_str(), nullptr, 10);
    else if (flag == "--rules")
      rules = split(value);
    else if (flag == "--modes")
      modes = split(value);
    else if (flag == "--repeat")
      repeat = std::max(1, std::atoi(value.c_str()));
    else if (flag == "--write-stream")
      stream_file = value;
    else if (flag == "--write-levels")
      levels_file = value;
    else {
      std::fprintf(stderr, "unknown option %s\n", flag.c_str());
      return 2;
    }
  }
  const auto p = signal_stream(n);
  if (!stream_file.empty()) write_doubles(stream_file, p);
  for (const auto& mode : modes) {
    for (const auto& name : rules) {
      auto config = resolve_config(RuleSpec{.rule = name, .evaluation = mode});
      if (!config) {
        std::fprintf(stderr, "%s\n", config.error().message.c_str());
        return 2;
      }
      const bool count_terms = mode == "exact";  // fast mode has no deposit-terms: no cost in its loop
      const bool keep = !levels_file.empty() && name == "lord++" && mode == "exact";
      std::vector<double> levels;
      if (keep) levels.reserve(n);
      double best_seconds = 0, best_wall = 0, best_setup = 0, best_loop = 1e300, terms = 0;
      std::uint64_t hash = 0, rejections = 0;
      for (int run = 0; run < repeat; ++run) {
        levels.clear();
        const double cpu_start = cpu_seconds();
        const auto start = Clock::now();
        Rule rule(*config);  // the first Rule of a configuration computes its table or mixture
        const double setup = cpu_seconds() - cpu_start;
        std::uint64_t h = 0xcbf29ce484222325ULL;
        terms = 0;
        for (std::size_t i = 0; i < n; ++i) {
          if (count_terms) terms += static_cast<double>(rule.rejections() + 1);
          const Outcome o = rule.record(p[i]);
          h = (h ^ std::bit_cast<std::uint64_t>(o.level)) * 0x100000001b3ULL;
          if (keep) levels.push_back(o.level);
        }
        const double wall = std::chrono::duration<double>(Clock::now() - start).count();
        const double seconds = cpu_seconds() - cpu_start;  // with the set-up: a replay pays it
        if (run > 0 && h != hash) {
          std::fprintf(stderr, "%s %s: run %d gave other levels than run 1\n", name.c_str(), mode.c_str(),
                       run + 1);
          return 1;
        }
        hash = h;
        rejections = rule.rejections();
        if (seconds - setup < best_loop) {
          best_loop = seconds - setup;
          best_seconds = seconds;
          best_wall = wall;
          best_setup = setup;
        }
      }
      const double loop = best_loop;
      std::printf(
          "result rule=%s mode=%s tests=%zu rejections=%llu cpu_seconds=%.4f wall_seconds=%.4f "
          "tests_per_s=%.4g",
          name.c_str(), mode.c_str(), n, static_cast<unsigned long long>(rejections), best_seconds, best_wall,
          static_cast<double>(n) / loop);
      std::printf(" setup_seconds=%.4f", best_setup);
      if (mode == "exact") std::printf(" deposit_terms=%.4g ns_per_term=%.3f", terms, 1e9 * loop / terms);
      std::printf(" ns_per_test=%.2f level_hash=%016llx runs=%d\n", 1e9 * loop / static_cast<double>(n),
                  static_cast<unsigned long long>(hash), repeat);
      std::fflush(stdout);
      if (keep) write_doubles(levels_file, levels);
    }
  }
  return 0;
}
