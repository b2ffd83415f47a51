// How an integration ended: one status enum shared by every method, and the single table that
// holds each status's short name and one-sentence message (bindings and Python read them from here).
#pragma once

namespace loschmidt {

enum class Status : int {
  success = 0,
  step_underflow = 1,
  max_steps = 2,
  max_wall_time = 3,
  interrupted = 4,
  collision = 5,
  stop_condition = 6,
  merger = 7,
  nonfinite = 8
};

namespace detail {
struct StatusEntry {
  Status status;
  const char* name;
  const char* message;
};

// Indexed by the enum's integer value; keep in the enum's order.
inline constexpr StatusEntry status_table[] = {
    {Status::success, "success", "The integration reached the requested final time."},
    {Status::step_underflow, "step_underflow",
     "The step size fell below the step floor before the error tolerance could be met (as on the way into a "
     "collision singularity: use the chain method there)."},
    {Status::max_steps, "max_steps", "The budget of steps was used up before the final time."},
    {Status::max_wall_time, "max_wall_time",
     "The wall-clock time budget was used up before the final time."},
    {Status::interrupted, "interrupted", "The integration was interrupted by the caller."},
    {Status::collision, "collision", "Two bodies came closer than the collision distance."},
    {Status::stop_condition, "stop_condition", "A user-supplied stop condition was met."},
    {Status::merger, "merger", "Two bodies came within their merger distance (a multiple of the sum of their Schwarzschild radii)."},
    {Status::nonfinite, "nonfinite",
     "The state or its accelerations became non-finite (infinite or NaN)."},
};
inline constexpr int status_count = static_cast<int>(sizeof(status_table) / sizeof(status_table[0]));

constexpr bool status_table_in_order() {
  for (int i = 0; i < status_count; ++i)
    if (static_cast<int>(status_table[i].status) != i) return false;
  return true;
}
static_assert(status_table_in_order(), "status_table must follow the enum's order");
}  // namespace detail

inline constexpr int status_count() { return detail::status_count; }

inline const char* status_name(Status s) {
  const int i = static_cast<int>(s);
  return (i >= 0 && i < detail::status_count) ? detail::status_table[i].name : "unknown";
}

inline const char* status_message(Status s) {
  const int i = static_cast<int>(s);
  return (i >= 0 && i < detail::status_count) ? detail::status_table[i].message
                                              : "Unknown status code.";
}

inline constexpr bool is_success(Status s) { return s == Status::success; }

}  // namespace loschmidt
