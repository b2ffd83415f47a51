// The budgets and tolerances every entry point passes to the engine, in one place (the Python
// layer has validated them; 0 means "none" or "automatic" as in methods/options.hpp).
#pragma once
#include "loschmidt/methods/options.hpp"

namespace loschmidt::bind {

inline Options base_options(double rtol, double atol, long long max_steps, double max_wall_time, int max_order,
                            double initial_step) {
  Options opt;
  opt.rtol = rtol;
  opt.atol = atol;
  opt.max_steps = max_steps;
  opt.max_wall_time = max_wall_time;
  opt.max_order = max_order;
  opt.initial_step = initial_step;
  return opt;
}

}  // namespace loschmidt::bind
