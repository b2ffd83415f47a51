// The stop conditions of a run (Options::stop), for every method: every check_every accepted
// steps the driver hands the physical state to StopMonitor::met, which tests it in double and
// says which condition was met and by which body or pair. The tests are cheap triggers; the exact
// classification of the stopped state is the caller's (python/loschmidt/outcome.py).
//
// Adding a condition: its bit in StopCondition and its parameters in Options (options.hpp), their
// check in validate (validate.hpp), and one branch in met() below. The drivers need no change.
// No allocation after setup().
#pragma once

#include <cstddef>
#include <vector>

#include <loschmidt/methods/options.hpp>
#include <loschmidt/nbody/escape.hpp>
#include <loschmidt/nbody/state.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

template <class T>
class StopMonitor {
 public:
  // The options (kept by reference) and the masses, which no condition expects to change.
  void setup(const Options& opt, const State<T>& s) {
    opt_ = &opt;
    n_ = s.n;
    active_ = opt.stop != StopCondition::none;
    if (!active_) return;
    const std::size_t n = static_cast<std::size_t>(s.n);
    m_.resize(n);
    x_.resize(3 * n);
    v_.resize(3 * n);
    for (std::size_t i = 0; i < n; ++i) m_[i] = to_double(s.m[i]);
  }

  bool active() const { return active_; }
  // A test is due after this many accepted steps.
  bool due(long long accepted) const { return active_ && accepted % opt_->check_every == 0; }

  // Test the physical state s (masses as at setup); true when a condition holds, with its
  // condition and body or pair recorded in st (Stats::stopped_by, stop_i, stop_j).
  bool met(const State<T>& s, Stats& st) {
    if (!active_) return false;
    for (std::size_t i = 0; i < x_.size(); ++i) {
      x_[i] = to_double(s.x[i]);
      v_[i] = to_double(s.v[i]);
    }
    if (stops_on(opt_->stop, StopCondition::escape)) {
      const int p = escaping_body(n_, m_.data(), x_.data(), v_.data(), opt_->distance_factor);
      if (p >= 0) {
        st.stopped_by = StopCondition::escape;
        st.stop_i = p;
        st.stop_j = -1;
        return true;
      }
    }
    return false;
  }

 private:
  const Options* opt_ = nullptr;
  int n_ = 0;
  bool active_ = false;
  std::vector<double> m_, x_, v_;
};

}  // namespace loschmidt
