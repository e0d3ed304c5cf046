// alphaledger report STREAM -o FILE.html: one self-contained HTML page for a stream of the ledger
// (docs/reports.md). Reads the ledger without writing anything, like status and history.
#include <iostream>
#include <memory>

#include "alphaledger/ledger.hpp"
#include "alphaledger/report.hpp"
#include "cli/command.hpp"

namespace alphaledger::cli {

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
  auto tests = write_stream_report(**ledger, o.stream, o.output, "-o");
  if (!tests) return tests.error();
  if (g.json) {
    out << R"({"report":")"
        << "stream"
        << R"(","stream":")" << o.stream << R"(","tests":)" << *tests << "}\n";
  } else {
    out << "wrote " << o.output << ": stream " << o.stream << ", " << *tests << " tests\n";
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
