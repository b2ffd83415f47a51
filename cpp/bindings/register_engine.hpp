// Integration and diagnostics entry points, one registration per (scalar, compensation) pair.
// The Python layer (loschmidt.integrate) validates everything first; this layer only converts limbs,
// releases the GIL, runs the engine and hands back limbs, the status and the statistics.
#pragma once
#include <string>
#include <vector>

#include "interrupt.hpp"
#include "limbs.hpp"
#include "options.hpp"
#include "loschmidt/batch.hpp"
#include "loschmidt/methods/chain.hpp"
#include "loschmidt/methods/gbs.hpp"
#include "loschmidt/methods/status.hpp"
#include "loschmidt/nbody/diagnostics.hpp"
#include "loschmidt/nbody/state.hpp"
#include "loschmidt/scalar/scalar.hpp"

namespace loschmidt::bind {

template <class T>
State<T> read_state(const limb_array& masses, const limb_array& positions, const limb_array& velocities) {
  constexpr int k = scalar_traits<T>::limbs;
  if (masses.ndim() != 2 || masses.shape(1) != k) throw py::value_error("masses: expected an (N, k) limb array");
  const py::ssize_t n = masses.shape(0);
  State<T> s;
  s.n = static_cast<int>(n);
  s.m = read_limbs<T>(masses, {n}, "masses");
  s.x = read_limbs<T>(positions, {n, 3}, "positions");
  s.v = read_limbs<T>(velocities, {n, 3}, "velocities");
  return s;
}

template <class T>
py::dict diagnostics_dict(const State<T>& s) {
  py::dict d;
  const auto p = linear_momentum(s);
  const auto l = angular_momentum(s);
  d["energy"] = scalar_limbs(energy(s));
  d["kinetic"] = scalar_limbs(kinetic_energy(s));
  d["potential"] = scalar_limbs(potential_energy(s));
  d["momentum"] = write_limbs<T>(p.data(), {3});
  d["angular_momentum"] = write_limbs<T>(l.data(), {3});
  return d;
}

// The fields every integration entry point returns: final limbs, status, counters and the relative
// energy error |E1 - E0| / |E0| computed in the working precision (absolute when E0 = 0).
template <class T>
py::dict run_summary(const State<T>& s, const T& t, const Stats& st, const T& e0) {
  using std::abs;
  const T e1 = energy(s);
  const T de = detail::relative_energy_error(e1, e0);  // +inf when an energy is not finite
  const py::ssize_t n = s.n;
  py::dict d;
  d["positions"] = write_limbs<T>(s.x, {n, 3});
  d["velocities"] = write_limbs<T>(s.v, {n, 3});
  d["t"] = scalar_limbs(t);
  d["status"] = static_cast<int>(st.status);
  d["steps"] = st.steps;
  d["rejected"] = st.rejected;
  d["evaluations"] = st.evaluations;
  d["wall_time"] = st.wall_time;
  d["energy_error"] = to_double(de);
  return d;
}

// The event log as numpy columns: {"passages", "outer", "closest"} -> {"t", "i", "j", "distance"}.
inline py::dict event_dict(const EventLog& log) {
  auto columns = [](const std::vector<PairEvent>& ev) {
    const auto count = static_cast<py::ssize_t>(ev.size());
    py::array_t<double> t(count), dist(count);
    py::array_t<long long> i(count), j(count);
    auto tt = t.mutable_unchecked<1>();
    auto dd = dist.mutable_unchecked<1>();
    auto ii = i.mutable_unchecked<1>();
    auto jj = j.mutable_unchecked<1>();
    for (py::ssize_t k = 0; k < count; ++k) {
      const PairEvent& e = ev[static_cast<std::size_t>(k)];
      tt(k) = e.t;
      ii(k) = e.i;
      jj(k) = e.j;
      dd(k) = e.distance;
    }
    py::dict c;
    c["t"] = t;
    c["i"] = i;
    c["j"] = j;
    c["distance"] = dist;
    return c;
  };
  py::dict d;
  d["passages"] = columns(log.passages);
  d["outer"] = columns(log.outer);
  d["closest"] = columns(log.closest);
  d["dropped"] = log.dropped;
  return d;
}

template <class T, bool Compensated>
void register_engine(py::module_& m, const std::string& suffix) {
  m.def(("diagnostics_" + suffix).c_str(),
        [](const limb_array& masses, const limb_array& positions, const limb_array& velocities) {
          const State<T> s = read_state<T>(masses, positions, velocities);
          return diagnostics_dict(s);
        },
        py::arg("masses"), py::arg("positions"), py::arg("velocities"));

  m.def(("integrate_" + suffix).c_str(),
        [](const std::string& method, const limb_array& masses, const limb_array& positions,
           const limb_array& velocities, const limb_array& t_end, const limb_array& times, double rtol,
           double atol, long long max_steps, double max_wall_time, int max_order, double initial_step,
           const std::vector<double>& radii, int regularization, int pn, const std::vector<double>& c,
           double merger_factor, int stop, int check_every, double distance_factor, double fixed_step, bool events,
           long long max_events, double stop_distance, int stop_pair_i, int stop_pair_j) {
          State<T> s = read_state<T>(masses, positions, velocities);
          const std::vector<T> tend = read_limbs<T>(t_end, {}, "t");
          if (tend.size() != 1) throw py::value_error("t: expected one value");
          const std::vector<T> outs = read_limbs<T>(times, {}, "times");
          if (method != "gbs" && method != "chain")
            throw py::value_error("method: unknown method '" + method + "'");
          if (!radii.empty() && radii.size() != static_cast<size_t>(s.n))
            throw py::value_error("radii: expected one radius per body");
          if (regularization < 0 || regularization > 1)
            throw py::value_error("regularization: unknown regularization");
          if (pn < 0 || pn > pn_all) throw py::value_error("pn: unknown post-Newtonian orders");
          if (pn != 0 && method != "chain") throw py::value_error("pn: post-Newtonian terms need method 'chain'");
          if (pn != 0 && c.size() != static_cast<size_t>(scalar_traits<T>::limbs))
            throw py::value_error("c: expected the limbs of the speed of light");
          // Stop condition and fixed-step mode: gbs only (validated again by the engine).
          if (fixed_step != 0.0 && method != "gbs") throw py::value_error("fixed_step: needs method 'gbs'");

          const py::ssize_t n = s.n;
          std::vector<T> traj_t, traj_x, traj_v;
          traj_t.reserve(outs.size());
          traj_x.reserve(outs.size() * 3 * n);
          traj_v.reserve(outs.size() * 3 * n);
          auto on_output = [&](int, const T& tt, const State<T>& st) {
            traj_t.push_back(tt);
            traj_x.insert(traj_x.end(), st.x.begin(), st.x.end());
            traj_v.insert(traj_v.end(), st.v.begin(), st.v.end());
          };

          interrupt_poll poll;
          Options opt = base_options(rtol, atol, max_steps, max_wall_time, max_order, initial_step);
          opt.stop = static_cast<StopCondition>(stop);
          opt.check_every = check_every;
          opt.distance_factor = distance_factor;
          opt.fixed_step = fixed_step;
          opt.poll = [&poll]() { return poll(); };
          EventLog log;
          log.max_events = max_events;
          if (events || (stop & static_cast<int>(StopCondition::pair_distance)) != 0) opt.events = &log;
          opt.stop_distance = stop_distance;
          opt.stop_pair_i = stop_pair_i;
          opt.stop_pair_j = stop_pair_j;

          T t = T(0);
          const T e0 = energy(s);
          Stats st;
          ChainReport report;
          {
            py::gil_scoped_release nogil;
            if (method == "gbs") {
              st = integrate_gbs<T, Compensated>(s, t, tend[0], outs, on_output, opt);
            } else {
              ChainOptions copt;
              copt.radii = radii;
              copt.regularization = static_cast<ChainRegularization>(regularization);
              copt.report = &report;
              copt.pn_orders = pn;
              copt.light_speed = c;
              copt.merger_factor = merger_factor;
              st = integrate_chain<T, Compensated>(s, t, tend[0], outs, on_output, opt, copt);
            }
          }
          if (poll.signalled()) throw py::error_already_set();
          py::dict d = run_summary(s, t, st, e0);
          // With post-Newtonian terms: the error of the energy bookkeeping (ChainReport).
          if (pn != 0) d["energy_error"] = report.pn_energy_error;
          d["collision_pair"] = py::make_tuple(report.collision_i, report.collision_j);
          d["rechains"] = report.rechains;
          d["stopped_by"] = static_cast<int>(st.stopped_by);
          d["stop_pair"] = py::make_tuple(st.stop_i, st.stop_j);
          if (opt.events != nullptr) d["events"] = event_dict(log);
          const auto count = static_cast<py::ssize_t>(traj_t.size());
          d["trajectory_t"] = write_limbs<T>(traj_t, {count});
          d["trajectory_positions"] = write_limbs<T>(traj_x, {count, n, 3});
          d["trajectory_velocities"] = write_limbs<T>(traj_v, {count, n, 3});
          return d;
        },
        py::arg("method"), py::arg("masses"), py::arg("positions"), py::arg("velocities"), py::arg("t_end"),
        py::arg("times"), py::arg("rtol"), py::arg("atol"), py::arg("max_steps"), py::arg("max_wall_time"),
        py::arg("max_order"), py::arg("initial_step"), py::arg("radii") = std::vector<double>{},
        py::arg("regularization") = 0, py::arg("pn") = 0, py::arg("c") = std::vector<double>{},
        py::arg("merger_factor") = 8.0, py::arg("stop") = 0, py::arg("check_every") = 10,
        py::arg("distance_factor") = 10.0, py::arg("fixed_step") = 0.0, py::arg("events") = false,
        py::arg("max_events") = 1000000, py::arg("stop_distance") = 0.0, py::arg("stop_pair_i") = -1,
        py::arg("stop_pair_j") = -1);
}

}  // namespace loschmidt::bind
