// The thin CLI layer (DEVELOPERS.md): per subcommand an options struct, a setup function that
// registers it on the app, and a run function that returns a Status and writes results to the
// given stream. main() maps errors to the exit codes of docs/cli.md.
#pragma once

#include <CLI/CLI.hpp>
#include <functional>
#include <optional>
#include <ostream>
#include <string>

#include "alphaledger/result.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger::cli {

struct GlobalOptions {
  std::string ledger;  // --ledger; resolved by ledger_path()
  bool json = false;   // --json
  std::string log_level = "warn";
};

// The chosen subcommand's work, set by its parse callback and run by main().
struct CommandContext {
  GlobalOptions global;
  std::function<Status()> run;
};

// --ledger, else $ALPHALEDGER_LEDGER, else ./alphaledger.db
std::string ledger_path(const GlobalOptions& global);

// Rule flags shared by replay, new and simulate (docs/cli.md "Rules and their parameters").
struct RuleFlags {
  std::optional<double> alpha, initial_wealth, candidate_threshold, discard_threshold, payout;
  std::optional<std::string> spending, evaluation;
  RuleSpec to_spec(std::string rule = {}) const;
};
void add_rule_flags(CLI::App* sub, RuleFlags& flags);

// The caution printed in --help and the README.
inline constexpr const char* kCaution =
    "Caution: where decisions affect people's health or safety (clinical, safety-critical\n"
    "settings), alphaledger does not replace a pre-registered analysis plan, a qualified\n"
    "statistician, or the rules of your local regulator.";

// Subcommands, one file pair each.
void add_replay_command(CLI::App& app, CommandContext& ctx);
void add_ledger_commands(CLI::App& app,
                         CommandContext& ctx);  // new decide next status streams history verify
void add_simulate_command(CLI::App& app, CommandContext& ctx);
void add_stats_commands(CLI::App& app, CommandContext& ctx);    // pvalue plan (cmd_pvalue.cpp, cmd_plan.cpp)
void add_service_commands(CLI::App& app, CommandContext& ctx);  // pipe serve
void add_recover_command(CLI::App& app, CommandContext& ctx);   // recover
void add_report_command(CLI::App& app, CommandContext& ctx);    // report

}  // namespace alphaledger::cli
