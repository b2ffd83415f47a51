// What the caller asks of an integration (tolerances, budgets, order limit, interrupt polling) and
// what it gets back besides the state (status and counters). Plain data, shared by every method.
#pragma once

#include <functional>

#include <loschmidt/methods/status.hpp>

namespace loschmidt {

// Step-number sequence n_1, n_2, ... of the extrapolation tableau (substeps per macro step in row j).
enum class StepSequence : int {
  harmonic = 0,     // 2, 4, 6, 8, ...: the classical choice for Gragg's midpoint rule
  bulirsch = 1,     // 2, 4, 6, 8, 12, 16, 24, 32, ...: n_j = 2 n_{j-2}
  romberg = 2,      // 2, 4, 8, 16, ...: doubling; expensive, for comparison only
  consecutive = 3   // 1, 2, 3, 4, ...: the default. Legal because the Stormer/leapfrog substep is a
                    // symmetric one-step method (even h-expansion for every n, not only even n).
                    // Measured here: 20-30% fewer force evaluations than harmonic at equal
                    // accuracy (Kepler e = 0.9, f64 and dd; Pythagorean problem, dd).
};

// What ends a run early besides the budgets (Options::stop): a set of conditions, one bit each;
// any one of them ends the run with Status::stop_condition. Tested by methods/stop.hpp, which is
// the one place a new condition is implemented (a pair-distance stop for scattering, say: its bit
// here, its parameters in Options, its test in StopMonitor::met).
enum class StopCondition : int {
  none = 0,
  escape = 1,        // a body escapes (nbody/escape.hpp)
  pair_distance = 2  // a pair comes closer than Options::stop_distance (tested by the event log,
                     // methods/events.hpp, on every accepted step; needs Options::events)
};
// Every defined condition; anything else is refused by validate (methods/validate.hpp).
inline constexpr int stop_conditions_known =
    static_cast<int>(StopCondition::escape) | static_cast<int>(StopCondition::pair_distance);

class EventLog;  // methods/events.hpp

constexpr StopCondition operator|(StopCondition a, StopCondition b) {
  return static_cast<StopCondition>(static_cast<int>(a) | static_cast<int>(b));
}
// condition is in the set
constexpr bool stops_on(StopCondition set, StopCondition condition) {
  return (static_cast<int>(set) & static_cast<int>(condition)) != 0;
}
constexpr bool known_stop(StopCondition set) { return (static_cast<int>(set) & ~stop_conditions_known) == 0; }

struct Options {
  // Scaled error norm: sc_i = atol + rtol * max(|y0_i|, |y1_i|) over positions and velocities;
  // a step is accepted when the RMS over all 6n components of (error_i / sc_i) is at most 1. A
  // component with exactly zero error contributes nothing (so z in a planar problem is harmless
  // with atol = 0); a nonzero error on a zero scale counts as infinite.
  double rtol = 1e-12;
  double atol = 0.0;
  // Budget of attempted (accepted + rejected) macro steps. The default is high enough never to
  // end a useful run (1e9 steps take hours) and low enough that a run that cannot progress ends;
  // Python reads it from here (options.DEFAULT_MAX_STEPS).
  long long max_steps = 1000000000;
  // Wall-clock budget in seconds; 0 means none.
  double max_wall_time = 0.0;
  // Largest number of rows of the extrapolation tableau (the order reached is 2 * rows); 0 means
  // scalar_traits<T>::default_max_order(). At least 3.
  int max_order = 0;
  // Magnitude of the first step; 0 means chosen automatically. The sign follows the direction.
  double initial_step = 0.0;
  // Step floor: a step whose size falls below min_step_fraction * max(|t|, |t_start|, |H_0|)
  // (H_0: the first step) ends the run with Status::step_underflow; steps shortened to land on a
  // requested time are exempt. 0 means 16 * scalar_traits<T>::epsilon().
  double min_step_fraction = 0.0;
  // Second step floor (gbs): after 1000 accepted steps, a step smaller than min_step_ratio times
  // the mean accepted step so far (time covered / accepted steps) also ends the run with
  // Status::step_underflow. It catches the Zeno-like crawl into a collision singularity in
  // Cartesian coordinates, where in dd or qd the steps shrink for millions of steps while staying
  // above the first floor (a head-on collision from rest in dd: 10 million steps in 20 s without
  // reaching it). 2^-50 (about 1e-15) is far below the step of any close encounter the gbs method
  // can integrate usefully (use the chain method there); 0 switches the test off. The chain
  // method, whose steps are fictitious-time steps, applies it to the physical time instead: after
  // 1000 accepted steps, a mean advance of t per step below min_step_ratio times the requested
  // span ends the run (RunBudget::crawling_in_time).
  double min_step_ratio = 0x1p-50;
  // Called every few milliseconds (at a step boundary); returning true stops the run with
  // Status::interrupted. Empty means never called.
  std::function<bool()> poll;
  // Substep sequence of the extrapolation tableau.
  StepSequence sequence = StepSequence::consecutive;
  // Stop conditions (a set; methods/stop.hpp), tested in double every check_every accepted steps
  // by every method: escape ends the run with Status::stop_condition (and t the time reached) as
  // soon as a body escapes by the practical test of nbody/escape.hpp, with distance_factor its k.
  StopCondition stop = StopCondition::none;
  int check_every = 10;
  double distance_factor = 10.0;
  // Event log (methods/events.hpp), owned by the caller: when set, every method hands it the
  // physical state after each accepted step; it records pericentre passages and closest
  // approaches, and tests StopCondition::pair_distance: the pair (stop_pair_i, stop_pair_j), or
  // any pair when stop_pair_i < 0, closer than stop_distance within a step ends the run with
  // Status::stop_condition at the end of that step. One log per run: not for the batch driver,
  // whose workers share the Options.
  EventLog* events = nullptr;
  double stop_distance = 0.0;
  int stop_pair_i = -1, stop_pair_j = -1;
  // Fixed-step mode (every method; for measuring the order of the method): when > 0, every step
  // has this magnitude (the sign follows the direction; the step before each output time and
  // t_end is shortened to land on it), uses exactly max_order rows of the tableau (any number
  // >= 1 here; 0 means the default), and is always accepted: no error control, no order control,
  // no step floor. initial_step is not used. The chain method reads it, like initial_step, as a
  // physical time: its fixed fictitious step is U(0) times it (chain.hpp).
  double fixed_step = 0.0;
};

struct Stats {
  Status status = Status::success;
  long long steps = 0;        // accepted macro steps
  long long rejected = 0;     // rejected macro steps
  long long evaluations = 0;  // force (right-hand side) evaluations
  double wall_time = 0.0;     // seconds spent inside the integrator
  // Status::stop_condition: the condition met and the body (stop_i; the escaper for escape) or
  // pair (stop_i < stop_j) that met it; none and -1 otherwise.
  StopCondition stopped_by = StopCondition::none;
  int stop_i = -1, stop_j = -1;
};

}  // namespace loschmidt
