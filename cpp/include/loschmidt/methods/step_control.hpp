// Order and step-size control of the extrapolation method by work per unit step (Deuflhard 1983;
// HNW I, section II.9), and the one macro-step stepper of every extrapolation method: it drives a
// pluggable symmetric substep through the tableau with the convergence monitor, and judges rows
// by a pluggable error norm. Generic over a flat vector of T: the Newtonian Stormer substep
// (gbs.hpp), its variational extension (lyapunov.hpp) and the regularized leapfrog in chain
// coordinates (chain.hpp, with its own norm) all plug in unchanged.
//
// A Substep provides
//   bool begin(const T* y0);                           // derivative data at y0; false if non-finite
//   void increment(const T* y0, const T& H, int n, T* dy); // n symmetric substeps over H: dy = y(H)-y0
// and its own evaluation counter. A Norm (the error-norm policy) provides
//   void start_at(const T* y0, int dim);               // the step's start (e.g. its scale, in double)
//   double operator()(const ExtrapolationTableau<T>& tab) const;
//                                                      // ||T_{j,j} - T_{j,j-1}|| after extrapolate(j):
//                                                      // slot(1) and slot(2); accepted at <= 1
// Step-control arithmetic is in double; H and the tableau are in T.
#pragma once

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <utility>
#include <vector>

#include <loschmidt/methods/extrapolation.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// Constants of the controller. The defaults follow HNW II.9 where the book gives values [memory:
// 0.94, 0.65, the 0.02 / 4 clamps and the 0.8 / 0.9 hysteresis, as in METHODS.md]. Measured
// here by work-precision runs (force evaluations at equal error; Kepler e = 0.9 in f64 and dd, the
// Pythagorean problem in dd): safety, error_target, growth_limit and the order hysteresis each move
// the work by at most ~5% over sensible ranges, the predictive control saves ~4% in f64, and
// the step sequence matters most (see StepSequence).
struct StepControlTuning {
  double safety = 0.94;        // every proposal is multiplied by this
  double error_target = 0.65;  // proposals aim at err = error_target rather than 1
  // Per-step growth of a row-j proposal is at most growth_limit^(1/(2j-1)); shrinking is at most
  // by a further factor shrink_limit beyond its inverse.
  double growth_limit = 50.0;
  double shrink_limit = 4.0;
  double order_down = 0.8;     // lower the order when W_{k-1} < order_down * W_k
  double order_up = 0.9;       // raise the order when W_k < order_up * W_{k-1}
  double divergence_shrink = 0.5;  // step factor when the rows diverge or turn non-finite
  // Initial row target: round(initial_order_slope * digits + initial_order_offset), digits =
  // -log10(rtol), clamped to [2, max_rows - 1]. initial_order > 0 overrides.
  double initial_order_slope = 0.6;
  double initial_order_offset = 1.5;
  int initial_order = 0;
  // Predictive step control (Gustafsson 1994 [memory]): when the last two accepted steps show
  // the step shrinking, as on the way into a close encounter, shrink the proposal in proportion
  // instead of learning it from one rejection per step. Applied only when it gives the smaller step.
  bool predictive = true;
  double predictive_floor = 0.2;  // the predictive factor never cuts a proposal by more than this
  // When the order is raised while the predictive factor says the step is shrinking, keep the
  // converged row's step instead of scaling it by A_{k+1} / A_k: on the way into an encounter
  // that scaling overshoots and costs a rejection per raise (measured: ~5% fewer evaluations on
  // Kepler e = 0.9 in f64, rejections on the Pythagorean problem in dd down from 129 to ~10).
  // Holding the order itself instead saves a little more but can trap the order at 2 with a tiny
  // step for thousands of steps (seen on Kepler e = 0.9), so the order is left free.
  bool hold_step_when_shrinking = true;
  // On raising the order above the converged row, scale that row's step by the work ratio
  // A_{k+1} / A_k (HNW II.9); false keeps the step of the converged row.
  bool scale_step_on_raise = true;
};

// The controller's bookkeeping: per-row step proposals H_j and work per unit step W_j = A_j / H_j,
// with A_j = n_1 + 1 + n_2 + ... + n_j force evaluations for rows 1..j (the +1 is the derivative at
// the step's start, shared by all rows). Target order k (rows) stays within [2, max_rows - 1] so
// that row k + 1 is always available to the monitor.
class OrderStepController {
 public:
  void setup(const std::vector<int>& n, double rtol, const StepControlTuning& tune) {
    n_ = n;
    rows_ = static_cast<int>(n.size()) - 1;
    if (rows_ < 3) throw std::invalid_argument("extrapolation needs at least 3 rows");
    tune_ = tune;
    work_.assign(static_cast<std::size_t>(rows_) + 1, 0.0);
    work_[1] = n_[1] + 1.0;
    for (std::size_t j = 2; j <= static_cast<std::size_t>(rows_); ++j) work_[j] = work_[j - 1] + n_[j];
    h_.assign(static_cast<std::size_t>(rows_) + 1, -1.0);
    err_.assign(static_cast<std::size_t>(rows_) + 1, 0.0);
    prev_err_.assign(static_cast<std::size_t>(rows_) + 1, -1.0);
    prev_h_ = 0.0;
    grow_.assign(static_cast<std::size_t>(rows_) + 1, 0.0);
    for (int j = 1; j <= rows_; ++j)
      grow_[static_cast<std::size_t>(j)] = std::pow(tune.growth_limit, 1.0 / (2 * j - 1));
    int k0 = tune.initial_order;
    if (k0 <= 0) {
      const double digits = -std::log10(std::max(rtol, 1e-300));
      k0 = static_cast<int>(std::lround(tune.initial_order_slope * digits + tune.initial_order_offset));
    }
    k_ = std::clamp(k0, 2, rows_ - 1);
    rejected_ = false;
  }

  int rows() const { return rows_; }
  int target() const { return k_; }
  int n(int j) const { return n_[static_cast<std::size_t>(j)]; }
  double work(int j) const { return work_[static_cast<std::size_t>(j)]; }
  bool last_rejected() const { return rejected_; }
  double proposal() const { return next_; }
  void set_proposal(double h) { next_ = h; }
  void set_target(int k) { k_ = std::clamp(k, 2, rows_ - 1); }

  // Row j >= 2 of a step of size |H| = habs ended with error estimate err: record its proposal.
  // Only the error is stored; the proposal (a pow) is computed when the order logic asks for it,
  // which is for at most four rows per step.
  void record(int j, double err, double habs) {
    err_[static_cast<std::size_t>(j)] = err;
    h_[static_cast<std::size_t>(j)] = -1.0;  // not yet computed
    habs_ = habs;
  }

  // Monitor: after row j of a step with target k, is convergence by row k + 1 still plausible?
  // The error of T_{k+1,k+1} is predicted from err_j by the factors (n_1 / n_i)^2, i = j+1..k+1.
  bool hopeless(int j, double err) const {
    double bound = 1.0;
    for (int i = j + 1; i <= k_ + 1; ++i) {
      const double r = static_cast<double>(n_[static_cast<std::size_t>(i)]) / n_[1];
      bound *= r * r;
    }
    return err > bound;
  }

  // Accepted with rows 1..kc: choose the next order and step size by work per unit step.
  void accepted(int kc, double habs) {
    const int kmax = rows_ - 1;
    // Predictive factor of row r (Gustafsson): (H_n / H_{n-1}) (err_{n-1} / err_n)^(1/(2r-1)),
    // from this and the previous accepted step; 1 when either error is unavailable or zero.
    auto trend = [&](int r) {
      if (!tune_.predictive || rejected_ || !(prev_h_ > 0.0)) return 1.0;
      const double e_now = err_[static_cast<std::size_t>(r)];
      const double e_prev = prev_err_[static_cast<std::size_t>(r)];
      if (!(e_now > 0.0 && e_prev > 0.0)) return 1.0;
      return (habs / prev_h_) * std::pow(e_prev / e_now, 1.0 / (2 * r - 1));
    };
    int k;
    if (kc == 2) {
      k = std::min(3, kmax);
      if (rejected_) k = 2;
    } else if (kc <= k_) {
      k = kc;
      if (w(kc - 1) < tune_.order_down * w(kc)) k = kc - 1;
      if (w(kc) < tune_.order_up * w(kc - 1)) k = std::min(kc + 1, kmax);
    } else {  // converged only in row k + 1
      k = kc - 1;
      if (kc > 3 && w(kc - 2) < tune_.order_down * w(kc - 1)) k = kc - 2;
      if (w(kc) < tune_.order_up * w(k)) k = std::min(kc, kmax);
    }
    // Raising the order while the step is shrinking: keep the converged row's step rather than
    // scaling it up by the work ratio (see hold_step_when_shrinking).
    const bool hold_step = k > kc && tune_.hold_step_when_shrinking && trend(kc) < 1.0;
    if (rejected_) {
      // Never raise order or step right after a rejection.
      k = std::min(k, kc);
      next_ = std::min(habs, h(k));
    } else if (k <= kc) {
      next_ = h(k);
    } else {
      next_ = (tune_.scale_step_on_raise && !hold_step) ? h(kc) * work(k) / work(kc) : h(kc);
    }
    {
      const double fac = trend(std::min(k, kc));
      if (fac < 1.0) next_ *= std::max(fac, tune_.predictive_floor);
    }
    prev_h_ = habs;
    for (int j = 2; j <= rows_; ++j)
      prev_err_[static_cast<std::size_t>(j)] = (j <= kc) ? err_[static_cast<std::size_t>(j)] : -1.0;
    k_ = std::clamp(k, 2, kmax);
    rejected_ = false;
  }

  // Rejected after rows 1..kc.
  void rejected(int kc) {
    int k = std::min({k_, kc, rows_ - 1});
    if (k > 2 && w(k - 1) < tune_.order_down * w(k)) k = k - 1;
    k_ = std::max(k, 2);
    next_ = h(k_);
    rejected_ = true;
  }

  // Rows diverged (error growing or non-finite): shrink without trusting the estimates.
  void diverged(double habs) {
    next_ = habs * tune_.divergence_shrink;
    rejected_ = true;
  }

 private:
  // Proposal of row j: H_j = |H| * clamp(safety * (error_target / err_j)^(1/(2j-1)), lo_j, hi_j)
  // with hi_j = growth_limit^(1/(2j-1)) and lo_j = 1 / (hi_j * shrink_limit).
  double h(int j) {
    double& hj = h_[static_cast<std::size_t>(j)];
    if (hj < 0.0) {
      const double err = err_[static_cast<std::size_t>(j)];
      const double grow = grow_[static_cast<std::size_t>(j)];
      const double lo = 1.0 / (grow * tune_.shrink_limit);
      double f;
      if (err == 0.0) f = grow;
      else f = tune_.safety * std::pow(tune_.error_target / err, 1.0 / (2 * j - 1));
      if (!(f >= lo)) f = lo;  // also catches NaN
      if (f > grow) f = grow;
      hj = habs_ * f;
    }
    return hj;
  }
  double w(int j) { return work_[static_cast<std::size_t>(j)] / h(j); }
  std::vector<int> n_;
  int rows_ = 0;
  StepControlTuning tune_;
  std::vector<double> work_, h_, grow_, err_, prev_err_;
  double prev_h_ = 0.0, habs_ = 0.0;
  int k_ = 2;
  bool rejected_ = false;
  double next_ = 0.0;
};

// The default error norm: the scaled RMS of ErrorScale (extrapolation.hpp), sc_i = atol + rtol *
// max(|y0_i|, |y1_i|) over the components it selects, averaged over count components.
template <class T>
class ScaledRmsNorm {
 public:
  ScaledRmsNorm() = default;
  // count, block, stride: see ErrorScale (0: all components, averaged over the dimension).
  ScaledRmsNorm(double rtol, double atol, int count = 0, int block = 0, int stride = 0) {
    scale_.rtol = rtol;
    scale_.atol = atol;
    scale_.count = count;
    scale_.block = block;
    scale_.stride = stride;
  }
  void start_at(const T* y0, int dim) { scale_.start_at(y0, dim); }
  double operator()(const ExtrapolationTableau<T>& tab) const { return tab.scaled_error(scale_); }

 private:
  ErrorScale scale_;
};

// One macro step of the extrapolation method over a pluggable substep, with the convergence
// monitor of HNW II.9: build rows 1..k-1 (normal step) and check row k-1, then row k, then row k+1;
// a progressive step (first step, step shortened to land on a time) checks every row from 2 on.
// Besides the controller-driven attempt() it offers two evaluations that leave the controller
// alone: fixed() (Options::fixed_step) and evaluate() (a fixed number of rows at any H, the same
// function of H on every call, as Newton's method and root finding on a step need).
// Allocation happens only in setup().
template <class T, class Substep, class Norm = ScaledRmsNorm<T>>
class ExtrapolationStepper {
 public:
  void setup(Substep* substep, int dim, StepSequence seq, int max_rows, double rtol, const StepControlTuning& tune,
             Norm norm) {
    sub_ = substep;
    dim_ = dim;
    rows_ = std::min(max_rows, sequence_max_rows(seq));
    n_ = step_sequence(seq, rows_);
    tableau_.setup(dim, n_);
    ctrl_.setup(n_, rtol, tune);
    norm_ = std::move(norm);
  }

  // Take y0 as the start of the next step: derivative data and the norm's scale. False if non-finite.
  bool start_at(const T* y0) {
    y0_ = y0;
    norm_.start_at(y0, dim_);
    return sub_->begin(y0);
  }

  // Attempt a step of signed size H from the point of the last start_at(). On acceptance the
  // increment is increment(); either way proposal() and target() are set for the next attempt.
  bool attempt(const T& H, bool progressive) {
    const double habs = std::fabs(to_double(H));
    const int k = ctrl_.target();
    const bool after_reject = ctrl_.last_rejected();
    progressive = progressive && !after_reject;
    double err_prev = 0.0;
    for (int j = 1; j <= k + 1; ++j) {
      sub_->increment(y0_, H, n_[static_cast<std::size_t>(j)], tableau_.slot(j));
      used_ = j;
      if (j == 1) continue;
      tableau_.extrapolate(j);
      const double err = norm_(tableau_);
      if (!std::isfinite(err) || (j > 2 && err >= std::max(4.0 * err_prev, 1.0))) {
        ctrl_.diverged(habs);
        return false;
      }
      err_prev = err;
      ctrl_.record(j, err, habs);
      if (progressive) {
        if (err <= 1.0) return accept(j, habs);
      } else if (j == k - 1 && !after_reject) {
        if (err <= 1.0) return accept(j, habs);
        if (ctrl_.hopeless(j, err)) return reject(j);
      } else if (j >= k) {
        if (err <= 1.0) return accept(j, habs);
      }
      if (j == k && ctrl_.hopeless(j, err)) return reject(j);
    }
    return reject(k + 1);
  }

  // Fixed-step mode (Options::fixed_step): rows 1..rows (1 <= rows <= max_rows()) at H with no
  // error estimate and no controller bookkeeping; the increment is T_{rows,rows}. False when it
  // is not finite.
  bool fixed(const T& H, int rows) {
    using std::isfinite;
    build(H, rows);
    const T* dy = tableau_.diagonal();
    for (int i = 0; i < dim_; ++i)
      if (!isfinite(dy[i])) return false;
    return true;
  }

  // Rows 1..rows at H (1 <= rows <= max_rows()), no controller bookkeeping. Returns the norm of
  // the last row's error estimate (0 for one row; non-finite on failure).
  double evaluate(const T& H, int rows) {
    build(H, rows);
    return rows >= 2 ? norm_(tableau_) : 0.0;
  }

  const T* increment() const { return tableau_.diagonal(); }
  int rows_used() const { return used_; }
  int max_rows() const { return rows_; }
  OrderStepController& controller() { return ctrl_; }
  const OrderStepController& controller() const { return ctrl_; }

 private:
  void build(const T& H, int rows) {
    for (int j = 1; j <= rows; ++j) {
      sub_->increment(y0_, H, n_[static_cast<std::size_t>(j)], tableau_.slot(j));
      tableau_.extrapolate(j);
    }
    used_ = rows;
  }
  bool accept(int kc, double habs) {
    used_ = kc;
    ctrl_.accepted(kc, habs);
    return true;
  }
  bool reject(int kc) {
    ctrl_.rejected(kc);
    return false;
  }

  Substep* sub_ = nullptr;
  const T* y0_ = nullptr;
  int dim_ = 0, rows_ = 0, used_ = 0;
  std::vector<int> n_;
  ExtrapolationTableau<T> tableau_;
  OrderStepController ctrl_;
  Norm norm_;
};

}  // namespace loschmidt
