// Replay: decide a whole log of finished tests with one or more rules, in order, touching no
// ledger; plus the hindsight baselines bh and storey-bh. Pure computation over in-memory data.
//
// Example (replay_data/ demo, see README):
//   auto procs = resolve_procedures({"lord++", "bh"}, RuleSpec{}, /*allow_offline=*/true);
//   auto log = read_test_log_file("replay_data/larkspur_experiments.csv", std::nullopt);
//   ReplayResult r = replay(*log, *procs);
//   summarize(r, *log)[0].rejections;   // 7: LORD++'s discoveries among the 420 tests (bh: 20)
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger {

// Stored nowhere; names are the CLI's.
// kEBh: e-BH on e-values (offline.hpp).
enum class OfflineMethod { kBh, kStoreyBh, kEBh };

struct OfflineConfig {
  OfflineMethod method = OfflineMethod::kBh;
  double alpha = 0.05;
  double candidate_threshold = 0.5;  // storey-bh only. Default: 1/2
};

struct Procedure {
  std::string name;  // "lord++", "bh", ...
  std::variant<RuleConfig, OfflineConfig> config;
  bool online() const { return std::holds_alternative<RuleConfig>(config); }
  // Whether the procedure reads e-values (e-lond, e-bh) rather than p-values.
  bool takes_e_values() const;
};

// What each procedure guarantees at its alpha (docs/rules.md): "FDR", "mFDR" or "FWER".
std::string_view guarantee_of(const Procedure& procedure);

// Checks that `log` has the column every procedure reads: e_value for e-lond and e-bh, p_value
// (or summary columns) for the others. The error names the rule and the missing column.
Status check_log_columns(const CompactLog& log, const std::vector<Procedure>& procedures);

// Resolves rule names with one set of flags (the `rule` field of `flags` is ignored). A flag
// applies to every listed procedure that takes it; a flag that no listed procedure takes is an
// error; a rule whose conditions the flags break is an error naming the condition.
// `allow_offline`: whether bh / storey-bh / e-bh are accepted (replay and simulate only).
Result<std::vector<Procedure>> resolve_procedures(const std::vector<std::string>& names,
                                                  const RuleSpec& flags, bool allow_offline);

// Splits "lord++,saffron" into names; refuses empty names and repeats.
Result<std::vector<std::string>> split_rule_list(std::string_view list);

struct Decision {
  std::uint64_t step = 0;
  double level = 0;
  bool rejected = false;
  std::optional<double> wealth;  // empty for the offline baselines
  std::uint64_t launch = 0;      // launch number (1-based, launch order); 0 unless the log has launched_at
};

struct ReplayResult {
  std::vector<Procedure> procedures;
  std::vector<std::vector<Decision>> decisions;  // [procedure][record], records in log order
};

// Online rules decide each record in log order with record(p); when the log has launched_at
// (TestLog::has_launch) they go through launch()/finish() instead: every test launches at its
// launched_at and finishes at its finished_at, events in time order, finishes before launches at
// equal times, launches at equal times in file order (docs/formats.md, "Launch times"). Decisions
// stay in log order (the order of finished_at); `step` is then the position in the log and `launch`
// the launch number. The offline baselines ignore launch times. Rules that take e-values (e-lond)
// and e-bh read each record's e_value (0 when absent: check_log_columns first); e-bh's `level` is
// 1 / its e-value threshold (0 when it rejects nothing), so that e >= 1/level rejects.
ReplayResult replay(const TestLog& log, const std::vector<Procedure>& procedures);

struct ReplaySummary {
  std::string rule;
  std::uint64_t tests = 0;
  std::uint64_t rejections = 0;
  std::optional<std::uint64_t> false_discoveries;  // only when the log has is_null
  std::optional<double> fdp;
  std::optional<double> power;  // empty also when there is no non-null
};

std::vector<ReplaySummary> summarize(const ReplayResult& result, const TestLog& log);

// The same decisions without holding them: decides `log` with one procedure and hands each
// decision to `each(index, decision)`, in log order. An online rule needs no memory beyond the
// log; bh and storey-bh need the p-values at once (8 bytes a test, plus a bit a test).
void replay_each(const CompactLog& log, const Procedure& procedure,
                 const std::function<void(std::size_t, const Decision&)>& each);
// summarize(replay(log, procedures), log) for a compact log, one procedure at a time.
std::vector<ReplaySummary> summarize(const CompactLog& log, const std::vector<Procedure>& procedures);

// The CSV form of replay's decisions (docs/formats.md, "replay"), as `replay` prints it and the
// Python binding returns it: the header line for `log` (a launch column after step when the log
// has launch times; an e_value column after p_value when it has e-values), and the row of
// decision `d` of `rule` on record `k` of `log` (p_value empty when the log has none; launch and
// wealth empty when the rule gives none). Both end with a line end.
std::string replay_csv_header(const CompactLog& log);
void append_replay_csv_row(std::string& out, std::string_view rule, const CompactLog& log, std::size_t k,
                           const Decision& d);

}  // namespace alphaledger
