// alphaledger close STREAM
#include <iostream>

#include "alphaledger/forms.hpp"
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {
namespace {

struct CloseOptions {
  std::string stream;
};

Status run_close(const CloseOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto closing = (*ledger)->close_stream(o.stream);
  if (!closing) return closing.error();
  const StreamInfo& info = closing->info;
  if (g.json) {
    out << stream_closed_json(info, closing->newly_closed, closing->closing_hash) << '\n';
  } else if (closing->newly_closed) {
    out << "closed stream " << o.stream << " at " << format_timestamp(*info.closed_at_ms) << " (tests "
        << info.tests << ", rejections " << info.rejections << "); it takes no more tests\n"
        << "closing hash " << closing->closing_hash << " (keep it: verify " << o.stream
        << " --expect closed:HASH)\n";
  } else {
    out << "stream " << o.stream << " is already closed (since " << format_timestamp(*info.closed_at_ms)
        << "); nothing changed\n";
  }
  return {};
}

}  // namespace

void add_close_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<CloseOptions>();
  CLI::App* sub = app.add_subcommand(
      "close", "close a stream: it takes no more tests; its history stays readable and verifiable");
  sub->add_option("stream", o->stream, "stream name")->required();
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_close(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
