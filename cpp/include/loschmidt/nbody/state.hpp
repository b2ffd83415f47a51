// The state of a Newtonian N-body system in the working precision T: masses, positions and
// velocities, flat and body-major (x[3*i + d] is coordinate d of body i).
//
// Coordinates stay in the caller's frame; the engine never shifts them to the centre of mass.
// Forces depend only on differences of positions, so the frame does not change the motion, but the
// shift x - x_cm is itself rounded and cannot be undone exactly: a round trip (forward, reverse,
// back) done in a shifted frame could not be compared bit for bit with the caller's input, and the
// round-off of the shift would be mixed into the very quantity being measured.
#pragma once

#include <cmath>
#include <stdexcept>
#include <vector>

#include <loschmidt/scalar/traits.hpp>

namespace loschmidt {

template <class T>
struct State {
  int n = 0;          // number of bodies
  std::vector<T> m;   // masses, n
  std::vector<T> x;   // positions, 3n, body-major
  std::vector<T> v;   // velocities, 3n, body-major

  State() = default;
  explicit State(int bodies)
      : n(bodies), m(static_cast<std::size_t>(bodies)), x(3 * static_cast<std::size_t>(bodies)),
        v(3 * static_cast<std::size_t>(bodies)) {}

  int dimension() const { return 6 * n; }  // length of the flat phase-space vector (x, v)

  // Sizes agree with n.
  bool consistent() const {
    const std::size_t k = static_cast<std::size_t>(n < 0 ? 0 : n);
    return n >= 0 && m.size() == k && x.size() == 3 * k && v.size() == 3 * k;
  }

  // Every mass, position and velocity is finite.
  bool finite() const {
    using std::isfinite;
    for (const T& q : m)
      if (!isfinite(q)) return false;
    for (const T& q : x)
      if (!isfinite(q)) return false;
    for (const T& q : v)
      if (!isfinite(q)) return false;
    return true;
  }

  void require_consistent() const {
    if (!consistent())
      throw std::invalid_argument("State: sizes of m, x, v do not match n bodies (m: n, x and v: 3n)");
  }
};

}  // namespace loschmidt
