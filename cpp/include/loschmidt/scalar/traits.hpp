// scalar_traits<T>: what generic engine code needs to know about a working-precision type
// (double, dd, qd): its limb count and name, its precision, conversion to and from float64 limb
// arrays (the form in which values cross the Python boundary), and the natural extrapolation
// order limit. Also the double overloads that let templates call to_double(x) uniformly.
//
// Generic code should call the elementary functions as
//     using std::sqrt; using std::abs; sqrt(x); abs(x); to_double(x);
// so that double picks std:: and dd/qd pick the loschmidt:: overloads by argument-dependent
// lookup.
#pragma once

#include "double_double.hpp"
#include "quad_double.hpp"

namespace loschmidt {

inline constexpr double to_double(double x) noexcept { return x; }

// 1/sqrt(x) in double, so that generic code can call rsqrt(x) for every working precision (dd and
// qd have their own, double_double.hpp and quad_double.hpp). Two roundings.
inline double rsqrt(double x) noexcept { return 1.0 / std::sqrt(x); }

// x * p for a power of two p, limb by limb: exact (unless a limb overflows or becomes subnormal),
// and free of the renormalization a general product would run.
inline double scale_pow2(double x, double p) noexcept { return x * p; }
inline dd scale_pow2(const dd& x, double p) noexcept { return dd::raw(x.hi * p, x.lo * p); }
inline qd scale_pow2(const qd& x, double p) noexcept {
    return qd::raw(x.x[0] * p, x.x[1] * p, x.x[2] * p, x.x[3] * p);
}

// a + b for operands known to have the same sign (or to be zero): sums of positive terms skip the
// cancellation handling of the general addition. dd: JMP 2017 Alg. 5 (<= 3u^2 for same signs);
// qd: the order-by-order path of the accurate addition, which the general one takes anyway for
// such operands, without the test. Measured in cpp/tests/test_scalar.cpp.
inline double add_same_sign(double a, double b) noexcept { return a + b; }
inline dd add_same_sign(const dd& a, const dd& b) noexcept { return detail::dd_add_same_sign(a, b); }
inline qd add_same_sign(const qd& a, const qd& b) noexcept {
    double e0;
    const double s0 = two_sum(a.x[0], b.x[0], e0);
    return detail::qd_add_nocancel(a, b, s0, e0);
}

// a - b to about double precision, without forming the difference in the working precision:
// the limbs are subtracted pairwise (the leading difference is exact when a and b are close,
// Sterbenz) and summed from the smallest. Relative error a few u unless the limb differences
// cancel among themselves, which leaves an absolute error of a few u * ulp(second limb): ample for
// error estimates, which are judged in double. (For double itself: a - b.)
inline double approx_difference(double a, double b) noexcept { return a - b; }
inline double approx_difference(const dd& a, const dd& b) noexcept {
    return (a.hi - b.hi) + (a.lo - b.lo);
}
inline double approx_difference(const qd& a, const qd& b) noexcept {
    return (a.x[0] - b.x[0]) + ((a.x[1] - b.x[1]) + ((a.x[2] - b.x[2]) + (a.x[3] - b.x[3])));
}

template <class T>
struct scalar_traits;  // only the specialisations below exist

template <>
struct scalar_traits<double> {
    static constexpr int limbs = 1;
    static constexpr const char* name = "f64";
    static constexpr int digits = 15;
    // Unit roundoff of binary64 round-to-nearest: 2^-53.
    static constexpr double epsilon() noexcept { return 0x1p-53; }
    // Unit roundoff of the representation (half an ulp of 1): 2^-53. For double it equals the
    // operation bound epsilon(); for dd and qd the two differ (see there).
    static constexpr double unit_roundoff() noexcept { return 0x1p-53; }
    // Default relative tolerance of the integrations: a few hundred units of round-off, so the
    // truncation error of the extrapolation sits just above the precision's floor; the
    // compensated state update (precision "f64c") lets the tolerance go one decade lower.
    static constexpr double default_tolerance(bool compensated = false) noexcept {
        return compensated ? 1e-14 : 1e-13;
    }
    static void to_limbs(const double& v, double* out) noexcept { out[0] = v; }
    static double from_limbs(const double* in) noexcept { return in[0]; }
    // Extrapolation columns (METHODS.md section 2, item 7: about 8-10 for f64).
    static constexpr int default_max_order() noexcept { return 9; }
    // Row limit of the chain method's tableau (consecutive sequence). Measured (benchmarks/kernels/
    // chain.cpp, 2026-12-02): with 7 rows the order control starves on the Pythagorean problem to
    // t = 70 at tol 1e-13 (50k evaluations, 11155 steps, 4.5 per step); with 9 rows 18.7k evaluations
    // in 605 steps, with 11 or more 19.8k in 596 (the controller settles below the limit), 3.6x
    // less CPU; free-fall round trips to t = 10: 11 rows use 6-45% fewer evaluations than 7 at
    // the same or smaller round-trip distance. 11 leaves the controller room above its choice.
    static constexpr int chain_max_rows() noexcept { return 11; }
};

template <>
struct scalar_traits<dd> {
    static constexpr int limbs = 2;
    static constexpr const char* name = "dd";
    static constexpr int digits = 31;
    // 2^-103 = 8u^2 (u = 2^-53): the per-operation relative error bound the tests enforce for
    // + - * / sqrt (proven bounds of the algorithms: 3u^2 to 9.8u^2, see double_double.hpp),
    // rather than the nominal 2^-106 of a 106-bit significand.
    static constexpr double epsilon() noexcept { return 0x1p-103; }
    // Unit roundoff of the representation, 2^-106 (a 106-bit significand): how finely a value is
    // resolved (decimal output, tolerance floors), as against epsilon(), the operations' bound.
    static constexpr double unit_roundoff() noexcept { return 0x1p-106; }
    static constexpr double default_tolerance(bool = false) noexcept { return 1e-28; }
    static void to_limbs(const dd& v, double* out) noexcept {
        out[0] = v.hi;
        out[1] = v.lo;
    }
    static dd from_limbs(const double* in) noexcept { return dd::from_limbs(in[0], in[1]); }
    static constexpr int default_max_order() noexcept { return 18; }
    // Measured (free-fall round trips, t = 5, tol 1e-28): 12 rows 127k evaluations, 14 or more
    // 117k (the controller settles at ~13 rows), 8 or 10 many times more; see also chain.hpp on
    // energy conservation through close pericentres at high order.
    static constexpr int chain_max_rows() noexcept { return 14; }
};

template <>
struct scalar_traits<qd> {
    static constexpr int limbs = 4;
    static constexpr const char* name = "qd";
    static constexpr int digits = 62;
    // 2^-208 = 16 units of 2^-212: covers the measured per-operation maxima (<= 10.4 units, the
    // one-correction division; quad_double.hpp) with
    // margin; the interface's required bound is 1e-60 ~ 2^-199.
    static constexpr double epsilon() noexcept { return 0x1p-208; }
    // Unit roundoff of the representation, 2^-212 (four 53-bit limbs), as against epsilon().
    static constexpr double unit_roundoff() noexcept { return 0x1p-212; }
    static constexpr double default_tolerance(bool = false) noexcept { return 1e-56; }
    static void to_limbs(const qd& v, double* out) noexcept {
        for (int i = 0; i < 4; ++i) out[i] = v.x[i];
    }
    static qd from_limbs(const double* in) noexcept {
        return qd::from_limbs(in[0], in[1], in[2], in[3]);
    }
    static constexpr int default_max_order() noexcept { return 32; }
    // Measured (free-fall round trips, t = 2-3, tol 1e-56): ~190 evaluations per step, i.e. the
    // controller uses ~19 of the 25 rows; fewer rows cost many times more steps.
    static constexpr int chain_max_rows() noexcept { return 25; }
};

}  // namespace loschmidt
