// The algorithmically regularized leapfrog in chain coordinates: the symmetric substep of the
// "chain" method, pluggable into the extrapolation tableau like the Newtonian Stormer substep.
//
// Derivation (logarithmic Hamiltonian; Mikkola & Tanikawa 1999, Celest. Mech. 73, 243; Preto &
// Tremaine 1999, AJ 118, 2532). With H = T(p) - U(q), U = sum m_i m_j / r_ij > 0, extend phase
// space by the time t and its momentum p_t = B, so that K = T - U + B vanishes on the orbit and
// B = -E is the binding energy. Multiply K by a time transformation without changing its zero set:
//     Gamma = ln(T + B) - ln U          (Gamma = 0 exactly where K = 0, since T + B = U there).
// Hamilton's equations in the fictitious time s are
//     dt/ds = dGamma/dB = 1/(T + B),   dq/ds = dGamma/dp = v/(T + B),
//     dp/ds = -dGamma/dq = grad U / U = m a / U,   dB/ds = -dGamma/dt = 0,
// so on the orbit ds = U dt. Gamma is the sum of a part in (p, B) and a part in q, so the
// leapfrog (drift h/2, kick h, drift h/2) is the composition of two exact flows:
//     drift: dt = (h/2)/(T + B); t += dt; q += dt v        (T, B constant during the drift)
//     kick:  dt' = h/U(q);       v += dt' a(q)             (q, t constant during the kick)
// It is symplectic in the extended phase space, time-symmetric (the adjoint of drift-kick-drift is
// itself; a step with -h undoes a step with h) and of second order in h; its error expands in even
// powers of h for ANY number of substeps n, so the tableau may use the sequence 1, 2, 3, ... . On a
// Kepler orbit it follows the exact conic and loses only phase (the references above; checked
// numerically in cpp/tests/test_chain.cpp, any eccentricity, collision orbits included: at r -> 0
// the drift's dt -> 0 and the kick's dt' a stays finite, so no step ever meets the singularity).
//
// Time-transformed leapfrog (Mikkola & Aarseth 2002, Celest. Mech. 84, 343): dt/ds = 1/Omega(q)
// with an auxiliary variable omega that follows Omega along the orbit, d omega/dt = grad Omega . v.
// Here Omega = U, so grad_i Omega = m_i a_i and the kick changes omega by
//     dt' sum_i m_i a_i . (v_i + v_i') / 2  (velocities before and after: the exact integral of the
// linear-in-time velocity change), while the drift uses dt = (h/2)/omega. Also time-symmetric and
// second order, and it regularizes collisions. With Omega = U it too keeps a Kepler orbit's energy
// and eccentricity vector (measured in cpp/tests/test_chain.cpp at 40 steps per orbit: round-off
// only, with somewhat more round-off than the logarithmic form near collisions, where omega is large).
//
// Post-Newtonian forces (nbody/post_newtonian.hpp) depend on the velocities, so the kick is no
// longer an exact flow at fixed q. Auxiliary-velocity scheme (Hellstrom & Mikkola 2010, Celest.
// Mech. Dyn. Astron. 106, 143): extend the state by an auxiliary velocity w, integrate
//     dv/dt = a(q) + f(q, w),   dw/dt = a(q) + f(q, v),   dq/dt = v,   dB/dt = -sum m u . f(q, w)
// (u = v relative to the centre of mass; B = -E_Newton now changes by the work of the PN forces,
// METHODS.md section 3), whose solution from w(0) = v(0) has w = v for all t and is the PN motion.
// Each piece below is the exact flow of its part of that vector field, so the kick
//     S1(dt'/2) S2(dt') S1(dt'/2),  S1(tau): v += tau (a + f(q, w)), B -= tau sum m u_mid . f(q, w)
//                                   S2(tau): w += tau (a + f(q, v))
// (u_mid: the mean of u before and after, exact for the linear change of u) is symmetric, and
// drift-kick-drift stays a time-symmetric second-order method with an even error expansion, so
// the extrapolation over it remains valid. T + B = U is still invariant under the exact flow
// (d(T + B - U)/ds is proportional to T + B - U), so dt/ds = 1/(T + B) = 1/U on the orbit. The
// auxiliary velocity starts equal to v at the start of every increment() (a fixed initial condition
// of the extended system for every row of the tableau) and is not part of y: only v, never w,
// moves the positions. Three PN evaluations per kick (f(q, w), f(q, v'), f(q, w')).
// The time-transformed variant's omega follows d omega/dt = sum m a . u over the two S1 pieces.
// Measured: without PN the leapfrog follows a Kepler conic exactly up to phase, and the tableau's
// row errors fall ~400-fold per row; any perturbation of the conic slows that to ~30-fold per row
// beyond the sixth, the same for the PN terms of a binary at a/r_s = 5e3 (e = 0.6) as for a
// Newtonian third body at 5 a, and in proportion to the perturbation. So in dd at tol 1e-26 a PN
// binary needs about twice the steps of the Kepler one; in f64 the same number. With negligible
// PN (c = 1e8) the step count is the Newtonian one, as it must be for an even error expansion.
// A backward run with the conservative terms (1PN, 2PN) gives the same bits as the forward run of
// the velocity-reversed state.
// The PN forces are not Galilean invariant, so the centre of mass (whose Newtonian momentum the
// EIH terms change) is integrated too: y gains (r_cm[3], v_cm[3]).
//
// Flat chain vector (L = n - 1 links): y = (X[3L], W[3L], t, B, omega), and with post-Newtonian
// terms also (r_cm[3], v_cm[3]). The substep produces the INCREMENT dy = y(H) - y0 directly (the
// tableau extrapolates increments), and evaluates the current point as y0 + dy where it needs it.
// No allocation after setup().
#pragma once

#include <cmath>
#include <limits>
#include <vector>

#include <loschmidt/methods/chain_coordinates.hpp>
#include <loschmidt/nbody/post_newtonian.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

enum class ChainRegularization : int {
  logarithmic = 0,      // logarithmic-Hamiltonian leapfrog: dt = h/(T + B) in the drift
  time_transformed = 1  // time-transformed leapfrog: dt = h/omega, omega following Omega = U
};

namespace chain {

// Layout of the flat chain vector.
struct ChainLayout {
  int links = 0;
  bool centre_integrated = false;  // post-Newtonian runs: (r_cm, v_cm) follow omega
  int dim() const { return 6 * links + 3 + (centre_integrated ? 6 : 0); }
  int X() const { return 0; }
  int W() const { return 3 * links; }
  int time() const { return 6 * links; }
  int binding() const { return 6 * links + 1; }
  int omega() const { return 6 * links + 2; }
  int centre() const { return 6 * links + 3; }  // r_cm; v_cm at centre() + 3
};

template <class T>
class RegularizedLeapfrog {
 public:
  // m (chain order), radii and merger radii (chain order or null) must stay valid and are read at
  // every call: re-chaining rewrites them in place. pn (null or no orders: Newtonian) must outlive
  // the leapfrog.
  void setup(int n, const T* m, const T& total_mass, ChainRegularization reg, const double* radii,
             const double* merger_radii = nullptr, const PostNewtonianTerms<T>* pn = nullptr) {
    n_ = n;
    m_ = m;
    M_ = total_mass;
    inv_M_ = T(1) / total_mass;
    reg_ = reg;
    lay_.links = n - 1;
    pn_ = (pn != nullptr && pn->any()) ? pn : nullptr;
    lay_.centre_integrated = pn_ != nullptr;
    probe_.radii = radii;
    probe_.merger = merger_radii;
    const std::size_t k = 3 * static_cast<std::size_t>(n);
    X_.assign(k, T(0));
    W_.assign(k, T(0));
    q_.assign(k, T(0));
    a_.assign(k, T(0));
    A_.assign(k, T(0));
    u_.assign(k, T(0));
    pw_.assign(k, T(0));
    if (pn_ != nullptr) {
      pnf_.setup(n);
      Wa_.assign(k, T(0));
      ua_.assign(k, T(0));
      pv_.assign(k, T(0));
      vabs_.assign(k, T(0));
      f_.assign(k, T(0));
      F_.assign(k, T(0));
    }
  }

  const ChainLayout& layout() const { return lay_; }

  // The tableau's interface. begin(): the start point is usable (finite, dt/ds > 0).
  bool begin(const T* y0) {
    using std::isfinite;
    for (int i = 0; i < lay_.dim(); ++i)
      if (!isfinite(y0[i])) return false;
    const T rate = time_rate(y0);
    return isfinite(rate) && rate > T(0);
  }

  // dt/ds at a full chain state y: 1/(T + B) (logarithmic) or 1/omega (time-transformed). On the
  // exact orbit both equal 1/U.
  T time_rate(const T* y) {
    if (reg_ == ChainRegularization::logarithmic) {
      const T kin = chain_kinetic(n_, m_, inv_M_, y + lay_.W(), pw_.data());
      return T(1) / (kin + y[lay_.binding()]);
    }
    return T(1) / y[lay_.omega()];
  }

  // n symmetric substeps (drift h/2, [kick h, drift h] x (n-1), kick h, drift h/2) over the
  // fictitious-time step H: dy = y(H) - y0. A non-positive time rate (possible only far from the
  // orbit) makes dy NaN, which the tableau reports as divergence.
  void increment(const T* y0, const T& H, int nsub, T* dy) {
    const int dim = lay_.dim();
    for (int i = 0; i < dim; ++i) dy[i] = T(0);
    contact_sample_ = -1;
    contact_i_ = contact_j_ = -1;
    nsub_ = nsub;
    const T h = H / T(nsub);
    const T h2 = scale_pow2(h, 0.5);  // = H / (2 nsub): halving is exact
    if (pn_ != nullptr) {  // auxiliary velocity w = v at the start
      const T* W0 = y0 + lay_.W();
      for (int k = 0; k < 3 * lay_.links; ++k) Wa_[static_cast<std::size_t>(k)] = W0[k];
      for (int d = 0; d < 3; ++d) Va_[d] = y0[lay_.centre() + 3 + d];
    }
    bool ok = drift(y0, h2, dy);
    for (int s = 1; ok && s <= nsub; ++s) {
      kick(y0, h, dy, s);
      ok = drift(y0, s < nsub ? h : h2, dy);
    }
    evaluations += nsub;
    if (!ok)
      for (int i = 0; i < dim; ++i) dy[i] = T(std::numeric_limits<double>::quiet_NaN());
  }

  // Contact samples of the last increment(): the first kick (1..n) at which some pair overlapped,
  // the deepest pair there (chain positions), and where that kick sits in the step, as a fraction
  // of H. -1 if none.
  int contact_sample() const { return contact_sample_; }
  int contact_i() const { return contact_i_; }
  int contact_j() const { return contact_j_; }
  double contact_fraction() const { return contact_fraction_; }

  long long evaluations = 0;

 private:
  // Drift over hh: t += dt, X += dt W, with dt = hh * (dt/ds) at the (fixed) velocities.
  bool drift(const T* y0, const T& hh, T* dy) {
    const int L = lay_.links;
    const T* W0 = y0 + lay_.W();
    const T* dW = dy + lay_.W();
    for (int k = 0; k < 3 * L; ++k) W_[static_cast<std::size_t>(k)] = W0[k] + dW[k];
    T rate_inv;
    if (reg_ == ChainRegularization::logarithmic) {
      const T kin = chain_kinetic(n_, m_, inv_M_, W_.data(), pw_.data());
      rate_inv = kin + y0[lay_.binding()] + dy[lay_.binding()];
    } else {
      rate_inv = y0[lay_.omega()] + dy[lay_.omega()];
    }
    if (!(rate_inv > T(0))) return false;
    const T dt = hh / rate_inv;
    dy[lay_.time()] += dt;
    T* dX = dy + lay_.X();
    for (int k = 0; k < 3 * L; ++k) dX[k] += dt * W_[static_cast<std::size_t>(k)];
    if (pn_ != nullptr) {
      const int c = lay_.centre();
      for (int d = 0; d < 3; ++d) dy[c + d] += dt * (y0[c + 3 + d] + dy[c + 3 + d]);
    }
    return true;
  }

  // Kick over hh: W += dt' A(X), dt' = hh/U(X); omega follows Omega = U (time-transformed only).
  void kick(const T* y0, const T& hh, T* dy, int sample) {
    const int L = lay_.links;
    const T* X0 = y0 + lay_.X();
    const T* dX = dy + lay_.X();
    for (int k = 0; k < 3 * L; ++k) X_[static_cast<std::size_t>(k)] = X0[k] + dX[k];
    ContactProbe* probe = probe_.radii != nullptr ? &probe_ : nullptr;
    const T U = chain_forces(n_, m_, X_.data(), q_.data(), a_.data(), A_.data(), probe);
    if (probe != nullptr && contact_sample_ < 0 && probe_.i >= 0) {
      contact_sample_ = sample;
      contact_i_ = probe_.i;
      contact_j_ = probe_.j;
    }
    const T dtk = hh / U;
    T* dW = dy + lay_.W();
    if (pn_ != nullptr) {
      kick_pn(y0, dtk, dy);
      if (contact_sample_ == sample) contact_fraction_ = (sample - 0.5) / nsub_;
      return;
    }
    if (reg_ == ChainRegularization::time_transformed) {
      // Velocities before the kick (the drift just before left W_ at the current W).
      chain_velocities_inv(n_, m_, inv_M_, W_.data(), u_.data());
      const T half = scale_pow2(dtk, 0.5);
      T p = T(0);
      for (int b = 0; b < n_; ++b) {
        T s = T(0);
        for (int d = 0; d < 3; ++d) {
          const T ab = a_[static_cast<std::size_t>(3 * b + d)];
          s += ab * (u_[static_cast<std::size_t>(3 * b + d)] + half * ab);
        }
        p += m_[b] * s;
      }
      dy[lay_.omega()] += dtk * p;
    }
    for (int k = 0; k < 3 * L; ++k) dW[k] += dtk * A_[static_cast<std::size_t>(k)];
    if (contact_sample_ == sample) contact_fraction_ = (sample - 0.5) / nsub_;
  }

  // PN accelerations f_ (bodies) and F_ (links) and their mass-weighted mean fbar_ at the current
  // X_ (q_ as left by chain_forces) for velocity links W and centre-of-mass velocity V.
  void pn_forces(const T* W, const T* V) {
    const int n = n_, L = lay_.links;
    chain_velocities(n, m_, M_, W, ua_.data());
    for (int b = 0; b < n; ++b)
      for (int d = 0; d < 3; ++d) vabs_[static_cast<std::size_t>(3 * b + d)] = V[d] + ua_[static_cast<std::size_t>(3 * b + d)];
    if (n > link_sum_span + 1) chain_positions(n, W, pv_.data());
    const T* X = X_.data();
    const T* q = q_.data();
    const T* pv = pv_.data();
    auto sep = [X, q](int i, int j, T* d) { chain_separation(i, j, X, q, d); };
    auto rel = [W, pv](int i, int j, T* w) { chain_separation(i, j, W, pv, w); };
    pnf_.evaluate(*pn_, m_, vabs_.data(), a_.data(), sep, rel, f_.data());
    for (int k = 0; k < L; ++k)
      for (int d = 0; d < 3; ++d)
        F_[static_cast<std::size_t>(3 * k + d)] = f_[static_cast<std::size_t>(3 * (k + 1) + d)] - f_[static_cast<std::size_t>(3 * k + d)];
    for (int d = 0; d < 3; ++d) {
      T s = T(0);
      for (int b = 0; b < n; ++b) s += m_[b] * f_[static_cast<std::size_t>(3 * b + d)];
      fbar_[d] = s / M_;
    }
  }

  // S1(tau): v += tau (a + f(q, w)) with the work of f on B (and omega's Newtonian part). W_ holds
  // the current velocity links on entry and on exit.
  void half_kick_pn(const T* y0, const T& tau, T* dy) {
    const int n = n_, L = lay_.links;
    const int cv = lay_.centre() + 3;
    pn_forces(Wa_.data(), Va_);
    chain_velocities(n, m_, M_, W_.data(), u_.data());
    const T half = tau / T(2);
    T work = T(0), power = T(0);
    for (int b = 0; b < n; ++b) {
      T sw = T(0), sp = T(0);
      for (int d = 0; d < 3; ++d) {
        const std::size_t i = static_cast<std::size_t>(3 * b + d);
        const T um = u_[i] + half * (a_[i] + f_[i] - fbar_[d]);  // mean u over the piece
        sw += f_[i] * um;
        sp += a_[i] * um;
      }
      work += m_[b] * sw;
      power += m_[b] * sp;
    }
    dy[lay_.binding()] -= tau * work;
    if (reg_ == ChainRegularization::time_transformed) dy[lay_.omega()] += tau * power;
    T* dW = dy + lay_.W();
    const T* W0 = y0 + lay_.W();
    for (int k = 0; k < 3 * L; ++k) {
      const std::size_t i = static_cast<std::size_t>(k);
      dW[k] += tau * (A_[i] + F_[i]);
      W_[i] = W0[k] + dW[k];
    }
    for (int d = 0; d < 3; ++d) dy[cv + d] += tau * fbar_[d];
  }

  // The PN kick S1(dtk/2) S2(dtk) S1(dtk/2) at the current X_ (Newtonian a_, A_ already there).
  void kick_pn(const T* y0, const T& dtk, T* dy) {
    const int L = lay_.links;
    const int cv = lay_.centre() + 3;
    const T tau = dtk / T(2);
    half_kick_pn(y0, tau, dy);
    T V[3];
    for (int d = 0; d < 3; ++d) V[d] = y0[cv + d] + dy[cv + d];
    pn_forces(W_.data(), V);
    for (int k = 0; k < 3 * L; ++k) {
      const std::size_t i = static_cast<std::size_t>(k);
      Wa_[i] += dtk * (A_[i] + F_[i]);
    }
    for (int d = 0; d < 3; ++d) Va_[d] += dtk * fbar_[d];
    half_kick_pn(y0, tau, dy);
  }

  int n_ = 0, nsub_ = 1;
  const T* m_ = nullptr;
  T M_ = T(0), inv_M_ = T(0);
  ChainRegularization reg_ = ChainRegularization::logarithmic;
  ChainLayout lay_;
  ContactProbe probe_;
  int contact_sample_ = -1, contact_i_ = -1, contact_j_ = -1;
  double contact_fraction_ = 0.0;
  std::vector<T> X_, W_, q_, a_, A_, u_, pw_;
  // Post-Newtonian state (empty when Newtonian): auxiliary velocity links and centre-of-mass
  // velocity, and scratch.
  const PostNewtonianTerms<T>* pn_ = nullptr;
  PostNewtonianForce<T> pnf_;
  std::vector<T> Wa_, ua_, pv_, vabs_, f_, F_;
  T Va_[3] = {T(0), T(0), T(0)}, fbar_[3] = {T(0), T(0), T(0)};
};

}  // namespace chain
}  // namespace loschmidt
