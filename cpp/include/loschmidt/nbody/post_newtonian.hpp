// Post-Newtonian (PN) accelerations for compact bodies (black holes), G = 1, speed of light c in
// N-body units, harmonic coordinates:
//   - 1PN: the full Einstein-Infeld-Hoffmann N-body equations (all pairs and the three-body
//     couplings through the potentials and the Newtonian accelerations);
//   - 2PN and 2.5PN (radiation reaction): two-body relative accelerations applied pair by pair
//     (common practice in few-body work; Kupi, Amaro-Seoane & Spurzem 2006, MNRAS 371, L45) and
//     distributed to the pair by mass ratio, a_i = (m_j/M) a_rel, a_j = -(m_i/M) a_rel, so each
//     pair term conserves the Newtonian momentum m_i v_i + m_j v_j exactly. The pairwise 2PN and
//     2.5PN terms omit the three-body couplings at those orders and the pair's centre-of-mass
//     motion (the relative-acceleration formulas hold in the pair's centre-of-mass frame).
//
// Formulas. EIH (Einstein, Infeld & Hoffmann 1938; in this form e.g. Will, Theory and Experiment
// in Gravitational Physics [memory]), with n_ab = (x_a - x_b)/r_ab, phi_a = sum_{c != a} m_c/r_ac and
// a_b the Newtonian acceleration of b:
//   c^2 f_a = sum_{b != a} (m_b/r_ab^2) { -n_ab [v_a^2 + 2 v_b^2 - 4 v_a.v_b - (3/2)(n_ab.v_b)^2
//                                                 - 4 phi_a - phi_b - (r_ab/2) n_ab.a_b]
//                                          + [n_ab.(4 v_a - 3 v_b)] (v_a - v_b) }
//             + (7/2) sum_{b != a} (m_b/r_ab) a_b.
// Pair terms (Blanchet 2014, Living Rev. Relativ. 17, 2, the harmonic-coordinate relative
// acceleration of section 7 [memory for the equation number]; 2PN also Kidder 1995, PRD 52, 821
// [memory]): x = x_i - x_j, v = v_i - v_j, n = x/r, rdot = n.v, M = m_i + m_j, nu = m_i m_j/M^2,
//   a_rel = -(M/r^2) [A n + B v],
//   c^4 A_2 = (15/8) nu (1 - 3 nu) rdot^4 - (3/2) nu (3 - 4 nu) rdot^2 v^2 + nu (3 - 4 nu) v^4
//             + (M/r) [-(2 + 25 nu + 2 nu^2) rdot^2 - (nu/2)(13 - 4 nu) v^2] + (M/r)^2 (9 + 87 nu/4),
//   c^4 B_2 = (3/2) nu (3 + 2 nu) rdot^3 - (nu/2)(15 + 4 nu) rdot v^2 + (M/r)(2 + 41 nu/2 + 4 nu^2) rdot,
//   c^5 A_25 = -(8/5) nu (M/r) rdot [3 v^2 + (17/3) M/r],   c^5 B_25 = (8/5) nu (M/r) [v^2 + 3 M/r].
// EIH and the pairwise 2PN term together. Blanchet's A_2, B_2 hold in the 1PN centre-of-mass
// frame of the pair, where the velocities are v_1 = X_2 v + delta, v_2 = -X_1 v + delta (X_i =
// m_i/M) with the 1PN shift delta = nu Delta d(P x)/dt, P = (v^2 - M/r)/(2 c^2), Delta = (m_1 -
// m_2)/M (the 1PN mass dipole at rest; Blanchet 2014, section 7 [memory]); so they include the
// O(c^-4) change of the 1PN relative acceleration under that shift. EIH, evaluated with the bodies'
// actual velocities, produces that change itself: for v_1 = V + X_2 v, v_2 = V - X_1 v its relative
// acceleration is A_1(x, v) - (M Delta / (c^2 r^2)) [2 (V.v) n + (n.V) v] + O(V^2) (worked out
// here by hand). So with EIH on, the pair term subtracts that part at V = delta:
//   c^4 dA_2 = nu (1 - 4 nu) [v^4 - (M/r)(v^2 + rdot^2)],
//   c^4 dB_2 = (nu (1 - 4 nu)/2) rdot [v^2 - 2 M/r]
// (Delta^2 = 1 - 4 nu: zero for equal masses), and EIH + pair term is the two-body 2PN motion in
// the pair's centre-of-mass frame. Without the subtraction a binary of mass ratio 3 started in
// that frame conserves the 2PN energy only to O(c^-4) (its drift falls 55-fold rather than 64-fold
// per doubling of c). Without EIH (pn_2 alone) the plain A_2, B_2 are used.
//
// Checked against things outside the project (offline; the cheap ones are kept in tests/test_pn.py):
//   - EIH: the 1PN N-body energy of the EIH Lagrangian (Landau & Lifshitz, Classical Theory of
//     Fields, section 106 [memory]) is conserved to O(c^-4) for two bodies with a moving centre of
//     mass and for three bodies (its drift falls 16-fold per doubling of c); the two-body reduction
//     gives Blanchet's 1PN relative acceleration (A_1 = (1 + 3 nu) v^2 - (3/2) nu rdot^2
//     - (4 + 2 nu) M/r, B_1 = -(4 - 2 nu) rdot), worked through by hand.
//   - 2PN: the test-mass limit equals the geodesic of the Schwarzschild metric in harmonic
//     coordinates expanded to 2PN (symbolic expansion); with the relative 1PN + 2PN accelerations
//     the two-body 2PN energy is conserved to O(c^-6) for nu = 0, 0.1, 0.25 (drift falls 64-fold
//     per doubling of c), and so it is with EIH + the corrected pair term for mass ratios 1, 3, 9;
//     the gauge-invariant ratio of azimuthal to radial frequency of near-circular orbits comes out
//     as K = 1 + 3x + (27/2 - 7 nu) x^2, x = (M omega_phi)^(2/3)/c^2 (linearised symbolically;
//     Damour & Schafer 1988 [memory]; the nu = 0 part is the Schwarzschild 1/sqrt(1 - 6x)). The
//     coefficient 41/2 of B_2 is the one both checks single out (41 fails both).
//   - 2.5PN: on a circular orbit mu v.a_rel is the quadrupole luminosity
//     -(32/5) m_i^2 m_j^2 M / (c^5 r^5) exactly (Peters & Mathews 1963, Phys. Rev. 131, 435); the
//     orbit-averaged loss at e = 0.5 matches their f(e) (tests/test_pn.py).
//
// No allocation after setup(); the caller supplies the separations and relative velocities (the
// chain method takes them from its links, at full relative precision).
#pragma once

#include <cmath>
#include <stdexcept>
#include <vector>

#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// Bit mask of PN orders.
enum PostNewtonianOrder : int { pn_1 = 1, pn_2 = 2, pn_25 = 4, pn_all = 7 };

// The PN terms of one run: which orders, and the powers of 1/c and the formula constants built in
// T from integer ratios (METHODS.md section 1: no double literals for constants).
template <class T>
struct PostNewtonianTerms {
  int orders = 0;
  T c = T(0), inv_c2 = T(0), inv_c4 = T(0), inv_c5 = T(0);

  bool any() const { return orders != 0; }
  bool eih() const { return (orders & pn_1) != 0; }
  bool second() const { return (orders & pn_2) != 0; }
  bool radiation() const { return (orders & pn_25) != 0; }

  void set(int mask, const T& light_speed) {
    using std::isfinite;
    if (mask < 0 || mask > pn_all) throw std::invalid_argument("post-Newtonian: unknown order mask");
    if (mask != 0 && !(light_speed > T(0) && isfinite(light_speed)))
      throw std::invalid_argument("post-Newtonian: the speed of light must be positive and finite");
    orders = mask;
    c = light_speed;
    if (mask == 0) return;
    const T ic = T(1) / c;
    inv_c2 = ic * ic;
    inv_c4 = inv_c2 * inv_c2;
    inv_c5 = inv_c4 * ic;
    k15_8 = T(15) / T(8);
    k3_2 = T(3) / T(2);
    k7_2 = T(7) / T(2);
    k87_4 = T(87) / T(4);
    k41_2 = T(41) / T(2);
    k8_5 = T(8) / T(5);
    k17_3 = T(17) / T(3);
  }

  T k15_8, k3_2, k7_2, k87_4, k41_2, k8_5, k17_3;
};

// Evaluator of the PN accelerations of n bodies (any order of the bodies; the chain method uses
// its chain order). Scratch is sized in setup().
template <class T>
class PostNewtonianForce {
 public:
  void setup(int n) {
    n_ = n;
    const std::size_t pairs = static_cast<std::size_t>(n) * static_cast<std::size_t>(n > 0 ? n - 1 : 0) / 2;
    d_.assign(3 * pairs, T(0));
    w_.assign(3 * pairs, T(0));
    inv_r_.assign(pairs, T(0));
    phi_.assign(static_cast<std::size_t>(n), T(0));
  }

  // f (3n) = the PN accelerations of the enabled orders. m (n) masses; v (3n) velocities in the
  // harmonic frame (absolute, not relative to the centre of mass: the PN terms are not Galilean
  // invariant); aN (3n) the Newtonian accelerations (used by EIH only); sep(i, j, d) writes
  // d = x_j - x_i and rel(i, j, w) writes w = v_j - v_i for i < j.
  template <class Sep, class Rel>
  void evaluate(const PostNewtonianTerms<T>& pn, const T* m, const T* v, const T* aN, const Sep& sep,
                const Rel& rel, T* f) {
    using std::sqrt;
    const int n = n_;
    for (int k = 0; k < 3 * n; ++k) f[k] = T(0);
    for (int i = 0; i < n; ++i) phi_[static_cast<std::size_t>(i)] = T(0);
    // Pass 1: separations, 1/r, relative velocities, potentials.
    std::size_t p = 0;
    for (int i = 0; i < n; ++i)
      for (int j = i + 1; j < n; ++j, ++p) {
        T* d = &d_[3 * p];
        T* w = &w_[3 * p];
        sep(i, j, d);
        rel(i, j, w);
        const T r = sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]);
        const T ir = T(1) / r;
        inv_r_[p] = ir;
        phi_[static_cast<std::size_t>(i)] += m[j] * ir;
        phi_[static_cast<std::size_t>(j)] += m[i] * ir;
      }
    // Pass 2: EIH for both ordered pairs (a, b) of each pair, then scaled by 1/c^2.
    if (pn.eih()) {
      p = 0;
      for (int i = 0; i < n; ++i)
        for (int j = i + 1; j < n; ++j, ++p) {
          eih_term(pn, i, j, m, v, aN, &d_[3 * p], T(-1), inv_r_[p], f);  // n_ij = -d/r
          eih_term(pn, j, i, m, v, aN, &d_[3 * p], T(1), inv_r_[p], f);   // n_ji = +d/r
        }
      for (int k = 0; k < 3 * n; ++k) f[k] *= pn.inv_c2;
    }
    // Pass 3: pairwise 2PN and 2.5PN.
    if (pn.second() || pn.radiation()) {
      p = 0;
      for (int i = 0; i < n; ++i)
        for (int j = i + 1; j < n; ++j, ++p) pair_term(pn, i, j, m, &d_[3 * p], &w_[3 * p], inv_r_[p], f);
    }
  }

 private:
  // c^2 f_a += the EIH term of body b on body a; nab = sgn * d / r with d = x_j - x_i of the pair.
  void eih_term(const PostNewtonianTerms<T>& pn, int a, int b, const T* m, const T* v, const T* aN, const T* d,
                const T& sgn, const T& ir, T* f) const {
    T nab[3], va[3], vb[3], ab[3];
    for (int c = 0; c < 3; ++c) {
      nab[c] = sgn * d[c] * ir;
      va[c] = v[3 * a + c];
      vb[c] = v[3 * b + c];
      ab[c] = aN[3 * b + c];
    }
    const T va2 = va[0] * va[0] + va[1] * va[1] + va[2] * va[2];
    const T vb2 = vb[0] * vb[0] + vb[1] * vb[1] + vb[2] * vb[2];
    const T vab = va[0] * vb[0] + va[1] * vb[1] + va[2] * vb[2];
    const T nvb = nab[0] * vb[0] + nab[1] * vb[1] + nab[2] * vb[2];
    const T nva = nab[0] * va[0] + nab[1] * va[1] + nab[2] * va[2];
    const T nab_b = nab[0] * ab[0] + nab[1] * ab[1] + nab[2] * ab[2];
    const T r = T(1) / ir;
    const T bracket = va2 + T(2) * vb2 - T(4) * vab - pn.k3_2 * nvb * nvb - T(4) * phi_[static_cast<std::size_t>(a)] -
                      phi_[static_cast<std::size_t>(b)] - r * nab_b / T(2);
    const T vcoef = T(4) * nva - T(3) * nvb;
    const T mr2 = m[b] * ir * ir;
    const T mr = m[b] * ir * pn.k7_2;
    for (int c = 0; c < 3; ++c) f[3 * a + c] += mr2 * (vcoef * (va[c] - vb[c]) - bracket * nab[c]) + mr * ab[c];
  }

  // Pairwise 2PN / 2.5PN relative acceleration of the pair (i, j), split by mass ratio.
  void pair_term(const PostNewtonianTerms<T>& pn, int i, int j, const T* m, const T* d, const T* w, const T& ir,
                 T* f) const {
    // x = x_i - x_j = -d, v = v_i - v_j = -w: rdot = n.v = (d.w)/r, and
    // a_rel = -(M/r^2)(A n + B v) = (M/r^2)(A d/r + B w).
    const T M = m[i] + m[j];
    if (!(M > T(0))) return;  // two massless bodies: no pair term
    const T nu = m[i] * m[j] / (M * M);
    const T rd = (d[0] * w[0] + d[1] * w[1] + d[2] * w[2]) * ir;
    const T v2 = w[0] * w[0] + w[1] * w[1] + w[2] * w[2];
    const T mr = M * ir;
    T A = T(0), B = T(0);
    if (pn.second()) {
      const T rd2 = rd * rd, nu2 = nu * nu;
      const T a2 = pn.k15_8 * nu * (T(1) - T(3) * nu) * rd2 * rd2 - pn.k3_2 * nu * (T(3) - T(4) * nu) * rd2 * v2 +
                   nu * (T(3) - T(4) * nu) * v2 * v2 +
                   mr * (-(T(2) + T(25) * nu + T(2) * nu2) * rd2 - nu * (T(13) - T(4) * nu) * v2 / T(2)) +
                   mr * mr * (T(9) + pn.k87_4 * nu);
      const T b2 = pn.k3_2 * nu * (T(3) + T(2) * nu) * rd2 * rd - nu * (T(15) + T(4) * nu) * rd * v2 / T(2) +
                   mr * (T(2) + pn.k41_2 * nu + T(4) * nu2) * rd;
      A += pn.inv_c4 * a2;
      B += pn.inv_c4 * b2;
      if (pn.eih()) {
        // With EIH the pair's own 1PN terms already carry part of A_2, B_2: see the file comment.
        const T k = nu * (T(1) - T(4) * nu);
        A -= pn.inv_c4 * k * (v2 * v2 - mr * (v2 + rd2));
        B -= pn.inv_c4 * k * rd * (v2 - T(2) * mr) / T(2);
      }
    }
    if (pn.radiation()) {
      const T k = pn.k8_5 * nu * mr * pn.inv_c5;
      A -= k * rd * (T(3) * v2 + pn.k17_3 * mr);
      B += k * (v2 + T(3) * mr);
    }
    const T g = mr * ir * ir;  // M / r^2 / r: the A term carries d/r
    const T h = mr * ir;       // M / r^2
    const T wi = m[j] / M, wj = m[i] / M;
    for (int c = 0; c < 3; ++c) {
      const T arel = g * A * d[c] + h * B * w[c];
      f[3 * i + c] += wi * arel;
      f[3 * j + c] -= wj * arel;
    }
  }

  int n_ = 0;
  std::vector<T> d_, w_, inv_r_, phi_;
};

}  // namespace loschmidt
