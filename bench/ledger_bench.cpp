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
//   5. decide on the in-memory store: the CPU cost of a decision without any disk, one at a time
//      and in groups of 4096 (memory_throughput below), for LORD++ fast and exact.
//   6. launch-time events (launch_events below): Ledger::launch, the finish of a running test
//      (Ledger::decide of a launched id), abandon and decide, each one synced write, then the same
//      events grouped (Ledger::apply_events, 80 per synced write), with 0, 100 and 10,000 tests
//      already running (LORD++ fast), on RocksDB and on the in-memory store; and the core Rule's
//      launch + finish alone, fast and exact, with the size of the encoded state.
// Prints the set-up, then per measurement: operations, seconds, microseconds per op, ops/s.
//
// Usage: ledger_bench [FOLDER] [SECONDS-PER-MEASUREMENT] [memory]   (defaults: ./ledger-bench.tmp, 3)
// With the word launch last, only the launch-time measurements (6.) run.
// With the word memory last, only the in-memory group measurements run (for profiling). With the
// word group last, the second argument is a number of decisions, and only group commit on RocksDB
// (4096 per synced write) runs: `ledger_bench FOLDER 1000000 group`.
// The folder is created and removed; put it on the disk you want to measure.
#include <fcntl.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/rules.hpp"
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

// CPU time of the whole process (all threads, RocksDB's included; measured around decide_batch
// only): on a loaded machine it says
// what a decision costs when the wall clock cannot.
double cpu_seconds() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

void report_cpu(std::size_t ops, double cpu_secs) {
  std::printf("  CPU time: %.2f us per op (%.0f ops per CPU second)\n",
              1e6 * cpu_secs / static_cast<double>(ops), static_cast<double>(ops) / cpu_secs);
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

std::string bench_id(std::size_t i) {
  std::string s = "exp-";
  s.append(std::to_string(i));
  return s;
}

// The ledger's CPU cost per decision without a disk: decide_batch on the in-memory store, 4096
// decisions per write, with the rule `config` (ids and p-values built before the clock starts).
void memory_batch(const std::vector<double>& p, double seconds, const RuleConfig& config, const char* label) {
  auto ledger = must(Ledger::open(std::make_unique<MemoryStore>()));
  if (!ledger->create_stream("bench", config)) std::exit(1);
  constexpr std::size_t kGroup = 4096;
  std::size_t done = 0;
  double busy = 0;
  double cpu = 0;
  while (busy < seconds) {
    std::vector<TestInput> inputs;
    inputs.reserve(kGroup * 4);
    for (std::size_t k = 0; k < kGroup * 4; ++k, ++done)
      inputs.push_back({bench_id(done), p[done % p.size()]});
    const auto t0 = SteadyClock::now();
    const double cpu0 = cpu_seconds();
    auto r = ledger->decide_batch("bench", inputs, kGroup);
    cpu += cpu_seconds() - cpu0;
    busy += seconds_since(t0);
    if (!r || r->error) {
      std::fprintf(stderr, "ledger_bench: in-memory batch failed\n");
      std::exit(1);
    }
  }
  report(label, done, busy);
  report_cpu(done, cpu);
}

// What the id check of decide_batch costs in RocksDB: one get of an index key per new test,
// which finds nothing. Measured on the ledger the run has filled, after it is closed.
void id_lookups(const std::string& ledger_path, std::size_t decided, double seconds) {
  auto store = open_rocksdb_store(ledger_path, RocksStoreOptions{});
  if (!store) {
    std::fprintf(stderr, "ledger_bench: %s\n", store.error().message.c_str());
    std::exit(1);
  }
  for (const bool present : {false, true}) {
    std::size_t ops = 0;
    const double cpu0 = cpu_seconds();
    const auto t0 = SteadyClock::now();
    while (seconds_since(t0) < seconds) {
      const std::size_t n = present ? (ops * 7919) % decided : decided + ops;
      auto v = (*store)->get("i/bench/" + bench_id(n));
      if (!v || v->has_value() != present) {
        std::fprintf(stderr, "ledger_bench: unexpected id lookup result\n");
        std::exit(1);
      }
      ++ops;
    }
    report(present ? "store get, id present" : "store get, id absent (a new test)", ops, seconds_since(t0));
    report_cpu(ops, cpu_seconds() - cpu0);
  }
}

// Group commit on RocksDB alone, the figure of the target: `total` decisions in groups of
// 4096 per synced write (16,384 per decide_batch call), on a fresh ledger. Wall and process CPU time
// (RocksDB's background flushes and compactions included). For profiling:
//   perf record -g build/bench/ledger_bench /tmp/lb 1000000 group
void group_commit(const std::string& ledger_path, const std::vector<double>& p, std::size_t total) {
  auto ledger = must(Ledger::open(ledger_path));
  if (!ledger->create_stream("bench", lord())) std::exit(1);
  constexpr std::size_t kGroup = 4096;
  std::size_t done = 0;
  double cpu = 0;
  double busy = 0;
  while (done < total) {
    std::vector<TestInput> inputs;
    inputs.reserve(kGroup * 4);
    for (std::size_t k = 0; k < kGroup * 4; ++k, ++done)
      inputs.push_back({bench_id(done), p[done % p.size()]});
    const auto t0 = SteadyClock::now();
    const double cpu0 = cpu_seconds();
    auto r = ledger->decide_batch("bench", inputs, kGroup);
    cpu += cpu_seconds() - cpu0;
    busy += seconds_since(t0);
    if (!r || r->error) {
      std::fprintf(stderr, "ledger_bench: batch failed\n");
      std::exit(1);
    }
  }
  report("decide_batch, 4096 per synced write", done, busy);
  report_cpu(done, cpu);
}

void memory_throughput(const std::vector<double>& p, double seconds) {
  memory_batch(p, seconds, lord(), "decide_batch 4096, in-memory, fast");
  memory_batch(p, seconds, resolve_config({.rule = "lord++", .evaluation = "exact"}).value(),
               "decide_batch 4096, in-memory, exact");
}

// Launch-time events with `running` tests already running: the tests launched before the clock
// starts, then, for `seconds`, in turn: one new launch, the finish of the oldest running test
// (first in, first out), one more launch and its abandon, and one decide of a new id, so the
// number running stays `running` (or one more). Each kind is timed apart; on RocksDB each is one
// synced write. Then the same cycle in groups of 16 cycles (80 events) per Ledger::apply_events,
// one synced write per group (group commit, as `pipe` and `serve` do when requests queue).
void launch_events_on(std::unique_ptr<Ledger> ledger, const RuleConfig& config, std::size_t running,
                      const std::vector<double>& p, double seconds, const char* where) {
  if (!ledger->create_stream("bench", config)) std::exit(1);
  auto must_ok = [](bool ok, const char* what) {
    if (!ok) {
      std::fprintf(stderr, "ledger_bench: %s failed\n", what);
      std::exit(1);
    }
  };
  std::size_t launched = 0, finished = 0;
  const auto t_fill = SteadyClock::now();
  for (; launched < running; ++launched) must_ok(ledger->launch("bench", bench_id(launched)).ok(), "launch");
  const double fill_secs = seconds_since(t_fill);
  double launch_secs = 0, finish_secs = 0, abandon_secs = 0, decide_secs = 0, cpu = 0;
  std::size_t ops = 0, decided = 0;
  auto decide_id = [](std::size_t n) { return "d" + std::to_string(n); };
  auto abandon_id = [](std::size_t n) { return "x" + std::to_string(n); };
  const auto t0 = SteadyClock::now();
  while (ops < 20 || seconds_since(t0) < seconds) {
    const double cpu0 = cpu_seconds();
    auto t = SteadyClock::now();
    must_ok(ledger->launch("bench", bench_id(launched)).ok(), "launch");
    launch_secs += seconds_since(t);
    ++launched;
    t = SteadyClock::now();
    must_ok(ledger->decide("bench", bench_id(finished), p[finished % p.size()]).ok(), "finish");
    finish_secs += seconds_since(t);
    ++finished;
    must_ok(ledger->launch("bench", abandon_id(ops)).ok(), "launch");
    t = SteadyClock::now();
    must_ok(ledger->abandon("bench", abandon_id(ops)).ok(), "abandon");
    abandon_secs += seconds_since(t);
    t = SteadyClock::now();
    must_ok(ledger->decide("bench", decide_id(decided), p[decided % p.size()]).ok(), "decide");
    decide_secs += seconds_since(t);
    ++decided;
    cpu += cpu_seconds() - cpu0;
    ++ops;
  }
  // Grouped: 16 cycles of the same five events per apply_events call.
  constexpr std::size_t kCycles = 16;
  std::size_t grouped_events = 0, groups = 0;
  double grouped_secs = 0, grouped_cpu = 0;
  std::vector<std::string> ids;
  const auto tg = SteadyClock::now();
  while (groups < 5 || seconds_since(tg) < seconds) {
    ids.clear();
    std::vector<EventInput> events;
    ids.reserve(5 * kCycles);
    for (std::size_t c = 0; c < kCycles; ++c, ++ops) {
      ids.push_back(bench_id(launched++));
      ids.push_back(bench_id(finished++));
      ids.push_back(abandon_id(ops));
      ids.push_back(decide_id(decided++));
    }
    for (std::size_t c = 0; c < kCycles; ++c) {
      const std::string* cycle = &ids[4 * c];
      events.push_back({EventType::kLaunch, cycle[0]});
      events.push_back({EventType::kDecide, cycle[1], p[(finished + c) % p.size()]});
      events.push_back({EventType::kLaunch, cycle[2]});
      events.push_back({EventType::kAbandon, cycle[2]});
      events.push_back({EventType::kDecide, cycle[3], p[(decided + c) % p.size()]});
    }
    const double cpu0 = cpu_seconds();
    const auto t = SteadyClock::now();
    auto answers = ledger->apply_events("bench", events);
    grouped_secs += seconds_since(t);
    grouped_cpu += cpu_seconds() - cpu0;
    for (const auto& a : answers) must_ok(a.ok(), "grouped event");
    grouped_events += events.size();
    ++groups;
  }
  auto status = ledger->status("bench");
  must_ok(status.ok() && status->running == running, "status");
  const auto tv = SteadyClock::now();
  auto v = ledger->verify("bench");
  must_ok(v.ok() && v->ok, "verify");
  const double verify_secs = seconds_since(tv);
  char label[96];
  std::printf("%s, %zu running:\n", where, running);
  if (running > 0) {
    std::snprintf(label, sizeof label, "  %zu launches to fill", running);
    report(label, running, fill_secs);
  }
  report("  launch", ops - groups * kCycles, launch_secs);
  report("  finish (decide of a running id)", ops - groups * kCycles, finish_secs);
  report("  abandon", ops - groups * kCycles, abandon_secs);
  report("  decide (new id)", ops - groups * kCycles, decide_secs);
  std::printf("  CPU time: %.1f us per cycle of 5 events (2 launches, finish, abandon, decide)\n",
              1e6 * cpu / static_cast<double>(ops - groups * kCycles));
  report("  grouped, 80 mixed events per synced write (per event)", grouped_events, grouped_secs);
  std::printf("  grouped CPU time: %.1f us per event\n", 1e6 * grouped_cpu / static_cast<double>(grouped_events));
  report("  verify (per chain entry)", v->steps, verify_secs);
  std::fflush(stdout);
}

// The core Rule alone: launch + finish of the oldest running test, with `running` running, and
// the size of the encoded state the ledger stores in the head after every event.
void launch_events_rule(const RuleConfig& config, std::size_t running, const std::vector<double>& p,
                        double seconds, const char* name) {
  Rule rule(config);
  std::vector<std::uint64_t> fifo;
  for (std::size_t k = 0; k < running; ++k) fifo.push_back(rule.launch().launch);
  std::size_t ops = 0, front = 0;
  double spent = 0;
  const auto t0 = SteadyClock::now();
  while (ops < 1000 || seconds_since(t0) < seconds) {
    const auto t = SteadyClock::now();
    for (int k = 0; k < 100; ++k, ++ops) {
      fifo.push_back(rule.launch().launch);
      if (!rule.finish(fifo[front++], p[ops % p.size()])) std::exit(1);
    }
    spent += seconds_since(t);
  }
  char label[96];
  std::snprintf(label, sizeof label, "Rule %s, %zu running, launch+finish", name, running);
  report(label, ops, spent);
  std::printf("  encoded state: %zu bytes with the running tests, %zu bytes without (the head's)\n",
              rule.encode_state().size(), rule.encode_state_without_running().size());
  std::fflush(stdout);
}

void launch_events(const std::string& folder, const std::vector<double>& p, double seconds) {
  const RuleConfig exact = resolve_config({.rule = "lord++", .evaluation = "exact"}).value();
  for (std::size_t running : {0u, 100u, 10000u}) {
    launch_events_rule(lord(), running, p, seconds, "lord++ fast");
    launch_events_rule(exact, running, p, seconds, "lord++ exact");
  }
  for (std::size_t running : {0u, 100u, 10000u})
    launch_events_on(must(Ledger::open(std::make_unique<MemoryStore>())), lord(), running, p, seconds,
                     "in-memory store, lord++ fast");
  for (std::size_t running : {0u, 100u, 10000u}) {
    const std::string path = folder + "/launch-" + std::to_string(running);
    launch_events_on(must(Ledger::open(path)), lord(), running, p, seconds, "RocksDB, lord++ fast");
    std::filesystem::remove_all(path);
  }
}

}  // namespace

int main(int argc, char** argv) {
  const std::string folder = argc > 1 ? argv[1] : "ledger-bench.tmp";
  const double seconds = argc > 2 ? std::atof(argv[2]) : 3.0;
  std::filesystem::remove_all(folder);
  std::filesystem::create_directories(folder);
  const std::string ledger_path = folder + "/ledger";
  const auto p = p_values(2'000'000);
  if (argc > 3 && std::string(argv[3]) == "group") {
    // Here the second argument is the number of decisions, not seconds.
    group_commit(ledger_path, p, static_cast<std::size_t>(seconds));
    std::filesystem::remove_all(folder);
    return 0;
  }
  if (argc > 3 && std::string(argv[3]) == "launch") {
    launch_events(folder, p, seconds);
    std::filesystem::remove_all(folder);
    return 0;
  }
  if (argc > 3 && std::string(argv[3]) == "memory") {
    memory_throughput(p, seconds);
    std::filesystem::remove_all(folder);
    return 0;
  }

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
      double cpu = 0;
      const auto t1 = SteadyClock::now();
      while (seconds_since(t1) < seconds) {
        std::vector<TestInput> inputs;
        inputs.reserve(group * 4);
        for (std::size_t k = 0; k < group * 4; ++k, ++next)
          inputs.push_back({id_of(next), p[next % p.size()]});
        const double cpu0 = cpu_seconds();
        auto r = ledger->decide_batch("bench", inputs, group);
        cpu += cpu_seconds() - cpu0;
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
      report_cpu(done, cpu);
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
    auto ledger = must(Ledger::open(std::make_unique<MemoryStore>()));
    if (!ledger->create_stream("bench", lord())) return 1;
    std::size_t ops = 0;
    const auto t0 = SteadyClock::now();
    while (seconds_since(t0) < seconds) {
      if (!ledger->decide("bench", id_of(ops), p[ops % p.size()])) return 1;
      ++ops;
    }
    report("decide, in-memory store (no disk)", ops, seconds_since(t0));
  }
  id_lookups(ledger_path, next, seconds);
  memory_throughput(p, seconds);
  launch_events(folder, p, seconds);
  std::filesystem::remove_all(folder);
  return 0;
}
