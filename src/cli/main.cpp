// alphaledger: online false discovery rate control for streams of hypothesis tests.
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <cstdlib>
#include <iostream>

#include "cli/command.hpp"

namespace alphaledger::cli {

std::string ledger_path(const GlobalOptions& global) {
  if (!global.ledger.empty()) return global.ledger;
  if (const char* env = std::getenv("ALPHALEDGER_LEDGER"); env != nullptr && *env != '\0') return env;
  return "alphaledger.db";
}

RuleSpec RuleFlags::to_spec(std::string rule) const {
  RuleSpec s;
  s.rule = std::move(rule);
  s.alpha = alpha;
  s.initial_wealth = initial_wealth;
  s.candidate_threshold = candidate_threshold;
  s.discard_threshold = discard_threshold;
  s.payout = payout;
  s.spending = spending;
  s.evaluation = evaluation;
  return s;
}

void add_rule_flags(CLI::App* sub, RuleFlags& f) {
  sub->add_option("--alpha", f.alpha,
                  "target FDR (mFDR for alpha-investing, FWER for alpha-spending), 0 < A < 1; default 0.05");
  sub->add_option("--initial-wealth", f.initial_wealth,
                  "W0, in estimated false discoveries (docs/rules.md); default alpha/2");
  sub->add_option("--candidate-threshold", f.candidate_threshold, "lambda (saffron, addis, storey-bh)");
  sub->add_option("--discard-threshold", f.discard_threshold, "tau, lambda < tau <= 1 (addis)");
  sub->add_option("--payout", f.payout, "paid on each rejection, <= alpha (alpha-investing)");
  sub->add_option("--spending", f.spending, "jm, jm:C, power:S or power-shift:S");
  sub->add_option("--evaluation", f.evaluation, "exact or fast (lord++, saffron, addis); default exact");
}

}  // namespace alphaledger::cli

int main(int argc, char** argv) {
  using namespace alphaledger;
  using namespace alphaledger::cli;
  CLI::App app{"alphaledger " ALPHALEDGER_VERSION
               ": decide each hypothesis test the moment it finishes, keeping the false discovery\n"
               "rate of the whole stream below a target (LORD++, SAFFRON, ADDIS, LOND, alpha-investing,\n"
               "alpha-spending), with a durable, verifiable ledger.\n\n" +
               std::string(kCaution)};
  app.require_subcommand(1);
  app.fallthrough();
  app.set_version_flag("--version", ALPHALEDGER_VERSION);
  CommandContext ctx;
  app.add_option("--ledger", ctx.global.ledger,
                 "ledger folder; default $ALPHALEDGER_LEDGER, else ./alphaledger.db");
  app.add_flag("--json", ctx.global.json, "machine-readable output, one JSON object per line");
  app.add_option("--log-level", ctx.global.log_level, "trace|debug|info|warn|error|off; default warn")
      ->check(CLI::IsMember({"trace", "debug", "info", "warn", "error", "off"}));

  add_replay_command(app, ctx);
  add_ledger_commands(app, ctx);
  add_simulate_command(app, ctx);
  add_stats_commands(app, ctx);
  add_service_commands(app, ctx);
  add_recover_command(app, ctx);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? 0 : 2;
  }
  auto logger = spdlog::stderr_color_mt("alphaledger");
  spdlog::set_default_logger(logger);
  spdlog::set_level(spdlog::level::from_str(ctx.global.log_level));
  if (!ctx.run) return 2;
  Status status;
  try {
    status = ctx.run();
  } catch (const std::exception& e) {
    std::cerr << "alphaledger: error: " << e.what() << "\n";
    return 4;
  }
  std::cout.flush();
  if (!status) {
    std::cerr << "alphaledger: error: " << status.error().message << "\n";
    return static_cast<int>(status.error().kind);
  }
  return 0;
}
