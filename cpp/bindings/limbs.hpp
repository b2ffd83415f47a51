// Moving extended-precision values across the Python boundary as float64 limb arrays, shape (..., k).
// Nothing is rounded on the way: a value of T is exactly its k limbs (ARCHITECTURE.md rule 3).
#pragma once
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <stdexcept>
#include <string>
#include <vector>

#include "loschmidt/scalar/traits.hpp"

namespace loschmidt::bind {
namespace py = pybind11;
using limb_array = py::array_t<double, py::array::c_style | py::array::forcecast>;

// Reads a (..., k) limb array into a flat vector of T; `expect` is the required leading shape
// (empty: any). `what` names the argument in the error.
template <class T>
std::vector<T> read_limbs(const limb_array& a, const std::vector<py::ssize_t>& expect, const char* what) {
  constexpr int k = scalar_traits<T>::limbs;
  if (a.ndim() < 1 || a.shape(a.ndim() - 1) != k)
    throw py::value_error(std::string(what) + ": expected a limb array whose last axis has " +
                          std::to_string(k) + " limbs");
  if (!expect.empty()) {
    if (static_cast<size_t>(a.ndim()) != expect.size() + 1)
      throw py::value_error(std::string(what) + ": wrong number of dimensions");
    for (size_t i = 0; i < expect.size(); ++i)
      if (a.shape(static_cast<py::ssize_t>(i)) != expect[i])
        throw py::value_error(std::string(what) + ": wrong shape");
  }
  const py::ssize_t count = a.size() / k;
  std::vector<T> out(static_cast<size_t>(count));
  const double* p = a.data();
  for (py::ssize_t i = 0; i < count; ++i) out[static_cast<size_t>(i)] = scalar_traits<T>::from_limbs(p + i * k);
  return out;
}

template <class T>
limb_array write_limbs(const T* values, std::vector<py::ssize_t> shape) {
  constexpr int k = scalar_traits<T>::limbs;
  py::ssize_t count = 1;
  for (auto s : shape) count *= s;
  shape.push_back(k);
  limb_array out(shape);
  double* p = out.mutable_data();
  for (py::ssize_t i = 0; i < count; ++i) scalar_traits<T>::to_limbs(values[i], p + i * k);
  return out;
}

template <class T>
limb_array write_limbs(const std::vector<T>& values, std::vector<py::ssize_t> shape) {
  return write_limbs(values.data(), std::move(shape));
}

template <class T>
limb_array scalar_limbs(const T& value) {
  return write_limbs(&value, {});
}

}  // namespace loschmidt::bind
