// Writing simulate's results: the CSV of docs/cli.md, one JSON object per rule row (--json), and
// a table for people with standard errors and a plain flag on any rule whose realized error rate
// is above its target by more than 3 standard errors (docs/simulate.md). Internal to the project.
#pragma once

#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/simulate.hpp"

namespace alphaledger {

// What the run used, for the table's heading and the JSON / log lines.
struct SimulationSettings {
  SimulationModel model;
  std::uint64_t runs = 0;
  std::uint64_t seed = 1;
  unsigned threads = 1;
  std::uint64_t looks = 0;  // --peeking K
};

// Header `rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer`, then one row per
// procedure; numbers in shortest round-trip form, an undefined value (power with no non-null,
// a standard error from one run) as an empty field.
void write_simulation_csv(std::ostream& out, const std::vector<ProcedureSummary>& rows);

// A sweep (a list of values for one model parameter): the same CSV with the swept parameter as a
// first column named `parameter` ("nonnull_fraction", "effect"), one header, the rows of
// summaries[v] for values[v] in order.
void write_simulation_sweep_csv(std::ostream& out, std::string_view parameter,
                                const std::vector<double>& values,
                                const std::vector<std::vector<ProcedureSummary>>& summaries);

// One object per row: the CSV keys, then evaluation ("exact" / "fast" / null), mfdr_se, fwer_se,
// promised ("FDR" / "mFDR" / "FWER"), target and exceeds_target. Undefined numbers are null.
// In a sweep, `parameter` names the swept field, which comes first in each object with `value`.
void write_simulation_json(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                           std::string_view parameter = {}, double value = 0);

// The table for people: heading with the settings and evaluation mode, one line per rule with
// standard errors and the promise, the flags, and which guarantees the chosen scenario leaves out.
void write_simulation_table(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                            const SimulationSettings& settings);

// "fast for lord++, saffron; exact for addis", or "" when no listed rule has a mode.
std::string evaluation_note(const std::vector<ProcedureSummary>& rows);

// The plain flag line for one row, or "" when the row is not flagged.
std::string exceedance_note(const ProcedureSummary& row);

}  // namespace alphaledger
