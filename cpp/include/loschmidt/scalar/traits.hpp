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
};

template <>
struct scalar_traits<qd> {
    static constexpr int limbs = 4;
    static constexpr const char* name = "qd";
    static constexpr int digits = 62;
    // 2^-208 = 16 units of 2^-212: covers the measured per-operation maxima (<= 3 units) with
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
};

}  // namespace loschmidt
