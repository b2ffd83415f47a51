// The one argument check of every driver (integrate_gbs, integrate_chain, integrate_lyapunov and
// through them the batch): the Options, the state, the times and the output times, and the number
// of tableau rows. Throws std::invalid_argument "who: what" before any work; who names the entry
// point. Method-specific arguments (chain radii, post-Newtonian terms, the tangent of a Lyapunov
// run) are checked by their method after this.
#pragma once

#include <cmath>
#include <stdexcept>
#include <string>
#include <vector>

#include <loschmidt/methods/extrapolation.hpp>
#include <loschmidt/methods/options.hpp>
#include <loschmidt/nbody/state.hpp>

namespace loschmidt {

namespace detail {
[[noreturn]] inline void invalid(const char* who, const char* what) {
  throw std::invalid_argument(std::string(who) + ": " + what);
}
}  // namespace detail

// The Options alone.
inline void validate(const Options& opt, const char* who) {
  using detail::invalid;
  if (!(opt.rtol >= 0) || !(opt.atol >= 0) || !(opt.rtol > 0 || opt.atol > 0))
    invalid(who, "rtol and atol must be >= 0 and not both zero");
  if (opt.max_steps < 1) invalid(who, "max_steps must be >= 1");
  if (!(opt.max_wall_time >= 0)) invalid(who, "max_wall_time must be >= 0");
  if (!(opt.initial_step >= 0) || !std::isfinite(opt.initial_step)) invalid(who, "initial_step must be finite and >= 0");
  if (!(opt.min_step_fraction >= 0)) invalid(who, "min_step_fraction must be >= 0");
  if (!(opt.min_step_ratio >= 0) || !std::isfinite(opt.min_step_ratio))
    invalid(who, "min_step_ratio must be finite and >= 0");
  if (!(opt.fixed_step >= 0) || !std::isfinite(opt.fixed_step)) invalid(who, "fixed_step must be finite and >= 0");
  if (!known_stop(opt.stop)) invalid(who, "unknown stop condition");
  if (opt.check_every < 1) invalid(who, "check_every must be >= 1");
  if (!(opt.distance_factor >= 0) || !std::isfinite(opt.distance_factor))
    invalid(who, "distance_factor must be finite and >= 0");
  if (stops_on(opt.stop, StopCondition::pair_distance)) {
    if (opt.events == nullptr) invalid(who, "the pair_distance stop needs an event log (Options::events)");
    if (!(opt.stop_distance > 0) || !std::isfinite(opt.stop_distance))
      invalid(who, "stop_distance must be finite and > 0");
  }
}

// The number of tableau rows: Options::max_order, 0 resolved to default_rows (the method's
// default for the scalar type); at least 3 (1 in fixed-step mode, which needs no error estimate)
// and at most what the step sequence supports.
inline int table_rows(const Options& opt, int default_rows, StepSequence seq, const char* who) {
  const int rows = opt.max_order > 0 ? opt.max_order : default_rows;
  if (rows < (opt.fixed_step > 0 ? 1 : 3) || rows > sequence_max_rows(seq))
    detail::invalid(who, "max_order out of range for the step sequence");
  return rows;
}

// A whole run: the state (consistent, at least one body), finite t and t_end, the options, and
// output_times sorted in the direction of integration within (t, t_end].
template <class T>
void validate_run(const char* who, const State<T>& s, const T& t, const T& t_end, const std::vector<T>& output_times,
                  const Options& opt) {
  using detail::invalid;
  using std::isfinite;
  s.require_consistent();
  if (s.n < 1) invalid(who, "need at least one body");
  if (!isfinite(t) || !isfinite(t_end)) invalid(who, "t and t_end must be finite");
  validate(opt, who);
  if (stops_on(opt.stop, StopCondition::pair_distance) && opt.stop_pair_i >= 0 &&
      (opt.stop_pair_i == opt.stop_pair_j || opt.stop_pair_i >= s.n || opt.stop_pair_j < 0 || opt.stop_pair_j >= s.n))
    invalid(who, "stop_pair_i and stop_pair_j must be two different bodies (or stop_pair_i < 0 for any pair)");
  const bool forward = t_end > t;
  T prev = t;
  for (const T& q : output_times) {
    if (!isfinite(q)) invalid(who, "output_times must be finite");
    const bool ok = forward ? (q > prev || (q == prev && q != t)) && q <= t_end
                            : (q < prev || (q == prev && q != t)) && q >= t_end;
    if (!ok) invalid(who, "output_times must be sorted in the direction of integration and lie in (t, t_end]");
    prev = q;
  }
}

}  // namespace loschmidt
