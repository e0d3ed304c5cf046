// The report files of a replay and of a stream (alphaledger/report.hpp): what `replay --report`,
// `report STREAM -o FILE` and the Python package's report methods write, from one place so the
// pages are the same whoever asks. The stream writer reads through the Ledger interface, so a
// program calling it links the store as well (the CLI and the Python module do).
#include <sstream>
#include <utility>

#include "alphaledger/ledger.hpp"
#include "alphaledger/report.hpp"
#include "harness/report_columns.hpp"

namespace alphaledger {
namespace {

// Decides the log again with each procedure (plus bh when missing) and writes the page; `other`
// returns the log's other columns (read_input_columns, report_columns.hpp).
template <typename ReadOther>
Status write_replay_page(const std::string& path, const CompactLog& log,
                         const std::vector<Procedure>& procedures, std::optional<double> alpha,
                         std::string_view option, ReadOther&& other) {
  // Each procedure decides the log once more through replay_each, the function the CSV rows come
  // from (same inputs, same bits), and the summary rows come from the same summarize().
  ReplayResult result{procedures, {}};
  ReplayReportData data;
  bool has_bh = false;
  for (const auto& p : procedures) has_bh = has_bh || p.name == "bh";
  if (!has_bh) {  // the hindsight BH answer, at the same alpha, for the report only
    auto bh = resolve_procedures({"bh"}, RuleSpec{.alpha = alpha}, /*allow_offline=*/true);
    if (!bh) return bh.error();
    result.procedures.push_back((*bh)[0]);
    data.extra.push_back("bh");
  }
  for (const Procedure& p : result.procedures) {
    auto& decisions = result.decisions.emplace_back();
    decisions.reserve(log.size());
    replay_each(log, p, [&](std::size_t, const Decision& d) { decisions.push_back(d); });
  }
  const std::vector<ReplaySummary> summaries = summarize(log, result.procedures);
  InputColumns others = other();
  data.input_column_names = std::move(others.names);
  data.input_columns = std::move(others.columns);
  data.log = &log;
  data.result = &result;
  data.summaries = &summaries;
  data.generated_at_ms = system_clock_ms();
  return write_file_atomically(path, render_replay_report(data), option);
}

}  // namespace

Status write_replay_report(const std::string& path, const CompactLog& log,
                           const std::vector<Procedure>& procedures, std::optional<double> alpha,
                           const std::string& log_path, std::optional<std::string_view> forced_format,
                           std::string_view option) {
  return write_replay_page(path, log, procedures, alpha, option,
                           [&] { return read_input_columns(log_path, forced_format, log, kReportKeeps); });
}

Status write_replay_report_from_text(const std::string& path, const CompactLog& log,
                                     const std::vector<Procedure>& procedures, std::optional<double> alpha,
                                     std::string_view log_text, LogFormat format, std::string_view option) {
  return write_replay_page(path, log, procedures, alpha, option, [&] {
    std::istringstream in{std::string(log_text)};
    return read_input_columns(in, format, log, kReportKeeps);
  });
}

Result<std::uint64_t> write_stream_report(Ledger& ledger, std::string_view stream, const std::string& path,
                                          std::string_view option) {
  if (auto s = check_output_path(path, option); !s) return s.error();
  auto info = ledger.status(stream);
  if (!info) return info.error();
  StreamReportData data;
  data.info = *info;
  data.configuration = describe_config(info->config);
  data.generated_at_ms = system_clock_ms();
  auto history = ledger.history(stream);  // decided and abandoned tests, in step order
  if (!history) return history.error();
  auto running = ledger.running(stream);
  if (!running) return running.error();
  data.reserved_wealth = reserved_after_each(*history, *running);
  data.running = std::move(*running);
  data.records.reserve(history->size());
  for (auto& r : *history) {
    if (!r.abandoned) data.records.push_back(std::move(r));
  }
  if (auto s = write_file_atomically(path, render_stream_report(data), option); !s) return s.error();
  return static_cast<std::uint64_t>(data.records.size());
}

}  // namespace alphaledger
