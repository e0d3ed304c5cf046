// Forwarding header, kept only so branches written against the old name still build: use
// support/process.hpp and support/temp_dir.hpp directly. To be removed.
#pragma once

#include "support/process.hpp"
#include "support/text.hpp"

namespace alphaledger::testing {
using CommandResult = test_support::ProcessResult;
using test_support::run_alphaledger;
inline std::string slurp(const std::string& path) { return test_support::read_file(path); }
}  // namespace alphaledger::testing
