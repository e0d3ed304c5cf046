// The simulation report page (`simulate --report`; docs/reports.md "Simulation report"): settings,
// error rate and power per rule, and the results table. The shared frame is in report_pages.cpp
// (harness/report_pages.hpp).
#include <cmath>
#include <string>

#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "harness/report_pages.hpp"

namespace alphaledger {
namespace {

using report_detail::definition_rows;
using report_detail::figure;
using report_detail::Json;
using report_detail::kDataFormat;
using report_detail::number_or_null;
using report_detail::page;
using report_detail::timestamp_text;

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
