// Benchmark: durable decisions per second on one ledger stream, against the raw sync rate of the
// same disk measured in the same run.
//
// What it measures (all in one folder, so on one disk):
//   1. raw fdatasync: append a 64-byte record to a file and fdatasync it, in a loop (RocksDB syncs
//      its write-ahead log with fdatasync by default); also with fsync, for comparison.
//   2. decide: Ledger::decide one test at a time on one stream (LORD++, fast): one synced
//      RocksDB write per decision. Reported as decisions/s and as the ratio to raw fdatasync/s.
//   3. decide_batch: group commit with groups of 16, 256 and 4096 decisions per synced write.
//   4. open: Ledger::open + close of the folder, the fixed cost a one-shot CLI process pays (the
//      first open after the run reported on its own), for writing (as `decide`: a checking
//      read-only open, then the read-write open) and for reading only (as `next`, `status`).
//   5. decide on the in-memory store: the CPU cost of a decision without any disk.
// Prints the set-up, then per measurement: operations, seconds, microseconds per op, ops/s.
//
// Usage: ledger_bench [FOLDER] [SECONDS-PER-MEASUREMENT]   (defaults: ./ledger-bench.tmp, 3)
// The folder is created and removed; put it on the disk you want to measure.
#include <fcntl.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <random>
#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"

using namespace alphaledger;
using SteadyClock = std::chrono::steady_clock;

namespace {

double seconds_since(SteadyClock::time_point t0) {
  return std::chrono::duration<double>(SteadyClock::now() - t0).count();
}

void report(const char* what, std::size_t ops, double secs) {
  std::printf("%-34s %9zu ops %8.3f s %10.1f us/op %11.0f ops/s\n", what, ops, secs,
              1e6 * secs / static_cast<double>(ops), static_cast<double>(ops) / secs);
  std::fflush(stdout);
}

std::vector<double> p_values(std::size_t n) {
  std::mt19937_64 gen(42);
  std::vector<double> p(n);
  for (auto& x : p) {
    const double u = static_cast<double>(gen() >> 11) * 0x1.0p-53;
    x = (gen() % 10 == 0) ? 1e-4 * u : u;  // 10% strong signals, the rest uniform nulls
  }
  return p;
}

// Raw sync rate: write a small record at the end of a file and sync, `seconds` long.
double raw_sync_rate(const std::string& folder, bool full_fsync, double seconds, const char* label) {
  const std::string path = folder + "/raw-sync.bin";
  const int fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (fd < 0) {
    std::perror("open");
    std::exit(1);
  }
  char record[64];
  std::fill(record, record + sizeof record, 'r');
  std::size_t ops = 0;
  const auto t0 = SteadyClock::now();
  while (seconds_since(t0) < seconds) {
    if (::write(fd, record, sizeof record) != static_cast<ssize_t>(sizeof record)) {
      std::perror("write");
      std::exit(1);
    }
    if ((full_fsync ? ::fsync(fd) : ::fdatasync(fd)) != 0) {
      std::perror("sync");
      std::exit(1);
    }
    ++ops;
  }
  const double secs = seconds_since(t0);
  ::close(fd);
  std::filesystem::remove(path);
  report(label, ops, secs);
  return static_cast<double>(ops) / secs;
}

std::unique_ptr<Ledger> must(Result<std::unique_ptr<Ledger>> r) {
  if (!r) {
    std::fprintf(stderr, "ledger_bench: %s\n", r.error().message.c_str());
    std::exit(1);
  }
  return std::move(*r);
}

// Fast evaluation: a fixed-size rule state, so the numbers measure the ledger rather than the
// growth of exact mode's deposit list (rules_bench measures that).
RuleConfig lord() { return resolve_config({.rule = "lord++", .evaluation = "fast"}).value(); }

}  // namespace

int main(int argc, char** argv) {
  const std::string folder = argc > 1 ? argv[1] : "ledger-bench.tmp";
  const double seconds = argc > 2 ? std::atof(argv[2]) : 3.0;
  std::filesystem::remove_all(folder);
  std::filesystem::create_directories(folder);
  const std::string ledger_path = folder + "/ledger";
  const auto p = p_values(2'000'000);

  std::printf("ledger_bench: folder %s (absolute %s), %.1f s per measurement, rule %s\n", folder.c_str(),
              std::filesystem::absolute(folder).c_str(), seconds, describe_config(lord()).c_str());

  const double fdatasync_rate = raw_sync_rate(folder, false, seconds, "raw write+fdatasync (64 B)");
  raw_sync_rate(folder, true, seconds, "raw write+fsync (64 B)");

  std::size_t next = 0;
  auto id_of = [](std::size_t i) {
    std::string s = "exp-";
    s.append(std::to_string(i));
    return s;
  };
  {
    auto ledger = must(Ledger::open(ledger_path));
    if (!ledger->create_stream("bench", lord())) return 1;
    std::size_t ops = 0;
    const auto t0 = SteadyClock::now();
    while (seconds_since(t0) < seconds) {
      auto d = ledger->decide("bench", id_of(next), p[next % p.size()]);
      if (!d) {
        std::fprintf(stderr, "ledger_bench: %s\n", d.error().message.c_str());
        return 1;
      }
      ++next;
      ++ops;
    }
    const double secs = seconds_since(t0);
    report("decide (one synced write each)", ops, secs);
    std::printf("  ratio to raw fdatasync: %.2f (decisions/s divided by fdatasync/s)\n",
                static_cast<double>(ops) / secs / fdatasync_rate);

    for (std::size_t group : {16u, 256u, 4096u}) {
      std::size_t done = 0;
      const auto t1 = SteadyClock::now();
      while (seconds_since(t1) < seconds) {
        std::vector<TestInput> inputs;
        inputs.reserve(group * 4);
        for (std::size_t k = 0; k < group * 4; ++k, ++next)
          inputs.push_back({id_of(next), p[next % p.size()]});
        auto r = ledger->decide_batch("bench", inputs, group);
        if (!r || r->error) {
          std::fprintf(stderr, "ledger_bench: batch failed\n");
          return 1;
        }
        done += inputs.size();
      }
      const double secs2 = seconds_since(t1);
      char label[64];
      std::snprintf(label, sizeof label, "decide_batch, %zu per synced write", group);
      report(label, done, secs2);
      std::printf("  ratio to raw fdatasync: %.1f\n", static_cast<double>(done) / secs2 / fdatasync_rate);
    }
    auto verify_t0 = SteadyClock::now();
    auto v = ledger->verify("bench");
    if (!v || !v->ok) {
      std::fprintf(stderr, "ledger_bench: verify failed\n");
      return 1;
    }
    report("verify (per record)", v->steps, seconds_since(verify_t0));
  }
  {
    // The run above closed its ledger, which moved what it decided from the write-ahead log into
    // a table file (a writer closing with a long log does so); later opens start from there.
    const auto t_first = SteadyClock::now();
    {
      auto ledger = must(Ledger::open(ledger_path));
      if (!ledger->next_level("bench")) return 1;
    }
    report("first open after the run, next, close", 1, seconds_since(t_first));
    std::size_t ops = 0;
    const auto t0 = SteadyClock::now();
    while (ops < 5 || seconds_since(t0) < seconds) {
      auto ledger = must(Ledger::open(ledger_path));
      if (!ledger->next_level("bench")) return 1;
      ++ops;
    }
    report("open + next_level + close", ops, seconds_since(t0));
    ops = 0;
    const auto t_ro = SteadyClock::now();
    while (ops < 5 || seconds_since(t_ro) < seconds) {
      auto ledger =
          must(Ledger::open(ledger_path, RocksStoreOptions{.create_if_missing = false, .read_only = true}));
      if (!ledger->next_level("bench")) return 1;
      ++ops;
    }
    report("read-only open + next_level + close", ops, seconds_since(t_ro));
  }
  {
    MemoryStore mem;
    auto ledger = must(Ledger::open(borrow_store(mem)));
    if (!ledger->create_stream("bench", lord())) return 1;
    std::size_t ops = 0;
    const auto t0 = SteadyClock::now();
    while (seconds_since(t0) < seconds) {
      if (!ledger->decide("bench", id_of(ops), p[ops % p.size()])) return 1;
      ++ops;
    }
    report("decide, in-memory store (no disk)", ops, seconds_since(t0));
  }
  std::filesystem::remove_all(folder);
  return 0;
}
