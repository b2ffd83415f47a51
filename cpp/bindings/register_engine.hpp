// Integration and diagnostics entry points, one registration per (scalar, compensation) pair.
// The Python layer (loschmidt.options, loschmidt.engine) validates everything first and passes the
// engine's own Options and ChainOptions (types.hpp); this layer converts limbs, releases the GIL,
// runs the one method dispatch (methods/dispatch.hpp) and hands back a RunRecord.
#pragma once
#include <string>
#include <vector>

#include "interrupt.hpp"
#include "limbs.hpp"
#include "types.hpp"
#include "loschmidt/batch.hpp"
#include "loschmidt/methods/dispatch.hpp"
#include "loschmidt/methods/events.hpp"
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
RunRecord run_record(const State<T>& s, const T& t, const Stats& st, const T& e0) {
  const T de = detail::relative_energy_error(energy(s), e0);  // +inf when an energy is not finite
  const py::ssize_t n = s.n;
  RunRecord r;
  r.positions = write_limbs<T>(s.x, {n, 3});
  r.velocities = write_limbs<T>(s.v, {n, 3});
  r.t = scalar_limbs(t);
  r.stats = st;
  r.energy_error = to_double(de);
  return r;
}

// The event log as an EventRecord (types.hpp): passages, outer, closest as columns t, i, j, distance.
inline EventRecord event_record(const EventLog& log) {
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
    EventColumns c;
    c.t = t;
    c.i = i;
    c.j = j;
    c.distance = dist;
    return c;
  };
  EventRecord r;
  r.passages = columns(log.passages);
  r.outer = columns(log.outer);
  r.closest = columns(log.closest);
  r.dropped = log.dropped;
  return r;
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
        [](const std::string& method_name, const limb_array& masses, const limb_array& positions,
           const limb_array& velocities, const limb_array& t_end, const limb_array& times, const Options& options,
           const ChainOptions& chain, long long max_events) {
          const Method method = method_from_name(method_name);
          State<T> s = read_state<T>(masses, positions, velocities);
          const std::vector<T> tend = read_limbs<T>(t_end, {}, "t");
          if (tend.size() != 1) throw py::value_error("t: expected one value");
          const std::vector<T> outs = read_limbs<T>(times, {}, "times");
          if (!chain.radii.empty() && chain.radii.size() != static_cast<size_t>(s.n))
            throw py::value_error("radii: expected one radius per body");
          if (chain.pn_orders != 0 && chain.light_speed.size() != static_cast<size_t>(scalar_traits<T>::limbs))
            throw py::value_error("c: expected the limbs of the speed of light");

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
          Options opt = options;
          opt.poll = [&poll]() { return poll(); };
          // The event log (methods/events.hpp), when asked for (max_events > 0): one per run.
          if (max_events < 0) throw py::value_error("max_events: must be >= 0 (0: no event log)");
          EventLog log;
          if (max_events > 0) {
            log.max_events = max_events;
            opt.events = &log;
          }
          ChainReport report;
          ChainOptions copt = chain;
          if (method == Method::chain) copt.report = &report;

          T t = T(0);
          const T e0 = energy(s);
          Stats st;
          {
            // std::invalid_argument from the engine's checks reaches Python as ValueError.
            py::gil_scoped_release nogil;
            st = integrate<T, Compensated>(method, s, t, tend[0], outs, on_output, opt, copt);
          }
          if (poll.signalled()) throw py::error_already_set();
          RunRecord r = run_record(s, t, st, e0);
          // With post-Newtonian terms: the error of the energy bookkeeping (ChainReport).
          if (chain.pn_orders != 0) r.energy_error = report.pn_energy_error;
          r.collision_i = report.collision_i;
          r.collision_j = report.collision_j;
          r.rechains = report.rechains;
          if (opt.events != nullptr) r.events = py::cast(event_record(log));
          const auto count = static_cast<py::ssize_t>(traj_t.size());
          r.trajectory_t = write_limbs<T>(traj_t, {count});
          r.trajectory_positions = write_limbs<T>(traj_x, {count, n, 3});
          r.trajectory_velocities = write_limbs<T>(traj_v, {count, n, 3});
          return r;
        },
        py::arg("method"), py::arg("masses"), py::arg("positions"), py::arg("velocities"), py::arg("t_end"),
        py::arg("times"), py::arg("options"), py::arg("chain"),
        py::arg("max_events") = 0);
}

}  // namespace loschmidt::bind
