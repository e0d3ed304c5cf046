// The stream report page (`report STREAM`; docs/reports.md "Stream report"): configuration and
// promise, the charts over the stream, running tests and decisions. The shared frame is in
// report_pages.cpp (harness/report_pages.hpp).
#include <cmath>
#include <string>

#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "harness/report_pages.hpp"

namespace alphaledger {
namespace {

using report_detail::conditions_text;
using report_detail::definition_rows;
using report_detail::figure;
using report_detail::Json;
using report_detail::kDataFormat;
using report_detail::number_or_null;
using report_detail::page;
using report_detail::timestamp_text;

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

}  // namespace alphaledger
