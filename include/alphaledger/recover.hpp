// Copying what can be proven out of a damaged ledger into a new folder (docs/ledger.md
// "Recovering a damaged ledger").
//
// Example (compiled only: it needs a damaged ledger; the values are what one such run reported):
//   auto report = recover_ledger("/srv/ab/ledger", "/srv/ab/ledger-recovered");
//   report->complete();              // false: something could not be proven
//   report->streams[0].kept_steps;   // e.g. 255: steps 1..255 are in the new ledger
//   report->streams[0].known_steps;  // e.g. 2000: the source's head counted 2000
//
// The source folder is never changed: its files are copied to a scratch folder beside the target
// and RocksDB's own salvage opens that copy. An entry of a stream's chain (a decision record, or a
// launch, finish or abandon event) is copied only if the hash chain is intact from the
// configuration up to it and a replay of the rule gives its level, decision and wealth bit for
// bit (a finish or abandon must name a test still running); each stream stops at its first
// unproven step. The new ledger's rule state, tests still running included, and its id index are
// rebuilt from the kept entries: a test launched in the kept steps whose finish was lost is
// running in the new ledger, with the level reserved at its launch.
//
// Thread-safety: a free function; no shared state.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "alphaledger/result.hpp"

namespace alphaledger {

struct StreamRecovery {
  std::string stream;
  std::uint64_t kept_steps = 0;              // steps (chain entries) 1..kept_steps were copied and proven
  std::optional<std::uint64_t> known_steps;  // what the source's head counted, when readable
  std::string problem;                       // why copying stopped early; empty when it did not
  // Set when the stream is closed in the new ledger: the closing time (the source's).
  std::optional<std::int64_t> closed_at_ms;
  // The closing hash of the new ledger's closing entry (when closed_at_ms is set).
  std::string closing_hash;
  // True when the source's closing entry was proven (its hash matches the source head's, over
  // every kept step): closing_hash is then the source's, and an anchor "closed:HASH" noted before
  // the damage still matches. False with closed_at_ms set: the source's head said closed but its
  // closing could not be proven; the stream is closed again over the kept steps with the same
  // closing time and a new closing hash (closing_problem says why).
  bool closing_proven = false;
  std::string closing_problem;  // empty when there was nothing to prove or it was proven
  // The source's head could not be read: how many steps it counted and whether the stream was
  // closed are unknown (the stream is open in the new ledger).
  std::string head_problem;
  bool complete() const {
    return problem.empty() && closing_problem.empty() && head_problem.empty() &&
           (!known_steps || *known_steps <= kept_steps);
  }
};

struct RecoveryReport {
  std::string source;
  std::string target;
  // What the strict open of the source said, when it refused the source (the damage found);
  // empty when the source opened cleanly with every check.
  std::string source_problem;
  std::vector<StreamRecovery> streams;  // by name
  // Keys that belong to no part of the ledger format (docs/ledger-format.md "Keys"): copied as
  // they were, NOT verified (nothing in the format says what they should hold). Their number,
  // and the first few names (as excerpt()s) for the report.
  std::uint64_t other_keys_copied = 0;
  std::vector<std::string> other_key_names;  // at most kShownKeys
  static constexpr std::size_t kShownKeys = 5;
  // Streams whose head, records or index entries were found without a configuration: nothing of
  // them can be proven, so nothing was copied (by name; also counted as not complete).
  std::vector<std::string> streams_without_configuration;
  bool complete() const {
    if (!source_problem.empty() || !streams_without_configuration.empty()) return false;
    for (const auto& s : streams)
      if (!s.complete()) return false;
    return true;
  }
};

// Copies every stream's configuration and every provable chain entry of ledger folder `source` into
// a new ledger in `target`, keeps each stream's closing (see StreamRecovery), then verifies each
// stream of the new ledger (against the source's closing hash, when the closing was proven).
// Errors: kInvalidArgument: `target` exists and is not an empty folder, or is the source;
// kNotFound: no ledger at `source`; kIOError or kCorruption: the source cannot be read at all (not even salvaged),
// the target or the scratch copy cannot be written, or the new ledger fails its own verify.
// A source that was read but lost decisions is not an error: see RecoveryReport::complete().
Result<RecoveryReport> recover_ledger(const std::string& source, const std::string& target);

}  // namespace alphaledger
