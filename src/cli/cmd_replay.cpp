// alphaledger replay FILE [--rules R1,R2,...] [rule flags] [--summary]
#include <algorithm>
#include <charconv>
#include <cmath>
#include <iostream>
#include <nlohmann/json.hpp>
#include <unistd.h>

#include "alphaledger/replay.hpp"
#include "alphaledger/report.hpp"
#include "cli/cli_errors.hpp"
#include "cli/command.hpp"
#include "alphaledger/text.hpp"
#include "harness/json_text.hpp"
#include "harness/report_columns.hpp"

namespace alphaledger::cli {
namespace {

struct ReplayOptions {
  std::string file;
  std::string rules = "lord++";
  std::optional<std::string> format;
  bool summary = false;
  bool rejected_only = false;  // --rejected-only: only the rows a rule rejected
  bool wide = false;           // --wide: one row per test, a level and a decision column per rule
  std::optional<std::string> report;  // --report FILE.html (docs/reports.md)
  std::optional<std::string> alternative;
  RuleFlags flags;
};

std::string opt_text(const std::optional<double>& v) { return v ? format_number(*v) : ""; }

// format_number() and std::to_string() written straight onto `row` (no temporary strings).
void append_double(std::string& row, double v) { append_number_text(row, v); }
void append_number(std::string& row, std::uint64_t v) {
  char buf[24];
  row.append(buf, std::to_chars(buf, buf + sizeof buf, v).ptr);
}

// A progress line on stderr for long replays, only when stderr is a terminal: never in stdout,
// never when stderr is piped or redirected. Rewritten in place with a carriage return.
class Progress {
 public:
  Progress(std::size_t tests, std::size_t rules)
      : total_(tests * rules), on_(total_ >= kLong && isatty(STDERR_FILENO) == 1) {}
  void tick(std::string_view rule) {
    if (!on_ || ++done_ % kEvery != 0) return;
    std::cerr << "\rreplay: " << rule << ", " << done_ << " of " << total_ << " decisions" << std::flush;
  }
  ~Progress() {
    if (on_ && done_ >= kEvery) std::cerr << "\r\033[K" << std::flush;  // clear the line
  }

 private:
  static constexpr std::size_t kLong = 200000;  // decisions; a shorter replay is done before it matters
  static constexpr std::size_t kEvery = 65536;
  std::size_t total_;
  bool on_;
  std::size_t done_ = 0;
};

// One output line, by the one JSON writer (harness/json_text.hpp: never throws; ids are valid
// UTF-8 already, the log reader refuses any other).
std::string json_line(const nlohmann::ordered_json& j) { return json_text(j) + '\n'; }

// The log's columns that --wide prints from the reader itself; every other column of the file
// (team, metric, finished_at as written...) is read again and printed as written.
constexpr std::string_view kWideKeepsNames[] = {"id", "p_value", "e_value"};

// The file's other columns that --wide prints: a column that has the name of a column we print
// is left out.
std::vector<std::size_t> wide_shown_columns(const InputColumns& others, const std::vector<Procedure>& procs,
                                            bool e_values) {
  std::vector<std::string> taken = {"line", "id", "p_value"};
  if (e_values) taken.emplace_back("e_value");
  for (const auto& proc : procs) {
    taken.push_back("level_" + proc.name);
    taken.push_back("rejected_" + proc.name);
  }
  std::vector<std::size_t> shown;
  for (std::size_t c = 0; c < others.names.size(); ++c) {
    if (std::find(taken.begin(), taken.end(), others.names[c]) == taken.end()) shown.push_back(c);
  }
  return shown;
}

// replay --wide: one row per test in log order: `line,id,p_value[,e_value]`, the log's other
// columns as written, then `level_RULE,rejected_RULE` for each rule. The decisions are replay_each's,
// the function the long form prints from, so the numbers are the long form's bit for bit.
Status print_wide(const ReplayOptions& o, const GlobalOptions& g, const CompactLog& log,
                  const std::vector<Procedure>& procs, std::optional<std::string_view> forced,
                  std::ostream& out) {
  const std::size_t n = log.size();
  std::vector<std::vector<double>> levels(procs.size());
  std::vector<std::vector<std::uint8_t>> rejected(procs.size());
  std::vector<std::uint8_t> any_rejected(n, 0);
  Progress progress(n, procs.size());
  for (std::size_t k = 0; k < procs.size(); ++k) {
    levels[k].resize(n);
    rejected[k].resize(n);
    replay_each(log, procs[k], [&](std::size_t i, const Decision& d) {
      progress.tick(procs[k].name);
      levels[k][i] = d.level;
      rejected[k][i] = d.rejected ? 1 : 0;
      any_rejected[i] |= rejected[k][i];
    });
  }
  InputColumns others = read_input_columns(o.file, forced, log, kWideKeepsNames);
  const bool e_values = log.has_e_values;
  const bool p_values = log.has_p_values;
  const std::vector<std::size_t> shown = wide_shown_columns(others, procs, e_values);
  std::string row;
  if (!g.json) {
    row += e_values ? "line,id,p_value,e_value" : "line,id,p_value";
    for (std::size_t c : shown) {
      row += ',';
      row += csv_field(others.names[c]);
    }
    for (const auto& proc : procs) row += ",level_" + proc.name + ",rejected_" + proc.name;
    row += '\n';
  }
  for (std::size_t i = 0; i < n; ++i) {
    if (o.rejected_only && any_rejected[i] == 0) continue;
    const CompactRecord& r = log.records[i];
    if (g.json) {
      nlohmann::ordered_json j = {{"line", r.line}, {"id", std::string(log.id(r))}};
      j["p_value"] = p_values ? nlohmann::ordered_json(r.p_value) : nlohmann::ordered_json(nullptr);
      if (e_values) j["e_value"] = r.e_value;
      for (std::size_t c : shown) j[others.names[c]] = others.columns[c][i];
      for (std::size_t k = 0; k < procs.size(); ++k) {
        j["level_" + procs[k].name] = levels[k][i];
        j["rejected_" + procs[k].name] = rejected[k][i];
      }
      row += json_line(j);
    } else {
      append_number(row, r.line);
      row += ',';
      row += csv_field(log.id(r));
      row += ',';
      if (p_values) append_double(row, r.p_value);
      if (e_values) {
        row += ',';
        append_double(row, r.e_value);
      }
      for (std::size_t c : shown) {
        row += ',';
        row += csv_field(others.columns[c][i]);
      }
      for (std::size_t k = 0; k < procs.size(); ++k) {
        row += ',';
        append_double(row, levels[k][i]);
        row += rejected[k][i] != 0 ? ",1" : ",0";
      }
      row += '\n';
    }
    if (row.size() >= (1 << 16)) {
      out << row;
      row.clear();
    }
  }
  out << row;
  return {};
}

// replay --summary: one row per procedure, with the promise of each.
void print_summary(const CompactLog& log, const std::vector<Procedure>& procs, const GlobalOptions& g,
                   std::ostream& out) {
  const auto rows = summarize(log, procs);
  if (!g.json) out << "rule,tests,rejections,false_discoveries,fdp,power,guarantee\n";
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const ReplaySummary& s = rows[i];
    const std::string guarantee(guarantee_of(procs[i]));
    if (g.json) {
      nlohmann::ordered_json j = {{"rule", s.rule}, {"tests", s.tests}, {"rejections", s.rejections}};
      j["false_discoveries"] = s.false_discoveries ? nlohmann::ordered_json(*s.false_discoveries)
                                                   : nlohmann::ordered_json(nullptr);
      j["fdp"] = s.fdp ? nlohmann::ordered_json(*s.fdp) : nlohmann::ordered_json(nullptr);
      j["power"] = s.power ? nlohmann::ordered_json(*s.power) : nlohmann::ordered_json(nullptr);
      j["guarantee"] = guarantee;
      out << json_line(j);
    } else {
      out << s.rule << ',' << s.tests << ',' << s.rejections << ','
          << (s.false_discoveries ? std::to_string(*s.false_discoveries) : "") << ',' << opt_text(s.fdp)
          << ',' << opt_text(s.power) << ',' << guarantee << '\n';
    }
  }
}

// Each procedure in turn over the read log, one row per decision, written as they are made.
void print_decisions(const ReplayOptions& o, const GlobalOptions& g, const CompactLog& log,
                     const std::vector<Procedure>& procs, std::ostream& out) {
  // A log with launch times adds the launch number after the step (docs/formats.md).
  // A log with e-values adds an e_value column after p_value; p_value is empty when the log has none.
  const bool launches = log.has_launch;
  const bool e_values = log.has_e_values;
  const bool p_values = log.has_p_values;
  if (!g.json) out << replay_csv_header(log);
  std::string row;
  Progress progress(log.size(), procs.size());
  for (const Procedure& proc : procs) {
    const std::string& name = proc.name;
    replay_each(log, proc, [&](std::size_t k, const Decision& d) {
      progress.tick(name);
      if (o.rejected_only && !d.rejected) return;
      const CompactRecord& r = log.records[k];
      if (g.json) {
        nlohmann::ordered_json j = {{"rule", name}, {"step", d.step}};
        if (launches)  // null for bh / storey-bh
          j["launch"] = d.launch > 0 ? nlohmann::ordered_json(d.launch) : nlohmann::ordered_json(nullptr);
        j["id"] = std::string(log.id(r));
        j["p_value"] = p_values ? nlohmann::ordered_json(r.p_value) : nlohmann::ordered_json(nullptr);
        if (e_values) j["e_value"] = r.e_value;
        j["level"] = d.level;
        j["rejected"] = d.rejected ? 1 : 0;
        j["wealth"] = d.wealth ? nlohmann::ordered_json(*d.wealth) : nlohmann::ordered_json(nullptr);
        row += json_line(j);
      } else {
        append_replay_csv_row(row, name, log, k, d);
      }
      if (row.size() >= (1 << 16)) {  // written in blocks: one call per row would dominate
        out << row;
        row.clear();
      }
    });
  }
  out << row;
}

Status run_replay(const ReplayOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.wide && o.summary) {
    return invalid_input("--wide and --summary do not go together: --summary prints one row per rule, "
                         "--wide one row per test");
  }
  auto names = split_rule_list(o.rules);
  if (!names) return names.error();
  auto procs = resolve_procedures(*names, o.flags.to_spec(), /*allow_offline=*/true);
  if (!procs) return procs.error();
  if (o.report) {
    if (auto s = check_output_path(*o.report, "--report"); !s) return s;
  }
  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  ReadOptions read_options;
  if (o.alternative) {
    auto alt = parse_alternative(*o.alternative);
    if (!alt) return alt.error();
    read_options.alternative = *alt;
  }
  auto log = read_log_argument(o.file, forced, read_options);
  if (!log) return log.error();
  if (auto s = check_log_columns(*log, *procs); !s) return s;
  if (o.wide) {
    if (auto s = print_wide(o, g, *log, *procs, forced, out); !s) return s;
    if (o.report) return write_replay_report(*o.report, *log, *procs, o.flags.alpha, o.file, forced);
    return {};
  }
  if (o.summary) {
    print_summary(*log, *procs, g, out);
    if (o.report) return write_replay_report(*o.report, *log, *procs, o.flags.alpha, o.file, forced);
    return {};
  }
  print_decisions(o, g, *log, *procs, out);
  if (o.report) return write_replay_report(*o.report, *log, *procs, o.flags.alpha, o.file, forced);
  return {};
}
}  // namespace

void add_replay_command(CLI::App& app, CommandContext& ctx) {
  auto opts = std::make_shared<ReplayOptions>();
  CLI::App* sub = app.add_subcommand(
      "replay", "decide a whole log of finished tests with one or more rules, touching no ledger");
  sub->add_option("file", opts->file,
                  "log of tests: CSV with a header, or JSON Lines (docs/formats.md); - reads standard input")
      ->required();
  sub->add_option("--rules", opts->rules,
                  "comma-separated rules: alpha-spending, alpha-investing, lond, lord++, saffron, addis, e-lond, "
                  "bh, storey-bh, e-bh; default lord++");
  sub->add_option("--format", opts->format, "csv or jsonl; default from the file extension")
      ->check(CLI::IsMember({"csv", "jsonl"}));
  sub->add_option(
      "--alternative", opts->alternative,
      "direction of tests computed from summary columns: two-sided, greater or less; default two-sided");
  sub->add_flag("--summary", opts->summary,
                "one row per rule: tests, rejections, false discoveries, fdp, power, guarantee (FDR, mFDR, FWER)");
  sub->add_flag("--rejected-only", opts->rejected_only,
                "print only the rows a rule rejected (with --wide: the tests any rule rejected)");
  sub->add_flag("--wide", opts->wide,
                "one row per test: the log's own columns, then a level and a decision column per rule");
  sub->add_option("--report", opts->report,
                  "also write one self-contained HTML page of this replay (docs/reports.md)")
      ->type_name("FILE");
  add_rule_flags(sub, opts->flags);
  sub->callback(
      [&ctx, opts] { ctx.run = [&ctx, opts] { return run_replay(*opts, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
