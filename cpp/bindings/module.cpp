// The private extension module loschmidt._core: wires the per-scalar registrations together.
#include <pybind11/pybind11.h>

#include "interrupt.hpp"
#include "precision_table.hpp"
#include "types.hpp"
#include "loschmidt/methods/status.hpp"

namespace py = pybind11;

namespace loschmidt::bind {
void register_f64(py::module_& m);
void register_dd(py::module_& m);
void register_qd(py::module_& m);
}  // namespace loschmidt::bind

PYBIND11_MODULE(_core, m) {
  m.doc() = "loschmidt engine (private; use the loschmidt package)";
#ifdef LOSCHMIDT_VERSION
  m.attr("__version__") = LOSCHMIDT_VERSION;
#endif
#ifdef LOSCHMIDT_HW_FMA
  m.attr("hardware_fma") = true;
#else
  m.attr("hardware_fma") = false;
#endif
  py::list statuses;
  for (int i = 0; i < loschmidt::status_count(); ++i) {
    const auto s = static_cast<loschmidt::Status>(i);
    statuses.append(py::make_tuple(i, loschmidt::status_name(s), loschmidt::status_message(s)));
  }
  m.attr("statuses") = statuses;
  // The working precisions, from scalar_traits (precision_table.hpp): loschmidt.precision reads them.
  m.attr("precisions") = loschmidt::bind::precision_table();
  m.def("request_stop", [](bool on) { loschmidt::bind::stop_requested().store(on); }, py::arg("on") = true,
        "Ask every running integration to stop at its next step (status 'interrupted').");
  // Options, ChainOptions, Stats and the records (types.hpp), before the kernels that use them.
  loschmidt::bind::register_types(m);
  loschmidt::bind::register_f64(m);
  loschmidt::bind::register_dd(m);
  loschmidt::bind::register_qd(m);
}
