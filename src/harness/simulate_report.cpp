// simulate's CSV, JSON and table output (src/harness/simulate_report.hpp).
#include "harness/simulate_report.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>

#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"

namespace alphaledger {
namespace {

nlohmann::ordered_json json_number(double v) {
  return std::isfinite(v) ? nlohmann::ordered_json(v) : nlohmann::ordered_json(nullptr);
}

std::string fixed(double v, int decimals) {
  if (!std::isfinite(v)) return "-";
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, v);
  return buf;
}

std::string pad(std::string s, std::size_t width, bool left = false) {
  if (s.size() >= width) return s;
  const std::string fill(width - s.size(), ' ');
  return left ? s + fill : fill + s;
}

// Breaks text into lines of at most `width` characters at spaces; continuation lines get `indent`.
std::string wrap(const std::string& text, std::size_t width = 100, std::size_t indent = 2) {
  std::string out, line;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find(' ', start);
    if (end == std::string::npos) end = text.size();
    const std::string word = text.substr(start, end - start);
    if (!line.empty() && line.size() + 1 + word.size() > width) {
      out += line + "\n";
      line = std::string(indent, ' ');
    } else if (!line.empty() && line.find_first_not_of(' ') != std::string::npos) {
      line += ' ';
    }
    line += word;
    start = end + 1;
  }
  if (!line.empty()) out += line + "\n";
  return out;
}

bool listed(const std::vector<ProcedureSummary>& rows, std::string_view name) {
  for (const auto& r : rows)
    if (r.rule == name) return true;
  return false;
}

std::string join_listed(const std::vector<ProcedureSummary>& rows,
                        const std::vector<std::string_view>& names) {
  std::string out;
  for (auto n : names) {
    if (!listed(rows, n)) continue;
    if (!out.empty()) out += ", ";
    out += n;
  }
  return out;
}

}  // namespace

void write_simulation_csv(std::ostream& out, const std::vector<ProcedureSummary>& rows) {
  out << "rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer\n";
  for (const auto& r : rows) {
    out << csv_field(r.rule) << ',' << r.runs << ',' << r.tests << ',' << format_number(r.mean_rejections)
        << ',' << format_number(r.fdr) << ',' << format_number(r.fdr_se) << ',' << format_number(r.mfdr)
        << ',' << format_number(r.power) << ',' << format_number(r.power_se) << ',' << format_number(r.fwer)
        << '\n';
  }
}

void write_simulation_sweep_csv(std::ostream& out, std::string_view parameter,
                                const std::vector<double>& values,
                                const std::vector<std::vector<ProcedureSummary>>& summaries) {
  out << parameter << ",rule,runs,tests,mean_rejections,fdr,fdr_se,mfdr,power,power_se,fwer\n";
  for (std::size_t v = 0; v < values.size() && v < summaries.size(); ++v) {
    for (const auto& r : summaries[v]) {
      out << format_number(values[v]) << ',' << csv_field(r.rule) << ',' << r.runs << ',' << r.tests << ','
          << format_number(r.mean_rejections) << ',' << format_number(r.fdr) << ',' << format_number(r.fdr_se)
          << ',' << format_number(r.mfdr) << ',' << format_number(r.power) << ',' << format_number(r.power_se)
          << ',' << format_number(r.fwer) << '\n';
    }
  }
}

void write_simulation_json(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                           std::string_view parameter, double value) {
  for (const auto& r : rows) {
    nlohmann::ordered_json j;
    if (!parameter.empty()) j[std::string(parameter)] = value;
    j["rule"] = r.rule;
    j["runs"] = r.runs;
    j["tests"] = r.tests;
    j["mean_rejections"] = json_number(r.mean_rejections);
    j["fdr"] = json_number(r.fdr);
    j["fdr_se"] = json_number(r.fdr_se);
    j["mfdr"] = json_number(r.mfdr);
    j["power"] = json_number(r.power);
    j["power_se"] = json_number(r.power_se);
    j["fwer"] = json_number(r.fwer);
    j["evaluation"] = r.evaluation ? nlohmann::ordered_json(std::string(evaluation_name(*r.evaluation)))
                                   : nlohmann::ordered_json(nullptr);
    j["mfdr_se"] = json_number(r.mfdr_se);
    j["fwer_se"] = json_number(r.fwer_se);
    j["promised"] = std::string(error_metric_name(r.metric));
    j["promised_value"] = json_number(r.promised);
    j["promised_se"] = json_number(r.promised_se);
    j["target"] = r.target;
    j["exceeds_target"] = r.exceeds_target;
    out << json_text(j) << '\n';
  }
}

std::string evaluation_note(const std::vector<ProcedureSummary>& rows) {
  std::string fast, exact;
  for (const auto& r : rows) {
    if (!r.evaluation) continue;
    std::string& list = *r.evaluation == Evaluation::kFast ? fast : exact;
    if (!list.empty()) list += ", ";
    list += r.rule;
  }
  std::string out;
  if (!fast.empty()) out = "fast for " + fast;
  if (!exact.empty()) out += (out.empty() ? "" : "; ") + std::string("exact for ") + exact;
  return out;
}

std::string exceedance_note(const ProcedureSummary& r) {
  if (!r.exceeds_target) return "";
  const std::string metric(error_metric_name(r.metric));
  return r.rule + ": realized " + metric + " " + fixed(r.promised, 4) + " is above its target " +
         format_rounded(r.target) + " by more than 3 standard errors (SE " + fixed(r.promised_se, 4) + ")";
}

namespace {

// The lines above the table: the runs, the model, overlap, peeking and evaluation.
void write_settings_lines(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                          const SimulationSettings& st) {
  const SimulationModel& m = st.model;
  out << "Simulated " << st.runs << " stream" << (st.runs == 1 ? "" : "s") << " of " << m.tests
      << " one-sided z-tests (seed " << st.seed << ", " << st.threads << " thread"
      << (st.threads == 1 ? "" : "s") << ")\n";
  out << "non-null share " << format_rounded(m.nonnull_fraction) << " (" << pattern_text(m.pattern)
      << "), effect " << format_rounded(m.effect) << " (sd " << format_rounded(m.effect_sd) << "), null mean "
      << format_rounded(m.null_mean)
      << (m.null_mean < 0   ? " (conservative nulls)"
          : m.null_mean > 0 ? " (anti-conservative nulls)"
                            : " (uniform nulls)")
      << ", "
      << (m.correlation.kind == Correlation::kNone
              ? std::string("independent tests")
              : "correlated tests (" + correlation_text(m.correlation) + ")")
      << "\n";
  if (m.mean_duration > 0) {
    out << "tests overlap: each runs while on average " << format_rounded(m.mean_duration)
        << " later tests launch (geometric); levels are fixed at launch\n";
  }
  if (st.looks > 0) {
    out << "peeking: " << st.looks
        << " looks per test; :peek-fixed stops at the first fixed-horizon p <= level, "
        << ":peek-anytime uses the always-valid p-value, :peek-mixture the mixture e-value\n";
  }
  const std::string eval = evaluation_note(rows);
  if (!eval.empty()) out << "evaluation: " << eval << "\n";
  out << "\n";
}

// The table: one row per procedure, then the mFDR_eta lines.
void write_rows(std::ostream& out, const std::vector<ProcedureSummary>& rows) {
  std::size_t width = 16;
  for (const auto& r : rows) width = std::max(width, r.rule.size() + 2);
  out << pad("rule", width, true) << pad("rejections", 11) << pad("FDR", 8) << pad("+-SE", 8)
      << pad("mFDR", 8) << pad("FWER", 8) << pad("+-SE", 8) << pad("power", 8) << pad("+-SE", 8) << "  "
      << pad("promise", 20, true) << "check\n";
  for (const auto& r : rows) {
    const std::string promise = std::string(error_metric_name(r.metric)) + " <= " + format_rounded(r.target);
    const std::string check = r.exceeds_target ? "ABOVE TARGET" : std::isnan(r.promised_se) ? "-" : "ok";
    out << pad(r.rule, width, true) << pad(fixed(r.mean_rejections, 1), 11) << pad(fixed(r.fdr, 4), 8)
        << pad(fixed(r.fdr_se, 4), 8) << pad(fixed(r.mfdr, 4), 8) << pad(fixed(r.fwer, 4), 8)
        << pad(fixed(r.fwer_se, 4), 8) << pad(fixed(r.power, 4), 8) << pad(fixed(r.power_se, 4), 8) << "  "
        << pad(promise, 20, true) << check << "\n";
  }
  for (const auto& r : rows) {
    if (r.metric != ErrorMetric::kMfdrEta) continue;
    out << wrap(r.rule + " promises Foster & Stine's mFDR_eta = E[V] / (E[R] + eta) with eta = W0/alpha = " +
                format_rounded(r.eta) + ": realized " + fixed(r.promised, 4) + " (SE " +
                fixed(r.promised_se, 4) + ").");
  }
  out << "\n";
}

// Which rows are above their target, and what the columns mean.
void write_checks(std::ostream& out, const std::vector<ProcedureSummary>& rows) {
  bool any = false;
  for (const auto& r : rows) {
    const std::string note = exceedance_note(r);
    if (note.empty()) continue;
    out << wrap("ABOVE TARGET  " + note, 100, 14);
    any = true;
  }
  bool single_run = false;
  for (const auto& r : rows) single_run = single_run || r.runs < 2;
  if (single_run) {
    out << "With one run there are no standard errors, so nothing is checked against its target.\n";
  } else if (!any) {
    out << "No rule's realized error rate is above its target by more than 3 standard errors.\n";
  }
  out << "FDR: mean of V/max(R,1) at the end of the stream; mFDR: sum V / sum max(R,1); FWER: share of\n"
         "streams with a false discovery; power: mean share of non-nulls rejected; SE: Monte Carlo\n"
         "standard error over streams.\n";
}

// Which promises the chosen scenario does not cover (docs/simulate.md lists the sources).
void write_scope_notes(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                       const SimulationModel& m) {
  bool peek_fixed = false;
  for (const auto& r : rows)
    peek_fixed = peek_fixed || r.rule.ends_with(evidence_suffix(Evidence::kPeekFixed));
  if (peek_fixed) {
    out << wrap(
        "Note: a fixed-horizon p-value checked at every look and stopped at the first p <= level is not a "
        "valid p-value, so the :peek-fixed rows have no promise; they show what such peeking costs.");
  }
  if (m.null_mean > 0) {
    out << wrap(
        "Note: with a positive null mean the null p-values are not valid, so no rule promises anything "
        "here.");
    return;
  }
  if (m.correlation.kind != Correlation::kNone) {
    const std::string not_covered =
        join_listed(rows, {"lord++", "saffron", "addis", "alpha-investing", "storey-bh"});
    std::string covered;
    for (const auto& [name, why] : std::vector<std::pair<std::string_view, std::string_view>>{
             {"alpha-spending", "any dependence"},
             {"e-lond", "any dependence"},
             {"e-bh", "any dependence"},
             {"lond", "positive regression dependence"},
             {"bh", "positive regression dependence"}}) {
      if (!listed(rows, name)) continue;
      covered += (covered.empty() ? "" : ", ") + std::string(name) + " (" + std::string(why) + ")";
    }
    std::string note = "Note: the tests are positively correlated.";
    if (!not_covered.empty()) note += " The promises of " + not_covered + " assume independent tests.";
    if (!covered.empty()) note += " Still covered: " + covered + ".";
    out << wrap(note);
  }
}

}  // namespace

void write_simulation_table(std::ostream& out, const std::vector<ProcedureSummary>& rows,
                            const SimulationSettings& st) {
  write_settings_lines(out, rows, st);
  write_rows(out, rows);
  write_checks(out, rows);
  write_scope_notes(out, rows, st.model);
}

}  // namespace alphaledger
