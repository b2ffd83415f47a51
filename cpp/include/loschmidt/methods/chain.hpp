// The chain-regularized integrator (method "chain"): chain coordinates (chain_coordinates.hpp),
// the algorithmically regularized leapfrog as the symmetric substep (leapfrog.hpp), and
// Gragg-Bulirsch-Stoer extrapolation of its increments over the fictitious-time macro step
// (Mikkola & Merritt 2006, MNRAS 372, 219; 2008, AJ 135, 2398), reusing the generic tableau
// (extrapolation.hpp) and the order/step controller (step_control.hpp) of the gbs method.
//
// integrate_chain has the contract of integrate_gbs (statuses, budgets, polling, exact landing on
// every output time and on t_end, backward integration when t_end < t) and in addition
//   - re-chains when a non-link pair becomes shorter than the shortest link it bridges (tested after
//     every accepted step; new links are compensated sums of old links, so the state is unchanged
//     up to one rounding per link and the energy does not jump);
//   - lands on a requested physical time t* by discarding the step that overshoots and solving
//     t(H) = t* for the last fictitious step H by Newton's method, with the extrapolated step at
//     the overshooting step's order as the function and dt/ds = 1/(T + B) (or 1/omega) at the trial
//     step's end as its derivative, started from the root of a cubic Hermite fit of t(s) (residual
//     1e-8..1e-5 of the step). Quadratic convergence: 3-4 iterations (3.9 on average over 30
//     Pythagorean outputs in dd) down to the round-off floor of the extrapolated time increment,
//     measured |t(H) - t*| <= 1.3e-29 for |t| <= 3 in dd (about 100 eps |t|); t is then set to t*
//     exactly, so the state's time is off by that residual at most;
//   - with radii, stops at the first contact r_ij = r_i + r_j (Status::collision), located by
//     regula falsi (Illinois) on the extrapolated step, reporting the pair in ChainReport;
//   - with post-Newtonian terms (ChainOptions::pn_orders; nbody/post_newtonian.hpp, kick scheme in
//     leapfrog.hpp), B = -E_Newton absorbs the work of the PN forces and the centre of mass is
//     integrated; a pair closer than merger_factor times the sum of its Schwarzschild radii
//     2 m / c^2 ends the run with Status::merger, located and reported like a collision.
// Physical time t and the binding energy B = -E are integrated variables; the centre of mass,
// which moves freely, is advanced analytically from t.
//
// Error norm: RMS over the groups X_k, W_k (Euclidean norm of each 3-vector, scaled by
// atol + rtol * max(|X_k(0)|, |X_k(H)|): a rotating link is not judged by a component passing
// through zero), the time increment (scaled by atol + rtol |dt| of the step, a relative phase error
// per step; a scale in |t| would let the phase error grow with t) and omega; accepted at RMS <= 1.
//
// Stop conditions (Options::stop, methods/stop.hpp) are tested every check_every accepted steps on
// the physical state, as in gbs, Newtonian or post-Newtonian alike; fixed-step mode
// (Options::fixed_step) keeps the fictitious step constant at U(0) times fixed_step and lands on
// output times by Newton's method without an error test (for order measurements).
//
// A place for the variational equations (Lyapunov exponents in the chain method; not built): a
// substep that carries the tangent of the chain vector beside it (y extended past layout.dim()),
// ChainNorm unchanged (it reads only the layout's components, so the tangent never drives the
// step), and a renormalisation hook after each accepted step where the re-chaining is done now
// (the tangent's links would be re-formed with the same exact sums).
//
// Options as read by this method: initial_step is a PHYSICAL time (the first fictitious step is
// U(0) times it; 0 = a tenth of the shortest pair time scale); the step floor min_step_fraction
// applies to the fictitious step, relative to max(first step, fictitious time covered); max_order
// 0 = scalar_traits<T>::chain_max_rows() (see below); Options::sequence is not used
// (ChainOptions::sequence is). Stats::steps counts accepted steps (a landing counts once).
//
// Energy as a diagnostic: B is constant, so the numerical orbit keeps (T + B)/U = c nearly
// constant rather than T - U; an energy error therefore shows as (c - 1) U and is largest where U
// is, e.g. (1 + e)/(1 - e) times larger at pericentre than at apocentre of a binary. That is the
// conditioning of E = T - U, not a drift.
#pragma once

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <stdexcept>
#include <utility>
#include <vector>

#include <loschmidt/methods/budget.hpp>
#include <loschmidt/methods/chain_coordinates.hpp>
#include <loschmidt/methods/events.hpp>
#include <loschmidt/methods/extrapolation.hpp>
#include <loschmidt/methods/leapfrog.hpp>
#include <loschmidt/methods/options.hpp>
#include <loschmidt/methods/status.hpp>
#include <loschmidt/methods/step_control.hpp>
#include <loschmidt/methods/stop.hpp>
#include <loschmidt/methods/validate.hpp>
#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/compensated.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// What a chain run reports beyond Stats (optional out-parameter through ChainOptions::report).
struct ChainReport {
  int collision_i = -1, collision_j = -1;  // caller's indices (i < j) of the pair in contact (or merging)
  long long rechains = 0;                  // times the chain was rebuilt
  long long landings = 0;                  // steps shortened by Newton's method onto a time
  long long landing_iterations = 0;        // Newton iterations over all landings
  double landing_residual = 0.0;           // largest |t(H) - t*| accepted, in time units
  // Post-Newtonian runs: the energy bookkeeping error at the end, |E(t) - E(0) - W| / |E(0)| with
  // E the Newtonian energy relative to the centre of mass and W the work of the PN forces (the
  // integrated B gives E(0) - W); 0 for Newtonian runs.
  double pn_energy_error = 0.0;
};

struct ChainOptions {
  ChainRegularization regularization = ChainRegularization::logarithmic;
  // Physical radii, one per body (>= 0), or empty for no collision test. Collision when
  // r_ij <= radii[i] + radii[j]. Contacts are sampled at every kick of the accepted row and at the
  // step's end, so a grazing contact shorter than one substep can be missed.
  std::vector<double> radii;
  // Step-number sequence of the tableau. The leapfrog is symmetric for every n, so 1, 2, 3, ...
  // (StepSequence::consecutive) is legal and the cheapest per order; measured best for the chain
  // method (Pythagorean round trip in dd at rtol 1e-26: 164k force evaluations against 204k with
  // the harmonic sequence, for the same delta). Options::sequence belongs to gbs and is not read.
  StepSequence sequence = StepSequence::consecutive;
  StepControlTuning tuning = {};
  ChainReport* report = nullptr;  // filled when not null
  // Post-Newtonian terms: a mask of PostNewtonianOrder (pn_1 | pn_2 | pn_25; 0 = Newtonian, the
  // default, and then nothing below is read), the speed of light in N-body units as the limbs of
  // the working precision (or one double for any precision), and the merger test: merger when
  // r_ij < merger_factor * (2 m_i + 2 m_j) / c^2 (0 = no merger test). The default 8 stops at
  // 16 G M / c^2 for the pair's mass M, where v/c ~ 0.25 on a circular orbit and the PN series is
  // about to fail (the innermost stable circular orbit of a test mass is at 6 G M / c^2).
  int pn_orders = 0;
  std::vector<double> light_speed;
  double merger_factor = 8.0;
};

namespace chain {

// The chain method's error norm, the Norm policy of ExtrapolationStepper (step_control.hpp):
// RMS over the groups X_k, W_k (Euclidean norm of each 3-vector, scaled by atol + rtol *
// max(|X_k(0)|, |X_k(H)|)), the time increment (scaled by atol + rtol |dt|), B and omega (see the
// file comment). It reads only the components of the layout, so a vector extended beyond
// layout.dim() (passive components such as tangent equations) is judged by the orbit alone.
template <class T>
class ChainNorm {
 public:
  ChainNorm() = default;
  ChainNorm(const ChainLayout& lay, double rtol, double atol) : lay_(lay), rtol_(rtol), atol_(atol) {}

  void start_at(const T* y0, int) {
    const int d = lay_.dim();
    y0d_.resize(static_cast<std::size_t>(d));
    for (int i = 0; i < d; ++i) y0d_[static_cast<std::size_t>(i)] = to_double(y0[i]);
  }

  // ||T_{j,j} - T_{j,j-1}|| in the chain norm, from the tableau's slots 1 and 2 after extrapolate(j).
  double operator()(const ExtrapolationTableau<T>& tab) const {
    const T* best = tab.slot(1);
    const T* next = tab.slot(2);
    const int L = lay_.links;
    double sum = 0.0;
    int groups = 0;
    auto vec = [&](int off) {
      double e2 = 0, a2 = 0, b2 = 0;
      for (int d = 0; d < 3; ++d) {
        const double e = approx_difference(best[off + d], next[off + d]);
        const double a = y0d_[static_cast<std::size_t>(off + d)];
        const double b = a + to_double(best[off + d]);
        e2 += e * e;
        a2 += a * a;
        b2 += b * b;
      }
      ++groups;
      if (e2 == 0.0) return true;
      const double sc = atol_ + rtol_ * std::sqrt(std::fmax(a2, b2));
      if (!(sc > 0.0)) return false;
      sum += e2 / (sc * sc);
      return true;
    };
    auto scalar = [&](int i, double size) {
      const double e = approx_difference(best[i], next[i]);
      if (e == 0.0) return true;
      ++groups;
      const double sc = atol_ + rtol_ * size;
      if (!(sc > 0.0)) return false;
      sum += (e / sc) * (e / sc);
      return true;
    };
    // With post-Newtonian terms the integrated centre of mass (after omega) is left out of the
    // norm: its velocity changes only through the EIH terms, as a function of the relative motion
    // that the norm already controls, and it is often exactly zero (no scale with atol = 0).
    for (int k = 0; k < L; ++k)
      if (!vec(lay_.X() + 3 * k) || !vec(lay_.W() + 3 * k)) return std::numeric_limits<double>::infinity();
    const int it = lay_.time(), ib = lay_.binding(), iw = lay_.omega();
    const double dt = std::fabs(to_double(best[it]));
    if (!scalar(it, dt)) return std::numeric_limits<double>::infinity();
    const double b0 = std::fabs(y0d_[static_cast<std::size_t>(ib)]);
    if (!scalar(ib, std::fmax(b0, std::fabs(b0 + to_double(best[ib]))))) return std::numeric_limits<double>::infinity();
    const double w0 = std::fabs(y0d_[static_cast<std::size_t>(iw)]);
    if (!scalar(iw, std::fmax(w0, std::fabs(w0 + to_double(best[iw]))))) return std::numeric_limits<double>::infinity();
    const double r = std::sqrt(sum / groups);
    return std::isfinite(r) ? r : std::numeric_limits<double>::infinity();
  }

 private:
  ChainLayout lay_;
  double rtol_ = 0, atol_ = 0;
  std::vector<double> y0d_;
};

// The one extrapolation stepper over the regularized leapfrog with the chain norm.
template <class T>
using ChainStepper = ExtrapolationStepper<T, RegularizedLeapfrog<T>, ChainNorm<T>>;

}  // namespace chain

// Integrate s from t to t_end with the chain method. Same contract as integrate_gbs: t is updated
// and equals t_end exactly on success; on_output(index, t, s) is called on landing exactly on
// output_times[index] (sorted in the direction of integration, within (t, t_end]); Compensated
// carries Kahan-Babuska-Neumaier compensation for the chain vector's update y += dy (links,
// velocity links, time); invalid arguments throw std::invalid_argument before any work; every
// other way of stopping is a Stats::status, with s and t at the last accepted state (at the contact
// for Status::collision). Needs at least two bodies of positive mass (n = 1 moves freely).
// Stats::evaluations counts force evaluations (kicks), including those of Newton landing and
// contact location.
template <class T, bool Compensated = false, class Observer>
Stats integrate_chain(State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
                      Observer&& on_output, const Options& opt, const ChainOptions& copt = ChainOptions()) {
  using clock = std::chrono::steady_clock;
  using std::abs;
  using std::isfinite;
  const auto clock_start = clock::now();
  Stats st;
  ChainReport rep;
  auto finish = [&](Status status) {
    st.status = status;
    st.wall_time = std::chrono::duration<double>(clock::now() - clock_start).count();
    if (copt.report != nullptr) *copt.report = rep;
    return st;
  };

  // ---- validation (before any work)
  validate_run("integrate_chain", s, t, t_end, output_times, opt);
  // Default row limit: scalar_traits<T>::chain_max_rows() (f64 11, dd 14, qd 25; measured there). Measured in
  // dd: through close pericentre passages the high-order, long steps conserve energy worse at the
  // same tolerance (e = 0.999, 100 periods, rtol 1e-28: 7e-26 at 18 rows, 6e-27 at 14, 5e-29 at 10),
  // and 14 rows cost no more force evaluations than 18; f64 and qd runs are unaffected.
  const int rows = table_rows(opt, scalar_traits<T>::chain_max_rows(), copt.sequence, "integrate_chain");
  {
    int positive = 0;
    for (const T& q : s.m) {
      if (!(q >= T(0))) throw std::invalid_argument("integrate_chain: masses must be >= 0");
      if (q > T(0)) ++positive;
    }
    if (s.n >= 2 && positive < 2)
      throw std::invalid_argument("integrate_chain: needs at least two bodies of positive mass");
  }
  PostNewtonianTerms<T> pn;
  std::vector<double> merger_radii;
  if (copt.pn_orders != 0) {
    if (copt.pn_orders < 0 || copt.pn_orders > pn_all) throw std::invalid_argument("integrate_chain: unknown pn_orders");
    T c = T(0);
    if (copt.light_speed.size() == static_cast<std::size_t>(scalar_traits<T>::limbs))
      c = scalar_traits<T>::from_limbs(copt.light_speed.data());
    else if (copt.light_speed.size() == 1)
      c = T(copt.light_speed[0]);
    else
      throw std::invalid_argument("integrate_chain: light_speed must hold the limbs of c (or one double)");
    if (!(c > T(0)) || !isfinite(c)) throw std::invalid_argument("integrate_chain: the speed of light must be positive and finite");
    if (!(copt.merger_factor >= 0) || !std::isfinite(copt.merger_factor))
      throw std::invalid_argument("integrate_chain: merger_factor must be finite and >= 0");
    pn.set(copt.pn_orders, c);
    if (copt.merger_factor > 0) {
      const double c2 = to_double(c) * to_double(c);
      merger_radii.assign(static_cast<std::size_t>(s.n), 0.0);
      for (int i = 0; i < s.n; ++i)
        merger_radii[static_cast<std::size_t>(i)] = copt.merger_factor * 2.0 * to_double(s.m[static_cast<std::size_t>(i)]) / c2;
    }
  }
  if (!copt.radii.empty()) {
    if (copt.radii.size() != static_cast<std::size_t>(s.n))
      throw std::invalid_argument("integrate_chain: radii must have one value per body");
    for (double r : copt.radii)
      if (!(r >= 0) || !std::isfinite(r)) throw std::invalid_argument("integrate_chain: radii must be finite and >= 0");
  }
  const bool forward = t_end > t;
  if (t == t_end) return finish(Status::success);
  if (!s.finite()) return finish(Status::nonfinite);

  const std::size_t n_out = output_times.size();
  std::size_t next_out = 0;

  // ---- one body: free motion, exact at every output.
  if (s.n == 1) {
    const std::vector<T> x0 = s.x;
    const T t0 = t;
    while (true) {
      const T& target = next_out < n_out ? output_times[next_out] : t_end;
      for (int d = 0; d < 3; ++d) s.x[static_cast<std::size_t>(d)] = x0[static_cast<std::size_t>(d)] + s.v[static_cast<std::size_t>(d)] * (target - t0);
      t = target;
      ++st.steps;
      while (next_out < n_out && output_times[next_out] == t) {
        on_output(static_cast<int>(next_out), static_cast<const T&>(t), static_cast<const State<T>&>(s));
        ++next_out;
      }
      if (t == t_end) break;
    }
    return finish(Status::success);
  }

  // ---- setup (all allocation happens here)
  chain::ChainFrame<T> frame;
  frame.setup(s, copt.radii, merger_radii);
  chain::RegularizedLeapfrog<T> sub;
  sub.setup(s.n, frame.masses(), frame.total_mass(), copt.regularization, frame.radii(), frame.merger_radii(), &pn);
  const chain::ChainLayout lay = sub.layout();
  const int dim = lay.dim();
  const int it = lay.time();
  std::vector<T> y(static_cast<std::size_t>(dim), T(0));
  std::vector<T> comp(static_cast<std::size_t>(dim), T(0));  // used when Compensated
  std::vector<T> ytrial(static_cast<std::size_t>(dim), T(0));
  std::vector<T> dbest(static_cast<std::size_t>(dim), T(0));
  frame.from_state(s, y.data());
  const T t_start = t;
  {
    T kin, U;
    frame.energies(y.data(), kin, U);
    y[static_cast<std::size_t>(it)] = t;
    y[static_cast<std::size_t>(lay.binding())] = U - kin;  // B = -E (internal energy)
    y[static_cast<std::size_t>(lay.omega())] = U;           // omega starts at Omega = U
    if (lay.centre_integrated) {
      frame.centre(y.data() + lay.centre());
      frame.set_integrated_centre(lay.centre());
    }
  }
  const T binding0 = y[static_cast<std::size_t>(lay.binding())];
  auto contact_status = [&](int a, int b) { return frame.merger_pair(a, b) ? Status::merger : Status::collision; };
  auto finish_pn = [&](Status status) {
    if (pn.any()) {
      T kin, U;
      frame.energies(y.data(), kin, U);
      using std::abs;
      const T resid = kin - U + y[static_cast<std::size_t>(lay.binding())];
      rep.pn_energy_error = to_double(binding0 == T(0) ? abs(resid) : abs(resid / binding0));
    }
    return status;
  };
  auto time_now = [&]() { return Compensated ? y[static_cast<std::size_t>(it)] + comp[static_cast<std::size_t>(it)] : y[static_cast<std::size_t>(it)]; };
  auto store = [&]() {
    t = time_now();
    frame.to_state(y.data(), t, t_start, s);
  };
  auto add_increment = [&](const T* dy) {
    if (Compensated) {
      for (int i = 0; i < dim; ++i) compensated_add(y[static_cast<std::size_t>(i)], comp[static_cast<std::size_t>(i)], dy[i]);
    } else {
      for (int i = 0; i < dim; ++i) y[static_cast<std::size_t>(i)] += dy[i];
    }
  };
  auto report_contact = [&](int a, int b) { frame.body_pair(a, b, rep.collision_i, rep.collision_j); };

  // Contact already at the start.
  if (frame.contact_test()) {
    const chain::ContactProbe p = frame.contact(y.data());
    if (p.i >= 0) {
      report_contact(p.i, p.j);
      return finish(finish_pn(contact_status(p.i, p.j)));
    }
  }

  chain::ChainStepper<T> stepper;
  // The fixed-step mode may use fewer than the controller's minimum of 3 rows.
  const bool fixed = opt.fixed_step > 0;
  stepper.setup(&sub, dim, copt.sequence, fixed ? std::max(rows, 3) : rows, opt.rtol, copt.tuning,
                chain::ChainNorm<T>(lay, opt.rtol, opt.atol));
  OrderStepController& ctrl = stepper.controller();
  RunBudget<T> budget(opt, clock_start);
  StopMonitor<T> stop;
  stop.setup(opt, s);
  if (opt.events != nullptr) opt.events->start(t, s);
  // Hands the physical state after an accepted step to the event log; true: its stop holds.
  auto log_step = [&]() {
    if (opt.events == nullptr) return false;
    store();
    return opt.events->observe(t, s, opt, st);
  };

  const double dir = forward ? 1.0 : -1.0;
  const double span = std::fabs(to_double(t_end - t));
  const double eps = scalar_traits<T>::epsilon();

  auto finish_counted = [&](Status status) {
    st.evaluations = sub.evaluations;
    return finish(finish_pn(status));
  };
  if (!stepper.start_at(y.data())) return finish_counted(Status::nonfinite);

  // First step in fictitious time: H = U * dt with dt a tenth of the shortest two-body time scale
  // (free-fall sqrt(r^3/m) or crossing r/v over all pairs), or Options::initial_step taken as a
  // physical time; never more than the whole span. Fixed-step mode: every step is U(0) times
  // Options::fixed_step (a physical time at the start; the fictitious step stays constant, so the
  // physical step follows the regularization), shortened only to land.
  const double U0 = to_double(y[static_cast<std::size_t>(lay.omega())]);
  const double h_fixed = U0 * opt.fixed_step;
  if (fixed && (!(h_fixed > 0) || !std::isfinite(h_fixed))) return finish_counted(Status::nonfinite);
  double h_fixed_now = h_fixed;  // halved for one attempt when a landing fails
  {
    double dt0 = opt.initial_step;
    if (!(dt0 > 0)) {
      double tmin = std::numeric_limits<double>::infinity();
      for (int i = 0; i < s.n; ++i)
        for (int j = i + 1; j < s.n; ++j) {
          double r2 = 0, v2 = 0;
          for (int d = 0; d < 3; ++d) {
            const double dx = to_double(s.x[static_cast<std::size_t>(3 * j + d)] - s.x[static_cast<std::size_t>(3 * i + d)]);
            const double dv = to_double(s.v[static_cast<std::size_t>(3 * j + d)] - s.v[static_cast<std::size_t>(3 * i + d)]);
            r2 += dx * dx;
            v2 += dv * dv;
          }
          const double mij = to_double(s.m[static_cast<std::size_t>(i)] + s.m[static_cast<std::size_t>(j)]);
          const double r = std::sqrt(r2);
          if (mij > 0) tmin = std::fmin(tmin, std::sqrt(r2 * r / mij));
          if (v2 > 0) tmin = std::fmin(tmin, r / std::sqrt(v2));
        }
      dt0 = 0.1 * tmin;
    }
    dt0 = std::fmin(dt0, span);
    double h0 = U0 * dt0;
    if (!(h0 > 0) || !std::isfinite(h0)) return finish_counted(Status::nonfinite);
    ctrl.set_proposal(h0);
  }
  const double s_ref0 = ctrl.proposal();
  double s_total = 0.0;  // fictitious time covered (magnitude), for the step floor
  // Physical-time floor (RunBudget::stalled): a run of stalled accepted steps, each advancing t
  // by less than frac * |t|, ends with Status::step_underflow (without it a binary whose period
  // is below eps |t| would spin until max_steps with t frozen). A span that is merely very long
  // in orbits (a period 1e-100 of it) is not caught there: the budgets end it.

  // Newton landing on t(H) = rem from the overshooting step (H_over, dt_over, dt/ds at its end).
  // First guess: the root of the cubic Hermite interpolant of t(s) on [0, H_over] built from
  // t(0) = 0, t(H_over) = dt_over and dt/ds at both ends (costs no force evaluation). Then Newton
  // with the extrapolated step of kc rows as the function and dt/ds = 1/(T + B) (or 1/omega) at the
  // trial's end as the derivative. It converges quadratically until the round-off floor of the
  // extrapolated time increment (~1e2 eps |dt| measured); the floor is recognised when a residual
  // misses the quadratic prediction q_{k-1} res_{k-1}^2 by a factor 100. Leaves the landed
  // increment in dbest; false if a trial failed the error test or stopped above 1024 eps.
  auto land = [&](const T& H_over, const T& dt_over, const T& rate_over, const T& rem, int kc) -> bool {
    const double scale = std::fabs(to_double(time_now())) + std::fabs(to_double(rem));
    const double tol = 4.0 * eps * scale, tol_floor = 1024.0 * eps * scale;
    T Hn;
    {
      const double D = to_double(dt_over), R = to_double(rem), Ho = to_double(H_over);
      const double r0 = to_double(sub.time_rate(y.data())) * Ho, r1 = to_double(rate_over) * Ho;
      double sg = R / D;  // sigma = s / H_over
      for (int i = 0; i < 8; ++i) {
        const double s2 = sg * sg, s3 = s2 * sg;
        const double p = r0 * (s3 - 2 * s2 + sg) + D * (3 * s2 - 2 * s3) + r1 * (s3 - s2);
        const double dp = r0 * (3 * s2 - 4 * sg + 1) + D * (6 * sg - 6 * s2) + r1 * (3 * s2 - 2 * sg);
        if (!(dp * D > 0)) break;
        sg -= (p - R) / dp;
      }
      if (!(sg > 0.0 && sg <= 1.0)) sg = R / D;
      Hn = H_over * T(sg);
    }
    // Fixed-step mode: with few rows and a long step the extrapolated t(H) differs from the true
    // flow by more than round-off, so dt/ds at the trial's end is not its exact derivative and
    // Newton converges only linearly (measured: rows 1, ~10 iterations in dd): more iterations,
    // and the floor is where the residual stops falling.
    const int max_iter = fixed ? 40 : 12;
    double res_prev = 0.0, q_prev = 0.0;
    for (int iter = 0; iter < max_iter; ++iter) {
      if (!((forward ? Hn > T(0) : Hn < T(0)) && abs(Hn) <= abs(H_over))) Hn = H_over * (rem / dt_over);
      const double err = stepper.evaluate(Hn, kc);
      ++rep.landing_iterations;
      const T* dy = stepper.increment();
      const T dtn = dy[it];
      // Fixed-step mode has no error test; a non-finite trial fails either way.
      if (fixed ? !isfinite(dtn) : !(err <= 1.0)) return false;
      const double res = std::fabs(to_double(rem - dtn));
      const bool floor = fixed ? iter >= 1 && res >= res_prev
                               : iter >= 2 && q_prev > 0 && res > 100.0 * q_prev * res_prev * res_prev;
      if (res <= tol || floor || iter == max_iter - 1) {
        if (res > tol_floor) return false;
        for (int i = 0; i < dim; ++i) dbest[static_cast<std::size_t>(i)] = dy[i];
        rep.landing_residual = std::fmax(rep.landing_residual, res);
        return true;
      }
      if (iter >= 1 && res_prev > 0) q_prev = res / (res_prev * res_prev);
      res_prev = res;
      for (int i = 0; i < dim; ++i) ytrial[static_cast<std::size_t>(i)] = y[static_cast<std::size_t>(i)] + dy[i];
      Hn = Hn + (rem - dtn) / sub.time_rate(ytrial.data());
    }
    return false;
  };

  // Contact location: the first H in (0, H_hi] with r_ab(H) = radii_a + radii_b, by the Illinois
  // variant of regula falsi on extrapolated steps of kc rows. The contact state (r <= r_a + r_b up
  // to round-off) is left in dbest. False if no extrapolated state in the bracket overlaps.
  auto separation_gap = [&](const T* dy, int a, int b) {
    for (int i = 0; i < dim; ++i) ytrial[static_cast<std::size_t>(i)] = y[static_cast<std::size_t>(i)] + dy[i];
    return frame.gap_at(ytrial.data(), a, b, frame.reach(a, b));
  };
  auto locate_contact = [&](const T& H_acc, int kc, int a, int b, double fraction) -> bool {
    const double rsum = frame.reach_double(a, b);
    T lo = T(0);
    T glo = frame.gap_at(y.data(), a, b, frame.reach(a, b));
    T hi = H_acc * T(fraction);
    T ghi = T(1);
    if (fraction < 1.0) {
      stepper.evaluate(hi, kc);
      ghi = separation_gap(stepper.increment(), a, b);
    }
    if (!(ghi < T(0))) {
      hi = H_acc;
      stepper.evaluate(hi, kc);
      ghi = separation_gap(stepper.increment(), a, b);
      if (!(ghi < T(0))) return false;
    }
    for (int i = 0; i < dim; ++i) dbest[static_cast<std::size_t>(i)] = stepper.increment()[i];
    int side = 0;
    double gap_hi = -to_double(ghi);  // true overlap at hi (ghi itself may be halved by Illinois)
    for (int iter = 0; iter < 100; ++iter) {
      if (std::fabs(to_double(hi - lo)) <= 4.0 * eps * std::fabs(to_double(hi)) || gap_hi <= 4.0 * eps * rsum) break;
      T mid = hi - ghi * (hi - lo) / (ghi - glo);
      if (!((forward ? mid > lo && mid < hi : mid < lo && mid > hi))) mid = (lo + hi) / T(2);
      stepper.evaluate(mid, kc);
      const T gm = separation_gap(stepper.increment(), a, b);
      if (gm < T(0)) {
        hi = mid;
        ghi = gm;
        gap_hi = -to_double(gm);
        for (int i = 0; i < dim; ++i) dbest[static_cast<std::size_t>(i)] = stepper.increment()[i];
        if (side == -1) glo /= T(2);
        side = -1;
      } else {
        lo = mid;
        glo = gm;
        if (side == 1) ghi /= T(2);
        side = 1;
      }
    }
    return true;
  };

  Status status = Status::success;
  bool first = true;

  while (true) {
    const long long steps_before = st.steps;  // for the event log
    const T& target = next_out < n_out ? output_times[next_out] : t_end;
    const T rem = target - time_now();
    bool landed = false;
    bool stepped = false;
    if ((forward && !(rem > T(0))) || (!forward && !(rem < T(0)))) {
      landed = true;  // at (or a rounding past) the target already
    } else {
      const double hmag = fixed ? h_fixed_now : ctrl.proposal();
      // ---- budgets, checked before each attempt (fixed-step mode: no step floor)
      if (!fixed && budget.below_floor(hmag, std::max(s_total, s_ref0))) {
        status = Status::step_underflow;
        break;
      }
      status = budget.next_attempt();
      if (status != Status::success) break;
      const T H = T(dir * hmag);
      if (fixed) {
        if (!stepper.fixed(H, rows)) {
          status = Status::nonfinite;
          break;
        }
        h_fixed_now = h_fixed;
      } else if (!stepper.attempt(H, first)) {
        ++st.rejected;
        continue;
      }
      const int kc = stepper.rows_used();
      const double h_next = ctrl.proposal();
      const int k_next = ctrl.target();
      const T dt_step = stepper.increment()[it];
      const bool overshoot = forward ? !(dt_step < rem) : !(dt_step > rem);
      T rate_end = T(0);  // dt/ds at the overshooting step's end: Newton's first derivative
      if (overshoot) {
        for (int i = 0; i < dim; ++i) ytrial[static_cast<std::size_t>(i)] = y[static_cast<std::size_t>(i)] + stepper.increment()[i];
        rate_end = sub.time_rate(ytrial.data());
      }

      // ---- contact (or merger) inside this step?
      if (frame.contact_test()) {
        int a = sub.contact_i(), b = sub.contact_j();
        double fraction = sub.contact_fraction();
        if (sub.contact_sample() < 0) {
          for (int i = 0; i < dim; ++i) ytrial[static_cast<std::size_t>(i)] = y[static_cast<std::size_t>(i)] + stepper.increment()[i];
          const chain::ContactProbe p = frame.contact(ytrial.data());
          a = p.i;
          b = p.j;
          fraction = 1.0;
        }
        const bool probed = a >= 0;
        if (probed && locate_contact(H, kc, a, b, fraction)) {
          // The earliest contact wins: if another pair overlaps at the located state, it touched
          // first; locate again for it within the shorter bracket.
          for (int guard = 0; guard < s.n * s.n; ++guard) {
            for (int i = 0; i < dim; ++i) ytrial[static_cast<std::size_t>(i)] = y[static_cast<std::size_t>(i)] + dbest[static_cast<std::size_t>(i)];
            const chain::ContactProbe p = frame.contact(ytrial.data());
            if (p.i < 0 || (p.i == a && p.j == b)) break;
            a = p.i;
            b = p.j;
            if (!locate_contact(H, kc, a, b, 1.0)) break;
          }
          const T dtc = dbest[static_cast<std::size_t>(it)];
          const bool before_target = forward ? !(dtc > rem) : !(dtc < rem);
          if (before_target) {
            add_increment(dbest.data());
            ++st.steps;
            report_contact(a, b);
            status = contact_status(a, b);
            break;
          }
        }
        // Contact location reused the tableau: restore the accepted step (same rows, same H, so
        // the same bits).
        if (probed && !overshoot) stepper.evaluate(H, kc);
      }

      if (overshoot) {
        // Discard the step; Newton's method on t(H) = target with the overshooting step's order.
        if (!land(H, dt_step, rate_end, rem, kc)) {
          if (fixed) h_fixed_now = 0.5 * hmag;
          else ctrl.set_proposal(0.5 * hmag);
          ++st.rejected;
          continue;
        }
        ++rep.landings;
        add_increment(dbest.data());
        y[static_cast<std::size_t>(it)] = target;
        comp[static_cast<std::size_t>(it)] = T(0);
        // A step shortened to land says little about the natural step and order: keep them.
        ctrl.set_proposal(std::max(h_next, hmag));
        ctrl.set_target(std::max(k_next, kc));
        landed = true;
      } else {
        add_increment(stepper.increment());
        if (!fixed && (budget.stalled(to_double(dt_step), to_double(time_now())) ||
                       budget.crawling_in_time(to_double(time_now() - t_start), st.steps + 1, span))) {
          s_total += hmag;
          ++st.steps;
          status = Status::step_underflow;
          break;
        }
      }
      s_total += hmag;
      ++st.steps;
      first = false;
      stepped = true;
      if (frame.needs_rechain(y.data()) && frame.rechain(y.data(), Compensated ? comp.data() : nullptr)) ++rep.rechains;
      if (!stepper.start_at(y.data())) {
        status = Status::nonfinite;
        break;
      }
    }
    if (landed) {
      y[static_cast<std::size_t>(it)] = target;
      comp[static_cast<std::size_t>(it)] = T(0);
      while (next_out < n_out && output_times[next_out] == target) {
        store();
        on_output(static_cast<int>(next_out), static_cast<const T&>(t), static_cast<const State<T>&>(s));
        ++next_out;
      }
      if (target == t_end) {
        if (st.steps != steps_before && log_step()) status = Status::stop_condition;
        break;
      }
    }
    // ---- event log and its pair-distance stop, every accepted step (on the physical state)
    if (st.steps != steps_before && log_step()) {
      status = Status::stop_condition;
      break;
    }
    // ---- stop conditions, every check_every accepted steps (on the physical state)
    if (stepped && stop.due(st.steps)) {
      store();
      if (stop.met(s, st)) {
        status = Status::stop_condition;
        break;
      }
    }
  }
  store();
  // The conversion back from chain coordinates can overflow where the chain itself did not
  // (products of extreme masses): never report a finished run with a non-finite state.
  {
    using std::isfinite;
    bool finite = isfinite(t);
    for (const T& q : s.x) finite = finite && isfinite(q);
    for (const T& q : s.v) finite = finite && isfinite(q);
    if (!finite) status = Status::nonfinite;
  }
  return finish_counted(status);
}

// Without output times.
template <class T, bool Compensated = false>
Stats integrate_chain(State<T>& s, T& t, const T& t_end, const Options& opt, const ChainOptions& copt = ChainOptions()) {
  const std::vector<T> none;
  return integrate_chain<T, Compensated>(s, t, t_end, none, [](int, const T&, const State<T>&) {}, opt, copt);
}

}  // namespace loschmidt
