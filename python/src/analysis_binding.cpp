// replay and simulate in Python: the CLI's commands over the same harness, run without the GIL.
#include <pybind11/stl.h>

#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/replay.hpp"
#include "alphaledger/report.hpp"
#include "alphaledger/simulate.hpp"
#include "alphaledger/test_log.hpp"
#include "alphaledger/text.hpp"
#include "binding.hpp"
#include "harness/simulate_report.hpp"

namespace alphaledger::python {

namespace {

struct ReplayColumns {
  std::vector<std::string> rule, id;
  std::vector<std::uint64_t> step;
  std::vector<std::optional<std::uint64_t>> launch;  // only with launched_at; None for bh / storey-bh / e-bh
  std::vector<std::optional<double>> p_value;        // None when the log has no p-values
  std::vector<double> e_value;                       // only when the log has e-values
  std::vector<double> level;
  std::vector<int> rejected;
  std::vector<std::optional<double>> wealth;
};

// Reads the log from a file (`path`) or from CSV text (`text`, named `source` in messages),
// then replays it; both without the GIL. Returns the CLI's CSV text when `csv`, else columns
// (with "columns": their order). The rows, columns and CSV are those of `alphaledger replay`: a
// launch column after step when the log has launched_at, an e_value column after p_value when it
// has e-values. `report`: also writes the page of `replay --report`.
py::object replay_native(const std::optional<std::string>& path, const std::optional<std::string>& text,
                         const std::string& source, const std::vector<std::string>& rules,
                         const py::dict& params, const std::optional<std::string>& format,
                         const std::optional<std::string>& alternative, bool csv,
                         const std::optional<std::string>& report) {
  auto procs = procedures_from(rules, params, /*allow_offline=*/true);
  const std::optional<double> alpha = spec_from("", params).alpha;
  ReadOptions read_options;
  if (alternative) read_options.alternative = take(parse_alternative(*alternative));
  if (report) check(check_output_path(*report, "report"));
  Result<CompactLog> log = invalid_input("no log");
  Status checked;
  Status written;
  std::string out;
  ReplayColumns cols;
  bool launches = false, e_values = false, p_values = true;
  {
    py::gil_scoped_release release;
    if (path) {
      std::optional<std::string_view> forced;
      if (format) forced = *format;
      log = read_compact_log_file(*path, forced, read_options);
    } else {
      std::istringstream in(*text);
      log = read_compact_log(in, source, LogFormat::kCsv, read_options);
    }
    if (log) checked = check_log_columns(*log, procs);
    if (log && checked) {
      launches = log->has_launch;
      e_values = log->has_e_values;
      p_values = log->has_p_values;
      if (csv) out = replay_csv_header(*log);
      for (const Procedure& proc : procs) {
        replay_each(*log, proc, [&](std::size_t k, const Decision& d) {
          if (csv) {
            append_replay_csv_row(out, proc.name, *log, k, d);
          } else {
            const CompactRecord& r = log->records[k];
            const std::string_view id = log->id(r);
            cols.rule.push_back(proc.name);
            cols.step.push_back(d.step);
            if (launches)
              cols.launch.push_back(d.launch > 0 ? std::optional<std::uint64_t>(d.launch) : std::nullopt);
            cols.id.emplace_back(id);
            cols.p_value.push_back(p_values ? std::optional<double>(r.p_value) : std::nullopt);
            if (e_values) cols.e_value.push_back(r.e_value);
            cols.level.push_back(d.level);
            cols.rejected.push_back(d.rejected ? 1 : 0);
            cols.wealth.push_back(d.wealth);
          }
        });
      }
      if (report) {
        written = path ? write_replay_report(*report, *log, procs, alpha, *path,
                                             format ? std::optional<std::string_view>(*format) : std::nullopt,
                                             "report")
                       : write_replay_report_from_text(*report, *log, procs, alpha, *text, LogFormat::kCsv,
                                                       "report");
      }
    }
  }
  if (!log) raise(log.error());
  check(checked);
  check(written);
  if (csv) return py::str(out);
  py::dict d;
  py::list order;
  auto put = [&](const char* name, py::object column) {
    d[name] = std::move(column);
    order.append(name);
  };
  put("rule", py::cast(cols.rule));
  put("step", py::cast(cols.step));
  if (launches) put("launch", py::cast(cols.launch));
  put("id", py::cast(cols.id));
  put("p_value", py::cast(cols.p_value));
  if (e_values) put("e_value", py::cast(cols.e_value));
  put("level", py::cast(cols.level));
  put("rejected", py::cast(cols.rejected));
  put("wealth", py::cast(cols.wealth));
  d["columns"] = order;
  return d;
}

// ---- Simulate ---------------------------------------------------------------------------------

py::dict summary_dict(const ProcedureSummary& s) {
  py::dict d;
  d["rule"] = s.rule;
  d["runs"] = s.runs;
  d["tests"] = s.tests;
  d["mean_rejections"] = s.mean_rejections;
  d["fdr"] = s.fdr;
  d["fdr_se"] = s.fdr_se;
  d["mfdr"] = s.mfdr;
  d["power"] = s.power;
  d["power_se"] = s.power_se;
  d["fwer"] = s.fwer;
  // As in `simulate --json`: the evaluation lord++, saffron and addis ran with (None for the others).
  d["evaluation"] =
      s.evaluation ? py::object(py::str(std::string(evaluation_name(*s.evaluation)))) : py::none();
  return d;
}

py::object simulate_native(const std::vector<std::string>& rules, const py::dict& params, std::uint64_t tests,
                           std::uint64_t runs, double nonnull_fraction, double effect, double effect_sd,
                           double null_mean, const std::string& pattern, const std::string& correlation,
                           double mean_duration, std::uint64_t peeking,
                           const std::optional<double>& mixture_sd, std::uint64_t seed, unsigned threads,
                           bool csv, const std::optional<std::string>& report) {
  // As `alphaledger simulate`: fast evaluation for the rules that have it unless asked otherwise.
  py::dict flags = params.attr("copy")().cast<py::dict>();  // a copy: the caller's dict stays as it was
  if (!flags.contains("evaluation") || flags["evaluation"].is_none()) {
    for (const auto& n : rules) {
      if (n == "lord++" || n == "saffron" || n == "addis") flags["evaluation"] = "fast";
    }
  }
  auto procs = procedures_from(rules, flags, /*allow_offline=*/true);
  SimulationModel model;
  model.tests = tests;
  model.nonnull_fraction = nonnull_fraction;
  model.effect = effect;
  model.effect_sd = effect_sd;
  model.null_mean = null_mean;
  model.mean_duration = mean_duration;
  model.pattern = take(parse_nonnull_pattern(pattern));
  model.correlation = take(parse_correlation(correlation));
  PeekingSpec looks;
  looks.looks = peeking;
  looks.mixture_sd = mixture_sd.value_or(0);
  if (mixture_sd && peeking == 0)
    raise(invalid_input("mixture_sd is used only with peeking=K (K >= 1 looks per test)"));
  check(validate_peeking(looks));
  check(validate_model(model));
  if (tests < 1 || tests > 100'000'000)
    raise(invalid_input("tests must be in [1, 100000000], got " + std::to_string(tests)));
  if (runs < 1 || runs > 100'000'000)
    raise(invalid_input("runs must be in [1, 100000000], got " + std::to_string(runs)));
  if (threads < 1 || threads > 1024)
    raise(invalid_input("threads must be in [1, 1024], got " + std::to_string(threads)));
  if (report) check(check_output_path(*report, "report"));
  SimulationOptions options;
  options.runs = runs;
  options.seed = seed;
  options.threads = threads;
  const SimulationPlan plan(std::move(procs), looks);
  Result<SimulationResult> result = invalid_input("not run");
  {
    py::gil_scoped_release release;
    result = run_simulation(plan, model, options);
  }
  auto r = take(std::move(result));
  if (report) {
    SimulationReportData data;
    data.values = {model.nonnull_fraction};
    data.summaries = {r.summaries};
    data.model = model;
    data.runs = runs;
    data.seed = seed;
    data.generated_at_ms = system_clock_ms();
    check(write_file_atomically(*report, render_simulation_report(data), "report"));
  }
  if (csv) {
    std::ostringstream out;
    write_simulation_csv(out, r.summaries);
    return py::str(out.str());
  }
  py::list rows;
  for (const auto& s : r.summaries) rows.append(summary_dict(s));
  return rows;
}

}  // namespace

void bind_analysis(py::module_& m) {
  m.def("replay", &replay_native);
  m.def("simulate", &simulate_native);
}

}  // namespace alphaledger::python
