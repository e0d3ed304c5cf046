// The output forms of the ledger's answers: every JSON object and CSV row that `decide`, `status`,
// `streams`, `history`, `next`, `verify`, `close` and `new` print, that `pipe` writes and that the
// HTTP routes answer comes from here, so one object has one shape wherever it is read
// (docs/formats.md, "Output forms"). Each function returns the text without a line end.
//
// Numbers: shortest text that reads back to the identical double. A value that is not finite (no
// valid ledger state holds one) is null in JSON and an empty cell in CSV. Text that is not valid
// UTF-8 (test ids cannot be: validate_test_id refuses them on input) is written with each bad byte
// as \xHH; no function here throws on any input.
//
// Example (a ledger in memory, so nothing is written to disk):
//   auto ledger = Ledger::open(std::make_unique<MemoryStore>());
//   (*ledger)->create_stream("checkout-team", *resolve_config({.rule = "lord++"}));
//   auto d = (*ledger)->decide("checkout-team", "exp-0142", 0.0004);
//   std::cout << decision_json(*d) << '\n';
//   // {"step":1,"id":"exp-0142","p_value":0.0004,"level":0.0013703860574...,"rejected":1,
//   //  "wealth":...,"stream":"checkout-team","decided_at":"2026-...Z","repeat":false}
//
// Thread-safety: free functions, no shared state.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"

namespace alphaledger {

// ---- decisions ---------------------------------------------------------------------------------

// {"step","id","p_value","level","rejected" (1/0),"wealth","stream","decided_at","launch",
// "launched_at","repeat"}; "e_value" instead of "p_value" for an e-value (record.e_value set, or
// `rule` e-lond). With a
// non-empty `rule`, a first key "rule" holds it (decide --file rows carry replay's rule column).
std::string decision_json(const DecideResult& d, std::string_view rule = {});

// A decision as a CSV row under kDecisionCsvHeader (decide --file without --json; replay's columns).
inline constexpr std::string_view kDecisionCsvHeader = "rule,step,id,p_value,level,rejected,wealth";
// The same for an e-lond stream, whose rows hold e-values (replay reads the e_value column).
inline constexpr std::string_view kDecisionCsvHeaderE = "rule,step,id,e_value,level,rejected,wealth";
std::string decision_csv(const DecisionRecord& r, std::string_view rule);

// ---- streams -----------------------------------------------------------------------------------

// A stream's status: {"stream","rule", the parameters its rule takes (alpha always;
// initial_wealth, candidate_threshold, discard_threshold, payout, spending, evaluation as the rule
// takes them), "alternative" (only when not two-sided), "created_at","tests","rejections","wealth",
// "next_level","running" (tests launched, not yet decided or abandoned),"reserved" (the sum of
// their levels), "closed_at" (only for a closed stream)}.
std::string stream_json(const StreamInfo& s);
// stream_json plus "created": false when the stream existed with this configuration (`new`).
std::string stream_created_json(const StreamInfo& s, bool created);
// stream_json plus "closed_now" (false: it was closed before) and "closing_hash" (`close`).
std::string stream_closed_json(const StreamInfo& s, bool closed_now, std::string_view closing_hash);
// {"streams": [stream_json, ...]} (GET /v1/streams; `streams --json` prints one stream_json a line).
std::string stream_list_json(const std::vector<StreamInfo>& streams);
// {"stream","step","level"}: the level the next test will get, and its step.
std::string next_level_json(std::string_view stream, std::uint64_t step, double level);

// ---- history -----------------------------------------------------------------------------------

// {"rule","step","id","p_value","level","rejected" (1/0),"wealth","decided_at","launch",
// "reserved_at" (when the test was launched),"abandoned" (true/false)}. An abandoned test has
// p_value 0, rejected 0, and decided_at is when it was abandoned. The launch time is not called
// launched_at here because replay reads a launched_at column as launch times (docs/formats.md),
// and a history file must replay as before.
std::string history_row_json(const DecisionRecord& r, std::string_view rule);
inline constexpr std::string_view kHistoryCsvHeader =
    "rule,step,id,p_value,level,rejected,wealth,decided_at,launch,reserved_at,abandoned";
std::string history_row_csv(const DecisionRecord& r, std::string_view rule);
// An e-lond stream's history holds e-values: the same columns with e_value for p_value (replay
// reads an e_value column as e-values). history_row_json uses the e_value key there too.
inline constexpr std::string_view kHistoryCsvHeaderE =
    "rule,step,id,e_value,level,rejected,wealth,decided_at,launch,reserved_at,abandoned";
// kHistoryCsvHeader, or kHistoryCsvHeaderE for a rule that takes e-values.
std::string_view history_csv_header(std::string_view rule);
// One page of history: {"stream","from","limit","total","next_step" (null at the end),
// "decisions": [history_row_json, ...]}.
std::string history_page_json(std::string_view stream, std::uint64_t from, std::uint64_t limit,
                              const HistoryPage& page, std::string_view rule);

// ---- launch-time events -----------------------------------------------------------------------

// {"stream","id","launch","level","wealth","launched_at","step","repeat"} (`launch`, pipe, HTTP).
std::string launch_json(const LaunchResult& l);
// {"stream","id","launch","level","wealth","launched_at","abandoned_at","step","repeat"}.
std::string abandon_json(const AbandonResult& a);
// {"stream","id","launch","level","launched_at"}: one running test (`running --json`, a line each).
std::string running_json(std::string_view stream, const RunningEntry& r);
// {"stream","running": [running_json, ...]} (GET /v1/streams/{s}/running).
std::string running_list_json(std::string_view stream, const std::vector<RunningEntry>& running);
inline constexpr std::string_view kRunningCsvHeader = "id,launch,level,launched_at";
std::string running_csv(const RunningEntry& r);

// ---- looks at running tests ---------------------------------------------------------------

// {"stream","id","look","launch","step","summary" ("proportions"/"means"),"control","treatment"
// (objects: n, conversions / n, mean, sd),"mixture_sd","estimate","anytime_p_value","running_min",
// "e_value","cs_low","cs_high","level","verdict" ("stop"/"continue"),"looked_at","decision" (the
// decision_json object a stop made, else null),"repeat"} (`look --json`, pipe, HTTP).
std::string look_json(const LookResult& l);
// {"stream","id","looks": [look_json, ...]} (`looks --json`, GET .../looks).
std::string look_list_json(std::string_view stream, std::string_view id, const std::vector<LookResult>& looks);

// ---- verify ------------------------------------------------------------------------------------

// {"stream","ok","steps","first_bad_step","problem","chain_hash"}: when ok, first_bad_step and
// problem are null and closed_at + closing_hash (closed streams) and anchors_checked follow; when
// not ok, chain_hash is null. With `at_step`, also "at_step" and "chain_hash_at_step".
struct ChainHashAt {
  std::uint64_t step = 0;
  std::string chain_hash;
};
std::string verify_json(std::string_view stream, const VerifyReport& report,
                        const std::optional<ChainHashAt>& at_step = std::nullopt);

// ---- errors ------------------------------------------------------------------------------------

// {"error": {"code": CODE, "message": MESSAGE}}: the error object of the CLI (--json) and HTTP.
std::string error_json(std::string_view code, std::string_view message);
// The same with the code of the error's kind: invalid_input, refused or storage. Front ends
// that know a finer code (unknown_stream, conflict...) pass it to the form above.
std::string error_json(const Error& e);
// {"line": N, "error": MESSAGE}: pipe's answer to a line it could not decide.
std::string line_error_json(std::uint64_t line, std::string_view message);
// GET /v1/health: {"status":"ok"}, or with a failure {"status":"failing","error":{"code":"storage",
// "message": ...}}.
std::string health_json(const std::optional<std::string>& storage_failure);

}  // namespace alphaledger
