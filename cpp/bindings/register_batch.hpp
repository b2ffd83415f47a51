// Batch entry points (batch.hpp), one registration per (scalar, compensation) pair:
//   batch_integrate_<p>, batch_roundtrip_<p>(method, masses (M,N,k), positions (M,N,3,k),
//   velocities (M,N,3,k), t_end (k,) or (M,k), options: Options, chain: ChainOptions, radii,
//   threads, progress=None) -> BatchRecord (types.hpp). radii: none, N shared or M*N (row-major)
//   values; the options are those of integrate_<p> (stop conditions and fixed_step included).
// The Python layer (loschmidt.options, loschmidt.batch) validates everything first. The GIL is released while the
// workers run; the calling thread takes it back about every 50 ms to let Python run its signal
// handlers (interrupt.hpp) and, every 100 ms or so, to call progress(done) (first
// after 100 ms, then whenever done has changed). A KeyboardInterrupt (or
// an exception raised by progress) stops the batch and is re-raised once every worker has finished.
#pragma once
#include <chrono>
#include <string>
#include <vector>

#include "interrupt.hpp"
#include "limbs.hpp"
#include "types.hpp"
#include "loschmidt/batch.hpp"
#include "loschmidt/scalar/scalar.hpp"

namespace loschmidt::bind {

namespace detail_batch {

template <class V>
py::array_t<V> column(const std::vector<V>& values) {
  py::array_t<V> out(static_cast<py::ssize_t>(values.size()));
  std::copy(values.begin(), values.end(), out.mutable_data());
  return out;
}

template <class T>
py::array_t<double> rounded(const std::vector<T>& values) {
  py::array_t<double> out(static_cast<py::ssize_t>(values.size()));
  double* p = out.mutable_data();
  for (std::size_t i = 0; i < values.size(); ++i) p[i] = to_double(values[i]);
  return out;
}

template <class T, bool Compensated>
BatchRecord run(BatchTask task, const std::string& method, const limb_array& masses, const limb_array& positions,
                const limb_array& velocities, const limb_array& t_end, const Options& options,
                const ChainOptions& chain, const std::vector<double>& radii, int threads,
                const py::object& progress) {
  constexpr int k = scalar_traits<T>::limbs;
  if (masses.ndim() != 3 || masses.shape(2) != k)
    throw py::value_error("masses: expected an (M, N, k) limb array with k = " + std::to_string(k));
  const py::ssize_t count = masses.shape(0);
  const py::ssize_t n = masses.shape(1);
  BatchInput<T> in;
  in.count = static_cast<int>(count);
  in.n = static_cast<int>(n);
  in.m = read_limbs<T>(masses, {count, n}, "masses");
  in.x = read_limbs<T>(positions, {count, n, 3}, "positions");
  in.v = read_limbs<T>(velocities, {count, n, 3}, "velocities");
  if (t_end.ndim() == 1) in.t_end = read_limbs<T>(t_end, {}, "t");
  else in.t_end = read_limbs<T>(t_end, {count}, "t");
  if (in.t_end.size() != 1 && in.t_end.size() != static_cast<std::size_t>(count))
    throw py::value_error("t: expected one value or one per system");
  const BatchIntegrator<T> integrator = batch_integrator<T, Compensated>(method);
  if (!(radii.empty() || radii.size() == static_cast<std::size_t>(n) ||
        radii.size() == static_cast<std::size_t>(count * n)))
    throw py::value_error("radii: expected one radius per body, shared or per system");
  if (chain.pn_orders != 0 && chain.light_speed.size() != static_cast<std::size_t>(k))
    throw py::value_error("c: expected the limbs of the speed of light");

  BatchSettings settings;
  settings.options = options;
  settings.threads = threads;
  settings.radii = radii;
  settings.chain = chain;

  interrupt_poll poll;
  const bool report = !progress.is_none();
  bool callback_failed = false;
  bool reported_once = false;
  std::size_t reported = 0;
  auto last_report = std::chrono::steady_clock::now();
  auto monitor = [&](std::size_t done) -> bool {
    if (poll()) return true;
    if (!report || (reported_once && done == reported)) return false;
    const auto now = std::chrono::steady_clock::now();
    if (now - last_report < std::chrono::milliseconds(100)) return false;
    last_report = now;
    reported = done;
    reported_once = true;
    py::gil_scoped_acquire gil;
    try {
      progress(done);
    } catch (py::error_already_set& e) {
      e.restore();  // left pending on this thread, raised below
      callback_failed = true;
      return true;
    }
    return false;
  };

  BatchOutput<T> out;
  {
    py::gil_scoped_release nogil;
    out = run_batch<T>(task, integrator, in, settings, monitor);
  }
  if (poll.signalled() || callback_failed) throw py::error_already_set();

  BatchRecord r;
  r.positions = write_limbs<T>(out.x, {count, n, 3});
  r.velocities = write_limbs<T>(out.v, {count, n, 3});
  r.t = write_limbs<T>(out.t, {count});
  r.status = column(out.status);
  r.forward_status = column(out.forward_status);
  r.steps = column(out.steps);
  r.rejected = column(out.rejected);
  r.evaluations = column(out.evaluations);
  r.wall_time = column(out.wall_time);
  r.energy_error = rounded(out.energy_error);
  r.forward_energy_error = rounded(out.forward_energy_error);
  r.pair_i = column(out.pair_i);
  r.pair_j = column(out.pair_j);
  r.rechains = column(out.rechains);
  r.stopped_by = column(out.stopped_by);
  r.stop_i = column(out.stop_i);
  r.stop_j = column(out.stop_j);
  if (task == BatchTask::roundtrip) {
    r.returned_positions = write_limbs<T>(out.back_x, {count, n, 3});
    r.returned_velocities = write_limbs<T>(out.back_v, {count, n, 3});
    r.returned_t = write_limbs<T>(out.back_t, {count});
    r.delta = rounded(out.delta);
    r.delta_position = rounded(out.delta_position);
    r.delta_velocity = rounded(out.delta_velocity);
  }
  return r;
}

}  // namespace detail_batch

template <class T, bool Compensated>
void register_batch(py::module_& m, const std::string& suffix) {
  for (const BatchTask task : {BatchTask::integrate, BatchTask::roundtrip}) {
    const std::string name = std::string(task == BatchTask::integrate ? "batch_integrate_" : "batch_roundtrip_") + suffix;
    m.def(name.c_str(),
          [task](const std::string& method, const limb_array& masses, const limb_array& positions,
                 const limb_array& velocities, const limb_array& t_end, const Options& options,
                 const ChainOptions& chain, const std::vector<double>& radii, int threads,
                 const py::object& progress) {
            return detail_batch::run<T, Compensated>(task, method, masses, positions, velocities, t_end, options,
                                                     chain, radii, threads, progress);
          },
          py::arg("method"), py::arg("masses"), py::arg("positions"), py::arg("velocities"), py::arg("t_end"),
          py::arg("options"), py::arg("chain"), py::arg("radii"), py::arg("threads"),
          py::arg("progress") = py::none());
  }
}

}  // namespace loschmidt::bind
