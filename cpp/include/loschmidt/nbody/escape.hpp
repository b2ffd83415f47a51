// A cheap escape test in double precision, for stopping an integration early (Options::stop).
// It is only a trigger: python/loschmidt/outcome.py classifies the stopped state exactly.
//
// Body p escapes when (G = 1, k = distance_factor; k = 0 drops condition 3):
//   1. its two-body energy relative to the centre of mass of all the other bodies is positive,
//      mu |V|^2 / 2 - m_p M / |R| > 0, M the mass of the rest, mu = m_p M / (m_p + M), R and V
//      the position and velocity of p relative to the rest's centre of mass;
//   2. it recedes from that centre of mass, R . V > 0;
//   3. it is far, and (N = 3) not part of the binary:
//      - N = 3, as outcome.py's practical test (common practice; METHODS.md section 5): when the
//        most bound pair (lowest two-body energy E_ij) is bound, p must be the third body and
//        |R| > k a, a = -m_i m_j / (2 E_ij) the pair's semimajor axis. (Taking "the remaining
//        pair" for every p instead would let a member of a tight binary "escape" from the centre
//        of mass of its partner and the third body; seen on the Pythagorean problem at t ~ 1.9.)
//        When no pair is bound, p must be far from each other body q on their own hyperbola,
//        r_pq > k m_p m_q / (2 E_pq).
//      - N = 2: the two bodies' own hyperbola, r > k m_1 m_2 / (2 E) (outcome.py's rule for two
//        single bodies); the lighter body (the second on a tie) is reported, as outcome.py does.
//      - N > 3: |R| > k s, s the size of the rest: over the other bodies j, the largest of the
//        distance r_j of j from the centre of mass of the rest without j and, when j is bound to
//        that centre of mass, its semimajor axis a_j about it. For a hierarchical rest, s is at
//        least the outer semimajor axis that outcome.py's subsystem test uses (so the trigger
//        does not fire before that test can pass); the test itself needs the hierarchical
//        decomposition and is left to outcome(). O(N^3) flops.
// No allocation.
#pragma once

#include <cmath>
#include <limits>

namespace loschmidt {

namespace detail {

// Two-body energy mu |v_ij|^2 / 2 - m_i m_j / r_ij and the separation r_ij.
inline double pair_energy(const double* m, const double* x, const double* v, int i, int j, double& r) {
  double s2 = 0.0, w2 = 0.0;
  for (int c = 0; c < 3; ++c) {
    const double d = x[3 * j + c] - x[3 * i + c];
    const double e = v[3 * j + c] - v[3 * i + c];
    s2 += d * d;
    w2 += e * e;
  }
  r = std::sqrt(s2);
  return 0.5 * (m[i] * m[j] / (m[i] + m[j])) * w2 - m[i] * m[j] / r;
}

// Conditions 1 and 2 for body p; R (3) and |R| returned for condition 3.
inline bool unbound_and_receding(int n, const double* m, const double* x, const double* v, int p, double* R,
                                 double& dist) {
  double M = 0.0, V[3] = {0, 0, 0};
  R[0] = R[1] = R[2] = 0.0;
  for (int j = 0; j < n; ++j) {
    if (j == p) continue;
    M += m[j];
    for (int c = 0; c < 3; ++c) {
      R[c] += m[j] * x[3 * j + c];
      V[c] += m[j] * v[3 * j + c];
    }
  }
  if (!(M > 0.0) || !(m[p] > 0.0)) return false;
  double r2 = 0.0, v2 = 0.0, rv = 0.0;
  for (int c = 0; c < 3; ++c) {
    R[c] = x[3 * p + c] - R[c] / M;
    V[c] = v[3 * p + c] - V[c] / M;
    r2 += R[c] * R[c];
    v2 += V[c] * V[c];
    rv += R[c] * V[c];
  }
  dist = std::sqrt(r2);
  const double mu = m[p] * M / (m[p] + M);
  const double energy = 0.5 * mu * v2 - m[p] * M / dist;
  return energy > 0.0 && rv > 0.0;
}

// r_pq > k m_p m_q / (2 E_pq) with E_pq > 0 (false when the pair is bound or parabolic).
inline bool far_on_hyperbola(const double* m, const double* x, const double* v, int p, int q, double k) {
  double r;
  const double e = pair_energy(m, x, v, p, q, r);
  return e > 0.0 && r > k * m[p] * m[q] / (2.0 * e);
}

// Size of the bodies other than p (N > 3): max over j != p of r_j and, when bound, a_j, the
// distance and semimajor axis of j about the centre of mass of the bodies other than p and j.
inline double rest_size(int n, const double* m, const double* x, const double* v, int p) {
  double size = 0.0;
  for (int j = 0; j < n; ++j) {
    if (j == p) continue;
    double M = 0.0, R[3] = {0, 0, 0}, V[3] = {0, 0, 0};
    for (int i = 0; i < n; ++i) {
      if (i == p || i == j) continue;
      M += m[i];
      for (int c = 0; c < 3; ++c) {
        R[c] += m[i] * x[3 * i + c];
        V[c] += m[i] * v[3 * i + c];
      }
    }
    if (!(M > 0.0)) continue;
    double r2 = 0.0, v2 = 0.0;
    for (int c = 0; c < 3; ++c) {
      const double d = x[3 * j + c] - R[c] / M;
      const double e = v[3 * j + c] - V[c] / M;
      r2 += d * d;
      v2 += e * e;
    }
    const double r = std::sqrt(r2);
    const double energy = 0.5 * (m[j] * M / (m[j] + M)) * v2 - m[j] * M / r;
    size = std::fmax(size, r);
    if (energy < 0.0) size = std::fmax(size, -m[j] * M / (2.0 * energy));
  }
  return size;
}

}  // namespace detail

// Index of an escaping body (the lowest index that passes), or -1. m: n masses; x, v: 3n,
// body-major.
inline int escaping_body(int n, const double* m, const double* x, const double* v, double distance_factor) {
  using detail::far_on_hyperbola;
  using detail::pair_energy;
  if (n < 2) return -1;
  const double k = distance_factor;
  double R[3], dist;
  if (n == 2) {
    const int p = (m[1] <= m[0]) ? 1 : 0;  // the heavier (the first on a tie) is the remnant
    if (!detail::unbound_and_receding(n, m, x, v, p, R, dist)) return -1;
    return (k == 0.0 || far_on_hyperbola(m, x, v, 0, 1, k)) ? p : -1;
  }
  if (n == 3) {
    int bi = 0, bj = 1;
    double r, ebest = pair_energy(m, x, v, 0, 1, r);
    const int pairs[2][2] = {{0, 2}, {1, 2}};
    for (const auto& pr : pairs) {
      const double e = pair_energy(m, x, v, pr[0], pr[1], r);
      if (e < ebest) {
        ebest = e;
        bi = pr[0];
        bj = pr[1];
      }
    }
    if (ebest < 0.0) {
      const int p = 3 - bi - bj;
      if (!detail::unbound_and_receding(n, m, x, v, p, R, dist)) return -1;
      const double a = -m[bi] * m[bj] / (2.0 * ebest);
      return (k == 0.0 || dist > k * a) ? p : -1;
    }
    for (int p = 0; p < 3; ++p) {
      if (!detail::unbound_and_receding(n, m, x, v, p, R, dist)) continue;
      if (k == 0.0) return p;
      bool far = true;
      for (int q = 0; q < 3 && far; ++q)
        if (q != p) far = far_on_hyperbola(m, x, v, p, q, k);
      if (far) return p;
    }
    return -1;
  }
  for (int p = 0; p < n; ++p) {
    if (!detail::unbound_and_receding(n, m, x, v, p, R, dist)) continue;
    if (k == 0.0) return p;
    if (dist > k * detail::rest_size(n, m, x, v, p)) return p;
  }
  return -1;
}

}  // namespace loschmidt
