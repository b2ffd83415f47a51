// Conserved quantities and distances of an N-body state, in the working precision T with
// compensated (Kahan-Babuska-Neumaier) sums, so that the diagnostics' own round-off stays far below
// the integration error they are used to judge. G = 1.
#pragma once

#include <array>
#include <cmath>

#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/compensated.hpp>

namespace loschmidt {

template <class T>
inline T kinetic_energy(const State<T>& s) {
  compensated_sum<T> sum;
  for (int i = 0; i < s.n; ++i) {
    const T* v = &s.v[3 * i];
    sum.add(s.m[i] * (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]));
  }
  return sum.value() / T(2);
}

// -sum_{i<j} m_i m_j / r_ij
template <class T>
inline T potential_energy(const State<T>& s) {
  using std::sqrt;
  compensated_sum<T> sum;
  for (int i = 0; i < s.n; ++i)
    for (int j = i + 1; j < s.n; ++j) {
      const T dx = s.x[3 * j] - s.x[3 * i];
      const T dy = s.x[3 * j + 1] - s.x[3 * i + 1];
      const T dz = s.x[3 * j + 2] - s.x[3 * i + 2];
      sum.add(-(s.m[i] * s.m[j]) / sqrt(dx * dx + dy * dy + dz * dz));
    }
  return sum.value();
}

// Total energy, kinetic and potential terms summed together in one compensated sum.
template <class T>
inline T energy(const State<T>& s) {
  using std::sqrt;
  compensated_sum<T> sum;
  for (int i = 0; i < s.n; ++i) {
    const T* v = &s.v[3 * i];
    sum.add(s.m[i] * (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]) / T(2));
  }
  for (int i = 0; i < s.n; ++i)
    for (int j = i + 1; j < s.n; ++j) {
      const T dx = s.x[3 * j] - s.x[3 * i];
      const T dy = s.x[3 * j + 1] - s.x[3 * i + 1];
      const T dz = s.x[3 * j + 2] - s.x[3 * i + 2];
      sum.add(-(s.m[i] * s.m[j]) / sqrt(dx * dx + dy * dy + dz * dz));
    }
  return sum.value();
}

template <class T>
inline std::array<T, 3> linear_momentum(const State<T>& s) {
  std::array<compensated_sum<T>, 3> p;
  for (int i = 0; i < s.n; ++i)
    for (int d = 0; d < 3; ++d) p[d].add(s.m[i] * s.v[3 * i + d]);
  return {p[0].value(), p[1].value(), p[2].value()};
}

// L = sum m_i x_i cross v_i, about the origin of the caller's frame.
template <class T>
inline std::array<T, 3> angular_momentum(const State<T>& s) {
  std::array<compensated_sum<T>, 3> l;
  for (int i = 0; i < s.n; ++i) {
    const T* x = &s.x[3 * i];
    const T* v = &s.v[3 * i];
    const T mi = s.m[i];
    l[0].add(mi * (x[1] * v[2]));
    l[0].add(-(mi * (x[2] * v[1])));
    l[1].add(mi * (x[2] * v[0]));
    l[1].add(-(mi * (x[0] * v[2])));
    l[2].add(mi * (x[0] * v[1]));
    l[2].add(-(mi * (x[1] * v[0])));
  }
  return {l[0].value(), l[1].value(), l[2].value()};
}

template <class T>
inline std::array<T, 3> center_of_mass(const State<T>& s) {
  std::array<compensated_sum<T>, 3> c;
  compensated_sum<T> mass;
  for (int i = 0; i < s.n; ++i) {
    mass.add(s.m[i]);
    for (int d = 0; d < 3; ++d) c[d].add(s.m[i] * s.x[3 * i + d]);
  }
  const T M = mass.value();
  return {c[0].value() / M, c[1].value() / M, c[2].value() / M};
}

// Phase-space distances used for round trips (METHODS.md section 4), the one implementation:
// between (x, v) and (x0, v0), k = 3n components each, delta = sqrt(sum |dx|^2 + |dv|^2), and its
// position and velocity parts dpos = sqrt(sum |dx|^2), dvel = sqrt(sum |dv|^2), N-body units, all
// in the working precision T. The operations are exactly those of loschmidt.phase_distances
// (differences, squares, plain sums in body-major order, positions and velocities separately,
// then their sum), so an engine result and a Python one agree bit for bit. Plain sums are enough:
// the distance is compared with perturbations many orders above its round-off.
template <class T>
inline void phase_space_distances(const T* x, const T* v, const T* x0, const T* v0, int k, T& delta, T& dpos,
                                  T& dvel) {
  using std::sqrt;
  T sx = T(0), sv = T(0);
  for (int i = 0; i < k; ++i) {
    const T dx = x[i] - x0[i];
    const T d2 = dx * dx;
    sx = i == 0 ? d2 : sx + d2;
  }
  for (int i = 0; i < k; ++i) {
    const T dv = v[i] - v0[i];
    const T d2 = dv * dv;
    sv = i == 0 ? d2 : sv + d2;
  }
  delta = sqrt(sx + sv);
  dpos = sqrt(sx);
  dvel = sqrt(sv);
}

// delta between two states of the same n.
template <class T>
inline T phase_space_distance(const State<T>& a, const State<T>& b) {
  T delta, dpos, dvel;
  phase_space_distances(a.x.data(), a.v.data(), b.x.data(), b.v.data(), static_cast<int>(a.x.size()), delta, dpos,
                        dvel);
  return delta;
}

}  // namespace loschmidt
