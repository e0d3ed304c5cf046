// Forwarding header, kept only so branches written against the old names still build: use
// support/process.hpp, support/temp_dir.hpp and support/text.hpp directly. To be removed.
#pragma once

#include <chrono>
#include <optional>

#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

namespace ledger_test {
using Run = alphaledger::test_support::ProcessResult;
using ScratchDir = alphaledger::test_support::TempDir;
using alphaledger::test_support::complete_lines;
using alphaledger::test_support::split_csv_simple;
// stdin is /dev/null; with kill_after, SIGKILL after that delay (Run::killed).
inline Run run_alphaledger(const std::vector<std::string>& args,
                           std::optional<std::chrono::microseconds> kill_after = std::nullopt) {
  alphaledger::test_support::RunOptions options;
  options.kill_after = kill_after;
  return alphaledger::test_support::run_alphaledger(args, options);
}
}  // namespace ledger_test
