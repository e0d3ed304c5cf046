// The frame of the three HTML reports (include/alphaledger/report.hpp; docs/reports.md). Each page
// is one file: static HTML for the words, the data as JSON in a <script type="application/json">
// block, Chart.js inline, and a small script that draws the charts and fills the tables from the
// data. This file holds the page around the sections and the parts every page uses
// (harness/report_pages.hpp); the pages are report_stream_page.cpp, report_replay_page.cpp and
// report_simulation_page.cpp.
#include "harness/report_pages.hpp"

#include <string>

#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"
#include "harness/report_assets.hpp"

namespace alphaledger {
namespace report_detail {
extern const char kChartJs[];
extern const std::size_t kChartJsSize;

namespace {

std::string dump(const Json& j) { return json_text(j); }

}  // namespace

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

}  // namespace report_detail

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

}  // namespace alphaledger
