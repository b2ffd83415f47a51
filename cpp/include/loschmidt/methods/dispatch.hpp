// The one method dispatch, used by single runs (the bindings) and batches (batch.hpp): a method
// name maps to a Method, and integrate(Method, ...) runs it with the contract of integrate_gbs
// (statuses, budgets, polling, stop conditions, fixed-step mode, exact landing on output times).
// The chain options (regularization, radii, post-Newtonian terms, report) belong to method
// "chain": given to "gbs" they are refused by name (std::invalid_argument), never dropped.
//
// Adding a method: its value in Method and its name in method_names, one case in integrate()
// and one in integrator() below, and its header here.
#pragma once

#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include <loschmidt/methods/chain.hpp>
#include <loschmidt/methods/gbs.hpp>
#include <loschmidt/methods/options.hpp>
#include <loschmidt/nbody/state.hpp>

namespace loschmidt {

enum class Method : int {
  gbs = 0,   // Gragg-Bulirsch-Stoer extrapolation in Cartesian coordinates (gbs.hpp)
  chain = 1  // chain regularization with extrapolation (chain.hpp); radii, post-Newtonian terms
};

namespace detail {
inline constexpr const char* method_names[] = {"gbs", "chain"};
inline constexpr int method_count = static_cast<int>(sizeof(method_names) / sizeof(method_names[0]));
}  // namespace detail

inline const char* method_name(Method m) {
  const int i = static_cast<int>(m);
  return (i >= 0 && i < detail::method_count) ? detail::method_names[i] : "unknown";
}

// Throws std::invalid_argument naming the argument for an unknown name.
inline Method method_from_name(const std::string& name) {
  for (int i = 0; i < detail::method_count; ++i)
    if (name == detail::method_names[i]) return static_cast<Method>(i);
  throw std::invalid_argument("method: unknown method '" + name + "' (expected 'gbs' or 'chain')");
}

namespace detail {
// The chain options set away from their defaults, refused by every method but chain.
inline void refuse_chain_options(Method m, const ChainOptions& c) {
  auto refuse = [&](const char* what) {
    throw std::invalid_argument(std::string(what) + ": needs method 'chain', not '" + method_name(m) + "'");
  };
  if (!c.radii.empty()) refuse("radii");
  if (c.pn_orders != 0) refuse("pn");
  if (c.regularization != ChainOptions().regularization) refuse("regularization");
}
}  // namespace detail

// Integrate s from t to t_end with the given method; on_output(index, t, s) on landing exactly on
// output_times[index]. Compensated: Kahan-Babuska-Neumaier compensation of the state update
// (precision "f64c"). Invalid arguments throw std::invalid_argument before any work.
template <class T, bool Compensated = false, class Observer>
Stats integrate(Method method, State<T>& s, T& t, const T& t_end, const std::vector<T>& output_times,
                Observer&& on_output, const Options& opt, const ChainOptions& copt = ChainOptions()) {
  switch (method) {
    case Method::gbs:
      detail::refuse_chain_options(method, copt);
      return integrate_gbs<T, Compensated>(s, t, t_end, output_times, std::forward<Observer>(on_output), opt);
    case Method::chain:
      return integrate_chain<T, Compensated>(s, t, t_end, output_times, std::forward<Observer>(on_output), opt, copt);
  }
  throw std::invalid_argument("method: unknown method");
}

// Without output times.
template <class T, bool Compensated = false>
Stats integrate(Method method, State<T>& s, T& t, const T& t_end, const Options& opt,
                const ChainOptions& copt = ChainOptions()) {
  const std::vector<T> none;
  return integrate<T, Compensated>(method, s, t, t_end, none, [](int, const T&, const State<T>&) {}, opt, copt);
}

// A method as a plain function (from t to t_end, no outputs), for callers that hold one per run
// (the batch's workers).
template <class T>
using Integrator = Stats (*)(State<T>&, T&, const T&, const Options&, const ChainOptions&);

namespace detail {
template <class T, bool Compensated, Method M>
Stats integrate_fixed_method(State<T>& s, T& t, const T& t_end, const Options& opt, const ChainOptions& copt) {
  return integrate<T, Compensated>(M, s, t, t_end, opt, copt);
}
}  // namespace detail

template <class T, bool Compensated = false>
Integrator<T> integrator(Method method) {
  switch (method) {
    case Method::gbs: return &detail::integrate_fixed_method<T, Compensated, Method::gbs>;
    case Method::chain: return &detail::integrate_fixed_method<T, Compensated, Method::chain>;
  }
  throw std::invalid_argument("method: unknown method");
}

}  // namespace loschmidt
