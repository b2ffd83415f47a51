// Instantiates the qd registrations (one translation unit per scalar keeps builds parallel).
#include "register_arith.hpp"
#include "register_batch.hpp"
#include "register_engine.hpp"
#include "register_lyapunov.hpp"

namespace loschmidt::bind {
void register_qd(py::module_& m) {
  register_arith<loschmidt::qd>(m, "qd");
  register_engine<loschmidt::qd, false>(m, "qd");
  register_batch<loschmidt::qd, false>(m, "qd");
  register_lyapunov<loschmidt::qd, false>(m, "qd");
}
}  // namespace loschmidt::bind
