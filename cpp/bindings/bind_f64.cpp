// Instantiates the f64 registrations (one translation unit per scalar keeps builds parallel).
#include "register_arith.hpp"
#include "register_batch.hpp"
#include "register_engine.hpp"
#include "register_lyapunov.hpp"

namespace loschmidt::bind {
void register_f64(py::module_& m) {
  register_arith<double>(m, "f64");
  register_engine<double, false>(m, "f64");
  register_engine<double, true>(m, "f64c");
  register_batch<double, false>(m, "f64");
  register_batch<double, true>(m, "f64c");
  register_lyapunov<double, false>(m, "f64");
  register_lyapunov<double, true>(m, "f64c");
}
}  // namespace loschmidt::bind
