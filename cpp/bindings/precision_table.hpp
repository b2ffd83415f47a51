// The working precisions as Python sees them (loschmidt.precision), read from scalar_traits: one
// row per precision name, in the order narrowest first. "f64c" is the double scalar with the
// compensated state update (Kahan-Babuska-Neumaier), so it shares double's arithmetic facts and
// has its own default tolerance.
#pragma once
#include <pybind11/pybind11.h>

#include "loschmidt/scalar/traits.hpp"

namespace loschmidt::bind {
namespace py = pybind11;

// (name, limbs, digits, unit_roundoff, operation_error, default_tolerance, order_limit, compensated)
//   unit_roundoff      half an ulp of 1 in the representation (2^-53, 2^-106, 2^-212): how finely
//                      a value is resolved; what decimal output and tolerance floors are measured in.
//   operation_error    the guaranteed relative error of one + - * / sqrt (2^-53, 2^-103, 2^-208):
//                      what error bounds of computed results are measured in.
template <class T, bool Compensated>
py::tuple precision_row(const char* name) {
  using tr = scalar_traits<T>;
  return py::make_tuple(name, tr::limbs, tr::digits, tr::unit_roundoff(), tr::epsilon(),
                        tr::default_tolerance(Compensated), tr::default_max_order(), Compensated);
}

inline py::list precision_table() {
  py::list rows;
  rows.append(precision_row<double, false>("f64"));
  rows.append(precision_row<double, true>("f64c"));
  rows.append(precision_row<dd, false>(scalar_traits<dd>::name));
  rows.append(precision_row<qd, false>(scalar_traits<qd>::name));
  return rows;
}

}  // namespace loschmidt::bind
