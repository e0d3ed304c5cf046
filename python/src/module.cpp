// The Python binding: the public headers of the core, harness and store exposed to Python as the
// private extension module alphaledger._native. The Python package (python/alphaledger/__init__.py)
// wraps it with keyword arguments, pandas conversion and docstrings. Long calls (reading and
// replaying a log, simulating) run without the GIL.
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "alphaledger/anytime.hpp"
#include "alphaledger/explain.hpp"
#include "alphaledger/explain_stream.hpp"
#include "alphaledger/forms.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/replay.hpp"
#include "alphaledger/report.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"
#include "alphaledger/simulate.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/test_log.hpp"
#include "alphaledger/text.hpp"
#include "harness/simulate_report.hpp"

namespace py = pybind11;
using namespace alphaledger;

namespace {

// The exception classes, created once at import (Error and its three subclasses).
PyObject* g_error = nullptr;
PyObject* g_invalid = nullptr;
PyObject* g_refused = nullptr;
PyObject* g_storage = nullptr;

PyObject* class_for(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::kInvalidArgument:
      return g_invalid;
    case ErrorKind::kNotFound:
    case ErrorKind::kConflict:
      return g_refused;
    case ErrorKind::kCorruption:
    case ErrorKind::kIOError:
    case ErrorKind::kBusy:
      return g_storage;
  }
  return g_error;
}

// Raises the library error as the Python exception of its kind, with `.code` set to its machine word.
[[noreturn]] void raise(const Error& e) {
  py::object type = py::reinterpret_borrow<py::object>(class_for(e.kind));
  py::object exc = type(e.message);
  exc.attr("code") = code_word(e);
  PyErr_SetObject(type.ptr(), exc.ptr());
  throw py::error_already_set();
}

template <typename T>
T take(Result<T> r) {
  if (!r) raise(r.error());
  return std::move(*r);
}
void check(const Status& s) {
  if (!s) raise(s.error());
}

std::optional<double> opt_double(const py::object& o, const char* field) {
  if (o.is_none()) return std::nullopt;
  try {
    return o.cast<double>();
  } catch (const py::cast_error&) {
    raise(invalid_input(std::string(field) + " must be a number"));
  }
}

std::optional<std::string> opt_text(const py::object& o, const char* field) {
  if (o.is_none()) return std::nullopt;
  if (!py::isinstance<py::str>(o)) raise(invalid_input(std::string(field) + " must be a string"));
  return o.cast<std::string>();
}

// Rule parameters from a dict of keyword arguments (None or absent: the default).
RuleSpec spec_from(const std::string& rule, const py::dict& params) {
  RuleSpec spec;
  spec.rule = rule;
  for (auto item : params) {
    const std::string key = py::str(item.first);
    const py::object value = py::reinterpret_borrow<py::object>(item.second);
    if (key == "alpha") spec.alpha = opt_double(value, "alpha");
    else if (key == "initial_wealth") spec.initial_wealth = opt_double(value, "initial_wealth");
    else if (key == "candidate_threshold") spec.candidate_threshold = opt_double(value, "candidate_threshold");
    else if (key == "discard_threshold") spec.discard_threshold = opt_double(value, "discard_threshold");
    else if (key == "payout") spec.payout = opt_double(value, "payout");
    else if (key == "spending") spec.spending = opt_text(value, "spending");
    else if (key == "evaluation") spec.evaluation = opt_text(value, "evaluation");
    else
      raise(invalid_input("unknown rule parameter '" + excerpt(key) +
                          "'; accepted: alpha, initial_wealth, candidate_threshold, discard_threshold, payout, "
                          "spending, evaluation"));
  }
  return spec;
}

std::vector<Procedure> procedures_from(const std::vector<std::string>& rules, const py::dict& params,
                                       bool allow_offline) {
  if (rules.empty()) raise(invalid_input("rules must name at least one rule"));
  std::string joined;
  for (const auto& r : rules) joined += (joined.empty() ? "" : ",") + r;
  auto names = take(split_rule_list(joined));
  return take(resolve_procedures(names, spec_from("", params), allow_offline));
}

py::object nullable(const std::optional<double>& v) { return v ? py::object(py::float_(*v)) : py::none(); }

// ---- Rule -------------------------------------------------------------------------------------

class PyRule {
 public:
  PyRule(const std::string& name, const py::dict& params)
      : rule_(take(resolve_config(spec_from(name, params)))) {}
  double next_level() const { return rule_.next_level(); }
  Outcome record(double p) {
    if (rule_takes_e_values(rule_.config().kind))
      raise(invalid_input(std::string(rule_name(rule_.config().kind)) + " takes e-values: use record_e(e)"));
    check(validate_p_value(p));
    return noted(rule_.record(p));
  }
  Outcome record_e(double e) {
    if (!rule_takes_e_values(rule_.config().kind))
      raise(invalid_input(std::string(rule_name(rule_.config().kind)) + " takes p-values: use record(p)"));
    check(validate_e_value(e));
    return noted(rule_.record_e(e));
  }
  Reservation launch() { return rule_.launch(); }
  Outcome finish(std::uint64_t launch, double p) {
    if (rule_takes_e_values(rule_.config().kind)) return noted(take(rule_.finish_e(launch, p)));
    return noted(take(rule_.finish(launch, p)));
  }
  void abandon(std::uint64_t launch) { check(rule_.abandon(launch)); }
  std::vector<RunningTest> running() const { return rule_.running(); }
  double reserved() const { return rule_.reserved(); }
  const Rule& rule() const { return rule_; }
  // The launch number of each rejection, in the order they were decided (explain's `test`).
  const std::vector<std::uint64_t>& rejected_tests() const { return rejected_tests_; }

 private:
  Outcome noted(const Outcome& o) {
    if (o.rejected) rejected_tests_.push_back(o.step);
    return o;
  }
  Rule rule_;
  std::vector<std::uint64_t> rejected_tests_;
};

// ---- Explain ----------------------------------------------------------------------------------

// A JSON object written by the library's one form of it (the CLI prints the same text), as a dict
// in the same key order.
py::object from_json(const std::string& text) { return py::module_::import("json").attr("loads")(text); }

// `alphaledger explain --log ... --json` for the tests recorded so far: the same form. The ids of
// running tests are not known to a Rule, so they are None in "running".
py::object explain_rule(const PyRule& r) {
  ExplainedTest e;
  e.explanation = take(explain_next_level(r.rule(), r.rejected_tests()));
  return from_json(explanation_json(e, std::nullopt, std::nullopt));
}

// ---- Replay -----------------------------------------------------------------------------------

struct ReplayColumns {
  std::vector<std::string> rule, id;
  std::vector<std::uint64_t> step;
  std::vector<std::optional<std::uint64_t>> launch;  // only with launched_at; None for bh / storey-bh / e-bh
  std::vector<std::optional<double>> p_value;         // None when the log has no p-values
  std::vector<double> e_value;                        // only when the log has e-values
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
                       : write_replay_report_from_text(*report, *log, procs, alpha, *text, LogFormat::kCsv, "report");
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
  d["evaluation"] = s.evaluation ? py::object(py::str(std::string(evaluation_name(*s.evaluation)))) : py::none();
  return d;
}

py::object simulate_native(const std::vector<std::string>& rules, const py::dict& params, std::uint64_t tests,
                           std::uint64_t runs, double nonnull_fraction, double effect, double effect_sd,
                           double null_mean, const std::string& pattern, const std::string& correlation,
                           double mean_duration, std::uint64_t peeking, const std::optional<double>& mixture_sd,
                           std::uint64_t seed, unsigned threads, bool csv, const std::optional<std::string>& report) {
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
  if (mixture_sd && peeking == 0) raise(invalid_input("mixture_sd is used only with peeking=K (K >= 1 looks per test)"));
  check(validate_peeking(looks));
  check(validate_model(model));
  if (tests < 1 || tests > 100'000'000) raise(invalid_input("tests must be in [1, 100000000], got " + std::to_string(tests)));
  if (runs < 1 || runs > 100'000'000) raise(invalid_input("runs must be in [1, 100000000], got " + std::to_string(runs)));
  if (threads < 1 || threads > 1024) raise(invalid_input("threads must be in [1, 1024], got " + std::to_string(threads)));
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

// ---- Ledger -----------------------------------------------------------------------------------

py::dict stream_dict(const StreamInfo& s) {
  py::dict d;
  d["stream"] = s.name;
  d["rule"] = std::string(rule_name(s.config.kind));
  d["configuration"] = describe_config(s.config);
  d["created_at"] = format_timestamp(s.created_at_ms);
  d["tests"] = s.tests;
  d["rejections"] = s.rejections;
  d["wealth"] = s.wealth;
  d["next_level"] = s.next_level;
  d["running"] = s.running;
  d["reserved"] = s.reserved;
  d["closed_at"] = s.closed_at_ms ? py::object(py::str(format_timestamp(*s.closed_at_ms))) : py::none();
  return d;
}

// A decided test as `decide --json` gives it (launch, launched_at).
py::dict decision_dict(const DecisionRecord& r) {
  py::dict d;
  d["step"] = r.step;
  d["id"] = r.id;
  d[r.e_value ? "e_value" : "p_value"] = r.p_value;
  d["level"] = r.level;
  d["rejected"] = r.rejected ? 1 : 0;
  d["wealth"] = r.wealth;
  d["decided_at"] = format_timestamp(r.decided_at_ms);
  d["launch"] = r.launch;
  d["launched_at"] = format_timestamp(r.launched_at_ms);
  return d;
}

// A row of `history`: the launch time is `reserved_at` there, as in the CLI's history (a column
// named launched_at would be read as launch times if the table were replayed); `abandoned` marks a
// test that was abandoned (p_value 0, rejected 0, decided_at when it was abandoned). On a stream
// whose rule takes e-values (e-lond) the number is named e_value, as in the CLI's history.
py::dict history_dict(const DecisionRecord& r, bool e_values) {
  py::dict d;
  d["step"] = r.step;
  d["id"] = r.id;
  d[e_values ? "e_value" : "p_value"] = r.p_value;
  d["level"] = r.level;
  d["rejected"] = r.rejected ? 1 : 0;
  d["wealth"] = r.wealth;
  d["decided_at"] = format_timestamp(r.decided_at_ms);
  d["launch"] = r.launch;
  d["reserved_at"] = format_timestamp(r.launched_at_ms);
  d["abandoned"] = r.abandoned;
  return d;
}

py::dict running_dict(const RunningEntry& r) {
  py::dict d;
  d["id"] = r.id;
  d["launch"] = r.launch;
  d["level"] = r.level;
  d["launched_at"] = format_timestamp(r.launched_at_ms);
  return d;
}

class PyLedger {
 public:
  explicit PyLedger(const std::string& path) : path_(path) {
    Result<std::unique_ptr<Ledger>> opened = invalid_input("not opened");
    {
      py::gil_scoped_release release;
      opened = Ledger::open(path);
    }
    ledger_ = take(std::move(opened));
  }
  void close() { ledger_.reset(); }
  bool closed() const { return !ledger_; }
  const std::string& path() const { return path_; }

  py::dict create_stream(const std::string& name, const std::string& rule, const py::dict& params) {
    auto config = take(resolve_config(spec_from(rule, params)));
    auto created = take(open_ledger().create_stream(name, config));
    py::dict d = stream_dict(created.info);
    d["created"] = created.created;
    return d;
  }
  // `e_value`: the number is an e-value (decide_e, e-lond streams), else a p-value (decide).
  py::dict decide(const std::string& stream, const std::string& id, double x, bool e_value) {
    Result<DecideResult> r = invalid_input("not decided");
    Ledger& l = open_ledger();
    {
      py::gil_scoped_release release;
      r = e_value ? l.decide_e(stream, id, x) : l.decide(stream, id, x);
    }
    auto res = take(std::move(r));
    py::dict d = decision_dict(res.record);
    d["stream"] = res.stream;
    d["repeat"] = res.repeat;
    return d;
  }
  py::list history(const std::string& stream) {
    const bool e_values = rule_takes_e_values(take(open_ledger().status(stream)).config.kind);
    auto records = take(open_ledger().history(stream));
    py::list rows;
    for (const auto& r : records) rows.append(history_dict(r, e_values));
    return rows;
  }
  py::dict status(const std::string& stream) { return stream_dict(take(open_ledger().status(stream))); }
  py::list streams() {
    py::list rows;
    for (const auto& s : take(open_ledger().streams())) rows.append(stream_dict(s));
    return rows;
  }
  double next_level(const std::string& stream) { return take(open_ledger().next_level(stream)); }
  py::dict verify(const std::string& stream, const std::vector<std::string>& anchors) {
    std::vector<Anchor> parsed;
    for (const auto& a : anchors) parsed.push_back(take(parse_anchor(a)));
    auto rep = take(open_ledger().verify(stream, parsed));
    py::dict d;
    d["stream"] = stream;
    d["ok"] = rep.ok;
    d["steps"] = rep.steps;
    d["first_bad_step"] = rep.ok ? py::none() : py::object(py::int_(rep.first_bad_step));
    d["problem"] = rep.ok ? py::none() : py::object(py::str(rep.problem));
    d["chain_hash"] = rep.chain_hash;
    d["closing_hash"] = rep.closing_hash.empty() ? py::none() : py::object(py::str(rep.closing_hash));
    d["anchors_checked"] = rep.anchors_checked;
    return d;
  }
  py::dict close_stream(const std::string& stream) {
    auto c = take(open_ledger().close_stream(stream));
    py::dict d = stream_dict(c.info);
    return d;
  }
  py::dict launch(const std::string& stream, const std::string& id) {
    Result<LaunchResult> r = invalid_input("not launched");
    Ledger& l = open_ledger();
    {
      py::gil_scoped_release release;
      r = l.launch(stream, id);
    }
    auto res = take(std::move(r));
    py::dict d;
    d["stream"] = res.stream;
    d["id"] = res.id;
    d["launch"] = res.launch;
    d["level"] = res.level;
    d["wealth"] = res.wealth;
    d["launched_at"] = format_timestamp(res.launched_at_ms);
    d["step"] = res.step;
    d["repeat"] = res.repeat;
    return d;
  }
  py::dict abandon(const std::string& stream, const std::string& id) {
    Result<AbandonResult> r = invalid_input("not abandoned");
    Ledger& l = open_ledger();
    {
      py::gil_scoped_release release;
      r = l.abandon(stream, id);
    }
    auto res = take(std::move(r));
    py::dict d;
    d["stream"] = res.stream;
    d["id"] = res.id;
    d["launch"] = res.launch;
    d["level"] = res.level;
    d["wealth"] = res.wealth;
    d["launched_at"] = format_timestamp(res.launched_at_ms);
    d["abandoned_at"] = format_timestamp(res.abandoned_at_ms);
    d["step"] = res.step;
    d["repeat"] = res.repeat;
    return d;
  }
  py::list running(const std::string& stream) {
    py::list rows;
    for (const auto& r : take(open_ledger().running(stream))) rows.append(running_dict(r));
    return rows;
  }

  // `alphaledger explain STREAM [--id ID] --json`: the same walk and the same form
  // (alphaledger/explain_stream.hpp), so the same dict, key for key.
  py::object explain(const std::string& stream, const std::optional<std::string>& id) {
    Ledger& l = open_ledger();
    Result<ExplainedTest> e = invalid_input("not explained");
    {
      py::gil_scoped_release release;
      e = explain_stream_test(l, stream, id, "id");
    }
    return from_json(explanation_json(take(std::move(e)), stream, id));
  }

  // `alphaledger look STREAM --id ID --control C --treatment T [--mixture-sd TAU] --json`.
  // `summary` is "proportions" (arms (n, conversions)) or "means" (arms (n, mean, sd)); the wrapper
  // checked the arms' shapes, the ledger checks their values.
  py::object look(const std::string& stream, const std::string& id, const std::string& summary,
                  const py::tuple& control, const py::tuple& treatment, const std::optional<double>& mixture_sd) {
    LookData data;
    if (summary == "means") {
      data.summary = LookSummary::kMeans;
      data.control_means = MeanArm{control[0].cast<std::uint64_t>(), control[1].cast<double>(), control[2].cast<double>()};
      data.treatment_means =
          MeanArm{treatment[0].cast<std::uint64_t>(), treatment[1].cast<double>(), treatment[2].cast<double>()};
    } else {
      data.summary = LookSummary::kProportions;
      data.control_proportions = ProportionArm{control[0].cast<std::uint64_t>(), control[1].cast<std::uint64_t>()};
      data.treatment_proportions =
          ProportionArm{treatment[0].cast<std::uint64_t>(), treatment[1].cast<std::uint64_t>()};
    }
    data.mixture_sd = mixture_sd;
    Ledger& l = open_ledger();
    Result<LookResult> r = invalid_input("not looked");
    {
      py::gil_scoped_release release;
      r = l.look(stream, id, data);
    }
    return from_json(look_json(take(std::move(r))));
  }

  // `alphaledger looks STREAM --id ID --json`: its "looks", each as look() gives it.
  py::object looks(const std::string& stream, const std::string& id) {
    auto list = take(open_ledger().looks(stream, id));
    return from_json(look_list_json(stream, id, list))["looks"];
  }

  // `alphaledger report STREAM -o PATH`: the same page, by the same writer.
  py::dict report(const std::string& stream, const std::string& path) {
    Ledger& l = open_ledger();
    Result<std::uint64_t> tests = invalid_input("not written");
    {
      py::gil_scoped_release release;
      tests = write_stream_report(l, stream, path, "path");
    }
    py::dict d;
    d["report"] = "stream";
    d["stream"] = stream;
    d["tests"] = take(std::move(tests));
    d["path"] = path;
    return d;
  }

 private:
  Ledger& open_ledger() {
    if (!ledger_) raise(invalid_input("the ledger at " + path_ + " is closed"));
    return *ledger_;
  }
  std::string path_;
  std::unique_ptr<Ledger> ledger_;
};

// ---- Statistics -------------------------------------------------------------------------------

py::dict comparison_dict(const Comparison& c) {
  py::dict d;
  d["statistic"] = c.statistic;
  d["p_value"] = c.p_value;
  d["df"] = nullable(c.df);
  d["estimate"] = nullable(c.estimate);
  d["relative_lift"] = nullable(c.relative_lift);
  d["ci_low"] = nullable(c.ci_low);
  d["ci_high"] = nullable(c.ci_high);
  d["confidence"] = c.confidence;
  return d;
}

void add_anytime(py::dict& d, bool anytime, const std::optional<double>& mixture_sd,
                 const Result<EffectEstimate>& effect, Alternative alternative, double confidence) {
  if (!anytime) {
    if (mixture_sd) raise(invalid_input("mixture_sd is used only with anytime=True"));
    return;
  }
  if (!mixture_sd)
    raise(invalid_input("anytime=True needs mixture_sd: the effect you hope to detect, on the scale of the "
                        "estimate (e.g. 0.005 for half a percentage point); it sets the power, never the validity"));
  const auto& look = take(Result<EffectEstimate>(effect));
  MixtureSettings settings{.mixture_sd = *mixture_sd, .alpha = 1.0 - confidence, .alternative = alternative};
  auto e = take(anytime_evidence(look, settings));
  d["mixture_sd"] = *mixture_sd;
  d["anytime_p_value"] = e.p_value;
  d["e_value"] = e.e_value;
  d["cs_low"] = e.cs_low;
  d["cs_high"] = e.cs_high;
}

py::dict pvalue_proportions(std::uint64_t cn, std::uint64_t cx, std::uint64_t tn, std::uint64_t tx,
                            const std::string& method, const std::string& alternative, double confidence,
                            bool anytime, const std::optional<double>& mixture_sd) {
  const ProportionArm control{cn, cx}, treatment{tn, tx};
  const auto alt = take(parse_alternative(alternative));
  auto c = take(compare_proportions(control, treatment, take(parse_proportion_method(method)), alt, confidence));
  py::dict d = comparison_dict(c);
  add_anytime(d, anytime, mixture_sd, effect_of_proportions(control, treatment), alt, confidence);
  return d;
}

py::dict pvalue_means(std::uint64_t cn, double cm, double cs, std::uint64_t tn, double tm, double ts,
                      bool pooled_variance, const std::string& alternative, double confidence, bool anytime,
                      const std::optional<double>& mixture_sd) {
  const MeanArm control{cn, cm, cs}, treatment{tn, tm, ts};
  const auto alt = take(parse_alternative(alternative));
  auto c = take(compare_means(control, treatment, pooled_variance, alt, confidence));
  py::dict d = comparison_dict(c);
  add_anytime(d, anytime, mixture_sd, effect_of_means(control, treatment), alt, confidence);
  return d;
}

py::dict plan_dict(const Plan& p) {
  py::dict d;
  d["solved"] = std::string(plan_target_name(p.solved));
  d["level"] = p.level;
  d["alternative"] = std::string(alternative_name(p.alternative));
  d["n_per_arm"] = p.n_per_arm;
  d["n_exact"] = p.n_exact;
  d["power"] = p.power;
  d["achieved_power"] = p.achieved_power;
  d["min_effect"] = p.min_effect;
  return d;
}

PlanRequest plan_request(double level, const std::string& alternative, const std::optional<double>& min_effect,
                         const std::optional<double>& power, const std::optional<std::uint64_t>& n_per_arm) {
  PlanRequest r;
  r.level = level;
  r.alternative = take(parse_alternative(alternative));
  r.min_effect = min_effect;
  r.power = power;
  r.n_per_arm = n_per_arm;
  return r;
}

// The exception classes, each a subclass of alphaledger.Error.
void bind_errors(py::module_& m) {
  g_error = PyErr_NewExceptionWithDoc("alphaledger.Error", "Every error alphaledger raises.", PyExc_Exception, nullptr);
  g_invalid = PyErr_NewExceptionWithDoc("alphaledger.InvalidInput",
                                        "The input or a parameter is wrong; nothing was changed.", g_error, nullptr);
  g_refused = PyErr_NewExceptionWithDoc(
      "alphaledger.Refused", "Refused by the ledger: unknown stream, no ledger, conflict, verification mismatch.",
      g_error, nullptr);
  g_storage = PyErr_NewExceptionWithDoc("alphaledger.StorageError",
                                        "The storage failed: ledger locked, corrupt data, disk error.", g_error, nullptr);
  m.attr("Error") = py::handle(g_error);
  m.attr("InvalidInput") = py::handle(g_invalid);
  m.attr("Refused") = py::handle(g_refused);
  m.attr("StorageError") = py::handle(g_storage);
}

// The small value types the rule and the ledger return.
void bind_values(py::module_& m) {
  py::class_<Outcome>(m, "Outcome", "The decision of one test.")
      .def_readonly("step", &Outcome::step, "the test's launch number (1-based)")
      .def_readonly("level", &Outcome::level, "the level granted, fixed before the p-value was read")
      .def_readonly("rejected", &Outcome::rejected, "whether the null hypothesis was rejected")
      .def_readonly("wealth", &Outcome::wealth, "alpha-wealth after the test")
      .def("__repr__", [](const Outcome& o) {
        return "Outcome(step=" + std::to_string(o.step) + ", level=" + format_number(o.level) +
               ", rejected=" + (o.rejected ? "True" : "False") + ", wealth=" + format_number(o.wealth) + ")";
      });
  py::class_<Reservation>(m, "Reservation", "A level reserved for a test at its launch.")
      .def_readonly("launch", &Reservation::launch, "launch number (1-based)")
      .def_readonly("level", &Reservation::level, "the level its finish will be decided against")
      .def_readonly("wealth", &Reservation::wealth, "alpha-wealth right after the launch")
      .def("__repr__", [](const Reservation& r) {
        return "Reservation(launch=" + std::to_string(r.launch) + ", level=" + format_number(r.level) +
               ", wealth=" + format_number(r.wealth) + ")";
      });
  py::class_<RunningTest>(m, "RunningTest", "A test launched and not yet finished or abandoned.")
      .def_readonly("launch", &RunningTest::launch)
      .def_readonly("level", &RunningTest::level)
      .def("__repr__", [](const RunningTest& r) {
        return "RunningTest(launch=" + std::to_string(r.launch) + ", level=" + format_number(r.level) + ")";
      });
}

// The rule and the ledger.
void bind_objects(py::module_& m) {
  py::class_<PyRule>(m, "NativeRule")
      .def(py::init<const std::string&, const py::dict&>())
      .def("next_level", &PyRule::next_level)
      .def("record", &PyRule::record)
      .def("record_e", &PyRule::record_e)
      .def("launch", &PyRule::launch)
      .def("finish", &PyRule::finish)
      .def("abandon", &PyRule::abandon)
      .def("running", &PyRule::running)
      .def_property_readonly("reserved", &PyRule::reserved)
      .def_property_readonly("name", [](const PyRule& r) { return std::string(rule_name(r.rule().config().kind)); })
      .def_property_readonly("configuration", [](const PyRule& r) { return describe_config(r.rule().config()); })
      .def_property_readonly("tests", [](const PyRule& r) { return r.rule().tests(); })
      .def_property_readonly("rejections", [](const PyRule& r) { return r.rule().rejections(); })
      .def_property_readonly("wealth", [](const PyRule& r) { return r.rule().wealth(); });

  py::class_<PyLedger>(m, "NativeLedger")
      .def(py::init<const std::string&>())
      .def("close", &PyLedger::close)
      .def_property_readonly("closed", &PyLedger::closed)
      .def_property_readonly("path", &PyLedger::path)
      .def("create_stream", &PyLedger::create_stream)
      .def("decide", &PyLedger::decide)
      .def("history", &PyLedger::history)
      .def("status", &PyLedger::status)
      .def("streams", &PyLedger::streams)
      .def("next_level", &PyLedger::next_level)
      .def("verify", &PyLedger::verify)
      .def("close_stream", &PyLedger::close_stream)
      .def("launch", &PyLedger::launch)
      .def("abandon", &PyLedger::abandon)
      .def("running", &PyLedger::running)
      .def("explain", &PyLedger::explain)
      .def("look", &PyLedger::look)
      .def("looks", &PyLedger::looks)
      .def("report", &PyLedger::report);
}

// replay, explain, simulate, the p-value and sample-size helpers.
void bind_functions(py::module_& m) {
  m.def("replay", &replay_native);
  m.def("explain", &explain_rule);
  m.def("simulate", &simulate_native);
  m.def("pvalue_proportions", &pvalue_proportions);
  m.def("pvalue_means", &pvalue_means);
  m.def("plan_proportions", [](double baseline, double level, const std::string& alternative,
                               const std::optional<double>& min_effect, const std::optional<double>& power,
                               const std::optional<std::uint64_t>& n_per_arm) {
    return plan_dict(take(plan_proportions(baseline, plan_request(level, alternative, min_effect, power, n_per_arm))));
  });
  m.def("plan_means", [](double sd, double level, const std::string& alternative,
                         const std::optional<double>& min_effect, const std::optional<double>& power,
                         const std::optional<std::uint64_t>& n_per_arm) {
    return plan_dict(take(plan_means(sd, plan_request(level, alternative, min_effect, power, n_per_arm))));
  });
  m.def("format_number", [](double v) { return format_number(v); });
}

}  // namespace

PYBIND11_MODULE(_native, m) {
  m.doc() = "alphaledger's C++ core (private; use the alphaledger package)";
  bind_errors(m);
  bind_values(m);
  bind_objects(m);
  bind_functions(m);
}
