// The three HTML reports (include/alphaledger/report.hpp; docs/reports.md). Each page is one file:
// static HTML for the words, the data as JSON in a <script type="application/json"> block, Chart.js
// inline, and a small script that draws the charts and fills the tables from the data.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>
#include <string>

#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"
#include "harness/report_assets.hpp"
#include "harness/report_encode.hpp"

namespace alphaledger {
namespace report_detail {
extern const char kChartJs[];
extern const std::size_t kChartJsSize;
}  // namespace report_detail

namespace {

using Json = nlohmann::ordered_json;

// The layout of the data block: 2 writes columns in the compact forms of report_encode.hpp.
constexpr int kDataFormat = 2;

Json number_or_null(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }
template <typename T>
Json optional_json(const std::optional<T>& v) {
  if (!v) return Json(nullptr);
  if constexpr (std::is_floating_point_v<T>) return number_or_null(*v);
  return Json(*v);
}

std::string dump(const Json& j) { return json_text(j); }

// ISO 8601 UTC with milliseconds, as the ledger prints decided_at (the harness does not link the
// store, so the few lines are here too).
std::string timestamp_text(std::int64_t ms) { return ms > 0 ? format_timestamp(ms) : std::string("-"); }

// The page around a report's own sections.
std::string page(std::string_view kind, const std::string& title, const std::string& subtitle,
                 const std::string& body, const Json& data) {
  std::string out;
  out.reserve(report_detail::kChartJsSize + body.size() + 4096);
  out += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  out += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n";
  out += "<meta name=\"generator\" content=\"alphaledger\">\n";
  out += "<title>" + html_escape(title) + "</title>\n<style>\n";
  out += report_assets::kCss;
  out += "</style>\n</head>\n<body data-report=\"";
  out += kind;
  out += "\" data-state=\"loading\">\n";
  out += report_assets::kErrorTrap;  // first, so that it also sees errors in the scripts below
  out += "<header>\n<h1>" + html_escape(title) + "</h1>\n<p class=\"sub\">" + html_escape(subtitle) +
         "</p>\n</header>\n<main>\n";
  out += body;
  out += report_assets::kCautions;
  out += "</main>\n<footer><p>Made by alphaledger. Charts: Chart.js 3.9.1 (MIT license), embedded. ";
  out += "The numbers of this page are in the block <code>report-data</code> of its source, as JSON. ";
  out += "<button type=\"button\" id=\"save-data\" hidden>Save the numbers (JSON)</button></p>";
  out += "</footer>\n";
  out += "<script type=\"application/json\" id=\"report-data\">";
  out += script_json(dump(data));
  out += "</script>\n<script>\n";
  out.append(report_detail::kChartJs, report_detail::kChartJsSize);
  out += "\n</script>\n<script>\n";
  out += report_assets::kCommonScript;
  if (kind == "stream") out += report_assets::kStreamScript;
  if (kind == "replay") out += report_assets::kReplayScript;
  if (kind == "simulation") out += report_assets::kSimulationScript;
  out += "</script>\n</body>\n</html>\n";
  return out;
}

std::string figure(const std::string& id, const std::string& heading, const std::string& label,
                   const std::string& caption) {
  return "<figure class=\"chart\">\n<h3>" + html_escape(heading) +
         "</h3>\n<div class=\"canvas-box\"><canvas id=\"" + id + "\" role=\"img\" aria-label=\"" +
         html_escape(label) + "\"></canvas></div>\n<figcaption>" + html_escape(caption) +
         "</figcaption>\n</figure>\n";
}

std::string definition_rows(const std::vector<std::pair<std::string, std::string>>& rows) {
  std::string out = "<table class=\"facts\">\n";
  for (const auto& [k, v] : rows)
    out += "<tr><th scope=\"row\">" + html_escape(k) + "</th><td>" + html_escape(v) + "</td></tr>\n";
  return out + "</table>\n";
}

std::string conditions_text(const RuleConfig& c) {
  switch (c.kind) {
    case RuleKind::kAlphaSpending:
      return "Holds under any dependence between the tests. Each p-value must be valid (at most as small as "
             "chance allows when there is no effect).";
    case RuleKind::kAlphaInvesting:
      return "Needs null p-values independent of the earlier decisions. It bounds the marginal FDR "
             "(expected false discoveries over expected discoveries), not the FDR itself.";
    case RuleKind::kLond:
      return "Needs null p-values independent of each other and of the non-null ones, or positively "
             "dependent (PRDS).";
    case RuleKind::kLordPlusPlus:
      return "Needs null p-values independent of each other and of the non-null ones.";
    case RuleKind::kSaffron:
      return "Needs null p-values independent of each other and of the non-null ones; candidate "
             "threshold lambda = " +
             format_rounded(c.candidate_threshold) + ".";
    case RuleKind::kELond:
      return "Holds under any dependence between the tests. Each null e-value must have mean at most 1; a "
             "test is rejected when its e-value reaches 1 / level.";
    case RuleKind::kAddis:
      return "Needs null p-values independent of each other and of the non-null ones, and conservative "
             "nulls (uniformly conservative); candidate threshold lambda = " +
             format_rounded(c.candidate_threshold) +
             ", discard threshold tau = " + format_rounded(c.discard_threshold) + ".";
  }
  return "";
}

}  // namespace

std::string guarantee_text(std::string_view rule) {
  if (rule == "alpha-spending")
    return "FWER <= alpha: the chance of even one false discovery in the whole stream";
  if (rule == "alpha-investing")
    return "mFDR <= alpha: expected false discoveries over expected discoveries (Foster & Stine's form)";
  if (rule == "bh" || rule == "storey-bh")
    return "FDR <= alpha over the whole list, decided in hindsight (not an online rule)";
  return "FDR <= alpha: the expected share of false discoveries among the discoveries, at every point of "
         "the stream";
}

// ---- Stream ------------------------------------------------------------------------------------

namespace {

// The stream's decisions as columns (report_encode.hpp forms); the wealth column refers to the
// levels (a rule that spends its level, as lord++ does, needs no wealth written out).
Json stream_decisions(const StreamReportData& d) {
  const std::size_t n = d.records.size();
  std::vector<std::int64_t> steps(n), decided(n);
  std::vector<std::string> ids(n);
  std::vector<double> p(n), level(n), wealth(n);
  std::vector<bool> rejected(n);
  for (std::size_t i = 0; i < n; ++i) {
    const DecisionRecord& r = d.records[i];
    steps[i] = static_cast<std::int64_t>(r.step);
    ids[i] = r.id;
    p[i] = r.p_value;
    level[i] = r.level;
    rejected[i] = r.rejected;
    wealth[i] = r.wealth;
    decided[i] = r.decided_at_ms;
  }
  const RuleConfig& c = d.info.config;
  const double divisor = c.kind == RuleKind::kSaffron ? 1 - c.candidate_threshold
                         : c.kind == RuleKind::kAddis  ? c.discard_threshold - c.candidate_threshold
                                                       : 1.0;
  return {{"step", report_detail::integer_column(steps)},
          {"id", report_detail::text_column(ids)},
          {"p_value", report_detail::number_column(p)},
          {"level", report_detail::number_column(level)},
          {"rejected", report_detail::flag_column(rejected)},
          {"wealth", report_detail::number_column(wealth, level, c.initial_wealth, divisor)},
          {"decided_at_ms", report_detail::integer_column(decided)}};
}

Json stream_running(const std::vector<RunningEntry>& running) {
  std::vector<std::string> ids;
  std::vector<std::int64_t> launch, at;
  std::vector<double> level;
  for (const RunningEntry& e : running) {
    ids.push_back(e.id);
    launch.push_back(static_cast<std::int64_t>(e.launch));
    level.push_back(e.level);
    at.push_back(e.launched_at_ms);
  }
  return {{"id", report_detail::text_column(ids)},
          {"launch", report_detail::integer_column(launch)},
          {"level", report_detail::number_column(level)},
          {"launched_at_ms", report_detail::integer_column(at)}};
}

Json stream_data(const StreamReportData& d) {
  const StreamInfo& info = d.info;
  const std::string rule(rule_name(info.config.kind));
  Json data;
  data["report"] = "stream";
  data["format"] = kDataFormat;
  data["stream"] = info.name;
  data["rule"] = rule;
  data["configuration"] = d.configuration;
  data["alpha"] = info.config.alpha;
  data["initial_wealth"] = info.config.initial_wealth;
  data["guarantee"] = guarantee_text(rule);
  data["conditions"] = conditions_text(info.config);
  data["created_at"] = timestamp_text(info.created_at_ms);
  data["closed_at"] = info.closed_at_ms ? Json(format_timestamp(*info.closed_at_ms)) : Json(nullptr);
  data["generated_at"] = timestamp_text(d.generated_at_ms);
  data["tests"] = info.tests;
  data["rejections"] = info.rejections;
  data["wealth"] = info.wealth;
  data["next_level"] = info.closed_at_ms ? Json(nullptr) : number_or_null(info.next_level);
  data["decisions"] = stream_decisions(d);
  // Wealth reserved by running tests right after each decision (launch-time levels).
  data["reserved_wealth"] = d.reserved_wealth ? report_detail::number_column(*d.reserved_wealth) : Json(nullptr);
  data["reserved"] = info.reserved;
  data["running"] = stream_running(d.running);
  std::vector<bool> keep(d.records.size());
  for (std::size_t i = 0; i < d.records.size(); ++i) keep[i] = d.records[i].rejected;
  data["drawn"] = drawing_indices(d.records.size(), keep, kMaxDrawnPoints);
  return data;
}

std::string stream_configuration(const StreamReportData& d) {
  const StreamInfo& info = d.info;
  const std::string rule(rule_name(info.config.kind));
  std::string body = "<section id=\"configuration\">\n<h2>Configuration and what it promises</h2>\n";
  body += definition_rows({
      {"stream", info.name},
      {"rule", d.configuration},
      {"guarantee", guarantee_text(rule) + " (alpha = " + format_rounded(info.config.alpha) + ")"},
      {"conditions", conditions_text(info.config)},
      {"created", timestamp_text(info.created_at_ms)},
      {"state", info.closed_at_ms ? "closed " + format_timestamp(*info.closed_at_ms) : std::string("open")},
      {"tests launched", std::to_string(info.tests)},
      {"running now", std::to_string(info.running) + " test" + (info.running == 1 ? "" : "s") + ", reserving " +
                          format_rounded(info.reserved, 6)},
      {"discoveries", std::to_string(info.rejections)},
      {"alpha-wealth now", format_rounded(info.wealth, 6)},
      {"next level", info.closed_at_ms ? std::string("none (closed)") : format_rounded(info.next_level, 6)},
  });
  body +=
      "<p>The guarantee is the published rule's, and it holds only under its conditions. Levels are "
      "fixed before each p-value is read; a test is a discovery when its p-value is at most its level.</p>\n";
  return body + "</section>\n";
}

std::string stream_charts(const StreamReportData& d, std::uint64_t discoveries) {
  const StreamInfo& info = d.info;
  const std::size_t n = d.records.size();
  std::string body = "<section id=\"charts\">\n<h2>Over the stream</h2>\n";
  body += "<p class=\"note\" id=\"thinning-note\" hidden></p>\n";
  body +=
      figure("chart-levels", "p-values against their levels",
             "Scatter chart, log scale: the p-value of each of " + std::to_string(n) +
                 " tests (circles; discoveries as filled triangles) and the level it was given (line). " +
                 std::to_string(discoveries) + " discoveries. The numbers are in the table of decisions.",
             "Each mark is a test, in step order; the line is its level. A test is a discovery when its "
             "p-value is on or below the line (filled triangles). Hover or tap a mark for its id, p-value "
             "and level. A p-value of 0 is drawn at the bottom of the chart. Table: Decisions, below.");
  body += figure("chart-wealth", "Alpha-wealth and reserved wealth after each test",
                 "Line chart: alpha-wealth after each of " + std::to_string(n) + " tests, from " +
                     format_rounded(info.config.initial_wealth) + " at the start to " +
                     format_rounded(info.wealth) + " now, and beside it (dashed) the wealth reserved by " +
                     "tests still running after each decision, " + format_rounded(info.reserved, 6) +
                     " now. The numbers are in the table of decisions.",
                 "Wealth is spent on each test and earned back on each discovery (how much depends on the "
                 "rule). A test launched before it is decided reserves its level at its launch; the dashed "
                 "line is the sum of the levels of the tests launched and not yet decided or abandoned, "
                 "right after each decision (zero when every test is decided at once). Table: Decisions, "
                 "below.");
  body += figure("chart-discoveries", "Discoveries so far",
                 "Step chart: the number of discoveries after each test, reaching " +
                     std::to_string(discoveries) + " after " + std::to_string(n) + " tests.",
                 "Each step up is one discovery (marked with a triangle). Table: Decisions, below.");
  return body + "</section>\n";
}

std::string stream_tables(const StreamReportData& d) {
  std::string body = "<section id=\"running\">\n<h2>Running tests</h2>\n";
  body += d.running.empty()
              ? std::string("<p>No test is running: every launched test has been decided or abandoned.</p>\n")
              : "<p>" + std::to_string(d.running.size()) +
                    " tests launched and not yet decided, in launch order, with the level each reserved at "
                    "its launch (its decision will be made against it; <code>alphaledger explain " +
                    html_escape(d.info.name) + " --id ID</code> shows how it was made).</p>\n";
  body += "<div class=\"table-box\" id=\"running-table\"></div>\n";
  body += "</section>\n<section id=\"decisions\">\n<h2>Decisions</h2>\n";
  body +=
      "<p>Every test in step order, with its full-precision numbers (as <code>alphaledger history</code> "
      "prints them). <label><input type=\"checkbox\" id=\"only-discoveries\"> only discoveries</label></p>\n";
  return body + "<div class=\"table-box\" id=\"decisions-table\"></div>\n</section>\n";
}

}  // namespace

std::string render_stream_report(const StreamReportData& d) {
  const StreamInfo& info = d.info;
  const std::size_t n = d.records.size();
  std::uint64_t discoveries = 0;
  for (const DecisionRecord& r : d.records) discoveries += r.rejected ? 1 : 0;
  const std::string title = "Stream " + info.name;
  const std::string subtitle = std::to_string(n) + " decided test" + (n == 1 ? "" : "s") + ", " +
                               std::to_string(discoveries) + " discover" + (discoveries == 1 ? "y" : "ies") +
                               "; report made " + timestamp_text(d.generated_at_ms);
  const std::string body = stream_configuration(d) + stream_charts(d, discoveries) + stream_tables(d);
  return page("stream", title, subtitle, body, stream_data(d));
}

// ---- Replay ------------------------------------------------------------------------------------

namespace {

// The log's own columns, in log order (report_encode.hpp forms).
Json replay_input(const ReplayReportData& d) {
  const CompactLog& log = *d.log;
  const std::size_t n = log.size();
  std::vector<std::string> ids(n);
  std::vector<double> p(n), finished(n);
  std::vector<std::int64_t> line(n);
  std::vector<bool> truth(n);
  bool any_time = false, every_time = true;
  for (std::size_t i = 0; i < n; ++i) {
    const CompactRecord& c = log.records[i];
    ids[i] = std::string(log.id(c));
    p[i] = c.p_value;
    line[i] = static_cast<std::int64_t>(c.line);
    const bool has_time = (c.flags & CompactRecord::kHasTime) != 0;
    any_time = any_time || has_time;
    every_time = every_time && has_time;
    finished[i] = has_time ? c.finished_at : std::nan("");  // NaN: null in the data
    truth[i] = (c.flags & CompactRecord::kIsNull) != 0;
  }
  Json input = {{"id", report_detail::text_column(ids)},
                {"p_value", report_detail::number_column(p)},
                {"line", report_detail::integer_column(line)}};
  if (any_time) input["finished_at"] = report_detail::number_column(finished);
  if (log.has_truth) input["is_null"] = report_detail::flag_column(truth);
  Json others = Json::object();
  for (std::size_t c = 0; c < d.input_column_names.size() && c < d.input_columns.size(); ++c) {
    if (d.input_columns[c].size() == n) others[d.input_column_names[c]] = report_detail::text_column(d.input_columns[c]);
  }
  input["columns"] = std::move(others);
  return input;
}

// Each procedure's levels and decisions (not the wealth: the page shows none, replay's CSV has
// it); `keep` gains every test some procedure rejects.
Json replay_rules(const ReplayReportData& d, std::vector<bool>& keep) {
  const ReplayResult& r = *d.result;
  Json rules = Json::array();
  for (std::size_t k = 0; k < r.procedures.size(); ++k) {
    const Procedure& proc = r.procedures[k];
    const auto& decisions = r.decisions[k];
    std::vector<double> level(decisions.size());
    std::vector<bool> rejected(decisions.size());
    for (std::size_t i = 0; i < decisions.size(); ++i) {
      level[i] = decisions[i].level;
      rejected[i] = decisions[i].rejected;
      if (decisions[i].rejected && i < keep.size()) keep[i] = true;
    }
    Json rule = {{"rule", proc.name}, {"online", proc.online()}, {"guarantee", guarantee_text(proc.name)}};
    bool extra = false;
    for (const auto& e : d.extra) extra = extra || e == proc.name;
    rule["added_for_report"] = extra;
    rule["level"] = report_detail::number_column(level);
    rule["rejected"] = report_detail::flag_column(rejected);
    if (d.summaries != nullptr && k < d.summaries->size()) {
      const ReplaySummary& s = (*d.summaries)[k];
      rule["summary"] = {{"tests", s.tests},
                         {"rejections", s.rejections},
                         {"false_discoveries", optional_json(s.false_discoveries)},
                         {"fdp", optional_json(s.fdp)},
                         {"power", optional_json(s.power)}};
    }
    rules.push_back(std::move(rule));
  }
  return rules;
}

Json replay_data(const ReplayReportData& d) {
  const CompactLog& log = *d.log;
  const std::size_t n = log.size();
  std::vector<bool> keep(n);
  Json data;
  data["report"] = "replay";
  data["format"] = kDataFormat;
  data["source"] = log.source;
  data["tests"] = n;
  data["has_truth"] = log.has_truth;
  data["generated_at"] = timestamp_text(d.generated_at_ms);
  data["input"] = replay_input(d);
  data["rules"] = replay_rules(d, keep);
  bool bh = false;
  for (const auto& proc : d.result->procedures) bh = bh || proc.name == "bh";
  data["hindsight"] = bh ? Json("bh") : Json(nullptr);
  data["drawn"] = drawing_indices(n, keep, kMaxDrawnPoints);
  return data;
}

}  // namespace

std::string render_replay_report(const ReplayReportData& d) {
  const CompactLog& log = *d.log;
  const ReplayResult& r = *d.result;
  const std::size_t n = log.size();
  const std::string title = "Replay of " + log.source;
  const std::string subtitle =
      std::to_string(n) + " tests decided in order by " + std::to_string(r.procedures.size()) + " procedure" +
      (r.procedures.size() == 1 ? "" : "s") + "; report made " + timestamp_text(d.generated_at_ms);
  std::string names;
  for (const auto& proc : r.procedures) names += (names.empty() ? "" : ", ") + proc.name;
  std::string body;
  body += "<section id=\"summary\">\n<h2>What each rule finds</h2>\n";
  body +=
      "<p>The same log, in the same order, decided by each rule as if the tests had arrived one at a time "
      "(the online rules), and by hindsight procedures that see every p-value at once (bh, storey-bh: a "
      "baseline no online rule can use).";
  if (!d.extra.empty())
    body += " The hindsight BH answer was added for this report; it is not in the CSV output.";
  body += "</p>\n";
  if (log.has_truth)
    body +=
        "<p>The log says which tests are null (<code>is_null</code>), so each rule's false discovery "
        "proportion (FDP: false discoveries over discoveries) and power (share of non-null tests found) "
        "are known.</p>\n";
  body += "<div class=\"table-box\" id=\"summary-table\"></div>\n";
  body += figure("chart-summary", log.has_truth ? "FDP and power per rule" : "Discoveries per rule",
                 log.has_truth ? "Bar chart: false discovery proportion and power of each rule (" + names +
                                     "). The numbers are in the table above."
                               : "Bar chart: number of discoveries of each rule (" + names +
                                     "). The numbers are in the table above.",
                 log.has_truth ? "Hatched bars: FDP; plain bars: power. Table: above." : "Table: above.");
  body += "</section>\n<section id=\"over-time\">\n<h2>Discoveries over the log</h2>\n";
  body += "<p class=\"note\" id=\"thinning-note\" hidden></p>\n";
  body += figure("chart-discoveries", "Discoveries so far, per rule",
                 "Line chart: the number of discoveries of each rule (" + names + ") after each of " +
                     std::to_string(n) + " tests. The per-test table below has every decision.",
                 "One line per rule, each with its own colour, dash pattern and marker shape. A hindsight "
                 "procedure's line counts its final answer in log order. Table: Per test, below.");
  body += "</section>\n<section id=\"per-test\">\n<h2>Per test</h2>\n";
  body +=
      "<p>Every test of the log with its own columns (id, p_value, finished_at and is_null when given, the "
      "line in the file, and the log's other columns when it was read from a file), then each rule's "
      "level and decision (<strong>R</strong> = "
      "rejected, a discovery). <label><input type=\"checkbox\" id=\"only-discoveries\"> only tests some "
      "rule rejects</label></p>\n";
  body += "<div class=\"table-box\" id=\"tests-table\"></div>\n</section>\n";
  return page("replay", title, subtitle, body, replay_data(d));
}

// ---- Simulation ----------------------------------------------------------------------------------

namespace {

Json simulation_rows(const SimulationReportData& d, double& target) {
  Json rows = Json::array();
  for (std::size_t v = 0; v < d.values.size(); ++v) {
    for (const ProcedureSummary& s : d.summaries[v]) {
      target = s.target;
      Json row;
      row["value"] = d.values[v];
      row["rule"] = s.rule;
      row["runs"] = s.runs;
      row["tests"] = s.tests;
      row["mean_rejections"] = number_or_null(s.mean_rejections);
      row["fdr"] = number_or_null(s.fdr);
      row["fdr_se"] = number_or_null(s.fdr_se);
      row["mfdr"] = number_or_null(s.mfdr);
      row["power"] = number_or_null(s.power);
      row["power_se"] = number_or_null(s.power_se);
      row["fwer"] = number_or_null(s.fwer);
      row["fwer_se"] = number_or_null(s.fwer_se);
      row["promised"] = std::string(error_metric_name(s.metric));
      row["promised_value"] = number_or_null(s.promised);
      row["promised_se"] = number_or_null(s.promised_se);
      row["target"] = s.target;
      row["exceeds_target"] = s.exceeds_target;
      rows.push_back(std::move(row));
    }
  }
  return rows;
}

std::string swept_label(const std::string& parameter) {
  return parameter == "nonnull_fraction" ? "non-null fraction"
         : parameter == "effect"         ? "effect (mean z of a non-null test)"
         : parameter == "mean_duration"  ? "mean duration (launches between launch and finish)"
                                         : std::string();
}

Json simulation_data(const SimulationReportData& d, double& target) {
  Json rows = simulation_rows(d, target);
  const SimulationModel& m = d.model;
  Json model = {{"tests", m.tests},
                {"nonnull_fraction", m.nonnull_fraction},
                {"effect", m.effect},
                {"effect_sd", m.effect_sd},
                {"null_mean", m.null_mean},
                {"nonnull_pattern", pattern_text(m.pattern)},
                {"correlation", correlation_text(m.correlation)},
                {"mean_duration", m.mean_duration},
                {"peeking_looks", d.peeking_looks}};
  Json data;
  data["report"] = "simulation";
  data["format"] = kDataFormat;
  data["swept"] = d.parameter.empty() ? Json(nullptr) : Json(d.parameter);
  data["swept_label"] = swept_label(d.parameter);
  data["values"] = d.values;
  data["model"] = std::move(model);
  data["runs"] = d.runs;
  data["seed"] = d.seed;
  data["target"] = target;
  data["generated_at"] = timestamp_text(d.generated_at_ms);
  data["rows"] = std::move(rows);
  return data;
}

std::string simulation_settings(const SimulationReportData& d, double target) {
  const SimulationModel& m = d.model;
  const std::string swept = swept_label(d.parameter);
  std::string values_text;
  for (double v : d.values) values_text += (values_text.empty() ? "" : ", ") + format_rounded(v);
  std::string body;
  body += "<section id=\"settings\">\n<h2>Settings</h2>\n";
  body += definition_rows({
      {"swept",
       d.parameter.empty() ? std::string("nothing (one setting)") : swept + ": " + values_text},
      {"tests per stream", std::to_string(m.tests)},
      {"streams per setting", std::to_string(d.runs)},
      {"non-null fraction", d.parameter == "nonnull_fraction" ? "swept" : format_rounded(m.nonnull_fraction)},
      {"non-null pattern", pattern_text(m.pattern)},
      {"effect", d.parameter == "effect" ? "swept" : format_rounded(m.effect)},
      {"effect sd", format_rounded(m.effect_sd)},
      {"null mean", format_rounded(m.null_mean)},
      {"correlation", correlation_text(m.correlation)},
      {"mean duration",
       d.parameter == "mean_duration"
           ? std::string("swept")
           : m.mean_duration == 0 ? std::string("0 (each test decided before the next is launched)")
                                  : format_rounded(m.mean_duration) + " launches between a test's launch and its finish"},
      {"peeking looks", d.peeking_looks == 0 ? std::string("none (only the final p-value is read)")
                                             : std::to_string(d.peeking_looks) + " looks per test"},
      {"seed", std::to_string(d.seed)},
      {"target (alpha)", format_rounded(target)},
  });
  body +=
      "<p>Every rule decides the very same simulated p-values in each stream, and every setting uses the "
      "same seed, so differences between rules and between settings are not noise from different "
      "draws. Error bars are plus or minus 2 Monte Carlo standard errors over the streams.</p>\n";
  return body;
}

std::string simulation_charts(const SimulationReportData& d, double target) {
  const std::string x = d.parameter.empty() ? std::string("the one setting") : swept_label(d.parameter);
  std::string body;
  body += "</section>\n<section id=\"charts\">\n<h2>Error rate and power</h2>\n";
  body += figure("chart-fdr", "Realized FDR per rule",
                 "Line chart with error bars: realized FDR of each rule across " + x + ", with the target " +
                     format_rounded(target) + " as a dashed black line. The numbers are in the table below.",
                 "FDR: mean over streams of false discoveries over max(discoveries, 1). A rule keeps its "
                 "promise when its point is at or below the dashed line, allowing for the error bar. "
                 "alpha-investing promises mFDR and alpha-spending FWER; see the table. Table: below.");
  body += figure(
      "chart-power", "Power per rule",
      "Line chart with error bars: power of each rule across " + x + ". The numbers are in the table below.",
      "Power: mean over streams of the share of non-null tests that were rejected. Each rule has its "
      "own colour, dash pattern and marker shape. Table: below.");
  body += "</section>\n<section id=\"results\">\n<h2>Results</h2>\n";
  body +=
      "<p>One row per setting and rule, as the CSV output of the same run, plus the promise and the check "
      "(ABOVE TARGET: the realized promised rate is above the target by more than 3 standard errors).</p>\n";
  body += "<div class=\"table-box\" id=\"results-table\"></div>\n</section>\n";
  return body;
}

}  // namespace


std::string render_simulation_report(const SimulationReportData& d) {
  double target = 0.05;
  Json data = simulation_data(d, target);
  const std::string swept = swept_label(d.parameter);
  const std::string title = "Simulation" + (d.parameter.empty() ? std::string() : " across " + swept);
  const std::string subtitle = std::to_string(d.runs) + " simulated streams of " + std::to_string(d.model.tests) +
                               " one-sided z-tests per setting, seed " + std::to_string(d.seed) +
                               "; report made " + timestamp_text(d.generated_at_ms);
  return page("simulation", title, subtitle, simulation_settings(d, target) + simulation_charts(d, target),
              std::move(data));
}

}  // namespace alphaledger
