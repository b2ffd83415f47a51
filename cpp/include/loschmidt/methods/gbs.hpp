// The Gragg-Bulirsch-Stoer integrator for second-order problems q'' = a(q), and its Newtonian
// N-body instance:
//   - StormerSubstep<T, Force>: the symmetric substep, Stormer's form of Gragg's midpoint rule for
//     second-order equations (kick-drift-kick leapfrog with n substeps over H; HNW I, II.14
//     [memory for the section]), accumulating the increments (dq, dp) directly, over any
//     acceleration model Force (NewtonianForce here; the variational equations in lyapunov.hpp);
//   - ExtrapolationStepper + OrderStepController (step_control.hpp): tableau and order control;
//   - detail::run_extrapolation: the driver, generic over a Problem (the substep, the layout of
//     the flat vector y and what happens after each accepted step; NewtonianProblem here). It
//     lands exactly on every output time and on t_end by shortening the step (no
//     interpolation), integrates backward when t_end < t, enforces the budgets (max_steps,
//     max_wall_time, step floor, polling for interrupts), tests the stop condition
//     (Options::stop) and has a fixed-step mode (Options::fixed_step) for order measurements;
//   - integrate_gbs: the Newtonian entry point. A planar system (all z and z velocities exactly
//     zero) is integrated in two dimensions, with the same bits.
// Re-entrant: no globals; all storage is allocated before the loop. The hot loop (substeps,
// tableau, controller) allocates nothing.
#pragma once

#include <algorithm>
#include <chrono>
#include <cmath>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include <loschmidt/methods/budget.hpp>
#include <loschmidt/methods/extrapolation.hpp>
#include <loschmidt/methods/options.hpp>
#include <loschmidt/methods/status.hpp>
#include <loschmidt/methods/step_control.hpp>
#include <loschmidt/methods/events.hpp>
#include <loschmidt/methods/stop.hpp>
#include <loschmidt/methods/validate.hpp>
#include <loschmidt/nbody/forces.hpp>
#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/compensated.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// Newtonian accelerations of n bodies in D dimensions as an acceleration model for
// StormerSubstep: q = x (D n components, body-major), a(q) = the gravitational accelerations.
template <class T, int D>
class NewtonianForce {
 public:
  void setup(int n, const T* m) {
    n_ = n;
    m_ = m;
    pairs_.setup(n);
  }
  int components() const { return D * n_; }
  // Single pass in double (fastest there); three passes in extended precision, where the
  // independent sqrt/division chains of the pairs overlap (same bits either way).
  void operator()(const T* x, T* a) {
    if constexpr (std::is_same_v<T, double>) accelerations_in<D>(n_, m_, x, a);
    else accelerations_in<D>(n_, m_, x, a, pairs_);
  }

 private:
  int n_ = 0;
  const T* m_ = nullptr;
  PairWorkspace<T> pairs_;
};

// Stormer/leapfrog substep on the flat phase-space vector y = (q[K], p[K]), q'' = a(q), K =
// force().components(). With h = H/n:
//   p_{1/2} = p0 + h/2 a(q0);  q_{i+1} = q_i + h p_{i+1/2};
//   p_{i+3/2} = p_{i+1/2} + h a(q_{i+1});  ...;  p_n = p_{n-1/2} + h/2 a(q_n).
// Symmetric, so its error expands in even powers of h for every n. It costs n force evaluations
// plus a(q0), which begin() computes once per macro step and all rows share.
// Force: void setup(...) (by the owner), int components() const, void operator()(const T* q, T* a).
template <class T, class Force>
class StormerSubstep {
 public:
  Force& force() { return force_; }
  const Force& force() const { return force_; }

  // Storage for force().components(); call after the force model is set up.
  void allocate() {
    k_ = force_.components();
    const std::size_t k = static_cast<std::size_t>(k_);
    a0_.assign(k, T(0));
    a_.assign(k, T(0));
    xt_.assign(k, T(0));
  }

  bool begin(const T* y0) {
    using std::isfinite;
    force_(y0, a0_.data());
    ++evaluations;
    for (const T& q : a0_)
      if (!isfinite(q)) return false;
    return true;
  }

  const T* start_acceleration() const { return a0_.data(); }

  // Acceleration at arbitrary positions (used by the automatic first step).
  void evaluate(const T* x, T* a) {
    force_(x, a);
    ++evaluations;
  }

  void increment(const T* y0, const T& H, int nsub, T* dy) {
    const int k = k_;
    const T* x0 = y0;
    const T* v0 = y0 + k;
    T* dx = dy;      // x_i - x0
    T* dv = dy + k;  // v_{i-1/2} - v0 inside the loop, v_n - v0 at the end
    T* xt = xt_.data();
    T* a = a_.data();
    const T* a0 = a0_.data();
    const T h = H / T(nsub);
    const T h2 = H / T(2 * nsub);
    for (int i = 0; i < k; ++i) {
      dv[i] = h2 * a0[i];
      dx[i] = h * (v0[i] + dv[i]);
    }
    for (int s = 1; s < nsub; ++s) {
      for (int i = 0; i < k; ++i) xt[i] = x0[i] + dx[i];
      force_(xt, a);
      for (int i = 0; i < k; ++i) {
        dv[i] += h * a[i];
        dx[i] += h * (v0[i] + dv[i]);
      }
    }
    for (int i = 0; i < k; ++i) xt[i] = x0[i] + dx[i];
    force_(xt, a);
    for (int i = 0; i < k; ++i) dv[i] += h2 * a[i];
    evaluations += nsub;
  }

  long long evaluations = 0;

 private:
  Force force_;
  int k_ = 0;
  std::vector<T> a0_, a_, xt_;
};

// The Newtonian substep, y = (x[Dn], v[Dn]), D = 3 (or 2 for a planar system, see integrate_gbs).
template <class T, int D = 3>
class NewtonianStormerSubstep : public StormerSubstep<T, NewtonianForce<T, D>> {
 public:
  void setup(int n, const T* m) {
    this->force().setup(n, m);
    this->allocate();
  }
};

namespace detail {

// Automatic first step (the starting-step heuristic of HNW I, II.4 [memory], adapted): from the sizes of y0, f(y0) and of the change of f
// over a small trial step, the step whose local error of order p would be about the tolerance.
// Components with zero scale are skipped. Returns a magnitude. sub must have begun at y.
template <class T, class Substep>
double initial_step_size(Substep& sub, const std::vector<T>& y, double rtol, double atol, int order,
                         double span, int norm_count) {
  const std::size_t k = y.size() / 2;
  const T* a0 = sub.start_acceleration();
  double d0 = 0, d1 = 0;
  std::vector<double> sc(2 * k);
  for (std::size_t i = 0; i < 2 * k; ++i) {
    sc[i] = atol + rtol * std::fabs(to_double(y[i]));
    if (sc[i] > 0) {
      const double f = (i < k) ? to_double(y[k + i]) : to_double(a0[i - k]);
      d0 += (to_double(y[i]) / sc[i]) * (to_double(y[i]) / sc[i]);
      d1 += (f / sc[i]) * (f / sc[i]);
    }
  }
  d0 = std::sqrt(d0 / norm_count);
  d1 = std::sqrt(d1 / norm_count);
  const bool guessed = (d0 < 1e-5 || d1 < 1e-5);
  double h0 = guessed ? 1e-6 * span : 0.01 * d0 / d1;
  h0 = std::min(h0, span);
  // Trial point y1 = y0 + h0 f(y0) (positive direction; only sizes matter here).
  std::vector<T> x1(k), a1(k);
  const T th0 = T(h0);
  for (std::size_t i = 0; i < k; ++i) x1[i] = y[i] + th0 * y[k + i];
  sub.evaluate(x1.data(), a1.data());
  double d2 = 0;
  for (std::size_t i = 0; i < 2 * k; ++i) {
    if (!(sc[i] > 0)) continue;
    const double df = (i < k) ? h0 * to_double(a0[i]) : to_double(a1[i - k] - a0[i - k]);
    d2 += (df / sc[i]) * (df / sc[i]);
  }
  d2 = std::sqrt(d2 / norm_count) / h0;
  const double dmax = std::max(d1, d2);
  double h1;
  if (!(dmax > 1e-15) || !std::isfinite(dmax))
    h1 = std::max(1e-6 * span, h0 * 1e-3);
  else
    h1 = std::pow(0.01 / dmax, 1.0 / (order + 1));
  double h = guessed ? h1 : std::min(100 * h0, h1);
  if (!(h > 0) || !std::isfinite(h)) h = 1e-6 * span;
  return std::min(h, span);
}

}  // namespace detail

// What the driver integrates. A Problem provides
//   using substep_type;  substep_type& substep();   // a symmetric substep (step_control.hpp)
//   int dimension() const;                         // length of y
//   int norm_count() const;                        // components the error RMS averages over
//   int error_block() const; int error_stride() const;  // components the error norm covers
//                                                  // (ErrorScale::block; 0, 0: all)
//   void load(const State<T>& s, T* y);            // y from the state
//   void store(const T* y, State<T>& s);           // the state from y
//   double initial_step(const std::vector<T>& y, double rtol, double atol, int order,
//                       double span);              // after substep().begin(y); a magnitude
//   void accepted(T* y, T* comp);                  // after every accepted step (comp: the
//                                                  // compensations, nullptr without)
//   long long evaluations() const;                 // force evaluations so far
// NewtonianProblem: y = (x[Dn], v[Dn]); for D = 2 the z parts (exactly zero) are left out.
template <class T, int D>
class NewtonianProblem {
 public:
  using substep_type = NewtonianStormerSubstep<T, D>;
  explicit NewtonianProblem(const State<T>& s) : n_(s.n) { sub_.setup(n_, s.m.data()); }

  substep_type& substep() { return sub_; }
  int dimension() const { return 2 * D * n_; }
  int norm_count() const { return 6 * n_; }  // always the full 6n components
  int error_block() const { return 0; }
  int error_stride() const { return 0; }

  void load(const State<T>& s, T* y) const {
    const int kd = D * n_;
    for (int i = 0; i < n_; ++i)
      for (int c = 0; c < D; ++c) {
        y[D * i + c] = s.x[static_cast<std::size_t>(3 * i + c)];
        y[kd + D * i + c] = s.v[static_cast<std::size_t>(3 * i + c)];
      }
  }
  void store(const T* y, State<T>& s) const {
    const int kd = D * n_;
    for (int i = 0; i < n_; ++i)
      for (int c = 0; c < D; ++c) {
        s.x[static_cast<std::size_t>(3 * i + c)] = y[D * i + c];
        s.v[static_cast<std::size_t>(3 * i + c)] = y[kd + D * i + c];
      }
  }
  double initial_step(const std::vector<T>& y, double rtol, double atol, int order, double span) {
    return detail::initial_step_size(sub_, y, rtol, atol, order, span, norm_count());
  }
  void accepted(T*, T*) {}
  long long evaluations() const { return sub_.evaluations; }

 private:
  int n_;
  substep_type sub_;
};

namespace detail {

// The driver proper over a Problem (see above); arguments already validated (validate_run).
// rows: the number of tableau rows (Options::max_order resolved).
template <class T, bool Compensated, class Problem, class Observer>
Stats run_extrapolation(Problem& pb, State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
                        Observer&& on_output, const Options& opt, const StepControlTuning& tune, int rows,
                        std::chrono::steady_clock::time_point clock_start) {
  using clock = std::chrono::steady_clock;
  using std::abs;
  using std::isfinite;
  using Substep = typename Problem::substep_type;
  Stats st;
  auto finish = [&](Status status) {
    st.status = status;
    st.wall_time = std::chrono::duration<double>(clock::now() - clock_start).count();
    return st;
  };
  const bool forward = t_end > t;
  const bool fixed = opt.fixed_step > 0;

  // ---- setup (all allocation happens here)
  const int dim = pb.dimension();
  const int norm_count = pb.norm_count();
  std::vector<T> y(static_cast<std::size_t>(dim));
  std::vector<T> comp(Compensated ? static_cast<std::size_t>(dim) : 0, T(0));
  pb.load(s, y.data());
  auto store = [&]() { pb.store(y.data(), s); };

  Substep& sub = pb.substep();
  ExtrapolationStepper<T, Substep> stepper;
  // The fixed-step mode may use fewer than the controller's minimum of 3 rows.
  stepper.setup(&sub, dim, opt.sequence, fixed ? std::max(rows, 3) : rows, opt.rtol, tune,
                ScaledRmsNorm<T>(opt.rtol, opt.atol, norm_count, pb.error_block(), pb.error_stride()));
  OrderStepController& ctrl = stepper.controller();

  StopMonitor<T> stop;
  stop.setup(opt, s);
  if (opt.events != nullptr) opt.events->start(t, s);
  // Hands the physical state after an accepted step to the event log; true: its stop holds.
  auto log_step = [&]() {
    if (opt.events == nullptr) return false;
    store();
    return opt.events->observe(t, s, opt, st);
  };
  RunBudget<T> budget(opt, clock_start);

  const double dir = forward ? 1.0 : -1.0;
  const double span = std::fabs(to_double(t_end - t));
  // Step floor: frac * max(|t|, |t_start|, |H_0|). Relative to |t| because below that t + H no
  // longer moves t; |t_start| and the first step's size |H_0| (the problem's own time scale) give
  // it a scale near t = 0. The span is deliberately not used: a long run must not forbid the
  // short steps of an early close encounter.
  double floor_scale = std::fabs(to_double(t));
  const T t_begin = t;  // for the mean step (Options::min_step_ratio)

  if (!stepper.start_at(y.data())) {
    st.evaluations = pb.evaluations();
    return finish(Status::nonfinite);
  }
  if (!fixed) {
    double h = opt.initial_step > 0 ? opt.initial_step
                                    : pb.initial_step(y, opt.rtol, opt.atol, 2 * ctrl.target(), span);
    h = std::min(h, span);
    ctrl.set_proposal(h);
    floor_scale = std::max(floor_scale, h);
  }

  T tc = T(0);  // compensation of t (Compensated only)
  std::size_t next_out = 0;
  const std::size_t n_out = output_times.size();
  bool first = true;
  Status status = Status::success;

  while (true) {
    const T& target = next_out < n_out ? output_times[next_out] : t_end;
    T remaining = target - t;
    if (Compensated) remaining -= tc;
    const double hmag = fixed ? opt.fixed_step : ctrl.proposal();
    T H;
    bool landing;
    bool stepped = false;
    if ((forward && !(remaining > T(0))) || (!forward && !(remaining < T(0)))) {
      // Compensated time already at (or a rounding past) the target: land without a step.
      H = T(0);
      landing = true;
    } else if (!(hmag > 0) || !std::isfinite(hmag)) {
      status = Status::step_underflow;  // cannot happen with a positive floor; never loop on H = 0
      break;
    } else {
      landing = !(T(hmag) < abs(remaining));
      H = landing ? remaining : T(dir * hmag);
    }

    if (H != T(0)) {
      // ---- budgets, checked before each attempt
      if (!fixed && !landing && budget.below_floor(hmag, std::max(std::fabs(to_double(t)), floor_scale))) {
        status = Status::step_underflow;
        break;
      }
      if (!fixed && !landing && budget.crawling(hmag, std::fabs(to_double(t - t_begin)), st.steps)) {
        status = Status::step_underflow;  // shrinking without end: a collision singularity
        break;
      }
      status = budget.next_attempt();
      if (status != Status::success) break;
      const int k_before = ctrl.target();
      if (fixed) {
        if (!stepper.fixed(H, rows)) {
          status = Status::nonfinite;
          break;
        }
      } else if (!stepper.attempt(H, first || landing)) {
        ++st.rejected;
        continue;
      }
      // ---- accepted: y += dy, t += H
      const T* dy = stepper.increment();
      if (Compensated) {
        for (std::size_t i = 0; i < static_cast<std::size_t>(dim); ++i) compensated_add(y[i], comp[i], dy[i]);
      } else {
        for (int i = 0; i < dim; ++i) y[static_cast<std::size_t>(i)] += dy[i];
      }
      ++st.steps;
      stepped = true;
      first = false;
      if (landing) {
        // A step shortened to land says little about the natural step and order: keep them.
        const double hused = std::fabs(to_double(H));
        if (!fixed && hused < hmag) {
          ctrl.set_proposal(std::max(ctrl.proposal(), hmag));
          ctrl.set_target(std::max(ctrl.target(), k_before));
        }
      } else {
        if (Compensated) compensated_add(t, tc, H);
        else t += H;
      }
      pb.accepted(y.data(), Compensated ? comp.data() : nullptr);
      if (!stepper.start_at(y.data())) {
        if (landing) t = target;
        status = Status::nonfinite;
        break;
      }
    }
    if (landing) {
      t = target;
      tc = T(0);
      while (next_out < n_out && output_times[next_out] == t) {
        store();
        on_output(static_cast<int>(next_out), static_cast<const T&>(t), static_cast<const State<T>&>(s));
        ++next_out;
      }
      if (t == t_end) {
        if (stepped && log_step()) status = Status::stop_condition;
        break;
      }
    }
    // ---- event log and its pair-distance stop, every accepted step
    if (stepped && log_step()) {
      status = Status::stop_condition;
      break;
    }
    // ---- stop conditions, every check_every accepted steps
    if (stepped && stop.due(st.steps)) {
      store();
      if (stop.met(s, st)) {
        status = Status::stop_condition;
        break;
      }
    }
  }
  store();
  st.evaluations = pb.evaluations();
  return finish(status);
}

// The Newtonian driver for D = 3 or (planar systems) D = 2; arguments already validated.
template <int D, class T, bool Compensated, class Observer>
Stats run_gbs(State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
              Observer&& on_output, const Options& opt, const StepControlTuning& tune, int rows,
              std::chrono::steady_clock::time_point clock_start) {
  NewtonianProblem<T, D> pb(s);
  return run_extrapolation<T, Compensated>(pb, s, t, t_end, output_times, on_output, opt, tune, rows,
                                           clock_start);
}

// All z coordinates and z velocities exactly zero.
template <class T>
bool is_planar(const State<T>& s) {
  bool planar = true;
  for (std::size_t i = 0; i < static_cast<std::size_t>(s.n) && planar; ++i)
    planar = s.x[3 * i + 2] == T(0) && s.v[3 * i + 2] == T(0);
  return planar;
}

}  // namespace detail

// Integrate s from t to t_end (t is updated; it equals t_end exactly on success). on_output(index,
// t, s) is called on landing exactly on output_times[index]; output_times must be sorted in the
// direction of integration and lie in (t, t_end]. Compensated = true carries Kahan-Babuska-
// Neumaier compensation for y += dy and t += H (precision "f64c"), so round-off does not
// random-walk over many steps. Invalid arguments throw std::invalid_argument before any work;
// every other way of stopping is reported in Stats::status (s and t then hold the last accepted
// state; with Options::stop, Status::stop_condition and t the time the condition was met).
template <class T, bool Compensated = false, class Observer>
Stats integrate_gbs(State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
                    Observer&& on_output, const Options& opt, const StepControlTuning& tune = {}) {
  using clock = std::chrono::steady_clock;
  const auto clock_start = clock::now();
  Stats st;
  auto finish = [&](Status status) {
    st.status = status;
    st.wall_time = std::chrono::duration<double>(clock::now() - clock_start).count();
    return st;
  };

  validate_run("integrate_gbs", s, t, t_end, output_times, opt);
  const int rows = table_rows(opt, scalar_traits<T>::default_max_order(), opt.sequence, "integrate_gbs");
  if (t == t_end) return finish(Status::success);
  if (!s.finite()) return finish(Status::nonfinite);

  // Planar fast path: with every z coordinate and z velocity exactly zero they stay exactly zero
  // (the z accelerations are exact zeros), so the system is integrated in two dimensions, with the
  // same bits as the three-dimensional path and about a third less work.
  if (detail::is_planar(s))
    return detail::run_gbs<2, T, Compensated>(s, t, t_end, output_times, on_output, opt, tune, rows,
                                              clock_start);
  return detail::run_gbs<3, T, Compensated>(s, t, t_end, output_times, on_output, opt, tune, rows,
                                            clock_start);
}

// Without output times.
template <class T, bool Compensated = false>
Stats integrate_gbs(State<T>& s, T& t, const T& t_end, const Options& opt,
                    const StepControlTuning& tune = {}) {
  const std::vector<T> none;
  return integrate_gbs<T, Compensated>(s, t, t_end, none, [](int, const T&, const State<T>&) {}, opt, tune);
}

}  // namespace loschmidt
