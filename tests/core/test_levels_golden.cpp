// Levels must not change: every level, decision and wealth of the rules on seeded random streams,
// compared bit for bit with tests/data/levels_golden.txt.
//
// The ledger stores each level it granted and `verify` replays the stream through a fresh Rule,
// so a change in the last bit of any level would make old streams fail to verify. This test pins
// the exact arithmetic of exact and fast evaluation: any speed-up must keep it.
//
// Source of the numbers: the build itself, at commit 80c05c2 (before the evaluation was
// rewritten for speed). They were written by this very test:
//   ALPHALEDGER_WRITE_GOLDEN=tests/data/levels_golden.txt build/tests/test_core -tc="*golden*"
// Each line of the file: configuration, stream, tests, rejections, a 64-bit FNV-1a hash over the
// bit patterns of every (level, decision, wealth), the final wealth and every 250th level as hex
// floats (so a mismatch says roughly where it starts).
#include <doctest/doctest.h>

#include <bit>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/rules.hpp"
#include "core/rules_internal.hpp"

using namespace alphaledger;

namespace {

// splitmix64 (Steele, Lea & Flood 2014): a fixed, portable sequence, no library distributions.
struct SplitMix {
  std::uint64_t state;
  std::uint64_t next() {
    std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  double uniform() { return static_cast<double>(next() >> 11) * 0x1.0p-53; }
};

// Mixed p-values built with exactly rounded operations only (no libm): a share of strong signals
// u^8, uniform nulls, and conservative nulls sqrt(u) (which ADDIS discards when above tau).
std::vector<double> mixed_stream(std::uint64_t seed, std::size_t n, double signal_share) {
  SplitMix gen{seed};
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = gen.uniform();
    const double kind = gen.uniform();
    if (kind < signal_share) {
      const double u2 = u * u;
      const double u4 = u2 * u2;
      x = u4 * u4;
    } else if (kind < signal_share + (1 - signal_share) / 2) {
      x = u;
    } else {
      x = std::sqrt(u);
    }
  }
  return p;
}

// A long stream with a strong signal every 997th test: crosses lag 65,536 (the old table's end)
// with few deposits, so it stays cheap for every evaluation.
std::vector<double> sparse_stream(std::size_t n) {
  SplitMix gen{99};
  std::vector<double> p(n);
  for (std::size_t i = 0; i < n; ++i) p[i] = i % 997 == 5 ? 1e-9 : 0.02 + 0.98 * gen.uniform();
  return p;
}

struct Case {
  std::string name;
  RuleSpec spec;
};

std::vector<Case> cases() {
  auto s = [](std::string rule, std::optional<std::string> eval = {},
              std::optional<std::string> spending = {}, std::optional<double> w0 = {}) {
    RuleSpec r{.rule = std::move(rule)};
    r.evaluation = std::move(eval);
    r.spending = std::move(spending);
    r.initial_wealth = w0;
    return r;
  };
  return {
      {"lord++/exact", s("lord++", "exact")},
      {"lord++/fast", s("lord++", "fast")},
      {"saffron/exact", s("saffron", "exact")},
      {"saffron/fast", s("saffron", "fast")},
      {"addis/exact", s("addis", "exact")},
      {"addis/fast", s("addis", "fast")},
      {"lond", s("lond")},
      {"alpha-spending", s("alpha-spending")},
      {"alpha-investing", s("alpha-investing")},
      {"lord++/exact/power:1.6", s("lord++", "exact", "power:1.6")},
      {"lord++/fast/power:1.6", s("lord++", "fast", "power:1.6")},
      {"saffron/exact/jm", s("saffron", "exact", "jm")},
      {"saffron/fast/jm", s("saffron", "fast", "jm")},
      {"addis/exact/jm", s("addis", "exact", "jm")},
      {"addis/fast/jm", s("addis", "fast", "jm")},
      {"lord++/exact/power-shift:2/w0=0.01", s("lord++", "exact", "power-shift:2", 0.01)},
      {"lord++/exact/jm/w0=alpha", s("lord++", "exact", "jm", 0.05)},
      {"lord++/fast/jm/w0=alpha", s("lord++", "fast", "jm", 0.05)},
  };
}

std::string hex(double v) {
  char buf[64];
  std::snprintf(buf, sizeof buf, "%a", v);
  return buf;
}

// One line of the golden file for a rule run over a stream.
std::string run_line(const Case& c, const std::string& stream_name, const std::vector<double>& p) {
  auto config = resolve_config(c.spec);
  REQUIRE(config.ok());
  Rule rule(*config);
  std::uint64_t hash = 0xcbf29ce484222325ULL;  // FNV-1a 64
  auto mix = [&](std::uint64_t v) {
    for (int i = 0; i < 8; ++i) {
      hash ^= (v >> (8 * i)) & 0xff;
      hash *= 0x100000001b3ULL;
    }
  };
  std::ostringstream samples;
  for (std::size_t i = 0; i < p.size(); ++i) {
    const Outcome o = rule.record(p[i]);
    mix(std::bit_cast<std::uint64_t>(o.level));
    mix(o.rejected ? 1 : 0);
    mix(std::bit_cast<std::uint64_t>(o.wealth));
    if (i % 250 == 0) samples << ' ' << hex(o.level);
  }
  char h[32];
  std::snprintf(h, sizeof h, "%016llx", static_cast<unsigned long long>(hash));
  std::ostringstream line;
  line << c.name << ' ' << stream_name << ' ' << p.size() << ' ' << rule.rejections() << ' ' << h << ' '
       << hex(rule.wealth()) << samples.str();
  return line.str();
}

std::vector<std::string> all_lines() {
  std::vector<std::string> lines;
  const std::vector<std::pair<std::string, std::vector<double>>> streams = {
      {"mixed-1", mixed_stream(1, 3000, 0.2)},
      {"mixed-2", mixed_stream(2, 3000, 0.3)},
      {"mixed-3", mixed_stream(3, 3000, 0.1)},
  };
  for (const auto& c : cases())
    for (const auto& [name, p] : streams) lines.push_back(run_line(c, name, p));
  const auto sparse = sparse_stream(70000);
  for (const auto& c : cases()) {
    if (c.name.find("w0=") != std::string::npos) continue;
    lines.push_back(run_line(c, "sparse-70000", sparse));
  }
  return lines;
}

}  // namespace

namespace {

void check_against_golden(const std::vector<std::string>& lines) {
  std::ifstream in(std::string(ALPHALEDGER_TEST_DATA) + "/levels_golden.txt");
  REQUIRE(in.good());
  std::map<std::string, std::string> want;  // "configuration stream" -> whole line
  std::string l;
  while (std::getline(in, l)) {
    if (l.empty() || l[0] == '#') continue;
    std::istringstream is(l);
    std::string config, stream;
    is >> config >> stream;
    want[config + ' ' + stream] = l;
  }
  CHECK(want.size() == lines.size());
  for (const auto& got : lines) {
    std::istringstream is(got);
    std::string config, stream;
    is >> config >> stream;
    CAPTURE(config);
    CAPTURE(stream);
    const auto it = want.find(config + ' ' + stream);
    REQUIRE(it != want.end());
    CHECK(got == it->second);
  }
}

}  // namespace

TEST_CASE("Levels golden: every rule and evaluation is bit-identical to the recorded levels") {
  const auto lines = all_lines();
  if (const char* out = std::getenv("ALPHALEDGER_WRITE_GOLDEN"); out != nullptr) {
    std::ofstream f(out);
    f << "# written by tests/core/test_levels_golden.cpp; see its header\n";
    for (const auto& l : lines) f << l << '\n';
    MESSAGE("wrote " << lines.size() << " lines to " << std::string(out));
    return;
  }
  check_against_golden(lines);
}

// Fast mode's kernels come in a baseline and an AVX2 version, picked by the processor. Both must
// give the recorded bits, so that a stream verifies on any x86-64 machine (and elsewhere). On a
// machine without AVX2 both runs take the baseline kernels.
TEST_CASE("Levels golden: the baseline fast kernels give the recorded bits too") {
  rules_detail::use_baseline_kernels(true);
  const auto lines = all_lines();
  rules_detail::use_baseline_kernels(false);
  check_against_golden(lines);
}
