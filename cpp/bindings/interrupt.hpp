// Ctrl-C while the engine runs with the GIL released: the engine polls this every step; at most every
// 50 ms it takes the GIL and lets Python run its signal handlers. A raised KeyboardInterrupt stops the
// engine (Status::interrupted) and is re-raised once the engine has returned.
#pragma once
#include <pybind11/pybind11.h>

#include <atomic>
#include <chrono>

namespace loschmidt::bind {
namespace py = pybind11;

// A process-wide request to stop, for work running on threads that cannot see signals.
inline std::atomic<bool>& stop_requested() {
  static std::atomic<bool> flag{false};
  return flag;
}

class interrupt_poll {
 public:
  explicit interrupt_poll(bool check_signals = true) : check_signals_(check_signals) {}
  bool operator()() {
    if (stop_requested().load(std::memory_order_relaxed)) return true;
    if (!check_signals_) return false;
    const auto now = std::chrono::steady_clock::now();
    if (now - last_ < std::chrono::milliseconds(50)) return false;
    last_ = now;
    py::gil_scoped_acquire gil;
    if (PyErr_CheckSignals() != 0) {
      signalled_ = true;
      return true;
    }
    return false;
  }
  // True when a Python exception (KeyboardInterrupt) is pending and must be re-raised.
  bool signalled() const { return signalled_; }

 private:
  bool check_signals_;
  bool signalled_ = false;
  std::chrono::steady_clock::time_point last_ = std::chrono::steady_clock::now();
};

}  // namespace loschmidt::bind
