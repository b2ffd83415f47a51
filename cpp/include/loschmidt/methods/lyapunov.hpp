// The finite-time maximal Lyapunov exponent of a Newtonian N-body system from the variational
// equations, integrated beside the orbit by the same Gragg-Bulirsch-Stoer driver (gbs.hpp) in the
// same precision (Benettin, Galgani & Strelcyn 1976: the tangent vector along the orbit,
// renormalised and its log growth accumulated).
//
// The augmented system. With x'' = a(x) and a displacement w = (dx, dv):
//   dx' = dv,  dv' = J(x) dx   (J: the tidal tensor, nbody/variational.hpp),
// so (x, dx)'' = (a(x), J(x) dx) is again second order and takes the same symmetric Stormer
// substep and the same extrapolation. y = (x[Dn], dx[Dn], v[Dn], dv[Dn]).
//
// Error control on the orbit only: the error norm covers x and v and averages over 6n components
// exactly as for integrate_gbs (ErrorScale::block/stride), so the tangent vector, whose size is
// arbitrary, never drives the step size or the order. Since the orbit's arithmetic does not depend
// on the tangent either, the orbit is bit for bit the one integrate_gbs computes with the same
// options and output times. The tangent is extrapolated with the same rows as the orbit, so its
// truncation error is of the order of the orbit's (it obeys a linear equation on the same time
// scales); it is not separately controlled.
//
// Renormalisation. The tangent equations are linear, so rescaling w only rescales the solution.
// After every accepted step whose tangent norm |w| (phase-space norm, sqrt(sum |dx_i|^2 + |dv_i|^2),
// in double) has left [1/renormalize, renormalize], w and its compensations are multiplied by the
// power of two 2^-e that brings |w| into [1, 2): exact in every scalar type, so the computed
// tangent is exactly 2^-E times the unrenormalised one (E the sum of the shifts), and
//   ln growth(t) = E ln 2 + ln |w(t)| - ln |w(0)|.
// Every operation of the tangent equations is homogeneous in w, so the choice of renormalize does
// not change a bit of the result except through overflow or underflow, which it exists to prevent.
#pragma once

#include <cmath>
#include <stdexcept>
#include <vector>

#include <loschmidt/methods/gbs.hpp>
#include <loschmidt/nbody/variational.hpp>

namespace loschmidt {

// q = (x[Dn], dx[Dn]), a(q) = (a(x), J(x) dx). The accelerations come from the three-pass kernel
// (the same bits as the single pass integrate_gbs uses in double), whose pair workspace then
// supplies the separations and 1/r^3 of the tangent accelerations.
template <class T, int D>
class VariationalForce {
 public:
  void setup(int n, const T* m) {
    n_ = n;
    m_ = m;
    pairs_.setup(n);
  }
  int components() const { return 2 * D * n_; }
  void operator()(const T* q, T* a) {
    accelerations_in<D>(n_, m_, q, a, pairs_);
    tangent_accelerations_in<D>(n_, m_, pairs_, q + D * n_, a + D * n_);
  }

 private:
  int n_ = 0;
  const T* m_ = nullptr;
  PairWorkspace<T> pairs_;
};

// What a Lyapunov run reports besides Stats and the final state and tangent.
struct LyapunovReport {
  double log_growth = 0.0;        // ln(|w(t)| / |w(0)|) at the time reached
  long long renormalizations = 0;  // rescalings of the tangent
};

// The Problem (gbs.hpp) of the orbit and its tangent vector.
template <class T, int D>
class VariationalProblem {
 public:
  using substep_type = StormerSubstep<T, VariationalForce<T, D>>;

  // tx, tv: the tangent (3n each, body-major; z parts zero when D = 2), updated by store().
  VariationalProblem(const State<T>& s, std::vector<T>& tx, std::vector<T>& tv, double renormalize)
      : n_(s.n), kd_(D * s.n), tx_(tx), tv_(tv), upper_(renormalize), lower_(1.0 / renormalize) {
    sub_.force().setup(n_, s.m.data());
    sub_.allocate();
    orbit_.setup(n_, s.m.data());
    double sum = 0.0;
    for (std::size_t i = 0; i < tx.size(); ++i) {
      const double a = to_double(tx[i]), b = to_double(tv[i]);
      sum += a * a + b * b;
    }
    log_norm0_ = 0.5 * std::log(sum);
  }

  substep_type& substep() { return sub_; }
  int dimension() const { return 4 * kd_; }
  int norm_count() const { return 6 * n_; }
  int error_block() const { return kd_; }       // x in [0, kd), v in [2 kd, 3 kd)
  int error_stride() const { return 2 * kd_; }

  void load(const State<T>& s, T* y) const {
    for (int i = 0; i < n_; ++i)
      for (int c = 0; c < D; ++c) {
        const std::size_t k = static_cast<std::size_t>(3 * i + c);
        const int j = D * i + c;
        y[j] = s.x[k];
        y[kd_ + j] = tx_[k];
        y[2 * kd_ + j] = s.v[k];
        y[3 * kd_ + j] = tv_[k];
      }
  }
  void store(const T* y, State<T>& s) {
    for (int i = 0; i < n_; ++i)
      for (int c = 0; c < D; ++c) {
        const std::size_t k = static_cast<std::size_t>(3 * i + c);
        const int j = D * i + c;
        s.x[k] = y[j];
        tx_[k] = y[kd_ + j];
        s.v[k] = y[2 * kd_ + j];
        tv_[k] = y[3 * kd_ + j];
      }
    log_growth_ = static_cast<double>(shift_) * std::log(2.0) + std::log(tangent_norm(y)) - log_norm0_;
  }

  // The first step of the orbit alone, as integrate_gbs chooses it.
  double initial_step(const std::vector<T>& y, double rtol, double atol, int order, double span) {
    std::vector<T> yo(static_cast<std::size_t>(2 * kd_));
    for (int j = 0; j < kd_; ++j) {
      yo[static_cast<std::size_t>(j)] = y[static_cast<std::size_t>(j)];
      yo[static_cast<std::size_t>(kd_ + j)] = y[static_cast<std::size_t>(2 * kd_ + j)];
    }
    if (!orbit_.begin(yo.data())) return 0.0;  // cannot happen: the full system began
    return detail::initial_step_size(orbit_, yo, rtol, atol, order, span, 6 * n_);
  }

  // Renormalise by an exact power of two when |w| has left [1/renormalize, renormalize].
  void accepted(T* y, T* comp) {
    using std::ldexp;
    const double norm = tangent_norm(y);
    if (!(norm > upper_ || norm < lower_) || !(norm > 0.0) || !std::isfinite(norm)) return;
    const int e = std::ilogb(norm);
    for (int part = 1; part <= 3; part += 2)
      for (int j = part * kd_; j < (part + 1) * kd_; ++j) {
        y[j] = ldexp(y[j], -e);
        if (comp) comp[j] = ldexp(comp[j], -e);
      }
    shift_ += e;
    ++renormalizations_;
  }

  long long evaluations() const { return sub_.evaluations + orbit_.evaluations; }
  double log_growth() const { return log_growth_; }  // at the last store()
  long long renormalizations() const { return renormalizations_; }

 private:
  double tangent_norm(const T* y) const {
    double sum = 0.0;
    for (int part = 1; part <= 3; part += 2)
      for (int j = part * kd_; j < (part + 1) * kd_; ++j) {
        const double a = to_double(y[j]);
        sum += a * a;
      }
    return std::sqrt(sum);
  }

  int n_, kd_;
  std::vector<T>& tx_;
  std::vector<T>& tv_;
  double upper_, lower_;
  double log_norm0_ = 0.0, log_growth_ = 0.0;
  long long shift_ = 0, renormalizations_ = 0;
  substep_type sub_;
  NewtonianStormerSubstep<T, D> orbit_;  // for the first step only
};

// Integrate s and the tangent vector w = (tangent_x, tangent_v) (3n each, body-major, not all zero)
// from t to t_end with the gbs method; the contract of integrate_gbs otherwise (statuses, budgets,
// exact landing on output_times, Options::fixed_step and Options::stop). on_output(index, t, s,
// log_growth) is called on landing on output_times[index], log_growth = ln(|w(t)| / |w(0)|). On
// return, tangent_x and tangent_v hold the final, renormalised tangent and report (optional) the
// final log growth. renormalize: the bound on |w| (in [2, 2^300]); see the file comment.
// A planar system with a planar tangent (z parts exactly zero) is integrated in two dimensions.
template <class T, bool Compensated = false, class Observer>
Stats integrate_lyapunov(State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
                         std::vector<T>& tangent_x, std::vector<T>& tangent_v, Observer&& on_output,
                         const Options& opt, double renormalize = 1e16, LyapunovReport* report = nullptr,
                         const StepControlTuning& tune = {}) {
  using clock = std::chrono::steady_clock;
  using std::isfinite;
  const auto clock_start = clock::now();
  Stats st;
  auto finish = [&](Status status) {
    st.status = status;
    st.wall_time = std::chrono::duration<double>(clock::now() - clock_start).count();
    return st;
  };

  validate_run("integrate_lyapunov", s, t, t_end, output_times, opt);
  const int rows = table_rows(opt, scalar_traits<T>::default_max_order(), opt.sequence, "integrate_lyapunov");
  const std::size_t k = 3 * static_cast<std::size_t>(s.n);
  if (tangent_x.size() != k || tangent_v.size() != k)
    throw std::invalid_argument("integrate_lyapunov: the tangent needs 3n position and 3n velocity components");
  bool nonzero = false;
  for (std::size_t i = 0; i < k; ++i) {
    if (!isfinite(tangent_x[i]) || !isfinite(tangent_v[i]))
      throw std::invalid_argument("integrate_lyapunov: the tangent must be finite");
    nonzero = nonzero || tangent_x[i] != T(0) || tangent_v[i] != T(0);
  }
  if (!nonzero) throw std::invalid_argument("integrate_lyapunov: the tangent must not be zero");
  if (!(renormalize >= 2.0 && renormalize <= 0x1p300))
    throw std::invalid_argument("integrate_lyapunov: renormalize must lie in [2, 2^300]");
  if (report) *report = LyapunovReport{};
  if (t == t_end) return finish(Status::success);
  if (!s.finite()) return finish(Status::nonfinite);

  auto run = [&](auto& pb) {
    auto observe = [&](int index, const T& tt, const State<T>& ss) { on_output(index, tt, ss, pb.log_growth()); };
    const Stats r = detail::run_extrapolation<T, Compensated>(pb, s, t, t_end, output_times, observe, opt, tune,
                                                              rows, clock_start);
    if (report) {
      report->log_growth = pb.log_growth();
      report->renormalizations = pb.renormalizations();
    }
    return r;
  };
  bool planar = detail::is_planar(s);
  for (std::size_t i = 0; i < static_cast<std::size_t>(s.n) && planar; ++i)
    planar = tangent_x[3 * i + 2] == T(0) && tangent_v[3 * i + 2] == T(0);
  if (planar) {
    VariationalProblem<T, 2> pb(s, tangent_x, tangent_v, renormalize);
    return run(pb);
  }
  VariationalProblem<T, 3> pb(s, tangent_x, tangent_v, renormalize);
  return run(pb);
}

}  // namespace loschmidt
