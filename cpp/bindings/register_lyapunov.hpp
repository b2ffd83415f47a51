// The Lyapunov entry point (variational equations beside the orbit, methods/lyapunov.hpp), one
// registration per (scalar, compensation) pair. loschmidt.lyapunov validates everything first;
// this layer converts limbs, releases the GIL, runs the engine and hands back limbs, the status,
// the statistics and the log growth at the output times.
#pragma once
#include <string>
#include <vector>

#include "interrupt.hpp"
#include "limbs.hpp"
#include "types.hpp"
#include "loschmidt/methods/lyapunov.hpp"
#include "loschmidt/nbody/diagnostics.hpp"
#include "register_engine.hpp"  // read_state, run_record

namespace loschmidt::bind {

template <class T, bool Compensated>
void register_lyapunov(py::module_& m, const std::string& suffix) {
  m.def(("lyapunov_" + suffix).c_str(),
        [](const limb_array& masses, const limb_array& positions, const limb_array& velocities,
           const limb_array& tangent_positions, const limb_array& tangent_velocities, const limb_array& t_end,
           const limb_array& times, const Options& options, double renormalize) {
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
          Options opt = options;
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
          RunRecord r = run_record(s, t, st, e0);
          const auto count = static_cast<py::ssize_t>(out_t.size());
          r.output_t = write_limbs<T>(out_t, {count});
          r.output_log_growth = py::array_t<double>(count, out_log.data());
          r.log_growth = report.log_growth;
          r.renormalizations = report.renormalizations;
          r.tangent_positions = write_limbs<T>(tx, {n, 3});
          r.tangent_velocities = write_limbs<T>(tv, {n, 3});
          return r;
        },
        py::arg("masses"), py::arg("positions"), py::arg("velocities"), py::arg("tangent_positions"),
        py::arg("tangent_velocities"), py::arg("t_end"), py::arg("times"), py::arg("options"),
        py::arg("renormalize"));
}

}  // namespace loschmidt::bind
