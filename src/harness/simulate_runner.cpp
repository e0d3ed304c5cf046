// Spreading simulation runs over threads (include/alphaledger/simulate.hpp). The result depends
// only on (plan, model, runs, seed): runs are cut into chunks (chunk_size() runs each, a function of
// the number of runs only), each chunk is summed in run order into its own slot, and the slots are
// merged in chunk order at the end.
#include <algorithm>
#include <atomic>
#include <mutex>
#include <thread>

#include "alphaledger/simulate.hpp"

namespace alphaledger {

std::uint64_t runs_per_chunk(std::uint64_t runs) {
  return std::max(kRunsPerChunk, (runs + kMaxChunks - 1) / kMaxChunks);
}

Result<SimulationResult> run_simulation(const SimulationPlan& plan, const SimulationModel& model,
                                        const SimulationOptions& options) {
  if (auto s = validate_model(model); !s) return s.error();
  if (auto s = validate_peeking(plan.peeking()); !s) return s.error();
  if (options.runs < 1 || options.runs > 100'000'000) {
    return invalid_field("runs",
                         "must be a whole number in [1, 100000000], got " + std::to_string(options.runs));
  }
  if (options.threads < 1 || options.threads > 1024) {
    return invalid_field("threads",
                         "must be a whole number in [1, 1024], got " + std::to_string(options.threads));
  }
  const std::size_t procs = plan.procedures().size();
  const std::uint64_t per_chunk = runs_per_chunk(options.runs);
  const std::uint64_t chunks = (options.runs + per_chunk - 1) / per_chunk;
  std::vector<std::vector<MetricTotals>> chunk_totals(chunks, std::vector<MetricTotals>(procs));
  SimulationResult result;
  if (options.keep_runs) result.runs.assign(options.runs, {});

  std::atomic<std::uint64_t> next_chunk{0};
  std::mutex progress_mutex;
  std::uint64_t finished = 0;

  const StreamNeeds needs = plan.needs();
  auto worker = [&] {
    SimulatedStream stream;
    while (true) {
      const std::uint64_t c = next_chunk.fetch_add(1);
      if (c >= chunks) return;
      const std::uint64_t first = c * per_chunk;
      const std::uint64_t last = std::min(options.runs, first + per_chunk);
      for (std::uint64_t run = first; run < last; ++run) {
        generate_stream(model, options.seed, run, stream, needs);
        std::vector<RunTally> tallies = plan.decide(stream);
        for (std::size_t i = 0; i < procs; ++i) chunk_totals[c][i].add(tallies[i]);
        if (options.keep_runs) result.runs[run] = std::move(tallies);
      }
      if (options.progress) {
        std::lock_guard<std::mutex> lock(progress_mutex);
        finished += last - first;
        options.progress(finished);
      }
    }
  };

  const unsigned workers = static_cast<unsigned>(std::min<std::uint64_t>(options.threads, chunks));
  if (workers <= 1) {
    worker();
  } else {
    std::vector<std::thread> pool;
    pool.reserve(workers);
    for (unsigned i = 0; i < workers; ++i) pool.emplace_back(worker);
    for (auto& th : pool) th.join();
  }

  result.totals.assign(procs, MetricTotals{});
  for (const auto& chunk : chunk_totals) {
    for (std::size_t i = 0; i < procs; ++i) result.totals[i].merge(chunk[i]);
  }
  for (std::size_t i = 0; i < procs; ++i) {
    result.summaries.push_back(summarize_totals(plan.procedures()[i], result.totals[i], model.tests));
  }
  return result;
}

}  // namespace alphaledger
