// Element-wise arithmetic on limb arrays, one registration per scalar type. Used by
// loschmidt.precision (add, sub, mul, div, sqrt) for tests and for post-processing results.
#pragma once
#include <cmath>

#include "limbs.hpp"
#include "loschmidt/scalar/scalar.hpp"

namespace loschmidt::bind {

enum class binary_op : int { add = 0, sub = 1, mul = 2, div = 3 };
enum class unary_op : int { sqrt = 0, neg = 1, abs = 2 };

template <class T>
void register_arith(py::module_& m, const std::string& suffix) {
  m.def(("limb_binary_" + suffix).c_str(),
        [](int op, const limb_array& a, const limb_array& b) {
          constexpr int k = scalar_traits<T>::limbs;
          if (a.ndim() != 2 || b.ndim() != 2 || a.shape(1) != k || b.shape(1) != k ||
              a.shape(0) != b.shape(0))
            throw py::value_error("operands: expected two (M, k) limb arrays of one shape");
          const py::ssize_t count = a.shape(0);
          limb_array out({count, static_cast<py::ssize_t>(k)});
          const double* pa = a.data();
          const double* pb = b.data();
          double* po = out.mutable_data();
          if (op < 0 || op > 3) throw py::value_error("op: unknown binary operation");
          {
            py::gil_scoped_release nogil;
            for (py::ssize_t i = 0; i < count; ++i) {
              const T x = scalar_traits<T>::from_limbs(pa + i * k);
              const T y = scalar_traits<T>::from_limbs(pb + i * k);
              T r;
              switch (static_cast<binary_op>(op)) {
                case binary_op::add: r = x + y; break;
                case binary_op::sub: r = x - y; break;
                case binary_op::mul: r = x * y; break;
                default: r = x / y; break;
              }
              scalar_traits<T>::to_limbs(r, po + i * k);
            }
          }
          return out;
        },
        py::arg("op"), py::arg("a"), py::arg("b"));

  m.def(("limb_unary_" + suffix).c_str(),
        [](int op, const limb_array& a) {
          constexpr int k = scalar_traits<T>::limbs;
          if (a.ndim() != 2 || a.shape(1) != k)
            throw py::value_error("operand: expected an (M, k) limb array");
          if (op < 0 || op > 2) throw py::value_error("op: unknown unary operation");
          const py::ssize_t count = a.shape(0);
          limb_array out({count, static_cast<py::ssize_t>(k)});
          const double* pa = a.data();
          double* po = out.mutable_data();
          {
            py::gil_scoped_release nogil;
            using std::abs;
            using std::sqrt;
            for (py::ssize_t i = 0; i < count; ++i) {
              const T x = scalar_traits<T>::from_limbs(pa + i * k);
              T r;
              switch (static_cast<unary_op>(op)) {
                case unary_op::sqrt: r = sqrt(x); break;
                case unary_op::neg: r = -x; break;
                default: r = abs(x); break;
              }
              scalar_traits<T>::to_limbs(r, po + i * k);
            }
          }
          return out;
        },
        py::arg("op"), py::arg("a"));

  // Error-free transformations, exposed for their own tests (exactness checked with Fraction).
  if (suffix == "f64") {
    m.def("two_sum", [](double a, double b) { double e; double s = two_sum(a, b, e); return py::make_tuple(s, e); });
    m.def("two_prod", [](double a, double b) { double e; double p = two_prod(a, b, e); return py::make_tuple(p, e); });
  }
}

}  // namespace loschmidt::bind
