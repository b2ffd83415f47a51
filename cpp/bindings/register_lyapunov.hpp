// The Lyapunov entry point (variational equations beside the orbit, methods/lyapunov.hpp), one
// registration per (scalar, compensation) pair. loschmidt.lyapunov validates everything first;
// this layer converts limbs, releases the GIL, runs the engine and hands back limbs, the status,
// the statistics and the log growth at the output times.
#pragma once
#include <string>
#include <vector>

#include "interrupt.hpp"
#include "limbs.hpp"
#include "options.hpp"
#include "loschmidt/methods/lyapunov.hpp"
#include "loschmidt/nbody/diagnostics.hpp"
#include "register_engine.hpp"  // read_state

namespace loschmidt::bind {

template <class T, bool Compensated>
void register_lyapunov(py::module_& m, const std::string& suffix) {
  m.def(("lyapunov_" + suffix).c_str(),
        [](const limb_array& masses, const limb_array& positions, const limb_array& velocities,
           const limb_array& tangent_positions, const limb_array& tangent_velocities, const limb_array& t_end,
           const limb_array& times, double rtol, double atol, long long max_steps, double max_wall_time,
           int max_order, double initial_step, double fixed_step, double renormalize) {
          State<T> s = read_state<T>(masses, positions, velocities);
          const py::ssize_t n = s.n;
          std::vector<T> tx = read_limbs<T>(tangent_positions, {n, 3}, "tangent positions");
          std::vector<T> tv = read_limbs<T>(tangent_velocities, {n, 3}, "tangent velocities");
          const std::vector<T> tend = read_limbs<T>(t_end, {}, "t");
          if (tend.size() != 1) throw py::value_error("t: expected one value");
          const std::vector<T> outs = read_limbs<T>(times, {}, "times");

          std::vector<T> out_t;
          std::vector<double> out_log;
          out_t.reserve(outs.size());
          out_log.reserve(outs.size());
          auto on_output = [&](int, const T& tt, const State<T>&, double log_growth) {
            out_t.push_back(tt);
            out_log.push_back(log_growth);
          };

          interrupt_poll poll;
          Options opt = base_options(rtol, atol, max_steps, max_wall_time, max_order, initial_step);
          opt.fixed_step = fixed_step;
          opt.poll = [&poll]() { return poll(); };

          T t = T(0);
          const T e0 = energy(s);
          Stats st;
          LyapunovReport report;
          {
            // std::invalid_argument from the engine's validation reaches Python as ValueError.
            py::gil_scoped_release nogil;
            st = integrate_lyapunov<T, Compensated>(s, t, tend[0], outs, tx, tv, on_output, opt, renormalize,
                                                    &report);
          }
          if (poll.signalled()) throw py::error_already_set();
          py::dict d = run_summary(s, t, st, e0);
          d["collision_pair"] = py::make_tuple(-1, -1);
          d["rechains"] = 0;
          const auto count = static_cast<py::ssize_t>(out_t.size());
          d["output_t"] = write_limbs<T>(out_t, {count});
          d["output_log_growth"] = py::array_t<double>(count, out_log.data());
          d["log_growth"] = report.log_growth;
          d["renormalizations"] = report.renormalizations;
          d["tangent_positions"] = write_limbs<T>(tx, {n, 3});
          d["tangent_velocities"] = write_limbs<T>(tv, {n, 3});
          return d;
        },
        py::arg("masses"), py::arg("positions"), py::arg("velocities"), py::arg("tangent_positions"),
        py::arg("tangent_velocities"), py::arg("t_end"), py::arg("times"), py::arg("rtol"), py::arg("atol"),
        py::arg("max_steps"), py::arg("max_wall_time"), py::arg("max_order"), py::arg("initial_step"),
        py::arg("fixed_step"), py::arg("renormalize"));
}

}  // namespace loschmidt::bind
