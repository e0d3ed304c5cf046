// What the ledger commands (new, decide, next, status, streams, history, verify, close) share:
// opening the ledger, and each command's registration (docs/ledger.md). Each command opens the
// ledger folder, does one thing, and closes it.
#pragma once

#include <memory>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"
#include "cli/command.hpp"

namespace alphaledger::cli {

// Opens the ledger. Only `new` creates a missing ledger; every other command refuses (exit 3)
// rather than leave an empty folder behind.
Result<std::unique_ptr<Ledger>> open_ledger(const GlobalOptions& g, bool create);

// Opens the ledger for reading only (status, history, verify, streams, next): takes no lock, so it
// works beside a running serve and in a read-only folder, and writes no file (docs/ledger.md).
Result<std::unique_ptr<Ledger>> open_for_reading(const GlobalOptions& g, bool check_all_files = false);

// One registration per command file (cmd_new.cpp, cmd_decide.cpp, ...).
void add_new_command(CLI::App& app, CommandContext& ctx);
void add_decide_command(CLI::App& app, CommandContext& ctx);
void add_stream_read_commands(CLI::App& app, CommandContext& ctx);  // next, status, streams
void add_history_command(CLI::App& app, CommandContext& ctx);
void add_verify_command(CLI::App& app, CommandContext& ctx);
void add_close_command(CLI::App& app, CommandContext& ctx);
void add_launch_commands(CLI::App& app, CommandContext& ctx);  // launch, abandon, running
void add_copy_command(CLI::App& app, CommandContext& ctx);     // copy (cmd_copy.cpp)

}  // namespace alphaledger::cli
