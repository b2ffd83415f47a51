// The event log of a run (Options::events): the pericentre passages and the closest approach of
// every pair, and of the outer orbit of a three-body system, found without dense output times;
// and the pair-distance stop (StopCondition::pair_distance), tested on every accepted step.
//
// After each accepted step the driver hands the physical state to EventLog::observe. For each
// pair (i < j) the sign of r_ij . v_ij is compared with its sign at the previous accepted state:
// a change from approaching to receding (in the direction of integration) means the separation
// had a minimum inside the step. The minimum is located from the end-of-step state of the pair:
//   1. its osculating two-body orbit (G = 1, m_i + m_j): pericentre distance q and time of
//      pericentre passage from Kepler's equation (elliptic or hyperbolic anomaly), accepted when
//      that time lies inside the step and q is at most the smaller end distance: exact for an
//      isolated pair and good to the size of the perturbation otherwise, however long the step
//      (the chain method crosses a close pericentre in one step);
//   2. otherwise (perturbed, near-circular or near-parabolic pairs) the minimum of the cubic
//      Hermite interpolant of the pair's separation through both ends of the step (positions and
//      velocities), found by golden-section search.
// A step that holds more than one minimum of the same pair (a step of several orbits) records
// one. Three bodies: the body outside the most bound pair (lowest two-body energy, bound) about
// that pair's centre of mass is watched the same way (gravitational parameter m_1 + m_2 + m_3),
// the pair taken anew at each state (it changes in an exchange; a state with no bound pair is
// skipped): its pericentre passages are the close approaches of a resonant encounter (j = -1).
//
// Everything in double. Appending to the log may allocate (amortised; at most max_events entries
// are kept, the rest counted in dropped); the per-step work is O(N^2) flops.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <vector>

#include <loschmidt/methods/options.hpp>
#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// One event: at time t, bodies i and j (j = -1: body i about the centre of mass of the others)
// at distance d.
struct PairEvent {
  double t = 0.0;
  int i = -1, j = -1;
  double distance = 0.0;
};

namespace detail {

inline double dot3(const double* a, const double* b) { return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]; }

// Osculating two-body pericentre of a relative state (r, v) about gm: sets tau (time since the
// passage, negative before it) and q; false when the orbit is near-circular, near-parabolic or
// degenerate (then the caller interpolates).
inline bool osculating_pericentre(double gm, const double* r, const double* v, double& tau, double& q) {
  const double rr = std::sqrt(dot3(r, r));
  const double v2 = dot3(v, v);
  const double rv = dot3(r, v);
  if (!(rr > 0) || !(gm > 0)) return false;
  const double inv_a = 2.0 / rr - v2 / gm;
  const double h2 = std::max(0.0, rr * rr * v2 - rv * rv);
  const double e2 = 1.0 - h2 * inv_a / gm;
  if (!(e2 >= 0)) return false;
  const double e = std::sqrt(e2);
  if (!(e > 1e-6) || std::fabs(e - 1.0) < 1e-6) return false;
  if (inv_a > 0) {  // ellipse
    const double a = 1.0 / inv_a;
    const double cosE = (1.0 - rr / a) / e;
    const double sinE = rv / (e * std::sqrt(gm * a));
    const double E = std::atan2(sinE, cosE);
    tau = (E - e * sinE) * std::sqrt(a * a * a / gm);
    q = a * (1.0 - e);
  } else if (inv_a < 0) {  // hyperbola
    const double A = -1.0 / inv_a;
    const double sinhH = rv / (e * std::sqrt(gm * A));
    const double H = std::asinh(sinhH);
    tau = (e * sinhH - H) * std::sqrt(A * A * A / gm);
    q = A * (e - 1.0);
  } else {
    return false;
  }
  return std::isfinite(tau) && std::isfinite(q);
}

// Minimum over s in [0, 1] of |p(s)|, p the cubic Hermite interpolant with p(0) = r0, p'(0) = v0 dt,
// p(1) = r1, p'(1) = v1 dt; returns s, sets d.
inline double hermite_minimum(const double* r0, const double* v0, const double* r1, const double* v1, double dt,
                              double& d) {
  auto dist2 = [&](double s) {
    const double h00 = (1 + 2 * s) * (1 - s) * (1 - s), h10 = s * (1 - s) * (1 - s);
    const double h01 = s * s * (3 - 2 * s), h11 = s * s * (s - 1);
    double sum = 0.0;
    for (int c = 0; c < 3; ++c) {
      const double p = h00 * r0[c] + h10 * dt * v0[c] + h01 * r1[c] + h11 * dt * v1[c];
      sum += p * p;
    }
    return sum;
  };
  const double g = 0.6180339887498949;  // (sqrt(5) - 1) / 2
  double lo = 0.0, hi = 1.0;
  double a = hi - g * (hi - lo), b = lo + g * (hi - lo);
  double fa = dist2(a), fb = dist2(b);
  for (int k = 0; k < 60 && hi - lo > 1e-12; ++k) {
    if (fa < fb) {
      hi = b;
      b = a;
      fb = fa;
      a = hi - g * (hi - lo);
      fa = dist2(a);
    } else {
      lo = a;
      a = b;
      fa = fb;
      b = lo + g * (hi - lo);
      fb = dist2(b);
    }
  }
  double s = 0.5 * (lo + hi), f = dist2(s);
  const double f0 = dist2(0.0), f1 = dist2(1.0);
  if (f0 < f) { s = 0.0; f = f0; }
  if (f1 < f) { s = 1.0; f = f1; }
  d = std::sqrt(f);
  return s;
}

}  // namespace detail

class EventLog {
 public:
  // Most pericentre passages kept (pairs and outer orbit together); later ones are counted in
  // dropped. The closest approaches are always kept.
  long long max_events = 1000000;

  std::vector<PairEvent> passages;  // pericentre passages of pairs, in the order found
  std::vector<PairEvent> outer;     // three bodies: pericentre passages of the outer orbit (j = -1)
  std::vector<PairEvent> closest;   // per pair (i < j, row by row): the smallest separation seen
  long long dropped = 0;

  // Called by the driver before the first step (also clears the log).
  template <class T>
  void start(const T& t, const State<T>& s) {
    n_ = s.n;
    const std::size_t n = static_cast<std::size_t>(n_);
    m_.assign(n, 0.0);
    for (std::size_t i = 0; i < n; ++i) m_[i] = to_double(s.m[i]);
    x0_.assign(3 * n, 0.0);
    v0_.assign(3 * n, 0.0);
    x1_.assign(3 * n, 0.0);
    v1_.assign(3 * n, 0.0);
    passages.clear();
    outer.clear();
    dropped = 0;
    closest.clear();
    for (int i = 0; i < n_; ++i)
      for (int j = i + 1; j < n_; ++j) closest.push_back(PairEvent{0.0, i, j, HUGE_VAL});
    rv_.assign(closest.size(), 0.0);
    load(t, s, x1_, v1_);
    if (n_ == 3) {
      double dist;
      outer_pair_ = watch_outer(outer_rv_, dist);
    }
    t1_ = to_double(t);
    for (std::size_t k = 0; k < closest.size(); ++k) {
      double r[3], v[3];
      relative(x1_, v1_, closest[k].i, closest[k].j, r, v);
      rv_[k] = detail::dot3(r, v);
      update_closest(k, t1_, std::sqrt(detail::dot3(r, r)));
    }
  }

  // After each accepted step, with the physical state at its end. True when the pair-distance
  // stop holds (opt.stop has StopCondition::pair_distance): st.stopped_by, stop_i, stop_j are set.
  template <class T>
  bool observe(const T& t, const State<T>& s, const Options& opt, Stats& st) {
    std::swap(x0_, x1_);
    std::swap(v0_, v1_);
    const double t0 = t1_;
    load(t, s, x1_, v1_);
    t1_ = to_double(t);
    const double dt = t1_ - t0;
    if (dt == 0.0) return false;
    const double dir = dt > 0 ? 1.0 : -1.0;
    const bool stop_on_pairs = stops_on(opt.stop, StopCondition::pair_distance);
    bool stop = false;
    for (std::size_t k = 0; k < closest.size(); ++k) {
      const int i = closest[k].i, j = closest[k].j;
      double r0[3], w0[3], r1[3], w1[3];
      relative(x0_, v0_, i, j, r0, w0);
      relative(x1_, v1_, i, j, r1, w1);
      const double rv = detail::dot3(r1, w1);
      const double d1 = std::sqrt(detail::dot3(r1, r1));
      double dmin = d1;
      if (dir * rv_[k] < 0 && dir * rv >= 0) {
        double tp, q;
        locate(m_[static_cast<std::size_t>(i)] + m_[static_cast<std::size_t>(j)], t0, r0, w0, r1, w1, dt, tp, q);
        record(passages, PairEvent{tp, i, j, q});
        update_closest(k, tp, q);
        dmin = std::min(dmin, q);
      }
      rv_[k] = rv;
      update_closest(k, t1_, d1);
      if (stop_on_pairs && !stop && dmin < opt.stop_distance && selected(opt, i, j)) {
        st.stopped_by = StopCondition::pair_distance;
        st.stop_i = i;
        st.stop_j = j;
        stop = true;
      }
    }
    if (n_ == 3) {
      // The outer body about the most bound pair: approaching at the start of the step (with the
      // pair most bound there) and receding at its end (with the pair most bound there). The pair
      // may change within the step: in an exchange, and in a close hyperbolic pass of the incomer
      // by one member, which is momentarily "bound" in the middle of a flyby.
      double rv, dist;
      const int pair = watch_outer(rv, dist);
      if (pair >= 0 && outer_pair_ >= 0 && dir * outer_rv_ < 0 && dir * rv >= 0) {
        double R1[3], V1[3], R0[3], V0[3];
        outer_relative(pair, R1, V1);
        std::swap(x0_, x1_);
        std::swap(v0_, v1_);
        outer_relative(pair, R0, V0);  // the same pair at the start of the step
        std::swap(x0_, x1_);
        std::swap(v0_, v1_);
        double tp, q;
        locate(m_[0] + m_[1] + m_[2], t0, R0, V0, R1, V1, dt, tp, q);
        record(outer, PairEvent{tp, 3 - pair_i(pair) - pair_j(pair), -1, q});
      }
      if (pair >= 0) {  // through a moment with no bound pair, the last bound pair's sign stands
        outer_pair_ = pair;
        outer_rv_ = rv;
      }
    }
    return stop;
  }

 private:
  int n_ = 0;
  std::vector<double> m_, x0_, v0_, x1_, v1_, rv_;
  double t1_ = 0.0;
  int outer_pair_ = -1;    // three bodies: the most bound pair at the last state (0, 1, 2 for the
  double outer_rv_ = 0.0;  // pairs (0,1), (0,2), (1,2); -1 none bound) and the outer R . V there

  static int pair_i(int p) { return p == 2 ? 1 : 0; }
  static int pair_j(int p) { return p == 0 ? 1 : 2; }

  static bool selected(const Options& opt, int i, int j) {
    if (opt.stop_pair_i < 0) return true;
    const int a = std::min(opt.stop_pair_i, opt.stop_pair_j), b = std::max(opt.stop_pair_i, opt.stop_pair_j);
    return a == i && b == j;
  }

  void record(std::vector<PairEvent>& log, const PairEvent& e) {
    if (static_cast<long long>(passages.size() + outer.size()) < max_events) log.push_back(e);
    else ++dropped;
  }

  void update_closest(std::size_t k, double t, double d) {
    if (d < closest[k].distance) {
      closest[k].distance = d;
      closest[k].t = t;
    }
  }

  template <class T>
  static void load(const T&, const State<T>& s, std::vector<double>& x, std::vector<double>& v) {
    for (std::size_t q = 0; q < x.size(); ++q) {
      x[q] = to_double(s.x[q]);
      v[q] = to_double(s.v[q]);
    }
  }

  static void relative(const std::vector<double>& x, const std::vector<double>& v, int i, int j, double* r,
                       double* w) {
    for (int c = 0; c < 3; ++c) {
      r[c] = x[static_cast<std::size_t>(3 * j + c)] - x[static_cast<std::size_t>(3 * i + c)];
      w[c] = v[static_cast<std::size_t>(3 * j + c)] - v[static_cast<std::size_t>(3 * i + c)];
    }
  }

  // The minimum inside a step from t0 (r0, w0) to t0 + dt (r1, w1): time tp and distance q.
  static void locate(double gm, double t0, const double* r0, const double* w0, const double* r1, const double* w1,
                     double dt, double& tp, double& q) {
    const double d0 = std::sqrt(detail::dot3(r0, r0)), d1 = std::sqrt(detail::dot3(r1, r1));
    double tau;
    if (detail::osculating_pericentre(gm, r1, w1, tau, q)) {
      tp = t0 + dt - tau;
      const double slack = 1e-9 * std::fabs(dt);
      const bool inside = dt > 0 ? (tp >= t0 - slack && tp <= t0 + dt + slack)
                                 : (tp <= t0 + slack && tp >= t0 + dt - slack);
      if (inside && q <= std::min(d0, d1) * (1 + 1e-12)) return;
    }
    const double s = detail::hermite_minimum(r0, w0, r1, w1, dt, q);
    tp = t0 + s * dt;
  }

  // Three bodies, the state in x1_, v1_: the most bound pair (-1 if none is bound), and the
  // outer body's R . V and distance about its centre of mass.
  int watch_outer(double& rv, double& dist) const {
    int best = -1;
    double ebest = 0.0;
    for (int p = 0; p < 3; ++p) {
      const int i = pair_i(p), j = pair_j(p);
      double r[3], w[3];
      relative(x1_, v1_, i, j, r, w);
      const double mi = m_[static_cast<std::size_t>(i)], mj = m_[static_cast<std::size_t>(j)];
      const double e = 0.5 * mi * mj / (mi + mj) * detail::dot3(w, w) - mi * mj / std::sqrt(detail::dot3(r, r));
      if (e < ebest) {
        ebest = e;
        best = p;
      }
    }
    rv = 0.0;
    dist = 0.0;
    if (best < 0) return -1;
    double R[3], V[3];
    outer_relative(best, R, V);
    rv = detail::dot3(R, V);
    dist = std::sqrt(detail::dot3(R, R));
    return best;
  }

  // The outer body relative to the centre of mass of pair p, from x1_, v1_.
  void outer_relative(int p, double* R, double* V) const {
    if (p < 0) {
      R[0] = R[1] = R[2] = V[0] = V[1] = V[2] = 0.0;
      return;
    }
    const std::size_t i = static_cast<std::size_t>(pair_i(p)), j = static_cast<std::size_t>(pair_j(p));
    const std::size_t k = 3 - i - j;
    const double mi = m_[i], mj = m_[j], M = mi + mj;
    for (std::size_t c = 0; c < 3; ++c) {
      R[c] = x1_[3 * k + c] - (mi * x1_[3 * i + c] + mj * x1_[3 * j + c]) / M;
      V[c] = v1_[3 * k + c] - (mi * v1_[3 * i + c] + mj * v1_[3 * j + c]) / M;
    }
  }
};

}  // namespace loschmidt
