// The ledger commands: new, decide, next, status, streams, history, verify, close, and launch,
// abandon, running (docs/ledger.md), one file each (cmd_new.cpp ... cmd_close.cpp, cmd_launch.cpp); this file holds what they share.
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {

Result<std::unique_ptr<Ledger>> open_ledger(const GlobalOptions& g, bool create) {
  return Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = create});
}

Result<std::unique_ptr<Ledger>> open_for_reading(const GlobalOptions& g, bool check_all_files) {
  return Ledger::open(ledger_path(g), RocksStoreOptions{
                                          .create_if_missing = false,
                                          .read_only = true,
                                          .check_all_files = check_all_files,
                                      });
}

void add_ledger_commands(CLI::App& app, CommandContext& ctx) {
  add_new_command(app, ctx);
  add_decide_command(app, ctx);
  add_stream_read_commands(app, ctx);
  add_history_command(app, ctx);
  add_verify_command(app, ctx);
  add_close_command(app, ctx);
  add_launch_commands(app, ctx);
  add_copy_command(app, ctx);
}

}  // namespace alphaledger::cli
