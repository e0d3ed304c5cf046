// The Python binding: the public headers of the core, harness and store exposed to Python as the
// private extension module alphaledger._native. The Python package (python/alphaledger/__init__.py)
// wraps it with keyword arguments, pandas conversion and docstrings. Long calls (reading and
// replaying a log, simulating) run without the GIL. Each part binds its own names (binding.hpp).
#include <pybind11/pybind11.h>

#include "binding.hpp"

PYBIND11_MODULE(_native, m) {
  using namespace alphaledger::python;
  m.doc() = "alphaledger's C++ core (private; use the alphaledger package)";
  bind_errors(m);
  bind_rule(m);
  bind_ledger(m);
  bind_analysis(m);
  bind_stats(m);
}
