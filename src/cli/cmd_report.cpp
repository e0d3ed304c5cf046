// alphaledger report STREAM -o FILE.html: one self-contained HTML page for a stream of the ledger
// (docs/reports.md). Reads the ledger without writing anything, like status and history.
#include <fstream>
#include <iostream>
#include <map>
#include <memory>
#include <nlohmann/json.hpp>
#include <unordered_map>

#include "harness/report_columns.hpp"
#include "harness/json_text.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/report.hpp"
#include "cli/command.hpp"

namespace alphaledger::cli {

Status write_replay_report(const std::string& path, const CompactLog& log,
                           const std::vector<Procedure>& procedures, std::optional<double> alpha,
                           const std::string& log_path, std::optional<std::string_view> forced_format) {
  // Each procedure decides the log once more through replay_each, the function the CSV rows come
  // from (same inputs, same bits), and the summary rows come from the same summarize().
  ReplayResult result{procedures, {}};
  ReplayReportData data;
  bool has_bh = false;
  for (const auto& p : procedures) has_bh = has_bh || p.name == "bh";
  if (!has_bh) {  // the hindsight BH answer, at the same alpha, for the report only
    auto bh = resolve_procedures({"bh"}, RuleSpec{.alpha = alpha}, /*allow_offline=*/true);
    if (!bh) return bh.error();
    result.procedures.push_back((*bh)[0]);
    data.extra.push_back("bh");
  }
  for (const Procedure& p : result.procedures) {
    auto& decisions = result.decisions.emplace_back();
    decisions.reserve(log.size());
    replay_each(log, p, [&](std::size_t, const Decision& d) { decisions.push_back(d); });
  }
  const std::vector<ReplaySummary> summaries = summarize(log, result.procedures);
  InputColumns others = read_input_columns(log_path, forced_format, log, kReportKeeps);
  data.input_column_names = std::move(others.names);
  data.input_columns = std::move(others.columns);
  data.log = &log;
  data.result = &result;
  data.summaries = &summaries;
  data.generated_at_ms = system_clock_ms();
  return write_file_atomically(path, render_replay_report(data), "--report");
}

namespace {

struct ReportOptions {
  std::string stream;
  std::string output;
};

Status run_report(const ReportOptions& o, const GlobalOptions& g, std::ostream& out) {
  // The output path first, so that a bad one costs nothing and leaves nothing behind.
  if (auto s = check_output_path(o.output, "-o"); !s) return s;
  auto ledger =
      Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = false, .read_only = true});
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  StreamReportData data;
  data.info = *info;
  data.configuration = describe_config(info->config);
  data.generated_at_ms = system_clock_ms();
  auto history = (*ledger)->history(o.stream);  // decided and abandoned tests, in step order
  if (!history) return history.error();
  auto running = (*ledger)->running(o.stream);
  if (!running) return running.error();
  data.reserved_wealth = reserved_after_each(*history, *running);
  data.running = std::move(*running);
  data.records.reserve(history->size());
  for (auto& r : *history) {
    if (!r.abandoned) data.records.push_back(std::move(r));
  }
  if (auto s = write_file_atomically(o.output, render_stream_report(data), "-o"); !s) return s;
  if (g.json) {
    out << R"({"report":")"
        << "stream"
        << R"(","stream":")" << o.stream << R"(","tests":)" << data.records.size() << "}\n";
  } else {
    out << "wrote " << o.output << ": stream " << o.stream << ", " << data.records.size() << " tests\n";
  }
  return {};
}

}  // namespace

void add_report_command(CLI::App& app, CommandContext& ctx) {
  auto opts = std::make_shared<ReportOptions>();
  CLI::App* sub = app.add_subcommand(
      "report", "write one self-contained HTML page about a stream: charts, configuration, every decision");
  sub->add_option("stream", opts->stream, "the stream's name")->required();
  sub->add_option("-o,--output", opts->output, "the HTML file to write (replaced in one step)")
      ->required()
      ->type_name("FILE");
  sub->footer(
      "The page opens offline (Chart.js is embedded) and holds its numbers as JSON. docs/reports.md\n"
      "says how to read it. Reads the ledger without writing anything.");
  sub->callback(
      [&ctx, opts] { ctx.run = [&ctx, opts] { return run_report(*opts, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
