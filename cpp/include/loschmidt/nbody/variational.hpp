// Tangent (variational) accelerations of the Newtonian N-body problem, G = 1, in the working
// precision T: for x'' = a(x) a small displacement dx obeys dx'' = J(x) dx, with J the tidal
// tensor. Pair by pair, with r = x_j - x_i and dr = dx_j - dx_i,
//   d a_i += m_j [dr / r^3 - 3 r (r . dr) / r^5],   d a_j -= m_i [dr / r^3 - 3 r (r . dr) / r^5]
// (the derivative of m_j r / r^3 along dr). Every operation is linear in dx, so scaling dx by a
// power of two scales the result exactly (the Lyapunov driver renormalises that way).
//
// The pair separations and 1/r^3 are taken from the PairWorkspace that the three-pass acceleration
// kernel (forces.hpp) has just filled for the same positions, so the tangent costs no extra sqrt.
// No allocation: the caller owns every array.
#pragma once

#include <loschmidt/nbody/forces.hpp>

namespace loschmidt {

// da[D*i+c] = (J(x) dx)_{i,c}, body-major with D components per body; w holds the separations
// and 1/r^3 of x from accelerations_in<D>(n, m, x, a, w).
template <int D, class T>
inline void tangent_accelerations_in(int n, const T* m, const PairWorkspace<T>& w, const T* dx, T* da) {
  static_assert(D == 2 || D == 3, "2 or 3 spatial dimensions");
  const T* d = w.d.data();
  const T* q = w.q.data();
  const T three = T(3);
  for (int k = 0; k < D * n; ++k) da[k] = T(0);
  int p = 0;
  for (int i = 0; i < n; ++i) {
    T dai[D];
    for (int c = 0; c < D; ++c) dai[c] = T(0);
    const T mi = m[i];
    for (int j = i + 1; j < n; ++j, ++p) {
      const T* r = d + 3 * p;
      T dr[D];
      for (int c = 0; c < D; ++c) dr[c] = dx[D * j + c] - dx[D * i + c];
      T r2 = r[0] * r[0] + r[1] * r[1];
      T rdr = r[0] * dr[0] + r[1] * dr[1];
      if constexpr (D == 3) {
        r2 = r2 + r[2] * r[2];
        rdr = rdr + r[2] * dr[2];
      }
      const T s = three * rdr / r2;  // 3 (r . dr) / r^2
      const T qj = m[j] * q[p];
      const T qi = mi * q[p];
      for (int c = 0; c < D; ++c) {
        const T wc = dr[c] - s * r[c];
        dai[c] += qj * wc;
        da[D * j + c] -= qi * wc;
      }
    }
    for (int c = 0; c < D; ++c) da[D * i + c] += dai[c];
  }
}

// The public three-dimensional form: x, dx and da flat, 3n, body-major. Computes the
// accelerations a too (they share the pair terms).
template <class T>
inline void variational_accelerations(int n, const T* m, const T* x, const T* dx, T* a, T* da,
                                      PairWorkspace<T>& w) {
  accelerations_in<3>(n, m, x, a, w);
  tangent_accelerations_in<3>(n, m, w, dx, da);
}

}  // namespace loschmidt
