// Chain coordinates (Mikkola & Aarseth 1993, Celest. Mech. Dyn. Astron. 57, 439): the bodies are
// ordered in a chain c[0], c[1], ..., c[n-1] in which neighbours are close, and the motion is
// described by the n - 1 link vectors X_k = r_{c[k+1]} - r_{c[k]}, their velocity differences
// W_k = v_{c[k+1]} - v_{c[k]}, and the centre of mass. The short, critical separations are then
// held directly as numbers of their own size instead of as differences of large coordinates, so a
// tight binary keeps its full relative precision wherever the system sits.
//
// This header holds the pieces that do not depend on the time transformation:
//   - the greedy chain ordering (shortest pair first, then the body nearest to either end);
//   - pair separations from the links: neighbours (chain distance 1) and next-neighbours (2) from
//     the links themselves, farther pairs from relative positions q (prefix sums of the links);
//   - the Newtonian force function U = sum m_i m_j / r_ij and the link accelerations
//     A_k = a_{c[k+1]} - a_{c[k]}, with an optional contact test against physical radii;
//   - velocities relative to the centre of mass and the kinetic energy from the W_k;
//   - ChainFrame: conversion between the caller's State and the flat chain vector, the re-chaining
//     test and the re-chaining itself (new links formed as compensated sums of old links).
// Nothing here allocates after setup.
#pragma once

#include <array>
#include <cmath>
#include <limits>
#include <utility>
#include <vector>

#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/compensated.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {
namespace chain {

// Pairs at most this far apart along the chain take their separation from a sum of links; farther
// pairs from relative positions (Mikkola & Aarseth 1993 use sums of up to two links; common practice).
inline constexpr int link_sum_span = 2;

// Relative positions along the chain: q_0 = 0, q_{k+1} = q_k + X_k (3n values, chain order).
template <class T>
inline void chain_positions(int n, const T* X, T* q) {
  q[0] = q[1] = q[2] = T(0);
  for (int k = 0; k + 1 < n; ++k)
    for (int d = 0; d < 3; ++d) q[3 * (k + 1) + d] = q[3 * k + d] + X[3 * k + d];
}

// Separation r_{c[j]} - r_{c[i]} for chain positions i < j.
template <class T>
inline void chain_separation(int i, int j, const T* X, const T* q, T* out) {
  if (j == i + 1) {
    for (int d = 0; d < 3; ++d) out[d] = X[3 * i + d];
  } else if (j == i + 2) {
    for (int d = 0; d < 3; ++d) out[d] = X[3 * i + d] + X[3 * i + 3 + d];
  } else {
    for (int d = 0; d < 3; ++d) out[d] = q[3 * j + d] - q[3 * i + d];
  }
}

// Where the radii test found the deepest overlap at one evaluation (chain positions, i < j).
// The contact distance of a pair is radii_i + radii_j, or merger_i + merger_j where that is larger
// (merger radii: merger_factor times the Schwarzschild radius 2 m / c^2 of each body, set by the
// post-Newtonian runs; the contact is then a merger).
struct ContactProbe {
  const double* radii = nullptr;   // chain order; nullptr = no physical radii
  const double* merger = nullptr;  // chain order; nullptr = no merger test
  int i = -1, j = -1;              // deepest overlapping pair of the last evaluation, -1 if none
  double depth = 0.0;              // contact distance - r_ij > 0 for that pair
  bool merger_pair = false;        // that pair's contact distance is its merger distance
};

// Force function U = sum_{i<j} m_i m_j / r_ij (returned), body accelerations a (3n, chain order,
// G = 1) and link accelerations A (3(n-1)). q is scratch (3n). Each pair's separation, 1/r and
// 1/r^3 are computed once (Newton's third law). With probe.radii or probe.merger set, also reports
// the deepest pair closer than its contact distance (in double; a contact test needs no more).
template <class T>
inline T chain_forces(int n, const T* m, const T* X, T* q, T* a, T* A, ContactProbe* probe = nullptr) {
  using std::sqrt;
  if (n > link_sum_span + 1) chain_positions(n, X, q);
  for (int k = 0; k < 3 * n; ++k) a[k] = T(0);
  T U = T(0);
  const bool test = probe != nullptr && (probe->radii != nullptr || probe->merger != nullptr);
  if (test) {
    probe->i = probe->j = -1;
    probe->depth = 0.0;
    probe->merger_pair = false;
  }
  T d[3];
  for (int i = 0; i < n; ++i) {
    const T mi = m[i];
    for (int j = i + 1; j < n; ++j) {
      chain_separation(i, j, X, q, d);
      const T r2 = add_same_sign(add_same_sign(d[0] * d[0], d[1] * d[1]), d[2] * d[2]);
      // 1/r and 1/r^3 from one inverse square root (no square root, no division in T).
      const T inv_r = rsqrt(r2);
      const T q3 = (inv_r * inv_r) * inv_r;
      U = add_same_sign(U, mi * m[j] * inv_r);  // positive terms
      const T qj = m[j] * q3, qi = mi * q3;
      for (int c = 0; c < 3; ++c) {
        a[3 * i + c] += qj * d[c];
        a[3 * j + c] -= qi * d[c];
      }
      if (test) {
        double reach = probe->radii != nullptr ? probe->radii[i] + probe->radii[j] : 0.0;
        bool merging = false;
        if (probe->merger != nullptr && probe->merger[i] + probe->merger[j] >= reach) {
          reach = probe->merger[i] + probe->merger[j];
          merging = true;
        }
        const double depth = reach - 1.0 / to_double(inv_r);
        if (depth > probe->depth) {
          probe->depth = depth;
          probe->i = i;
          probe->j = j;
          probe->merger_pair = merging;
        }
      }
    }
  }
  for (int k = 0; k + 1 < n; ++k)
    for (int c = 0; c < 3; ++c) A[3 * k + c] = a[3 * (k + 1) + c] - a[3 * k + c];
  return U;
}

// Kinetic energy relative to the centre of mass from the velocity links alone, by Lagrange's
// identity sum_i m_i |u_i|^2 = (1/M) sum_{i<j} m_i m_j |v_j - v_i|^2: a sum of positive terms (no
// cancellation, no division; inv_M = 1/M), with the relative velocities taken from the links as
// the separations are from X (chain_separation; p: 3n scratch for the prefix sums when n > 3).
template <class T>
inline T chain_kinetic(int n, const T* m, const T& inv_M, const T* W, T* p) {
  if (n > link_sum_span + 1) chain_positions(n, W, p);
  T sum = T(0);
  T w[3];
  for (int i = 0; i < n; ++i) {
    T si = T(0);
    for (int j = i + 1; j < n; ++j) {
      chain_separation(i, j, W, p, w);
      si = add_same_sign(si, m[j] * add_same_sign(add_same_sign(w[0] * w[0], w[1] * w[1]), w[2] * w[2]));
    }
    sum = add_same_sign(sum, m[i] * si);
  }
  return scale_pow2(sum * inv_M, 0.5);
}

// Velocities relative to the centre of mass from the W_k (3n, chain order): p_0 = 0,
// p_{k+1} = p_k + W_k, u = p - sum m p / M. Returns the kinetic energy sum m u^2 / 2.
template <class T>
inline T chain_velocities(int n, const T* m, const T& M, const T* W, T* u) {
  T pc[3] = {T(0), T(0), T(0)};
  u[0] = u[1] = u[2] = T(0);
  for (int k = 0; k + 1 < n; ++k)
    for (int d = 0; d < 3; ++d) {
      u[3 * (k + 1) + d] = u[3 * k + d] + W[3 * k + d];
      pc[d] += m[k + 1] * u[3 * (k + 1) + d];
    }
  for (int d = 0; d < 3; ++d) pc[d] /= M;
  T kin = T(0);
  for (int k = 0; k < n; ++k) {
    T s = T(0);
    for (int d = 0; d < 3; ++d) {
      u[3 * k + d] -= pc[d];
      s += u[3 * k + d] * u[3 * k + d];
    }
    kin += m[k] * s;
  }
  return scale_pow2(kin, 0.5);  // exact, as kin / 2 was
}

// chain_velocities with the centre-of-mass velocity formed by a product with inv_M = 1/M instead of
// a division (for the kick's hot path; one more rounding per component).
template <class T>
inline void chain_velocities_inv(int n, const T* m, const T& inv_M, const T* W, T* u) {
  T pc[3] = {T(0), T(0), T(0)};
  u[0] = u[1] = u[2] = T(0);
  for (int k = 0; k + 1 < n; ++k)
    for (int d = 0; d < 3; ++d) {
      u[3 * (k + 1) + d] = u[3 * k + d] + W[3 * k + d];
      pc[d] += m[k + 1] * u[3 * (k + 1) + d];
    }
  for (int d = 0; d < 3; ++d) pc[d] = pc[d] * inv_M;
  for (int k = 0; k < 3 * n; ++k) u[k] -= pc[k % 3];
}

// Greedy chain (Mikkola & Aarseth 1993): start from the shortest pair, then repeatedly attach the
// free body nearest to either end. dist(i, j) is any symmetric distance (double is enough to
// choose an order). Ties go to the lower index, so the order is deterministic. Writes order[0..n).
// used is scratch of size n.
template <class Dist>
inline void greedy_chain(int n, const Dist& dist, int* order, char* used) {
  for (int i = 0; i < n; ++i) used[i] = 0;
  if (n == 1) {
    order[0] = 0;
    return;
  }
  int bi = 0, bj = 1;
  double best = std::numeric_limits<double>::infinity();
  for (int i = 0; i < n; ++i)
    for (int j = i + 1; j < n; ++j) {
      const double r = dist(i, j);
      if (r < best) {
        best = r;
        bi = i;
        bj = j;
      }
    }
  // The chain grows at either end; prepending shifts order[] (n is small: O(n^2) moves are
  // negligible next to the forces).
  int len = 2;
  order[0] = bi;
  order[1] = bj;
  used[bi] = used[bj] = 1;
  while (len < n) {
    const int head = order[0], tail = order[len - 1];
    int pick = -1;
    bool at_head = false;
    double rbest = std::numeric_limits<double>::infinity();
    for (int b = 0; b < n; ++b) {
      if (used[b]) continue;
      const double rh = dist(head, b), rt = dist(tail, b);
      if (rh < rbest) {
        rbest = rh;
        pick = b;
        at_head = true;
      }
      if (rt < rbest) {
        rbest = rt;
        pick = b;
        at_head = false;
      }
    }
    if (pick < 0) {  // non-finite distances: attach the rest in index order
      for (int b = 0; b < n; ++b)
        if (!used[b]) {
          pick = b;
          break;
        }
    }
    if (at_head) {
      for (int k = len; k > 0; --k) order[k] = order[k - 1];
      order[0] = pick;
    } else {
      order[len] = pick;
    }
    used[pick] = 1;
    ++len;
  }
}

// The chain of one integration: the order, masses (and radii) in chain order, the centre of mass
// (which moves uniformly and is advanced analytically from the physical time: r_cm(t) =
// r_cm(t0) + v_cm (t - t0), exact for free motion), and conversions between the caller's State and
// the flat chain vector y = (X[3L], W[3L], extra...), L = n - 1.
//
// With post-Newtonian terms the Newtonian momentum sum m v is not conserved (the EIH terms conserve
// a 1PN-corrected momentum instead), so the centre of mass is integrated as part of y:
// set_integrated_centre(offset) makes to_state read (r_cm, v_cm) from y[offset .. offset + 6) and
// centre() writes the initial values there. Merger radii (post-Newtonian runs) join the physical
// radii in the contact test (ContactProbe).
template <class T>
class ChainFrame {
 public:
  void setup(const State<T>& s, const std::vector<double>& radii, const std::vector<double>& merger_radii = {}) {
    n_ = s.n;
    order_.assign(static_cast<std::size_t>(n_), 0);
    new_order_.assign(static_cast<std::size_t>(n_), 0);
    pos_.assign(static_cast<std::size_t>(n_), 0);
    used_.assign(static_cast<std::size_t>(n_), 0);
    mass_.assign(static_cast<std::size_t>(n_), T(0));
    body_mass_ = s.m;
    radii_user_ = radii;
    radii_.assign(radii.empty() ? 0 : static_cast<std::size_t>(n_), 0.0);
    merger_user_ = merger_radii;
    merger_.assign(merger_radii.empty() ? 0 : static_cast<std::size_t>(n_), 0.0);
    centre_offset_ = -1;
    q_.assign(3 * static_cast<std::size_t>(n_), T(0));
    u_.assign(3 * static_cast<std::size_t>(n_), T(0));
    a_.assign(3 * static_cast<std::size_t>(n_), T(0));
    A_.assign(3 * static_cast<std::size_t>(n_), T(0));
    tmpX_.assign(3 * static_cast<std::size_t>(n_), T(0));
    tmpW_.assign(3 * static_cast<std::size_t>(n_), T(0));
    compensated_sum<T> msum;
    for (int i = 0; i < n_; ++i) msum.add(s.m[static_cast<std::size_t>(i)]);
    M_ = msum.value();
    // Centre of mass in the caller's frame, compensated sums.
    for (int d = 0; d < 3; ++d) {
      compensated_sum<T> cx, cv;
      for (int i = 0; i < n_; ++i) {
        cx.add(s.m[static_cast<std::size_t>(i)] * s.x[static_cast<std::size_t>(3 * i + d)]);
        cv.add(s.m[static_cast<std::size_t>(i)] * s.v[static_cast<std::size_t>(3 * i + d)]);
      }
      cm_x0_[d] = cx.value() / M_;
      cm_v_[d] = cv.value() / M_;
    }
    // Initial order from the caller's positions.
    const State<T>* sp = &s;
    auto dist = [sp](int i, int j) {
      double r2 = 0;
      for (int d = 0; d < 3; ++d) {
        const double x = to_double(sp->x[static_cast<std::size_t>(3 * j + d)] - sp->x[static_cast<std::size_t>(3 * i + d)]);
        r2 += x * x;
      }
      return std::sqrt(r2);
    };
    greedy_chain(n_, dist, order_.data(), used_.data());
    apply_order();
  }

  int bodies() const { return n_; }
  int links() const { return n_ - 1; }
  const int* order() const { return order_.data(); }
  const T* masses() const { return mass_.data(); }  // chain order
  const T& total_mass() const { return M_; }
  const double* radii() const { return radii_.empty() ? nullptr : radii_.data(); }  // chain order
  const double* merger_radii() const { return merger_.empty() ? nullptr : merger_.data(); }  // chain order
  bool contact_test() const { return !radii_.empty() || !merger_.empty(); }

  // Contact distance of chain positions a, b in T: radii_a + radii_b, or the merger distance where
  // that is larger (as ContactProbe decides it); and whether it is the merger distance.
  bool merger_pair(int a, int b) const {
    if (merger_.empty()) return false;
    if (radii_.empty()) return true;
    const double rr = radii_.empty() ? 0.0 : radii_[static_cast<std::size_t>(a)] + radii_[static_cast<std::size_t>(b)];
    return merger_[static_cast<std::size_t>(a)] + merger_[static_cast<std::size_t>(b)] >= rr;
  }
  double reach_double(int a, int b) const {
    if (merger_pair(a, b)) return merger_[static_cast<std::size_t>(a)] + merger_[static_cast<std::size_t>(b)];
    return radii_[static_cast<std::size_t>(a)] + radii_[static_cast<std::size_t>(b)];
  }
  T reach(int a, int b) const {
    if (merger_pair(a, b)) return T(merger_[static_cast<std::size_t>(a)]) + T(merger_[static_cast<std::size_t>(b)]);
    return T(radii_[static_cast<std::size_t>(a)]) + T(radii_[static_cast<std::size_t>(b)]);
  }

  // Integrated centre of mass (post-Newtonian runs): see the class comment.
  void set_integrated_centre(int offset) { centre_offset_ = offset; }
  void centre(T* out) const {
    for (int d = 0; d < 3; ++d) {
      out[d] = cm_x0_[d];
      out[3 + d] = cm_v_[d];
    }
  }

  // Links and velocity links from the caller's coordinates (one rounding each: X_k = x_b - x_a).
  void from_state(const State<T>& s, T* y) const {
    const int L = links();
    T* X = y;
    T* W = y + 3 * L;
    for (int k = 0; k < L; ++k) {
      const std::size_t a = static_cast<std::size_t>(order_[static_cast<std::size_t>(k)]);
      const std::size_t b = static_cast<std::size_t>(order_[static_cast<std::size_t>(k + 1)]);
      for (int d = 0; d < 3; ++d) {
        X[3 * k + d] = s.x[3 * b + d] - s.x[3 * a + d];
        W[3 * k + d] = s.v[3 * b + d] - s.v[3 * a + d];
      }
    }
  }

  // Back to the caller's frame at physical time t (t0 = the time setup() was called at).
  void to_state(const T* y, const T& t, const T& t0, State<T>& s) {
    const int L = links();
    const T* X = y;
    const T* W = y + 3 * L;
    chain_positions(n_, X, q_.data());
    T qc[3] = {T(0), T(0), T(0)};
    for (int k = 0; k < n_; ++k)
      for (int d = 0; d < 3; ++d) qc[d] += mass_[static_cast<std::size_t>(k)] * q_[static_cast<std::size_t>(3 * k + d)];
    chain_velocities(n_, mass_.data(), M_, W, u_.data());
    const T dt = t - t0;
    T rc[3], vc[3];
    if (centre_offset_ >= 0) {
      for (int d = 0; d < 3; ++d) {
        rc[d] = y[centre_offset_ + d] - qc[d] / M_;
        vc[d] = y[centre_offset_ + 3 + d];
      }
    } else {
      for (int d = 0; d < 3; ++d) {
        rc[d] = cm_x0_[d] + cm_v_[d] * dt - qc[d] / M_;
        vc[d] = cm_v_[d];
      }
    }
    for (int k = 0; k < n_; ++k) {
      const std::size_t b = static_cast<std::size_t>(order_[static_cast<std::size_t>(k)]);
      for (int d = 0; d < 3; ++d) {
        s.x[3 * b + d] = rc[d] + q_[static_cast<std::size_t>(3 * k + d)];
        s.v[3 * b + d] = vc[d] + u_[static_cast<std::size_t>(3 * k + d)];
      }
    }
  }

  // Kinetic energy relative to the centre of mass, U, and the internal energy T - U, each with
  // compensated sums over bodies and pairs (used to start B = -E and for diagnostics).
  void energies(const T* y, T& kinetic, T& force_function) {
    using std::sqrt;
    const int L = links();
    const T* X = y;
    const T* W = y + 3 * L;
    chain_velocities(n_, mass_.data(), M_, W, u_.data());
    compensated_sum<T> ks;
    for (int k = 0; k < n_; ++k) {
      const T* u = &u_[static_cast<std::size_t>(3 * k)];
      ks.add(mass_[static_cast<std::size_t>(k)] * (u[0] * u[0] + u[1] * u[1] + u[2] * u[2]));
    }
    kinetic = ks.value() / T(2);
    chain_positions(n_, X, q_.data());
    compensated_sum<T> us;
    T d[3];
    for (int i = 0; i < n_; ++i)
      for (int j = i + 1; j < n_; ++j) {
        chain_separation(i, j, X, q_.data(), d);
        us.add(mass_[static_cast<std::size_t>(i)] * mass_[static_cast<std::size_t>(j)] /
               sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]));
      }
    force_function = us.value();
  }

  // Contact test of a chain state against the radii (and merger radii): the deepest overlapping
  // pair (chain positions) and its depth, or i = -1.
  ContactProbe contact(const T* y) {
    ContactProbe p;
    p.radii = radii();
    p.merger = merger_radii();
    if (p.radii == nullptr && p.merger == nullptr) return p;
    chain_forces(n_, mass_.data(), y, q_.data(), a_.data(), A_.data(), &p);
    return p;
  }

  // Separation (double) of chain positions i < j.
  double distance(const T* X, int i, int j) const {
    T d[3];
    chain_separation(i, j, X, q_.data(), d);
    double r2 = 0;
    for (int c = 0; c < 3; ++c) {
      const double x = to_double(d[c]);
      r2 += x * x;
    }
    return std::sqrt(r2);
  }

  // r_ij - rsum in the working precision for chain positions i < j of a full chain state y
  // (contact location needs the root to the working precision).
  T gap_at(const T* y, int i, int j, const T& rsum) {
    using std::sqrt;
    chain_positions(n_, y, q_.data());
    T d[3];
    chain_separation(i, j, y, q_.data(), d);
    return sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]) - rsum;
  }

  // Re-chaining test (Mikkola & Aarseth 1993): a pair that is not a link, (i, j) with j - i >= 2,
  // is closer than the shortest link it bridges, min_{i <= k < j} |X_k|. Cheap: O(n^2) in double.
  bool needs_rechain(const T* y) {
    const int n = n_;
    if (n < 3) return false;
    chain_positions(n, y, q_.data());
    for (int i = 0; i + 2 < n; ++i) {
      double shortest = distance(y, i, i + 1);
      for (int j = i + 2; j < n; ++j) {
        shortest = std::fmin(shortest, distance(y, j - 1, j));
        if (distance(y, i, j) < shortest) return true;
      }
    }
    return false;
  }

  // Rebuild the chain greedily from the current separations; if the order changes, rewrite the
  // links in place as sums of the old links between the new neighbours (compensated, so each new
  // link is the correctly summed old one up to one rounding), fold the compensation terms comp
  // (Compensated builds; may be null) into the sums, and return true. The extra entries of y
  // (time, binding energy, ...) are untouched: they do not depend on the chain.
  bool rechain(T* y, T* comp) {
    const int n = n_, L = n_ - 1;
    chain_positions(n, y, q_.data());
    // Distances by body index through the old chain positions.
    for (int k = 0; k < n; ++k) pos_[static_cast<std::size_t>(order_[static_cast<std::size_t>(k)])] = k;
    const ChainFrame* self = this;
    const T* X = y;
    auto dist = [self, X](int a, int b) {
      int i = self->pos_[static_cast<std::size_t>(a)], j = self->pos_[static_cast<std::size_t>(b)];
      if (i > j) std::swap(i, j);
      return self->distance(X, i, j);
    };
    greedy_chain(n, dist, new_order_.data(), used_.data());
    bool same = true, reversed = true;
    for (int k = 0; k < n; ++k) {
      same = same && new_order_[static_cast<std::size_t>(k)] == order_[static_cast<std::size_t>(k)];
      reversed = reversed && new_order_[static_cast<std::size_t>(k)] == order_[static_cast<std::size_t>(n - 1 - k)];
    }
    if (same || reversed) return false;
    const T* W = y + 3 * L;
    const T* cX = comp;
    const T* cW = comp ? comp + 3 * L : nullptr;
    for (int k = 0; k < L; ++k) {
      int i = pos_[static_cast<std::size_t>(new_order_[static_cast<std::size_t>(k)])];
      int j = pos_[static_cast<std::size_t>(new_order_[static_cast<std::size_t>(k + 1)])];
      const bool flip = i > j;
      if (flip) std::swap(i, j);
      for (int d = 0; d < 3; ++d) {
        compensated_sum<T> sx, sw;
        for (int l = i; l < j; ++l) {
          sx.add(X[3 * l + d]);
          sw.add(W[3 * l + d]);
          if (comp) {
            sx.add(cX[3 * l + d]);
            sw.add(cW[3 * l + d]);
          }
        }
        T vx = sx.value(), vw = sw.value();
        if (flip) {
          vx = -vx;
          vw = -vw;
        }
        tmpX_[static_cast<std::size_t>(3 * k + d)] = vx;
        tmpW_[static_cast<std::size_t>(3 * k + d)] = vw;
      }
    }
    for (int k = 0; k < 3 * L; ++k) {
      y[k] = tmpX_[static_cast<std::size_t>(k)];
      y[3 * L + k] = tmpW_[static_cast<std::size_t>(k)];
      if (comp) comp[k] = comp[3 * L + k] = T(0);
    }
    for (int k = 0; k < n; ++k) order_[static_cast<std::size_t>(k)] = new_order_[static_cast<std::size_t>(k)];
    apply_order();
    return true;
  }

  // User indices (i < j) of chain positions a, b.
  void body_pair(int a, int b, int& i, int& j) const {
    i = order_[static_cast<std::size_t>(a)];
    j = order_[static_cast<std::size_t>(b)];
    if (i > j) std::swap(i, j);
  }

 private:
  void apply_order() {
    for (int k = 0; k < n_; ++k) {
      const std::size_t b = static_cast<std::size_t>(order_[static_cast<std::size_t>(k)]);
      mass_[static_cast<std::size_t>(k)] = body_mass_[b];
      if (!radii_.empty()) radii_[static_cast<std::size_t>(k)] = radii_user_[b];
      if (!merger_.empty()) merger_[static_cast<std::size_t>(k)] = merger_user_[b];
    }
  }

  int n_ = 0;
  std::vector<int> order_, new_order_, pos_;
  std::vector<char> used_;
  std::vector<T> mass_, body_mass_;
  std::vector<double> radii_, radii_user_, merger_, merger_user_;
  int centre_offset_ = -1;
  T M_ = T(0);
  T cm_x0_[3] = {T(0), T(0), T(0)}, cm_v_[3] = {T(0), T(0), T(0)};
  std::vector<T> q_, u_, a_, A_, tmpX_, tmpW_;
};

}  // namespace chain
}  // namespace loschmidt
