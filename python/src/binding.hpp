// What the parts of the Python binding (alphaledger._native) share: raising a library error as the
// Python exception of its kind, reading rule parameters from a dict of keyword arguments, and the
// function each part binds its names with. module.cpp calls the bind_* functions at import.
#pragma once

#include <pybind11/pybind11.h>

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "alphaledger/replay.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/rules.hpp"

namespace alphaledger::python {

namespace py = pybind11;

// Raises the library error as the Python exception of its kind, with `.code` set to its machine word.
[[noreturn]] void raise(const Error& e);

template <typename T>
T take(Result<T> r) {
  if (!r) raise(r.error());
  return std::move(*r);
}
inline void check(const Status& s) {
  if (!s) raise(s.error());
}

// None: not given; else the number (a float or an int) or the string, or InvalidInput naming `field`.
std::optional<double> opt_double(const py::object& o, const char* field);
std::optional<std::string> opt_text(const py::object& o, const char* field);

// Rule parameters from a dict of keyword arguments (None or absent: the default).
RuleSpec spec_from(const std::string& rule, const py::dict& params);
std::vector<Procedure> procedures_from(const std::vector<std::string>& rules, const py::dict& params,
                                       bool allow_offline);

py::object nullable(const std::optional<double>& v);

// A JSON object written by the library's one form of it (the CLI prints the same text), as a dict
// in the same key order.
py::object from_json(const std::string& text);

void bind_errors(py::module_& m);  // Error and its subclasses (binding.cpp)
void bind_rule(py::module_& m);  // Outcome, Reservation, RunningTest, NativeRule, explain (rule_binding.cpp)
void bind_ledger(py::module_& m);    // NativeLedger (ledger_binding.cpp)
void bind_analysis(py::module_& m);  // replay, simulate (analysis_binding.cpp)
void bind_stats(py::module_& m);     // p-values, sample sizes, format_number (stats_binding.cpp)

}  // namespace alphaledger::python
