// Error-free transformations (EFTs) of IEEE-754 binary64: the exact building blocks of the
// double-double (dd) and quad-double (qd) types. Each returns the rounded result and stores the
// exact rounding error, so that  result + err == exact  holds in real arithmetic.
//
// Validity (all of these): round-to-nearest-even, no reassociation or contraction by the
// compiler (build with -ffp-contract=off, never -ffast-math / -Ofast / -fassociative-math), no
// overflow, and for products no underflow of the error term (|a*b| >= 2^-969 or a*b == 0).
//
// Product error: by default two_prod uses one std::fma. With -mfma (or -march supporting FMA)
// this is a single instruction; without it std::fma is a call into the C library, which is still
// exact (correctly rounded fma) but slower. Defining LOSCHMIDT_NO_FMA selects Dekker's
// split-based product instead (no fma anywhere in the dd/qd code); it needs |a|,|b| <= 2^995.
#pragma once

#include <cmath>

// Value-changing floating-point options that compilers announce by macro. (-ffp-contract=fast
// announces nothing; the build must pass -ffp-contract=off, and the tests would catch it.)
#if defined(__FAST_MATH__) || defined(__ASSOCIATIVE_MATH__) || defined(__RECIPROCAL_MATH__) || \
    (defined(__FINITE_MATH_ONLY__) && __FINITE_MATH_ONLY__)
#error "loschmidt's extended precision needs IEEE semantics: no -ffast-math / -Ofast / -fassociative-math / -freciprocal-math / -ffinite-math-only"
#endif

namespace loschmidt {

#if defined(LOSCHMIDT_NO_FMA)
inline constexpr bool eft_uses_fma = false;
#else
inline constexpr bool eft_uses_fma = true;
#endif

#if defined(__FMA__)
inline constexpr bool eft_fma_is_hardware = true;   // compiled to an fma instruction
#else
inline constexpr bool eft_fma_is_hardware = false;  // std::fma is a library call (if used)
#endif

// Knuth's TwoSum (TAOCP vol. 2, 4.2.2): 6 flops, no branch, no precondition on magnitudes.
inline double two_sum(double a, double b, double& err) noexcept {
    const double s = a + b;
    const double a_virtual = s - b;   // the part of s that came from a
    const double b_virtual = s - a_virtual;
    const double a_lost = a - a_virtual;
    const double b_lost = b - b_virtual;
    err = a_lost + b_lost;
    return s;
}

// Dekker's FastTwoSum (1971): 3 flops. Exact when exponent(a) >= exponent(b), in particular when
// |a| >= |b| or a == 0. Callers must guarantee that ordering.
inline double fast_two_sum(double a, double b, double& err) noexcept {
    const double s = a + b;
    const double b_virtual = s - a;   // exact under the precondition (Sterbenz-type argument)
    err = b - b_virtual;
    return s;
}

// Veltkamp's splitting (Dekker 1971): a == hi + lo exactly, each half fits in 26 bits (plus sign),
// so products of halves are exact in binary64. The constant is 2^27 + 1. Overflows for |a| > 2^995.
inline void split(double a, double& hi, double& lo) noexcept {
    const double c = 134217729.0 * a;   // 2^27 + 1, exactly representable
    hi = c - (c - a);
    lo = a - hi;
}

// Dekker's product without FMA (1971): 17 flops. err is exact under the split's range condition.
inline double two_prod_dekker(double a, double b, double& err) noexcept {
    const double p = a * b;
    double ah, al, bh, bl;
    split(a, ah, al);
    split(b, bh, bl);
    // Subtract the partial products from p in decreasing size, so each step is exact.
    err = ((ah * bh - p) + ah * bl + al * bh) + al * bl;
    return p;
}

// Exact product via FMA: a*b - RN(a*b) is representable and fma computes it with one rounding.
inline double two_prod_fma(double a, double b, double& err) noexcept {
    const double p = a * b;
    err = std::fma(a, b, -p);
    return p;
}

// The product EFT used by the dd/qd code.
inline double two_prod(double a, double b, double& err) noexcept {
#if defined(LOSCHMIDT_NO_FMA)
    return two_prod_dekker(a, b, err);
#else
    return two_prod_fma(a, b, err);
#endif
}

}  // namespace loschmidt
