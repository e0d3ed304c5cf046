// alphaledger verify STREAM [--at-step STEP] [--expect STEP:HASH ...]
#include <iostream>

#include "alphaledger/forms.hpp"
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {
namespace {

struct VerifyOptions {
  std::string stream;
  std::optional<std::uint64_t> at_step;
  std::vector<std::string> expect;
};

// The text report of a verify that passed.
void print_verified(const VerifyOptions& o, const VerifyReport& report, const std::optional<ChainHashAt>& at,
                    std::ostream& out) {
  out << "ok: stream " << o.stream << ", " << report.steps
      << " records; hash chain, levels, decisions, wealth and rule state all match a replay\n"
      << "ends at step " << report.steps << ", chain hash " << report.chain_hash << "\n";
  if (report.closed_at_ms) {
    out << "closed since " << format_timestamp(*report.closed_at_ms) << ", closing hash "
        << report.closing_hash << "\n";
  }
  if (report.anchors_checked > 0) out << "anchors: all " << report.anchors_checked << " match\n";
  if (at) out << "chain hash at step " << at->step << " " << at->chain_hash << "\n";
  out << "to check this point later: alphaledger verify " << o.stream << " --expect "
      << anchor_text(Anchor{report.steps, false, report.chain_hash});
  if (report.closed_at_ms) out << " --expect " << anchor_text(Anchor{0, true, report.closing_hash});
  out << "\n";
}

Status run_verify(const VerifyOptions& o, const GlobalOptions& g, std::ostream& out) {
  std::vector<Anchor> anchors;
  for (const auto& text : o.expect) {
    auto a = parse_anchor(text);
    if (!a) return invalid_input("--expect: " + a.error().message);
    anchors.push_back(std::move(*a));
  }
  auto ledger = open_for_reading(g, /*check_all_files=*/true);
  if (!ledger) return ledger.error();
  auto report = (*ledger)->verify(o.stream, anchors);
  if (!report) return report.error();
  std::optional<ChainHashAt> at;
  if (o.at_step && report->ok) {
    auto h = (*ledger)->chain_hash_at(o.stream, *o.at_step);
    if (!h) return invalid_input("--at-step: " + h.error().message);
    at = ChainHashAt{*o.at_step, *h};
  }
  if (g.json) out << verify_json(o.stream, *report, at) << '\n';
  if (!report->ok) {
    return conflict("stream " + o.stream + " fails verification at step " +
                        std::to_string(report->first_bad_step) + ": " + report->problem,
                    "verification_failed");
  }
  if (!g.json) print_verified(o, *report, at, out);
  return {};
}

}  // namespace

void add_verify_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<VerifyOptions>();
  CLI::App* sub = app.add_subcommand(
      "verify", "replay a stream's history through its rule and check every record and the hash chain");
  sub->add_option("stream", o->stream, "stream name")->required();
  sub->add_option("--at-step", o->at_step,
                  "also print the chain hash at this step (compare with one you kept)");
  sub->add_option("--expect", o->expect,
                  "STEP:HASH (or closed:HASH) noted from an earlier verify: the ledger must still hold "
                  "that step with that chain hash; repeatable")
      ->allow_extra_args(false);  // one anchor per --expect, so it never swallows the stream name
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_verify(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
