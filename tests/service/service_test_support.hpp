// Forwarding header, kept only so branches written against the old names still build: use the
// headers in tests/support/ directly. To be removed.
#pragma once

#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

namespace alphaledger::testing {
using Child = test_support::BackgroundProcess;
using test_support::check_history_equals_replay;
using test_support::read_file;
using test_support::ServerProcess;
using test_support::split_lines;
using test_support::tag;
using test_support::TempDir;
using test_support::write_file;
}  // namespace alphaledger::testing
