// HTML reports: one self-contained page per stream, replay or simulation (docs/reports.md).
//
// A report is rendered from the very results the CSV output is written from (no second
// computation): the numbers go into the page as JSON in a <script type="application/json"
// id="report-data"> block, exact and complete (long columns in compact exact forms: binary64 in
// base64, runs, differences; docs/reports.md "The data block"); the charts are drawn in the browser by Chart.js,
// which is embedded in the page, so the file opens offline and fetches nothing. Long streams are
// thinned for drawing only (drawing_indices), never in the tables or the embedded data.
//
// Example (what `alphaledger replay log.csv --rules lord++,bh --report r.html` does; compiled only):
//   auto procs = resolve_procedures({"lord++", "bh"}, RuleSpec{}, true);
//   auto log = read_compact_log_file("log.csv", std::nullopt);
//   ReplayResult r{*procs, {}};
//   for (const auto& p : *procs) { r.decisions.emplace_back();
//     replay_each(*log, p, [&](std::size_t, const Decision& d) { r.decisions.back().push_back(d); }); }
//   const auto summaries = summarize(*log, *procs);
//   auto html = render_replay_report({.log = &*log, .result = &r, .summaries = &summaries});
//   write_file_atomically("r.html", html, "--report");
//
// Thread-safety: free functions, no shared state.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/simulate.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger {

// ---- Building blocks (tested on their own) -----------------------------------------------------

// Text for an HTML text node or a quoted attribute value: & < > " ' become character references.
// Bytes that are not valid UTF-8 become U+FFFD.
std::string html_escape(std::string_view text);

// A JSON text that is safe between <script type="application/json"> and </script>: the JSON of
// `json_text` (already serialized) with every '<', '>' and '&' written as \u003c, \u003e, \u0026
// and U+2028 / U+2029 as \u2028 / \u2029. These characters can only appear inside JSON strings,
// where the escapes mean the same characters, so JSON.parse gives back the same value and no id
// can close the block. REQUIRES: json_text is valid JSON in UTF-8.
std::string script_json(std::string_view json_text);

// Which of `count` points to draw when at most about `max_points` should be: every index with
// keep[i] true (discoveries), the first and the last, and evenly spaced others up to the budget.
// All indices when count <= max_points. Sorted, without repeats. More than max_points only when
// the kept points alone are more. REQUIRES: keep.size() == count (or keep empty: keep none).
std::vector<std::size_t> drawing_indices(std::size_t count, const std::vector<bool>& keep,
                                         std::size_t max_points);

// Points per drawn series in the reports. Default 5000: smooth at any zoom a report has, and
// Chart.js stays responsive.
inline constexpr std::size_t kMaxDrawnPoints = 5000;

// Writes `content` to `path` as one step: a temporary file in the same folder, fsync, rename over
// `path`, fsync of the folder. On any failure nothing is left at `path` that was not there before
// and the temporary file is removed. `option` names the flag in messages ("-o", "--report").
// Errors: a path that cannot be written (missing folder, a folder at the path, no permission):
// kInvalidInput naming the option, the path (excerpt) and what is accepted; a failing write
// (disk full, I/O error): kStorage.
Status write_file_atomically(const std::string& path, std::string_view content, std::string_view option);

// Checks before any work that `path` can be written as write_file_atomically() will: its folder
// exists and is writable and `path` is not a folder. Same errors as write_file_atomically().
Status check_output_path(const std::string& path, std::string_view option);

// ---- The three reports -----------------------------------------------------------------------

// A stream of the ledger: its status, its decisions in step order and its running tests.
struct StreamReportData {
  StreamInfo info;
  std::string configuration;  // describe_config(info.config), one line
  std::vector<DecisionRecord> records;  // decided tests only, in step order
  std::int64_t generated_at_ms = 0;  // when the report was made
  // Wealth reserved by running tests right after each record's decision (reserved_after_each), or
  // empty: the embedded data then has "reserved_wealth": null.
  std::optional<std::vector<double>> reserved_wealth;
  std::vector<RunningEntry> running;  // tests running now, in launch order (Ledger::running)
};

// The wealth reserved by running tests right after each decided test of `history` (the whole
// Ledger::history, abandoned tests included, in step order), one number per decided test, in
// step order. `running` (Ledger::running) gives the levels of the tests still running. The chain
// entries between the history's steps are launches of their own, in launch order; a test decided
// at the step of its own launch was never running. Each value is the sum, in launch order, of the
// levels of the tests launched and not yet decided or abandoned (as Rule::reserved sums them), so
// the last equals StreamInfo::reserved when the stream has no events after its last decision.
std::vector<double> reserved_after_each(const std::vector<DecisionRecord>& history,
                                        const std::vector<RunningEntry>& running);
std::string render_stream_report(const StreamReportData& data);

// A replay: the log, each procedure's decisions (ReplayResult::decisions[procedure][record], log
// order), and the summary rows of the same run. `extra` names procedures that were added for the
// report only (the hindsight BH answer when the command line did not list bh): the page marks them.
struct ReplayReportData {
  const CompactLog* log = nullptr;
  const ReplayResult* result = nullptr;
  const std::vector<ReplaySummary>* summaries = nullptr;
  std::vector<std::string> extra = {};
  // The log's own other columns (team, metric...), which the log reader does not keep: names, and
  // per name one text per record in log order (empty strings where a row has none).
  std::vector<std::string> input_column_names = {};
  std::vector<std::vector<std::string>> input_columns = {};
  std::int64_t generated_at_ms = 0;
};
std::string render_replay_report(const ReplayReportData& data);

// A simulation, possibly swept over one parameter: summaries[v] are the rows for values[v].
// `parameter` is the swept column's name ("nonnull_fraction", "effect" or "mean_duration"), or
// empty when nothing was swept (one value).
struct SimulationReportData {
  std::string parameter;
  std::vector<double> values;
  std::vector<std::vector<ProcedureSummary>> summaries;
  SimulationModel model;  // the model of the first value (the swept field differs per value)
  std::uint64_t runs = 0;
  std::uint64_t seed = 1;
  std::int64_t generated_at_ms = 0;
  std::uint64_t peeking_looks = 0;  // simulate --peeking K: looks per test (0: no peeking)
};
std::string render_simulation_report(const SimulationReportData& data);

// ---- Report files (src/harness/report_files.cpp) ----------------------------------------------
// What `replay --report`, `report STREAM -o FILE` and the Python package write: the CLI and Python
// call these, so a page is the same whoever asks (only its "report made" time differs). `option`
// names the path's flag or argument in messages ("--report", "-o", "path").

// The page of a replay of `log` by `procedures`, with the hindsight BH answer at `alpha` added
// when `procedures` lacks bh. The log's other columns (team, metric...) are read again from
// `log_path` with `forced_format` (none for "-": standard input cannot be read twice).
Status write_replay_report(const std::string& path, const CompactLog& log, const std::vector<Procedure>& procedures,
                           std::optional<double> alpha, const std::string& log_path,
                           std::optional<std::string_view> forced_format, std::string_view option = "--report");
// The same for a log that was read from `log_text` (in `format`) in memory.
Status write_replay_report_from_text(const std::string& path, const CompactLog& log,
                                     const std::vector<Procedure>& procedures, std::optional<double> alpha,
                                     std::string_view log_text, LogFormat format,
                                     std::string_view option = "--report");

// The page of stream `stream` of `ledger`: its status, its decided tests in step order (from
// Ledger::history, abandoned tests left out), the wealth reserved after each (reserved_after_each)
// and the tests running now. Checks `path` first, writes nothing to the ledger. Returns the number
// of decided tests on the page. Errors: those of check_output_path, Ledger::status (unknown
// stream: kNotFound), Ledger::history, Ledger::running and write_file_atomically.
Result<std::uint64_t> write_stream_report(Ledger& ledger, std::string_view stream, const std::string& path,
                                          std::string_view option = "-o");

// What a rule promises and under which conditions, in plain words (the configuration section).
std::string guarantee_text(std::string_view rule);

}  // namespace alphaledger
