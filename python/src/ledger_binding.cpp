// The ledger in Python: NativeLedger, whose answers are the dicts of the CLI's --json forms.
#include <pybind11/stl.h>

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "alphaledger/explain_stream.hpp"
#include "alphaledger/forms.hpp"
#include "alphaledger/ledger.hpp"
#include "alphaledger/report.hpp"
#include "alphaledger/text.hpp"
#include "binding.hpp"

namespace alphaledger::python {

namespace {

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

// The keys a decision and a history row share, in their order; the number is named e_value on
// a stream whose rule takes e-values (e-lond), as in the CLI.
py::dict decided_fields(const DecisionRecord& r, bool e_value) {
  py::dict d;
  d["step"] = r.step;
  d["id"] = r.id;
  d[e_value ? "e_value" : "p_value"] = r.p_value;
  d["level"] = r.level;
  d["rejected"] = r.rejected ? 1 : 0;
  d["wealth"] = r.wealth;
  d["decided_at"] = format_timestamp(r.decided_at_ms);
  d["launch"] = r.launch;
  return d;
}

// A decided test as `decide --json` gives it (launch, launched_at).
py::dict decision_dict(const DecisionRecord& r) {
  py::dict d = decided_fields(r, r.e_value);
  d["launched_at"] = format_timestamp(r.launched_at_ms);
  return d;
}

// A row of `history`: the launch time is `reserved_at` there, as in the CLI's history (a column
// named launched_at would be read as launch times if the table were replayed); `abandoned` marks a
// test that was abandoned (p_value 0, rejected 0, decided_at when it was abandoned).
py::dict history_dict(const DecisionRecord& r, bool e_values) {
  py::dict d = decided_fields(r, e_values);
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

// A launch or an abandon as `launch --json` / `abandon --json` give it; `abandoned_at_ms` only for
// an abandon.
template <typename EventResult>
py::dict event_dict(const EventResult& res, const std::int64_t* abandoned_at_ms) {
  py::dict d;
  d["stream"] = res.stream;
  d["id"] = res.id;
  d["launch"] = res.launch;
  d["level"] = res.level;
  d["wealth"] = res.wealth;
  d["launched_at"] = format_timestamp(res.launched_at_ms);
  if (abandoned_at_ms != nullptr) d["abandoned_at"] = format_timestamp(*abandoned_at_ms);
  d["step"] = res.step;
  d["repeat"] = res.repeat;
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
    return event_dict(take(std::move(r)), nullptr);
  }
  py::dict abandon(const std::string& stream, const std::string& id) {
    Result<AbandonResult> r = invalid_input("not abandoned");
    Ledger& l = open_ledger();
    {
      py::gil_scoped_release release;
      r = l.abandon(stream, id);
    }
    const auto res = take(std::move(r));
    return event_dict(res, &res.abandoned_at_ms);
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
                  const py::tuple& control, const py::tuple& treatment,
                  const std::optional<double>& mixture_sd) {
    LookData data;
    if (summary == "means") {
      data.summary = LookSummary::kMeans;
      data.control_means =
          MeanArm{control[0].cast<std::uint64_t>(), control[1].cast<double>(), control[2].cast<double>()};
      data.treatment_means = MeanArm{treatment[0].cast<std::uint64_t>(), treatment[1].cast<double>(),
                                     treatment[2].cast<double>()};
    } else {
      data.summary = LookSummary::kProportions;
      data.control_proportions =
          ProportionArm{control[0].cast<std::uint64_t>(), control[1].cast<std::uint64_t>()};
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

}  // namespace

void bind_ledger(py::module_& m) {
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

}  // namespace alphaledger::python
