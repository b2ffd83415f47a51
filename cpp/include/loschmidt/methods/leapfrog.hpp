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
// Flat chain vector (L = n - 1 links): y = (X[3L], W[3L], t, B, omega). The substep produces the
// INCREMENT dy = y(H) - y0 directly (the tableau extrapolates increments), and evaluates the
// current point as y0 + dy where it needs it. No allocation after setup().
#pragma once

#include <cmath>
#include <limits>
#include <vector>

#include <loschmidt/methods/chain_coordinates.hpp>
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
  int dim() const { return 6 * links + 3; }
  int X() const { return 0; }
  int W() const { return 3 * links; }
  int time() const { return 6 * links; }
  int binding() const { return 6 * links + 1; }
  int omega() const { return 6 * links + 2; }
};

template <class T>
class RegularizedLeapfrog {
 public:
  // m (chain order) and radii (chain order or null) must stay valid and are read at every call:
  // re-chaining rewrites them in place.
  void setup(int n, const T* m, const T& total_mass, ChainRegularization reg, const double* radii) {
    n_ = n;
    m_ = m;
    M_ = total_mass;
    reg_ = reg;
    lay_.links = n - 1;
    probe_.radii = radii;
    const std::size_t k = 3 * static_cast<std::size_t>(n);
    X_.assign(k, T(0));
    W_.assign(k, T(0));
    q_.assign(k, T(0));
    a_.assign(k, T(0));
    A_.assign(k, T(0));
    u_.assign(k, T(0));
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
      const T kin = chain_velocities(n_, m_, M_, y + lay_.W(), u_.data());
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
    const T h2 = H / T(2 * nsub);
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
      const T kin = chain_velocities(n_, m_, M_, W_.data(), u_.data());
      rate_inv = kin + y0[lay_.binding()] + dy[lay_.binding()];
    } else {
      rate_inv = y0[lay_.omega()] + dy[lay_.omega()];
    }
    if (!(rate_inv > T(0))) return false;
    const T dt = hh / rate_inv;
    dy[lay_.time()] += dt;
    T* dX = dy + lay_.X();
    for (int k = 0; k < 3 * L; ++k) dX[k] += dt * W_[static_cast<std::size_t>(k)];
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
    if (reg_ == ChainRegularization::time_transformed) {
      // Velocities before the kick (the drift just before left W_ at the current W).
      chain_velocities(n_, m_, M_, W_.data(), u_.data());
      const T half = dtk / T(2);
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

  int n_ = 0, nsub_ = 1;
  const T* m_ = nullptr;
  T M_ = T(0);
  ChainRegularization reg_ = ChainRegularization::logarithmic;
  ChainLayout lay_;
  ContactProbe probe_;
  int contact_sample_ = -1, contact_i_ = -1, contact_j_ = -1;
  double contact_fraction_ = 0.0;
  std::vector<T> X_, W_, q_, a_, A_, u_;
};

}  // namespace chain
}  // namespace loschmidt
