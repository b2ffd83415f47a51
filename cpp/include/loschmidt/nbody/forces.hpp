// Newtonian gravitational accelerations, G = 1, no softening, in the working precision T.
// Pairwise: each pair's separation, distance and 1/r^3 are computed once and applied to both bodies
// (Newton's third law), so the cost is n(n-1)/2 pair terms, one sqrt and one division each.
// No allocation: the caller owns every array.
//
// The kernels are written for D spatial dimensions (D = 3: the public interface; D = 2: the
// integrators' fast path for planar systems, whose z coordinates and velocities are exactly zero
// and stay so). For such a system the D = 2 kernel returns the same bits as the D = 3 one, since
// adding the exact zero dz*dz changes nothing.
#pragma once

#include <cmath>
#include <vector>

#include <loschmidt/nbody/state.hpp>

namespace loschmidt {

// a[D*i+d] = sum_{j != i} m_j (x_j - x_i)_d / |x_j - x_i|^3, body-major with D components per body.
// Single pass. Coincident bodies give non-finite values (the integrators report Status::nonfinite).
template <int D, class T>
inline void accelerations_in(int n, const T* m, const T* x, T* a) {
  static_assert(D == 2 || D == 3, "2 or 3 spatial dimensions");
  using std::sqrt;
  for (int k = 0; k < D * n; ++k) a[k] = T(0);
  for (int i = 0; i < n; ++i) {
    T xi[D], ai[D];
    for (int c = 0; c < D; ++c) {
      xi[c] = x[D * i + c];
      ai[c] = T(0);
    }
    const T mi = m[i];
    for (int j = i + 1; j < n; ++j) {
      T dx[D];
      for (int c = 0; c < D; ++c) dx[c] = x[D * j + c] - xi[c];
      T r2 = dx[0] * dx[0] + dx[1] * dx[1];
      if constexpr (D == 3) r2 = r2 + dx[2] * dx[2];
      const T r = sqrt(r2);
      const T q = T(1) / (r2 * r);  // 1 / r^3
      const T qj = m[j] * q;
      const T qi = mi * q;
      for (int c = 0; c < D; ++c) {
        ai[c] += qj * dx[c];
        a[D * j + c] -= qi * dx[c];
      }
    }
    for (int c = 0; c < D; ++c) a[D * i + c] += ai[c];
  }
}

// Scratch for the three-pass kernel: separations and 1/r^3 of every pair. Allocated once.
template <class T>
struct PairWorkspace {
  std::vector<T> d;  // 3 per pair
  std::vector<T> q;  // 1 per pair
  void setup(int n) {
    const std::size_t pairs = static_cast<std::size_t>(n) * static_cast<std::size_t>(n > 0 ? n - 1 : 0) / 2;
    d.assign(3 * pairs, T(0));
    q.assign(pairs, T(0));
  }
};

// The same accelerations (same pair terms, same summation order, same bits) in three passes:
// separations, then 1/r^3 of all pairs, then accumulation. The sqrt/division chains of different
// pairs are independent and overlap in the pipeline instead of waiting on each other: about 25%
// faster in double-double for n = 3..8 (measured), slightly slower in double.
template <int D, class T>
inline void accelerations_in(int n, const T* m, const T* x, T* a, PairWorkspace<T>& w) {
  static_assert(D == 2 || D == 3, "2 or 3 spatial dimensions");
  using std::sqrt;
  T* d = w.d.data();
  T* q = w.q.data();
  int p = 0;
  for (int i = 0; i < n; ++i)
    for (int j = i + 1; j < n; ++j, ++p) {
      T* dp = d + 3 * p;
      for (int c = 0; c < D; ++c) dp[c] = x[D * j + c] - x[D * i + c];
      T r2 = dp[0] * dp[0] + dp[1] * dp[1];
      if constexpr (D == 3) r2 = r2 + dp[2] * dp[2];
      q[p] = r2;
    }
  for (int k = 0; k < p; ++k) {
    const T r2 = q[k];
    const T r = sqrt(r2);
    q[k] = T(1) / (r2 * r);
  }
  for (int k = 0; k < D * n; ++k) a[k] = T(0);
  p = 0;
  for (int i = 0; i < n; ++i) {
    T ai[D];
    for (int c = 0; c < D; ++c) ai[c] = T(0);
    const T mi = m[i];
    for (int j = i + 1; j < n; ++j, ++p) {
      const T qj = m[j] * q[p];
      const T qi = mi * q[p];
      const T* dp = d + 3 * p;
      for (int c = 0; c < D; ++c) {
        ai[c] += qj * dp[c];
        a[D * j + c] -= qi * dp[c];
      }
    }
    for (int c = 0; c < D; ++c) a[D * i + c] += ai[c];
  }
}

// The public three-dimensional form: x and a flat, 3n, body-major (x[3*i+d]).
template <class T>
inline void accelerations(int n, const T* m, const T* x, T* a) {
  accelerations_in<3>(n, m, x, a);
}

template <class T>
inline void accelerations(int n, const T* m, const T* x, T* a, PairWorkspace<T>& w) {
  accelerations_in<3>(n, m, x, a, w);
}

template <class T>
inline void accelerations(const State<T>& s, std::vector<T>& a) {
  a.resize(3 * static_cast<std::size_t>(s.n));
  accelerations(s.n, s.m.data(), s.x.data(), a.data());
}

}  // namespace loschmidt
