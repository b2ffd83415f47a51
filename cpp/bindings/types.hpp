// The typed boundary between Python and the engine: the engine's Options, ChainOptions and Stats
// bound as classes (their defaults are the C++ ones), and the two records every kernel returns:
// RunRecord (integrate_<p>, lyapunov_<p>) and BatchRecord (batch_integrate_<p>, batch_roundtrip_<p>).
// Their fields are documented in python/loschmidt/_core.pyi; loschmidt.engine is their one reader.
#pragma once
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <limits>
#include <utility>

#include "loschmidt/methods/chain.hpp"
#include "loschmidt/methods/options.hpp"

namespace loschmidt::bind {
namespace py = pybind11;

// The event log of one run (methods/events.hpp), as numpy columns of equal length: t (double),
// i, j (int64; j = -1 for the outer orbit of three bodies), distance (double).
struct EventColumns {
  py::object t, i, j, distance;
};
struct EventRecord {
  EventColumns passages, outer, closest;
  long long dropped = 0;
};

// One single-system run: the final state (limbs), its time, the statistics and what the methods
// report besides; the Lyapunov fields are None (and nan, 0) for integrate.
struct RunRecord {
  py::object positions, velocities, t;
  Stats stats;
  double energy_error = 0.0;
  int collision_i = -1, collision_j = -1;
  long long rechains = 0;
  py::object trajectory_t = py::none(), trajectory_positions = py::none(), trajectory_velocities = py::none();
  py::object output_t = py::none(), output_log_growth = py::none();
  double log_growth = std::numeric_limits<double>::quiet_NaN();
  long long renormalizations = 0;
  py::object tangent_positions = py::none(), tangent_velocities = py::none();
  py::object events = py::none();  // an EventRecord when the run kept an event log
};

// One batch: per-system columns (first axis M). For task "integrate" the returned_* and delta*
// fields are None; for "roundtrip" positions, velocities and t are the turning point.
struct BatchRecord {
  py::object positions, velocities, t;
  py::object status, forward_status, steps, rejected, evaluations, wall_time, energy_error, forward_energy_error;
  py::object pair_i, pair_j, rechains, stopped_by, stop_i, stop_j;
  py::object returned_positions = py::none(), returned_velocities = py::none(), returned_t = py::none();
  py::object delta = py::none(), delta_position = py::none(), delta_velocity = py::none();
};

inline void register_types(py::module_& m) {
  py::class_<Options>(m, "Options", "The engine's options of one run (methods/options.hpp); C++ defaults.")
      .def(py::init<>())
      .def_readwrite("rtol", &Options::rtol)
      .def_readwrite("atol", &Options::atol)
      .def_readwrite("max_steps", &Options::max_steps)
      .def_readwrite("max_wall_time", &Options::max_wall_time)
      .def_readwrite("max_order", &Options::max_order)
      .def_readwrite("initial_step", &Options::initial_step)
      .def_readwrite("min_step_fraction", &Options::min_step_fraction)
      .def_readwrite("min_step_ratio", &Options::min_step_ratio)
      .def_property(
          "sequence", [](const Options& o) { return static_cast<int>(o.sequence); },
          [](Options& o, int v) { o.sequence = static_cast<StepSequence>(v); })
      .def_property(
          "stop", [](const Options& o) { return static_cast<int>(o.stop); },
          [](Options& o, int v) { o.stop = static_cast<StopCondition>(v); })
      .def_readwrite("check_every", &Options::check_every)
      .def_readwrite("distance_factor", &Options::distance_factor)
      .def_readwrite("fixed_step", &Options::fixed_step)
      .def_readwrite("stop_distance", &Options::stop_distance)
      .def_property(
          "stop_pair", [](const Options& o) { return std::make_pair(o.stop_pair_i, o.stop_pair_j); },
          [](Options& o, const std::pair<int, int>& p) {
            o.stop_pair_i = p.first;
            o.stop_pair_j = p.second;
          });

  py::class_<ChainOptions>(m, "ChainOptions", "The chain method's options (methods/chain.hpp); C++ defaults.")
      .def(py::init<>())
      .def_property(
          "regularization", [](const ChainOptions& o) { return static_cast<int>(o.regularization); },
          [](ChainOptions& o, int v) { o.regularization = static_cast<ChainRegularization>(v); })
      .def_readwrite("radii", &ChainOptions::radii)
      .def_readwrite("pn_orders", &ChainOptions::pn_orders)
      .def_readwrite("light_speed", &ChainOptions::light_speed)
      .def_readwrite("merger_factor", &ChainOptions::merger_factor);

  py::class_<Stats>(m, "Stats", "Status and counters of one run (methods/options.hpp).")
      .def(py::init<>())
      .def_property_readonly("status", [](const Stats& s) { return static_cast<int>(s.status); })
      .def_readonly("steps", &Stats::steps)
      .def_readonly("rejected", &Stats::rejected)
      .def_readonly("evaluations", &Stats::evaluations)
      .def_readonly("wall_time", &Stats::wall_time)
      .def_property_readonly("stopped_by", [](const Stats& s) { return static_cast<int>(s.stopped_by); })
      .def_readonly("stop_i", &Stats::stop_i)
      .def_readonly("stop_j", &Stats::stop_j);

  py::class_<EventColumns>(m, "EventColumns", "Events as columns t, i, j, distance (see _core.pyi).")
      .def_readonly("t", &EventColumns::t)
      .def_readonly("i", &EventColumns::i)
      .def_readonly("j", &EventColumns::j)
      .def_readonly("distance", &EventColumns::distance);

  py::class_<EventRecord>(m, "EventRecord", "The event log of one run (methods/events.hpp; see _core.pyi).")
      .def_readonly("passages", &EventRecord::passages)
      .def_readonly("outer", &EventRecord::outer)
      .def_readonly("closest", &EventRecord::closest)
      .def_readonly("dropped", &EventRecord::dropped);

  py::class_<RunRecord>(m, "RunRecord", "What a single-system kernel returns (see _core.pyi).")
      .def_readonly("positions", &RunRecord::positions)
      .def_readonly("velocities", &RunRecord::velocities)
      .def_readonly("t", &RunRecord::t)
      .def_readonly("stats", &RunRecord::stats)
      .def_readonly("energy_error", &RunRecord::energy_error)
      .def_readonly("collision_i", &RunRecord::collision_i)
      .def_readonly("collision_j", &RunRecord::collision_j)
      .def_readonly("rechains", &RunRecord::rechains)
      .def_readonly("trajectory_t", &RunRecord::trajectory_t)
      .def_readonly("trajectory_positions", &RunRecord::trajectory_positions)
      .def_readonly("trajectory_velocities", &RunRecord::trajectory_velocities)
      .def_readonly("output_t", &RunRecord::output_t)
      .def_readonly("output_log_growth", &RunRecord::output_log_growth)
      .def_readonly("log_growth", &RunRecord::log_growth)
      .def_readonly("renormalizations", &RunRecord::renormalizations)
      .def_readonly("tangent_positions", &RunRecord::tangent_positions)
      .def_readonly("tangent_velocities", &RunRecord::tangent_velocities)
      .def_readonly("events", &RunRecord::events);

  py::class_<BatchRecord>(m, "BatchRecord", "What a batch kernel returns: per-system columns (see _core.pyi).")
      .def_readonly("positions", &BatchRecord::positions)
      .def_readonly("velocities", &BatchRecord::velocities)
      .def_readonly("t", &BatchRecord::t)
      .def_readonly("status", &BatchRecord::status)
      .def_readonly("forward_status", &BatchRecord::forward_status)
      .def_readonly("steps", &BatchRecord::steps)
      .def_readonly("rejected", &BatchRecord::rejected)
      .def_readonly("evaluations", &BatchRecord::evaluations)
      .def_readonly("wall_time", &BatchRecord::wall_time)
      .def_readonly("energy_error", &BatchRecord::energy_error)
      .def_readonly("forward_energy_error", &BatchRecord::forward_energy_error)
      .def_readonly("pair_i", &BatchRecord::pair_i)
      .def_readonly("pair_j", &BatchRecord::pair_j)
      .def_readonly("rechains", &BatchRecord::rechains)
      .def_readonly("stopped_by", &BatchRecord::stopped_by)
      .def_readonly("stop_i", &BatchRecord::stop_i)
      .def_readonly("stop_j", &BatchRecord::stop_j)
      .def_readonly("returned_positions", &BatchRecord::returned_positions)
      .def_readonly("returned_velocities", &BatchRecord::returned_velocities)
      .def_readonly("returned_t", &BatchRecord::returned_t)
      .def_readonly("delta", &BatchRecord::delta)
      .def_readonly("delta_position", &BatchRecord::delta_position)
      .def_readonly("delta_velocity", &BatchRecord::delta_velocity);
}

}  // namespace loschmidt::bind
