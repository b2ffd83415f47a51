// Many systems of one body count integrated over a pool of std::threads: the engine of sweeps over
// thousands of initial conditions.
//
// Tasks (BatchTask):
//   integrate  each system from t = 0 to its t_end;
//   roundtrip  a Loschmidt test (METHODS.md section 4): forward to t_end, negate every velocity,
//              forward another t_end, negate again; then the distances to the start, computed in
//              the working precision by phase_space_distances (nbody/diagnostics.hpp), with
//              exactly the operations of loschmidt.phase_distances (so a batch and a
//              single-system run agree bit for bit).
// The method comes from the one dispatch (methods/dispatch.hpp); every option of a single run,
// stop conditions included, applies to each system.
//
// Determinism: every system is integrated on its own, by the same single-system integrator with
// the same options, into its own output slots; nothing is shared between systems but the stop
// flag. So the results are the same bits whatever the thread count and whichever worker picks which
// system (scheduling is dynamic: an atomic counter hands out the next index). Wall-clock budgets
// (Options::max_wall_time, per leg) are the one thing that can make a rerun differ.
//
// Stopping: the calling thread does no integration; it sleeps on a condition variable and wakes
// every monitor_interval to call monitor(done) (the bindings check Python signals there, so workers
// never touch Python). When monitor returns true a shared flag is set; every running integration
// sees it at its next poll (Status::interrupted) and no further system is started. Systems that
// never started are reported as interrupted with zero steps and their state left at the start.
//
// Errors: an exception thrown while integrating one system (std::invalid_argument for bad options)
// stops the batch; the one of the lowest system index is rethrown on the calling thread after every
// worker has been joined.
#pragma once

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <cstddef>
#include <exception>
#include <functional>
#include <limits>
#include <mutex>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include <loschmidt/methods/dispatch.hpp>
#include <loschmidt/methods/options.hpp>
#include <loschmidt/methods/status.hpp>
#include <loschmidt/nbody/diagnostics.hpp>
#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

// A single-system integrator with the contract of integrate_gbs (from t to t_end, no outputs),
// from the one method dispatch (methods/dispatch.hpp). The chain options (regularization, radii,
// post-Newtonian terms, report) belong to method "chain"; the batch gives each worker its own copy,
// with the system's radii and its own report.
template <class T>
using BatchIntegrator = Integrator<T>;

// By name, through the dispatch (kept for callers that hold a name).
template <class T, bool Compensated>
BatchIntegrator<T> batch_integrator(const std::string& method) {
  return integrator<T, Compensated>(method_from_name(method));
}

enum class BatchTask : int { integrate = 0, roundtrip = 1 };

// M systems of n bodies, flat: m[i*n + b], x[i*3n + 3b + d] (system i, body b, coordinate d).
template <class T>
struct BatchInput {
  int count = 0;         // M
  int n = 0;             // bodies per system
  std::vector<T> m;      // M * n
  std::vector<T> x, v;   // M * 3n each
  std::vector<T> t_end;  // 1 value shared by all systems, or M values
};

// Per-system outcome, same flat layout as the input.
template <class T>
struct BatchOutput {
  // integrate: the final state and the time reached; roundtrip: the state at the turning point
  // (after the forward leg, before the negation) and the time reached on the forward leg.
  std::vector<T> x, v, t;
  // roundtrip only: the state after the return leg and the final negation (comparable with the
  // start), and the time reached on the return leg. NaN when the forward leg did not succeed.
  std::vector<T> back_x, back_v, back_t;
  // integrate: the run's status; roundtrip: the forward leg's status if it did not succeed, else
  // the return leg's. forward_status: the forward leg's alone.
  std::vector<int> status, forward_status;
  // Summed over both legs for a round trip.
  std::vector<long long> steps, rejected, evaluations;
  std::vector<double> wall_time;
  // |E - E0| / |E0| (absolute when E0 = 0) in the working precision: energy_error at the end
  // (integrate: the final state; roundtrip: the returned state against the start),
  // forward_energy_error at the turning point.
  std::vector<T> energy_error, forward_energy_error;
  // roundtrip only: sqrt(sum |dx|^2 + |dv|^2), sqrt(sum |dx|^2), sqrt(sum |dv|^2) between the
  // returned state and the start; NaN unless both legs succeeded.
  std::vector<T> delta, delta_position, delta_velocity;
  // Method "chain": the pair in contact (status collision) or merging (status merger), -1 when
  // none, on the leg that ended the run; re-chainings summed over both legs.
  std::vector<int> pair_i, pair_j;
  std::vector<long long> rechains;
  // Status stop_condition (Options::stop, any method): the condition met (StopCondition as int;
  // 0 none) and the body (stop_i; the escaper) or pair (stop_i, stop_j) that met it, -1 when none.
  // With a stop condition, integrate gives the time it was met in t and the state there: the
  // lifetime of a system that breaks up, with no stepping loop outside the engine.
  std::vector<int> stopped_by, stop_i, stop_j;
};

struct BatchSettings {
  // Per-system options (stop conditions and fixed-step mode included); options.poll is replaced
  // by the batch's stop flag.
  Options options;
  // Method "chain": per-system options; chain.radii and chain.report are replaced per system by
  // radii below and a worker-local report.
  ChainOptions chain;
  // Body radii: empty (no collision test), n values shared by all systems, or count * n values.
  std::vector<double> radii;
  int threads = 1;  // worker threads (at least 1, at most the number of systems)
  std::chrono::milliseconds monitor_interval{10};
};

namespace detail {

template <class T>
T relative_energy_error(const T& e1, const T& e0) {
  using std::abs;
  using std::isfinite;
  // An energy that overflows (or a non-finite state) has no meaningful error: +inf, never NaN.
  if (!isfinite(e0) || !isfinite(e1)) return T(std::numeric_limits<double>::infinity());
  return e0 == T(0) ? abs(e1 - e0) : abs((e1 - e0) / e0);
}

template <class T>
void record_stop(BatchOutput<T>& out, std::size_t i, const Stats& st) {
  out.stopped_by[i] = static_cast<int>(st.stopped_by);
  out.stop_i[i] = st.stop_i;
  out.stop_j[i] = st.stop_j;
}

template <class T>
void add_stats(BatchOutput<T>& out, std::size_t i, const Stats& st) {
  out.steps[i] += st.steps;
  out.rejected[i] += st.rejected;
  out.evaluations[i] += st.evaluations;
  out.wall_time[i] += st.wall_time;
}

// One system, start to finish; s is the worker's scratch state (n bodies).
template <class T>
void run_one(BatchTask task, BatchIntegrator<T> integrate, const BatchInput<T>& in, BatchOutput<T>& out,
             std::size_t i, State<T>& s, const Options& opt, ChainOptions& copt,
             const std::vector<double>& radii) {
  const std::size_t n = static_cast<std::size_t>(in.n);
  const std::size_t k = 3 * n;
  const T* m0 = in.m.data() + i * n;
  const T* x0 = in.x.data() + i * k;
  const T* v0 = in.v.data() + i * k;
  std::copy(m0, m0 + n, s.m.begin());
  std::copy(x0, x0 + k, s.x.begin());
  std::copy(v0, v0 + k, s.v.begin());
  const T& t_end = in.t_end.size() == 1 ? in.t_end[0] : in.t_end[i];
  if (radii.size() == n) copt.radii = radii;
  else if (!radii.empty()) copt.radii.assign(radii.begin() + static_cast<std::ptrdiff_t>(i * n),
                                             radii.begin() + static_cast<std::ptrdiff_t>((i + 1) * n));
  ChainReport report;
  copt.report = &report;
  const bool pn = copt.pn_orders != 0;

  const T e0 = energy(s);
  T t = T(0);
  const Stats fwd = integrate(s, t, t_end, opt, copt);
  std::copy(s.x.begin(), s.x.end(), out.x.begin() + static_cast<std::ptrdiff_t>(i * k));
  std::copy(s.v.begin(), s.v.end(), out.v.begin() + static_cast<std::ptrdiff_t>(i * k));
  out.t[i] = t;
  out.forward_status[i] = static_cast<int>(fwd.status);
  out.status[i] = static_cast<int>(fwd.status);
  // With post-Newtonian terms the Newtonian energy is not conserved: the error of the energy
  // bookkeeping (ChainReport::pn_energy_error), as integrate reports it.
  out.forward_energy_error[i] = pn ? T(report.pn_energy_error) : relative_energy_error(energy(s), e0);
  out.energy_error[i] = out.forward_energy_error[i];
  out.steps[i] = out.rejected[i] = out.evaluations[i] = 0;
  out.wall_time[i] = 0.0;
  out.pair_i[i] = report.collision_i;
  out.pair_j[i] = report.collision_j;
  out.rechains[i] = report.rechains;
  record_stop(out, i, fwd);
  add_stats(out, i, fwd);
  if (task == BatchTask::integrate || fwd.status != Status::success) return;

  for (T& q : s.v) q = -q;
  T tb = T(0);
  report = ChainReport();
  const Stats back = integrate(s, tb, t_end, opt, copt);
  for (T& q : s.v) q = -q;
  std::copy(s.x.begin(), s.x.end(), out.back_x.begin() + static_cast<std::ptrdiff_t>(i * k));
  std::copy(s.v.begin(), s.v.end(), out.back_v.begin() + static_cast<std::ptrdiff_t>(i * k));
  out.back_t[i] = tb;
  out.status[i] = static_cast<int>(back.status);
  // The returned state against the start: valid for any time-reversible dynamics, PN included.
  out.energy_error[i] = relative_energy_error(energy(s), e0);
  out.pair_i[i] = report.collision_i;
  out.pair_j[i] = report.collision_j;
  out.rechains[i] += report.rechains;
  record_stop(out, i, back);
  add_stats(out, i, back);
  if (back.status == Status::success)
    phase_space_distances(s.x.data(), s.v.data(), x0, v0, static_cast<int>(k), out.delta[i], out.delta_position[i],
                          out.delta_velocity[i]);
}

// Outputs sized and set to "never started": state at the start, t = 0, status interrupted.
template <class T>
void prepare_output(BatchTask task, const BatchInput<T>& in, BatchOutput<T>& out) {
  const std::size_t count = static_cast<std::size_t>(in.count);
  const T nan = T(std::numeric_limits<double>::quiet_NaN());
  out.x = in.x;
  out.v = in.v;
  out.t.assign(count, T(0));
  if (task == BatchTask::roundtrip) {
    out.back_x.assign(in.x.size(), nan);
    out.back_v.assign(in.v.size(), nan);
    out.back_t.assign(count, nan);
  }
  const int interrupted = static_cast<int>(Status::interrupted);
  out.status.assign(count, interrupted);
  out.forward_status.assign(count, interrupted);
  out.steps.assign(count, 0);
  out.rejected.assign(count, 0);
  out.evaluations.assign(count, 0);
  out.wall_time.assign(count, 0.0);
  out.energy_error.assign(count, T(0));
  out.forward_energy_error.assign(count, T(0));
  out.pair_i.assign(count, -1);
  out.pair_j.assign(count, -1);
  out.rechains.assign(count, 0);
  out.stopped_by.assign(count, 0);
  out.stop_i.assign(count, -1);
  out.stop_j.assign(count, -1);
  if (task == BatchTask::roundtrip) {
    out.delta.assign(count, nan);
    out.delta_position.assign(count, nan);
    out.delta_velocity.assign(count, nan);
  }
}

}  // namespace detail

// Runs the batch; monitor(done) is called on the calling thread about every monitor_interval with
// the number of systems finished so far, and stops the batch by returning true (may be empty).
// Throws std::invalid_argument for inconsistent input before any work.
template <class T>
BatchOutput<T> run_batch(BatchTask task, BatchIntegrator<T> integrate, const BatchInput<T>& in,
                         const BatchSettings& settings, const std::function<bool(std::size_t)>& monitor = {}) {
  const std::size_t count = static_cast<std::size_t>(in.count);
  const std::size_t n = static_cast<std::size_t>(in.n);
  if (in.count < 0 || in.n < 1) throw std::invalid_argument("batch: need at least one body per system");
  if (in.m.size() != count * n || in.x.size() != 3 * count * n || in.v.size() != 3 * count * n)
    throw std::invalid_argument("batch: sizes of masses, positions and velocities do not match M x N");
  if (!(in.t_end.size() == 1 || (in.t_end.size() == count && count > 0)))
    throw std::invalid_argument("batch: t_end must hold one value or one per system");
  if (integrate == nullptr) throw std::invalid_argument("batch: no integrator");
  if (!(settings.radii.empty() || settings.radii.size() == n || settings.radii.size() == count * n))
    throw std::invalid_argument("radii: expected none, one per body or one per body of every system");

  BatchOutput<T> out;
  detail::prepare_output(task, in, out);
  if (count == 0) return out;
  const std::size_t threads =
      std::min<std::size_t>(count, static_cast<std::size_t>(std::max(1, settings.threads)));

  std::atomic<std::size_t> next{0};
  std::atomic<std::size_t> done{0};
  std::atomic<bool> stop{false};
  std::mutex mu;
  std::condition_variable cv;
  std::size_t running = 0;  // workers not yet finished (guarded by mu)
  std::size_t error_index = count;
  std::exception_ptr error;

  auto worker = [&]() {
    Options opt = settings.options;
    opt.poll = [&stop]() { return stop.load(std::memory_order_relaxed); };
    ChainOptions copt = settings.chain;
    State<T> s(in.n);
    while (!stop.load(std::memory_order_relaxed)) {
      const std::size_t i = next.fetch_add(1, std::memory_order_relaxed);
      if (i >= count) break;
      try {
        detail::run_one(task, integrate, in, out, i, s, opt, copt, settings.radii);
      } catch (...) {
        std::lock_guard<std::mutex> lock(mu);
        if (i < error_index) {
          error_index = i;
          error = std::current_exception();
        }
        stop.store(true);
      }
      done.fetch_add(1, std::memory_order_relaxed);
    }
    std::lock_guard<std::mutex> lock(mu);
    --running;
    cv.notify_all();
  };

  std::vector<std::thread> pool;
  pool.reserve(threads);
  try {
    for (std::size_t w = 0; w < threads; ++w) {
      {
        std::lock_guard<std::mutex> lock(mu);
        ++running;
      }
      try {
        pool.emplace_back(worker);
      } catch (...) {
        std::lock_guard<std::mutex> lock(mu);
        --running;
        throw;
      }
    }
  } catch (...) {
    if (pool.empty()) throw;  // no thread at all could be started
    // Fewer threads than asked: the ones running share the work.
  }

  {
    std::unique_lock<std::mutex> lock(mu);
    bool asked = false;
    while (running > 0) {
      cv.wait_for(lock, settings.monitor_interval);
      if (running == 0 || asked || !monitor) continue;
      lock.unlock();
      const bool halt = monitor(done.load(std::memory_order_relaxed));
      lock.lock();
      if (halt) {
        asked = true;
        stop.store(true);
      }
    }
  }
  for (auto& th : pool) th.join();
  if (error) std::rethrow_exception(error);
  return out;
}

}  // namespace loschmidt
