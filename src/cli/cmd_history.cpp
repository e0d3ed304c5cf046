// alphaledger history STREAM [--format csv|jsonl] [--from STEP] [--limit N]
#include <iostream>

#include "alphaledger/forms.hpp"
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {
namespace {

struct HistoryOptions {
  std::string stream;
  std::string format = "csv";
  std::uint64_t from = 1;
  std::optional<std::uint64_t> limit;
};

Status run_history(const HistoryOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.limit && *o.limit == 0) return invalid_input("--limit must be at least 1, got 0");
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  const std::string rule(rule_name(info->config.kind));
  const bool json = g.json || o.format == "jsonl";
  if (!json) out << history_csv_header(rule) << '\n';
  // A page of chain entries at a time: a long history is never held in memory. Decided and
  // abandoned tests are listed (abandoned = 1); a launch still running gives no row.
  constexpr std::size_t kPage = 1024;
  std::uint64_t printed = 0;
  std::uint64_t from = o.from;
  while (true) {
    auto page = (*ledger)->history_page(o.stream, from, kPage);
    if (!page) return page.error();
    for (const auto& r : page->records) {
      if (o.limit && printed >= *o.limit) break;
      out << (json ? history_row_json(r, rule) : history_row_csv(r, rule)) << '\n';
      ++printed;
    }
    if (page->next_step == 0 || (o.limit && printed >= *o.limit)) break;
    from = page->next_step;
  }
  out.flush();
  return {};
}

}  // namespace

void add_history_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<HistoryOptions>();
  CLI::App* sub =
      app.add_subcommand("history", "every decided or abandoned test of a stream, in order, with its launch and decision times");
  sub->add_option("stream", o->stream, "stream name")->required();
  sub->add_option("--format", o->format, "csv or jsonl; default csv")->check(CLI::IsMember({"csv", "jsonl"}));
  sub->add_option("--from", o->from, "start at this step (default 1)");
  sub->add_option("--limit", o->limit, "print at most this many decisions (default all)");
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_history(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
