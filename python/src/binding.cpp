// The parts of the Python binding the others use (binding.hpp): the exception classes and raising
// library errors as them, and rule parameters from keyword arguments.
#include "binding.hpp"

#include <pybind11/stl.h>

#include "alphaledger/text.hpp"

namespace alphaledger::python {

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

}  // namespace

void raise(const Error& e) {
  py::object type = py::reinterpret_borrow<py::object>(class_for(e.kind));
  py::object exc = type(e.message);
  exc.attr("code") = code_word(e);
  PyErr_SetObject(type.ptr(), exc.ptr());
  throw py::error_already_set();
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
    if (key == "alpha")
      spec.alpha = opt_double(value, "alpha");
    else if (key == "initial_wealth")
      spec.initial_wealth = opt_double(value, "initial_wealth");
    else if (key == "candidate_threshold")
      spec.candidate_threshold = opt_double(value, "candidate_threshold");
    else if (key == "discard_threshold")
      spec.discard_threshold = opt_double(value, "discard_threshold");
    else if (key == "payout")
      spec.payout = opt_double(value, "payout");
    else if (key == "spending")
      spec.spending = opt_text(value, "spending");
    else if (key == "evaluation")
      spec.evaluation = opt_text(value, "evaluation");
    else
      raise(
          invalid_input("unknown rule parameter '" + excerpt(key) +
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

// A JSON object written by the library's one form of it (the CLI prints the same text), as a dict
// in the same key order.
py::object from_json(const std::string& text) { return py::module_::import("json").attr("loads")(text); }

// The exception classes, each a subclass of alphaledger.Error.
void bind_errors(py::module_& m) {
  g_error = PyErr_NewExceptionWithDoc("alphaledger.Error", "Every error alphaledger raises.", PyExc_Exception,
                                      nullptr);
  g_invalid =
      PyErr_NewExceptionWithDoc("alphaledger.InvalidInput",
                                "The input or a parameter is wrong; nothing was changed.", g_error, nullptr);
  g_refused = PyErr_NewExceptionWithDoc(
      "alphaledger.Refused",
      "Refused by the ledger: unknown stream, no ledger, conflict, verification mismatch.", g_error, nullptr);
  g_storage = PyErr_NewExceptionWithDoc("alphaledger.StorageError",
                                        "The storage failed: ledger locked, corrupt data, disk error.",
                                        g_error, nullptr);
  m.attr("Error") = py::handle(g_error);
  m.attr("InvalidInput") = py::handle(g_invalid);
  m.attr("Refused") = py::handle(g_refused);
  m.attr("StorageError") = py::handle(g_storage);
}

}  // namespace alphaledger::python
