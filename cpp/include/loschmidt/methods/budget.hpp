// The budgets of a run, checked by every driver before each attempted step: the step budget
// (Options::max_steps), the wall-clock budget (Options::max_wall_time), interrupt polling
// (Options::poll) and the step floors that end a run stuck at steps too small to make progress
// (Options::min_step_fraction, Options::min_step_ratio, and a stall of the physical time). One
// object per run; the drivers (gbs.hpp, chain.hpp) differ only in what they call a step's size
// and the scale it is judged against (physical time for gbs, fictitious time for chain).
#pragma once

#include <chrono>
#include <cmath>

#include <loschmidt/methods/options.hpp>
#include <loschmidt/methods/status.hpp>
#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

template <class T>
class RunBudget {
 public:
  using clock = std::chrono::steady_clock;

  RunBudget(const Options& opt, clock::time_point start)
      : opt_(opt),
        start_(start),
        last_poll_(start),
        frac_(opt.min_step_fraction > 0 ? opt.min_step_fraction : 16.0 * scalar_traits<T>::epsilon()) {}

  // The relative step floor: Options::min_step_fraction, 0 resolved to 16 eps of T.
  double floor_fraction() const { return frac_; }

  // A step of magnitude hmag is below the floor frac * scale (true also for a NaN step).
  bool below_floor(double hmag, double scale) const { return !(hmag >= frac_ * scale); }

  // The second floor (Options::min_step_ratio): after 1000 accepted steps, a step smaller than
  // min_step_ratio times the mean accepted step (covered / accepted) means the steps shrink
  // without end, as on the crawl into a collision singularity in Cartesian coordinates.
  bool crawling(double hmag, double covered, long long accepted) const {
    return opt_.min_step_ratio > 0 && accepted >= 1000 &&
           hmag < opt_.min_step_ratio * covered / static_cast<double>(accepted);
  }

  // The same floor in physical time for regularized methods, whose steps are judged in fictitious
  // time: after 1000 accepted steps, a mean advance of the physical time (covered / accepted)
  // below min_step_ratio times the requested span means the span needs more than about 1e15
  // steps. Seen on a head-on pair released from rest 1e-15 apart in a triple: the regularized
  // pair bounces with a period near 1e-22, so t = 0.5 would take some 1e21 bounces (dd: t advanced
  // 1.2e-22 in 4.5 million steps and 90 s). No run of that length finishes; ending it with
  // step_underflow at once is the honest answer, where the budgets would end it only after hours.
  bool crawling_in_time(double covered, long long accepted, double span) const {
    return opt_.min_step_ratio > 0 && accepted >= 1000 &&
           std::fabs(covered) < opt_.min_step_ratio * span * static_cast<double>(accepted);
  }

  // The physical-time floor of regularized methods: an accepted step that advances t by dt with
  // |dt| < frac |t| hardly moves t; stall_limit such steps in a row mean t no longer advances at
  // this precision (a binary whose period is below eps |t|). A regularized close passage takes a
  // few dozen such steps at most. Call once per accepted step; true when the run must end.
  bool stalled(double dt, double t) {
    stalled_ = std::fabs(dt) < frac_ * std::fabs(t) ? stalled_ + 1 : 0;
    return stalled_ >= stall_limit;
  }
  static constexpr long long stall_limit = 10000;

  // Before an attempt: Status::success to go on (and the attempt is counted), else the status
  // that ends the run (max_steps, max_wall_time, interrupted). The clock is read only when a
  // wall-clock budget or a poll is set; the poll is called at most every poll_interval.
  Status next_attempt() {
    if (attempts_ >= opt_.max_steps) return Status::max_steps;
    if (opt_.max_wall_time > 0 || opt_.poll) {
      const auto now = clock::now();
      if (opt_.max_wall_time > 0 && std::chrono::duration<double>(now - start_).count() >= opt_.max_wall_time)
        return Status::max_wall_time;
      if (opt_.poll && now - last_poll_ >= poll_interval) {
        last_poll_ = now;
        if (opt_.poll()) return Status::interrupted;
      }
    }
    ++attempts_;
    return Status::success;
  }
  long long attempts() const { return attempts_; }

  // Seconds since the run started.
  double elapsed() const { return std::chrono::duration<double>(clock::now() - start_).count(); }

  static constexpr std::chrono::milliseconds poll_interval{2};

 private:
  const Options& opt_;
  clock::time_point start_, last_poll_;
  double frac_;
  long long attempts_ = 0;
  long long stalled_ = 0;
};

}  // namespace loschmidt
