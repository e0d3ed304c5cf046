// The replay report page (`replay --report`; docs/reports.md "Replay report"): what each rule
// finds in the same log, discoveries over the log, and every test. The shared frame is in
// report_pages.cpp (harness/report_pages.hpp).
#include <cmath>
#include <string>

#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "harness/report_pages.hpp"

namespace alphaledger {
namespace {

using report_detail::figure;
using report_detail::Json;
using report_detail::kDataFormat;
using report_detail::optional_json;
using report_detail::page;
using report_detail::timestamp_text;

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

}  // namespace alphaledger
