// The online rule in Python: NativeRule (one stream in memory, no ledger), the value types it
// returns, and explain for the tests it has recorded.
#include <pybind11/stl.h>

#include <string>
#include <vector>

#include "alphaledger/explain.hpp"
#include "alphaledger/explain_stream.hpp"
#include "alphaledger/text.hpp"
#include "binding.hpp"

namespace alphaledger::python {

namespace {

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

// `alphaledger explain --log ... --json` for the tests recorded so far: the same form. The ids of
// running tests are not known to a Rule, so they are None in "running".
py::object explain_rule(const PyRule& r) {
  ExplainedTest e;
  e.explanation = take(explain_next_level(r.rule(), r.rejected_tests()));
  return from_json(explanation_json(e, std::nullopt, std::nullopt));
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

}  // namespace

// The value types, the rule, and explain of a rule.
void bind_rule(py::module_& m) {
  bind_values(m);
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
      .def_property_readonly("name",
                             [](const PyRule& r) { return std::string(rule_name(r.rule().config().kind)); })
      .def_property_readonly("configuration",
                             [](const PyRule& r) { return describe_config(r.rule().config()); })
      .def_property_readonly("tests", [](const PyRule& r) { return r.rule().tests(); })
      .def_property_readonly("rejections", [](const PyRule& r) { return r.rule().rejections(); })
      .def_property_readonly("wealth", [](const PyRule& r) { return r.rule().wealth(); });
  m.def("explain", &explain_rule);
}

}  // namespace alphaledger::python
