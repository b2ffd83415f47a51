// Compensated (Kahan-Babuska-Neumaier) summation, and the compensated state update y += dy used
// by the "f64c" precision: the low-order bits that each addition rounds away are kept in a
// separate compensation term and fed back, so long sums and long integrations do not accumulate
// a random walk of rounding errors (Kahan 1965; Neumaier 1974).
#pragma once

#include <cmath>
#include <type_traits>

#include "eft.hpp"

namespace loschmidt {

// Running sum s with compensation c; value() = s + c.
// For double the lost part of each addition is taken exactly by Knuth's TwoSum, which gives the
// same compensation as Neumaier's magnitude test without its branch (Ogita, Rump & Oishi 2005,
// "Sum2"). For other types (dd, qd) Neumaier's branch form is used as written.
template <class T>
struct compensated_sum {
    T s{};
    T c{};

    constexpr compensated_sum() = default;
    explicit compensated_sum(const T& initial) : s(initial), c() {}

    void add(const T& x) noexcept {
        if constexpr (std::is_same_v<T, double>) {
            double e;
            s = two_sum(s, x, e);
            c += e;
        } else {
            using std::abs;
            const T t = s + x;
            if (abs(s) >= abs(x)) {
                c += (s - t) + x;  // x's low part was lost
            } else {
                c += (x - t) + s;  // s's low part was lost
            }
            s = t;
        }
    }

    compensated_sum& operator+=(const T& x) noexcept {
        add(x);
        return *this;
    }

    T value() const noexcept { return s + c; }
    void reset() noexcept { s = T(); c = T(); }
};

// Compensated state update: y += dy, where c carries what earlier updates rounded away.
// The increment is corrected by c first; then the rounding error of the addition into y becomes
// the new c. With T = double the error is exact (TwoSum), so y + c tracks the exactly summed
// increments up to one rounding per step of the (small) corrected increment. No branch.
template <class T>
inline void compensated_add(T& y, T& c, const T& dy) noexcept {
    if constexpr (std::is_same_v<T, double>) {
        const double corrected = dy + c;
        double e;
        y = two_sum(y, corrected, e);
        c = e;
    } else {
        // TwoSum's formula evaluated in T: not exact, but recovers the lost part to T's precision.
        const T corrected = dy + c;
        const T s = y + corrected;
        const T yv = s - corrected;
        const T cv = s - yv;
        c = (y - yv) + (corrected - cv);
        y = s;
    }
}

}  // namespace loschmidt
