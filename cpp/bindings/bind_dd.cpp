// Instantiates the dd registrations (one translation unit per scalar keeps builds parallel).
#include "register_arith.hpp"
#include "register_batch.hpp"
#include "register_engine.hpp"
#include "register_lyapunov.hpp"

namespace loschmidt::bind {
void register_dd(py::module_& m) {
  register_arith<loschmidt::dd>(m, "dd");
  register_engine<loschmidt::dd, false>(m, "dd");
  register_batch<loschmidt::dd, false>(m, "dd");
  register_lyapunov<loschmidt::dd, false>(m, "dd");
}
}  // namespace loschmidt::bind
