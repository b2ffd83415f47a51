// Double-double ("double-word") arithmetic: a real number held as the unevaluated sum hi + lo of
// two binary64 values, giving a 106-bit significand (unit roundoff u^2 = 2^-106, u = 2^-53).
//
// Representation invariant ("normalized"): hi == RN(hi + lo), hence |lo| <= ulp(hi)/2. Every
// operation below returns a normalized value; dd::raw() skips the check, dd::from_limbs() restores
// it exactly.
//
// Algorithms and their proven relative error bounds (Joldes, Muller & Popescu 2017, "Tight and
// rigorous error bounds for basic building blocks of double-word arithmetic", ACM TOMS 44(2);
// algorithm numbers of that paper; the DW*DW bounds as corrected by Muller & Rideau 2022, ACM TOMS
// 48(1)):
//   dd + dd    Alg. 6  AccurateDWPlusDW          3u^2 + 13u^3
//   dd + fp    Alg. 4  DWPlusFP                  2u^2          [memory]
//   dd * fp    Alg. 9  DWTimesFP3 (FMA)          2u^2          [memory]
//              Alg. 7  DWTimesFP1 (LOSCHMIDT_NO_FMA)   1.5u^2 + 4u^3
//   dd * dd    Alg. 12 DWTimesDW3 (FMA)          5u^2 (Muller & Rideau) [memory]
//              Alg. 10 DWTimesDW1 (LOSCHMIDT_NO_FMA)   7u^2-ish    [memory]
//   dd / fp    Alg. 13 DWDivFP1                  3.5u^2        [memory]
//   dd / dd    Alg. 18 DWDivDW3 (FMA)            9.8u^2
//              Alg. 17 DWDivDW2 (LOSCHMIDT_NO_FMA)     15u^2 + 56u^3
//   sqrt(dd)   one Newton (Heron) correction of the binary64 square root, with the exact
//              remainder hi - s^2 (Karp & Markstein 1997 style); ~2u^2 by the usual first-order
//              analysis (common practice) - the test program measures it.
// Measured maxima, FMA build (600k random operands per op incl. deep cancellation, exact
// reference; then a local search for bad cases): + 2.2u^2, * 3.2u^2 (search: 4.0u^2),
// / 4.2u^2 (search: 6.4u^2), sqrt 2.8u^2 (search: 3.1u^2), mixed forms <= 3.5u^2. All are below
// the 8u^2 the tests require (cpp/tests/test_scalar.cpp); on paper only DWDivDW3's proven
// 9.8u^2 exceeds it. The LOSCHMIDT_NO_FMA build's Alg. 17 reaches 8.2u^2 on a searched case.
//
// None of the hot operations branch (the published algorithms have no branches); sqrt branches
// only to route zero, negative and infinite arguments.
//
// Special values: +-0 and finite results behave; infinities and NaN propagate as non-finite
// values (typically NaN rather than inf, as inf - inf appears inside the EFTs). Results keep full
// relative accuracy only while |lo| terms stay normal, i.e. |value| >~ 2^-968, and below overflow.
// The sign of a zero result is not guaranteed to follow IEEE rules.
#pragma once

#include <cmath>
#include <cstdint>
#include <limits>
#include <type_traits>

#include "eft.hpp"

namespace loschmidt {

struct dd {
    double hi;
    double lo;

    constexpr dd() noexcept : hi(0.0), lo(0.0) {}
    constexpr dd(double x) noexcept : hi(x), lo(0.0) {}  // NOLINT: implicit on purpose

    // Any integer type, converted exactly (a 64-bit integer needs up to two doubles).
    template <class I, std::enable_if_t<std::is_integral_v<I>, int> = 0>
    constexpr dd(I v) noexcept : hi(0.0), lo(0.0) {  // NOLINT: implicit on purpose
        if constexpr (sizeof(I) < 8) {
            hi = static_cast<double>(v);  // exact: at most 32 significant bits
        } else {
            // Split into a multiple of 2^32 and a remainder below 2^32, both exact doubles; their
            // TwoSum is then the exact, normalized value.
            double upper, lower;
            if constexpr (std::is_signed_v<I>) {
                const long long q = static_cast<long long>(v) / 4294967296LL;
                const long long r = static_cast<long long>(v) % 4294967296LL;
                upper = static_cast<double>(q) * 4294967296.0;
                lower = static_cast<double>(r);
            } else {
                const unsigned long long w = static_cast<unsigned long long>(v);
                upper = static_cast<double>(w >> 32) * 4294967296.0;
                lower = static_cast<double>(w & 0xffffffffULL);
            }
            hi = two_sum_constexpr(upper, lower, lo);
        }
    }

    // Take the limbs as they are (caller guarantees normalization). constexpr, no arithmetic.
    static constexpr dd raw(double hi, double lo) noexcept {
        dd r;
        r.hi = hi;
        r.lo = lo;
        return r;
    }

    // Accept any pair; the result is normalized and equals hi + lo exactly (TwoSum is exact).
    // A pair that is already normalized comes back bit-for-bit unchanged.
    static dd from_limbs(double hi, double lo) noexcept {
        double e;
        const double s = two_sum(hi, lo, e);
        return raw(s, e);
    }

    inline dd& operator+=(const dd& b) noexcept;
    inline dd& operator-=(const dd& b) noexcept;
    inline dd& operator*=(const dd& b) noexcept;
    inline dd& operator/=(const dd& b) noexcept;
    inline dd& operator+=(double b) noexcept;
    inline dd& operator-=(double b) noexcept;
    inline dd& operator*=(double b) noexcept;
    inline dd& operator/=(double b) noexcept;

private:
    // TwoSum usable in a constant expression (same flops as loschmidt::two_sum).
    static constexpr double two_sum_constexpr(double a, double b, double& err) noexcept {
        const double s = a + b;
        const double av = s - b;
        const double bv = s - av;
        err = (a - av) + (b - bv);
        return s;
    }
};

static_assert(sizeof(dd) == 2 * sizeof(double), "dd must be exactly two packed doubles");
static_assert(std::is_trivially_copyable_v<dd>, "dd must be trivially copyable");

namespace detail {

// JMP 2017 Alg. 4 (DWPlusFP): TwoSum of the high parts, fold the low part into the error,
// renormalize. No branch.
inline dd dd_add_fp(const dd& x, double y) noexcept {
    double sl;
    const double sh = two_sum(x.hi, y, sl);
    const double v = x.lo + sl;
    double zl;
    const double zh = fast_two_sum(sh, v, zl);
    return dd::raw(zh, zl);
}

// JMP 2017 Alg. 6 (AccurateDWPlusDW). Summing the low parts with a second TwoSum (instead of a
// plain add, the "sloppy" variant) keeps the bound relative even under cancellation.
inline dd dd_add(const dd& x, const dd& y) noexcept {
    double sl, tl;
    const double sh = two_sum(x.hi, y.hi, sl);
    const double th = two_sum(x.lo, y.lo, tl);
    const double c = sl + th;
    double vl;
    const double vh = fast_two_sum(sh, c, vl);
    const double w = tl + vl;
    double zl;
    const double zh = fast_two_sum(vh, w, zl);
    return dd::raw(zh, zl);
}

// JMP 2017 Alg. 7 (DWTimesFP1): no fma beyond the one in two_prod; bound 1.5u^2 + 4u^3.
inline dd dd_mul_fp_alg7(const dd& x, double y) noexcept {
    double cl1;
    const double ch = two_prod(x.hi, y, cl1);
    const double cl2 = x.lo * y;
    double tl1;
    const double th = fast_two_sum(ch, cl2, tl1);
    const double tl2 = tl1 + cl1;
    double zl;
    const double zh = fast_two_sum(th, tl2, zl);
    return dd::raw(zh, zl);
}

// dd * double. FMA build: JMP 2017 Alg. 9 (DWTimesFP3), 2 fma + 1 mul + 3 add; otherwise Alg. 7.
inline dd dd_mul_fp(const dd& x, double y) noexcept {
#if defined(LOSCHMIDT_NO_FMA)
    return dd_mul_fp_alg7(x, y);
#else
    double cl1;
    const double ch = two_prod(x.hi, y, cl1);
    const double cl3 = std::fma(x.lo, y, cl1);  // lo*y and the product error with one rounding
    double zl;
    const double zh = fast_two_sum(ch, cl3, zl);
    return dd::raw(zh, zl);
#endif
}

// dd * dd. FMA build: JMP 2017 Alg. 12 (DWTimesDW3): the cross terms are accumulated into the
// product error with fma, smallest (lo*lo) first. Otherwise Alg. 10 (DWTimesDW1).
inline dd dd_mul(const dd& x, const dd& y) noexcept {
    double cl1;
    const double ch = two_prod(x.hi, y.hi, cl1);
#if defined(LOSCHMIDT_NO_FMA)
    const double tl1 = x.hi * y.lo;
    const double tl2 = x.lo * y.hi;
    const double cl2 = tl1 + tl2;
#else
    const double tl0 = x.lo * y.lo;
    const double tl1 = std::fma(x.hi, y.lo, tl0);
    const double cl2 = std::fma(x.lo, y.hi, tl1);
#endif
    const double cl3 = cl1 + cl2;
    double zl;
    const double zh = fast_two_sum(ch, cl3, zl);
    return dd::raw(zh, zl);
}

// dd / double, JMP 2017 Alg. 13 (DWDivFP1). The remainder x.hi - th*y of a correctly rounded
// quotient is representable, so computing it with one fma or with TwoProd + two exact
// subtractions gives the same bits: FMA and no-FMA builds agree here.
inline dd dd_div_fp(const dd& x, double y) noexcept {
    const double th = x.hi / y;
#if defined(LOSCHMIDT_NO_FMA)
    double pl;
    const double ph = two_prod(th, y, pl);
    const double dh = x.hi - ph;  // exact (Sterbenz)
    const double dt = dh - pl;    // exact (representable remainder)
#else
    const double dt = std::fma(-th, y, x.hi);  // exact remainder
#endif
    const double d = dt + x.lo;
    const double tl = d / y;
    double zl;
    const double zh = fast_two_sum(th, tl, zl);
    return dd::raw(zh, zl);
}

// dd / dd.
// FMA build: JMP 2017 Alg. 18 (DWDivDW3), proven bound 9.8u^2: the reciprocal m ~ 1/y is formed
// from th = RN(1/y.hi) and the exact remainder 1 - y.hi*th (one fma), refined to double-word,
// then multiplied by x with Alg. 12. One division. (Alg. 17 was dropped for this build: besides
// its looser 15u^2 bound, a local search found quotients with 8.15u^2 error, over the 8u^2 this
// library promises; for Alg. 18 the same search found at most ~6.1u^2.)
// LOSCHMIDT_NO_FMA build: Alg. 17 (DWDivDW2), 15u^2 + 56u^3: first quotient digit th =
// x.hi / y.hi, the remainder x - th*y in double-word (the product by Alg. 7, its leading
// subtraction exact by Sterbenz), second digit = remainder / y.hi. Two divisions.
inline dd dd_div(const dd& x, const dd& y) noexcept {
#if defined(LOSCHMIDT_NO_FMA)
    const double th = x.hi / y.hi;
    const dd r = dd_mul_fp_alg7(y, th);  // Alg. 17 is proven with Alg. 7 for this product
    const double pih = x.hi - r.hi;       // exact: r.hi is within a few ulps of x.hi
    const double dl = x.lo - r.lo;
    const double d = pih + dl;
    const double tl = d / y.hi;
    double zl;
    const double zh = fast_two_sum(th, tl, zl);
    return dd::raw(zh, zl);
#else
    const double th = 1.0 / y.hi;
    const double rh = std::fma(-y.hi, th, 1.0);  // exact remainder of the reciprocal
    const double rl = -y.lo * th;
    double el;
    const double eh = fast_two_sum(rh, rl, el);  // e = 1 - y*th, ~u in size
    const dd m = dd_add_fp(dd_mul_fp(dd::raw(eh, el), th), th);  // th*(1 + e) ~ 1/y
    return dd_mul(x, m);
#endif
}

// dd + dd for operands of the same sign (or zero): JMP 2017 Alg. 5 (SloppyDWPlusDW), the low
// parts added in plain double, 11 flops against Alg. 6's 20. Its relative error is unbounded under
// cancellation, but for same-sign operands it stays below 3u^2 [memory: JMP 2017, the remark after
// Alg. 5]; cpp/tests/test_scalar.cpp measures it against the 8u^2 of the other operations. Used
// for sums of positive terms (squared distances, kinetic energy, the force function).
inline dd dd_add_same_sign(const dd& x, const dd& y) noexcept {
    double sl;
    const double sh = two_sum(x.hi, y.hi, sl);
    const double v = sl + (x.lo + y.lo);
    double zl;
    const double zh = fast_two_sum(sh, v, zl);
    return dd::raw(zh, zl);
}

}  // namespace detail

// ---- arithmetic operators ------------------------------------------------------------------

inline dd operator-(const dd& a) noexcept { return dd::raw(-a.hi, -a.lo); }
inline dd operator+(const dd& a) noexcept { return a; }

inline dd operator+(const dd& a, const dd& b) noexcept { return detail::dd_add(a, b); }
inline dd operator-(const dd& a, const dd& b) noexcept { return detail::dd_add(a, -b); }
inline dd operator*(const dd& a, const dd& b) noexcept { return detail::dd_mul(a, b); }
inline dd operator/(const dd& a, const dd& b) noexcept { return detail::dd_div(a, b); }

inline dd operator+(const dd& a, double b) noexcept { return detail::dd_add_fp(a, b); }
inline dd operator+(double a, const dd& b) noexcept { return detail::dd_add_fp(b, a); }
inline dd operator-(const dd& a, double b) noexcept { return detail::dd_add_fp(a, -b); }
inline dd operator-(double a, const dd& b) noexcept { return detail::dd_add_fp(-b, a); }
inline dd operator*(const dd& a, double b) noexcept { return detail::dd_mul_fp(a, b); }
inline dd operator*(double a, const dd& b) noexcept { return detail::dd_mul_fp(b, a); }
inline dd operator/(const dd& a, double b) noexcept { return detail::dd_div_fp(a, b); }
inline dd operator/(double a, const dd& b) noexcept { return detail::dd_div(dd(a), b); }

inline dd& dd::operator+=(const dd& b) noexcept { return *this = *this + b; }
inline dd& dd::operator-=(const dd& b) noexcept { return *this = *this - b; }
inline dd& dd::operator*=(const dd& b) noexcept { return *this = *this * b; }
inline dd& dd::operator/=(const dd& b) noexcept { return *this = *this / b; }
inline dd& dd::operator+=(double b) noexcept { return *this = *this + b; }
inline dd& dd::operator-=(double b) noexcept { return *this = *this - b; }
inline dd& dd::operator*=(double b) noexcept { return *this = *this * b; }
inline dd& dd::operator/=(double b) noexcept { return *this = *this / b; }

// ---- comparisons -------------------------------------------------------------------------
// For normalized values hi = RN(value), and the rounding intervals of distinct doubles are
// disjoint, so comparing (hi, lo) lexicographically orders the values exactly.

inline bool operator==(const dd& a, const dd& b) noexcept { return a.hi == b.hi && a.lo == b.lo; }
inline bool operator!=(const dd& a, const dd& b) noexcept { return !(a == b); }
inline bool operator<(const dd& a, const dd& b) noexcept {
    return a.hi < b.hi || (a.hi == b.hi && a.lo < b.lo);
}
inline bool operator>(const dd& a, const dd& b) noexcept { return b < a; }
inline bool operator<=(const dd& a, const dd& b) noexcept {
    return a.hi < b.hi || (a.hi == b.hi && a.lo <= b.lo);
}
inline bool operator>=(const dd& a, const dd& b) noexcept { return b <= a; }

inline bool operator==(const dd& a, double b) noexcept { return a.hi == b && a.lo == 0.0; }
inline bool operator!=(const dd& a, double b) noexcept { return !(a == b); }
inline bool operator<(const dd& a, double b) noexcept {
    return a.hi < b || (a.hi == b && a.lo < 0.0);
}
inline bool operator>(const dd& a, double b) noexcept {
    return a.hi > b || (a.hi == b && a.lo > 0.0);
}
inline bool operator<=(const dd& a, double b) noexcept {
    return a.hi < b || (a.hi == b && a.lo <= 0.0);
}
inline bool operator>=(const dd& a, double b) noexcept {
    return a.hi > b || (a.hi == b && a.lo >= 0.0);
}
inline bool operator==(double a, const dd& b) noexcept { return b == a; }
inline bool operator!=(double a, const dd& b) noexcept { return b != a; }
inline bool operator<(double a, const dd& b) noexcept { return b > a; }
inline bool operator>(double a, const dd& b) noexcept { return b < a; }
inline bool operator<=(double a, const dd& b) noexcept { return b >= a; }
inline bool operator>=(double a, const dd& b) noexcept { return b <= a; }

// ---- functions ---------------------------------------------------------------------------

inline double to_double(const dd& a) noexcept { return a.hi; }  // hi is RN(value)

// Multiplying both limbs by +-1 is exact and compiles without a branch.
inline dd abs(const dd& a) noexcept {
    const double s = std::copysign(1.0, a.hi);
    return dd::raw(a.hi * s, a.lo * s);
}

inline bool isfinite(const dd& a) noexcept { return std::isfinite(a.hi) && std::isfinite(a.lo); }
inline bool isnan(const dd& a) noexcept { return std::isnan(a.hi) || std::isnan(a.lo); }

// Exact scaling by 2^n (unless a limb overflows or becomes subnormal).
inline dd ldexp(const dd& a, int n) noexcept {
    return dd::raw(std::ldexp(a.hi, n), std::ldexp(a.lo, n));
}

// sqrt(hi + lo) = s * sqrt(1 + rho/s^2) ~ s + rho/(2s), with s = RN(sqrt(hi)) and
// rho = (hi - s^2) + lo. hi - s^2 is exactly representable for a correctly rounded square root,
// so fma (or TwoProd) gives it exactly and both builds produce the same bits.
inline dd sqrt(const dd& a) noexcept {
    if (!(a.hi > 0.0 && a.hi < std::numeric_limits<double>::infinity())) {
        if (a.hi == 0.0 || a.hi > 0.0) return a;  // +-0 and +inf as IEEE sqrt does
        return dd(std::numeric_limits<double>::quiet_NaN());  // negative or NaN
    }
    const double s = std::sqrt(a.hi);
#if defined(LOSCHMIDT_NO_FMA)
    double pl;
    const double ph = two_prod(s, s, pl);
    const double rem = (a.hi - ph) - pl;  // both steps exact
#else
    const double rem = std::fma(-s, s, a.hi);  // exact
#endif
    const double rho = rem + a.lo;
    const double t = rho / (2.0 * s);
    double zl;
    const double zh = fast_two_sum(s, t, zl);
    return dd::raw(zh, zl);
}

// 1/sqrt(a) for inverse distances in force loops (r^-3 = rsqrt(r^2)^3: one square root and one
// division in double instead of a dd square root and a dd division). Seed y = RN(1/RN(sqrt(a.hi))),
// within ~2.5u of 1/sqrt(a) (a.lo included); residual e = 1 - a y^2 (|e| <= ~5u) as an exact pair:
// y^2 = p + pl and a.hi p = h + hl by TwoProd, 1 - h exact (Sterbenz: h is within a few ulps of 1),
// the other parts of a y^2 (order u) in plain double (rounding ~u^2/2 absolute; a.lo * pl, order
// u^3, dropped), then TwoSum. Correction to second order, y (e/2 + 3e^2/8) (the first-order step
// alone leaves 3e^2/8, up to ~9u^2 for |e| = 5u, and measured 6.4u^2), with its leading part
// y eh / 2 exact by TwoProd, so the result is not limited by rounding a u-sized correction to
// one double. Remaining: e^3 terms (~u^3), the residual's rounding (<= ~0.4u^2), the final
// additions (<= ~u^2): <= ~1.5u^2 on paper; 8u^2 required, measured by cpp/tests/test_scalar.cpp.
// No fma outside two_prod, so FMA and no-FMA builds give the same bits. Full accuracy for
// 2^-900 <~ a <~ 2^900 (the TwoProd errors of y^2 must stay normal).
inline dd rsqrt(const dd& a) noexcept {
    if (!(a.hi > 0.0 && a.hi < std::numeric_limits<double>::infinity())) {
        if (a.hi == 0.0) return dd(std::copysign(std::numeric_limits<double>::infinity(), a.hi));
        if (a.hi > 0.0) return dd(0.0);  // 1/sqrt(inf)
        return dd(std::numeric_limits<double>::quiet_NaN());
    }
    const double y = 1.0 / std::sqrt(a.hi);
    double pl, hl;
    const double p = two_prod(y, y, pl);
    const double h = two_prod(a.hi, p, hl);
    const double rest = hl + (a.hi * pl + a.lo * p);
    double el;
    const double eh = two_sum(1.0 - h, -rest, el);  // e = eh + el
    const double hy = 0.5 * y;                       // exact
    double cl;
    const double ch = two_prod(hy, eh, cl);          // y eh / 2 exactly
    const double c2 = cl + hy * (el + 0.75 * (eh * eh));
    double vl;
    const double vh = fast_two_sum(y, ch, vl);
    double zl;
    const double zh = fast_two_sum(vh, vl + c2, zl);
    return dd::raw(zh, zl);
}

}  // namespace loschmidt
