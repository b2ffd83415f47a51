// Quad-double arithmetic: a real number held as the unevaluated sum x[0] + x[1] + x[2] + x[3] of
// four non-overlapping binary64 values, largest first (212-bit significand, ~62 decimal digits).
//
// Algorithms after Hida, Li & Bailey 2001, "Algorithms for quad-double precision floating point
// arithmetic" (ARITH-15):
//   renormalization   their two-pass scheme: a bottom-up FastTwoSum sweep that makes the
//                     terms non-overlapping, then a top-down sweep that drops zero errors.
//   qd + qd           when the leading limbs do not cancel (the usual case), the limbs are added
//                     order by order (their "sloppy" scheme, accurate under that condition, see
//                     qd_add_nocancel); otherwise the accurate ("IEEE") addition: merge the eight
//                     limbs by decreasing magnitude and feed them through a two-double accumulator
//                     (Double-Accumulate), emitting a limb whenever the accumulator holds
//                     three non-zero parts. Relative error stays below 2^-212 in the tests
//                     even under deep cancellation, which the cheap "sloppy" addition does not
//                     guarantee. The merge is done by a branch-free sorting network.
//   qd * qd           products a_i*b_j grouped by order eps^(i+j): orders 0-2 exactly (TwoProd),
//                     order 3 and the order-4 terms in plain double, then renormalized.
//   qd / double       long division: five quotient digits q_k = r_0 / b, each followed by the
//                     remainder update r -= q_k * b (accurate addition, so the cancellation in
//                     the remainder is handled exactly enough).
//   qd / qd, sqrt,    ONE Newton correction from the double-double result (Karp & Markstein
//   rsqrt             1997), the residual computed once in qd, the correction in dd: ~2x faster
//                     than two corrections (measured: qd / qd 347 -> 146 ns, sqrt 374 -> 180 ns
//                     on this 2-core machine under load), within ~15 units of 2^-212 measured.
//                     (The paper's five-digit long division for qd / qd is kept as
//                     detail::qd_div_long, for reference and the tests.)
// Mixed forms qd+double and qd*double use the same ideas with the missing limbs removed.
//
// Invariant ("normalized"): |x[i+1]| <= ulp(x[i]) and zero limbs only trail. This is what the
// Hida-Li-Bailey renormalization guarantees; it does not always deliver the stricter
// |x[i+1]| <= ulp(x[i])/2 (after deep cancellation a partial sum can be rounded twice, leaving
// x[0] one ulp from RN(value)). So the representation is not canonical: comparisons are decided by
// the sign of the accurate difference, not by comparing limbs. Operations return normalized values;
// qd::raw() skips the check, qd::from_limbs() restores it.
//
// Special values: zeros and finite results behave; infinities and NaN propagate as non-finite
// values. Full relative accuracy needs the limbs to stay normal: |value| >~ 2^-860 and below
// overflow. Unlike dd, the qd code has data-dependent branches (in the accumulator of the
// addition); merging and renormalization are written with selects.
// Measured maxima (exact reference, cpp/tests/test_scalar.cpp, 20k operands per op incl. deep
// cancellation): + 1.0, * 2.3, / 10.4, sqrt 7.5, rsqrt 5.4 units of 2^-212 (2^-212 ~ 1.5e-64
// relative); the tests require 1e-60 (~6600 units).
#pragma once

#include <cmath>
#include <limits>
#include <type_traits>

#include "double_double.hpp"
#include "eft.hpp"

namespace loschmidt {

struct qd {
    double x[4];

    constexpr qd() noexcept : x{0.0, 0.0, 0.0, 0.0} {}
    constexpr qd(double a) noexcept : x{a, 0.0, 0.0, 0.0} {}  // NOLINT: implicit on purpose
    template <class I, std::enable_if_t<std::is_integral_v<I>, int> = 0>
    constexpr qd(I v) noexcept : x{0.0, 0.0, 0.0, 0.0} {  // NOLINT: implicit on purpose; exact
        const dd d(v);
        x[0] = d.hi;
        x[1] = d.lo;
    }
    explicit constexpr qd(const dd& a) noexcept : x{a.hi, a.lo, 0.0, 0.0} {}

    static constexpr qd raw(double a0, double a1, double a2, double a3) noexcept {
        qd r;
        r.x[0] = a0;
        r.x[1] = a1;
        r.x[2] = a2;
        r.x[3] = a3;
        return r;
    }

    // Accept any four limbs. Normalized input comes back bit-for-bit unchanged; anything else is
    // summed with the qd + double addition (exact up to the final rounding to 212 bits).
    static inline qd from_limbs(double a0, double a1, double a2, double a3) noexcept;

    constexpr double operator[](int i) const noexcept { return x[i]; }

    inline qd& operator+=(const qd& b) noexcept;
    inline qd& operator-=(const qd& b) noexcept;
    inline qd& operator*=(const qd& b) noexcept;
    inline qd& operator/=(const qd& b) noexcept;
    inline qd& operator+=(double b) noexcept;
    inline qd& operator-=(double b) noexcept;
    inline qd& operator*=(double b) noexcept;
    inline qd& operator/=(double b) noexcept;
};

static_assert(sizeof(qd) == 4 * sizeof(double), "qd must be exactly four packed doubles");
static_assert(std::is_trivially_copyable_v<qd>, "qd must be trivially copyable");

// Negation is exact and keeps the invariant (defined first: the algorithms below use it).
inline qd operator-(const qd& a) noexcept { return qd::raw(-a.x[0], -a.x[1], -a.x[2], -a.x[3]); }

namespace detail {

// Round to double-double: the lower limbs are summed first, then joined exactly to x[0].
inline dd to_dd_impl(const qd& a) noexcept {
    double lo;
    const double hi = fast_two_sum(a.x[0], a.x[1] + (a.x[2] + a.x[3]), lo);
    return dd::raw(hi, lo);
}

// Hida-Li-Bailey renormalization of five roughly ordered, possibly overlapping terms
// (c0 largest) into a normalized qd.
inline qd qd_renormalize(double c0, double c1, double c2, double c3, double c4) noexcept {
    // Pass 1, bottom-up: after it, t0 = RN(sum) and t1..t4 are the exact leftover errors. TwoSum
    // rather than FastTwoSum: exact whatever the order of the terms (a term can be smaller than
    // the next after cancellation inside one order of magnitude), the same bits where FastTwoSum
    // was exact, and no slower on the critical path (the sum has the same latency; the error
    // terms are first needed in pass 2).
    double t1, t2, t3, t4;
    double s = two_sum(c3, c4, t4);
    s = two_sum(c2, s, t3);
    s = two_sum(c1, s, t2);
    const double t0 = two_sum(c0, s, t1);

    // Pass 2, top-down: accumulate while the error is zero (the term was absorbed), emit a limb
    // and continue with the error otherwise. This closes the gaps that zeros would leave. Written
    // with branches (Hida, Li & Bailey's nesting): an error is zero only for exactly representable
    // partial sums, so for general data every branch goes the same way and is predicted; the
    // form with selects on every step (same bits) put the selects on the critical path and
    // measured ~15% slower per qd operation.
    double s0, s1 = 0.0, s2 = 0.0, s3 = 0.0;
    s0 = fast_two_sum(t0, t1, s1);
    if (s1 != 0.0) {
        s1 = fast_two_sum(s1, t2, s2);
        if (s2 != 0.0) {
            s2 = fast_two_sum(s2, t3, s3);
            if (s3 != 0.0)
                s3 += t4;  // past four limbs the rest is below half an ulp
            else
                s2 = fast_two_sum(s2, t4, s3);
        } else {
            s1 = fast_two_sum(s1, t3, s2);
            if (s2 != 0.0)
                s2 = fast_two_sum(s2, t4, s3);
            else
                s1 = fast_two_sum(s1, t4, s2);
        }
    } else {
        s0 = fast_two_sum(s0, t2, s1);
        if (s1 != 0.0) {
            s1 = fast_two_sum(s1, t3, s2);
            if (s2 != 0.0)
                s2 = fast_two_sum(s2, t4, s3);
            else
                s1 = fast_two_sum(s1, t4, s2);
        } else {
            s0 = fast_two_sum(s0, t3, s1);
            if (s1 != 0.0)
                s1 = fast_two_sum(s1, t4, s2);
            else
                s0 = fast_two_sum(s0, t4, s1);
        }
    }
    return qd::raw(s0, s1, s2, s3);
}

// One Double-Accumulate step (Hida, Li & Bailey 2001): add t into the two-double accumulator
// (u, v), |u| >= |v|. Returns true and sets `emit` when the exact sum needs three doubles; the
// top one is then final enough to leave the accumulator.
inline bool qd_accumulate(double& u, double& v, double t, double& emit) noexcept {
    double vn, un;
    double s = two_sum(v, t, vn);
    s = two_sum(u, s, un);  // s + un + vn == u + v + t exactly
    if (un == 0.0) {
        u = s;
        v = vn;
        return false;
    }
    if (vn == 0.0) {
        u = s;
        v = un;
        return false;
    }
    emit = s;
    u = un;
    v = vn;
    return true;
}

// Compare-exchange by magnitude: afterwards |x| >= |y|.
inline void qd_order(double& x, double& y) noexcept {
    const bool swap = std::fabs(x) < std::fabs(y);
    const double hi = swap ? y : x;
    const double lo = swap ? x : y;
    x = hi;
    y = lo;
}

// qd + qd when the leading limbs do not cancel (|RN(a0 + b0)| >= max(|a0|, |b0|) / 2, so that
// |a| + |b| <= ~3 |a + b|): the limbs are added order by order (Hida, Li & Bailey's "sloppy"
// scheme): TwoSum of a_i + b_i (exact), the order-1 and order-2 sums with their errors by TwoSum
// (exact), the order-3 terms (and the order-4 error) in plain double, whose rounding is
// ~4 * 2^-212 (|a| + |b|), then renormalized. With the condition: <= ~13 units of 2^-212 relative
// on paper, measured in cpp/tests/test_scalar.cpp. The adds of the four orders are independent,
// so this is much shorter than the merge-and-accumulate path, which stays for cancellation.
inline qd qd_add_nocancel(const qd& a, const qd& b, double s0, double e0) noexcept {
    double e1, e2, e3;
    const double s1 = two_sum(a.x[1], b.x[1], e1);
    const double s2 = two_sum(a.x[2], b.x[2], e2);
    const double s3 = two_sum(a.x[3], b.x[3], e3);
    double f1;
    const double x1 = two_sum(s1, e0, f1);  // order 1, error order 2
    double g1, g2;
    double x2 = two_sum(s2, e1, g1);  // order 2
    x2 = two_sum(x2, f1, g2);
    const double x3 = s3 + (e2 + (g1 + g2));  // order 3
    return qd_renormalize(s0, x1, x2, x3, e3);
}

// Accurate ("IEEE") qd + qd addition of Hida, Li & Bailey 2001, taken when the leading limbs
// cancel (see qd_add_nocancel for the other case; the test is one TwoSum that the short path
// reuses).
inline qd qd_add(const qd& a, const qd& b) noexcept {
    {
        double e0;
        const double s0 = two_sum(a.x[0], b.x[0], e0);
        if (std::fabs(s0) >= 0.5 * std::fmax(std::fabs(a.x[0]), std::fabs(b.x[0])))
            return qd_add_nocancel(a, b, s0, e0);
    }
    // Merge by decreasing magnitude; each operand's limbs are already in that order. Batcher's
    // odd-even merge network (9 compare-exchanges, depth 3; checked exhaustively by the 0-1
    // principle) does this without branches: the merge order is data-dependent, and as
    // branches it would mispredict.
    double m[8] = {a.x[0], a.x[1], a.x[2], a.x[3], b.x[0], b.x[1], b.x[2], b.x[3]};
    qd_order(m[0], m[4]);
    qd_order(m[1], m[5]);
    qd_order(m[2], m[6]);
    qd_order(m[3], m[7]);
    qd_order(m[2], m[4]);
    qd_order(m[3], m[5]);
    qd_order(m[1], m[2]);
    qd_order(m[3], m[4]);
    qd_order(m[5], m[6]);

    double v;
    double u = fast_two_sum(m[0], m[1], v);  // |m0| >= |m1|
    double out[4] = {0.0, 0.0, 0.0, 0.0};
    int k = 0;
    int n = 2;
    for (; n < 8 && k < 4; ++n) {
        double e;
        if (qd_accumulate(u, v, m[n], e)) out[k++] = e;
    }

    // Fold what is left (the accumulator and any unmerged limbs) into the tail for the final
    // renormalization, rather than dropping it.
    double tail = 0.0;
    if (k == 4) {
        double rest = 0.0;
        for (int r = 7; r >= n; --r) rest += m[r];
        tail = u + (v + rest);
    } else {
        out[k++] = u;
        if (k < 4) {
            out[k] = v;
        } else {
            tail = v;
        }
    }
    return qd_renormalize(out[0], out[1], out[2], out[3], tail);
}

// qd + double: a TwoSum ripple through the limbs (exact), then renormalization.
inline qd qd_add_fp(const qd& a, double b) noexcept {
    double e;
    const double s0 = two_sum(a.x[0], b, e);
    const double s1 = two_sum(a.x[1], e, e);
    const double s2 = two_sum(a.x[2], e, e);
    const double s3 = two_sum(a.x[3], e, e);
    return qd_renormalize(s0, s1, s2, s3, e);
}

// qd * double. With eps ~ 2^-53: a_i*b is of order eps^i. Orders 0..2 exactly by TwoProd, the
// order-3 terms (a3*b and the order-2 product errors) in plain double, whose rounding is order 4.
inline qd qd_mul_fp(const qd& a, double b) noexcept {
    double q0, q1, q2;
    const double p0 = two_prod(a.x[0], b, q0);
    const double p1 = two_prod(a.x[1], b, q1);
    const double p2 = two_prod(a.x[2], b, q2);
    const double p3 = a.x[3] * b;

    double e1;
    const double s1 = two_sum(p1, q0, e1);  // order 1, error order 2
    double e2a, e2b;
    double s2 = two_sum(p2, q1, e2a);  // order 2
    s2 = two_sum(s2, e1, e2b);
    const double s3 = p3 + (q2 + (e2a + e2b));  // order 3
    return qd_renormalize(p0, s1, s2, s3, 0.0);
}

// qd * qd: see the file comment.
inline qd qd_mul(const qd& a, const qd& b) noexcept {
    const double* x = a.x;
    const double* y = b.x;
    // Order 0 and 1 and 2 products, exactly.
    double e00, e01, e10, e02, e11, e20;
    const double p00 = two_prod(x[0], y[0], e00);
    const double p01 = two_prod(x[0], y[1], e01);
    const double p10 = two_prod(x[1], y[0], e10);
    const double p02 = two_prod(x[0], y[2], e02);
    const double p11 = two_prod(x[1], y[1], e11);
    const double p20 = two_prod(x[2], y[0], e20);
    // Order 3 and 4 in plain double; their own rounding errors are order 4 and 5.
    const double o3 = (x[0] * y[3] + x[3] * y[0]) + (x[1] * y[2] + x[2] * y[1]);
    const double o4 = x[1] * y[3] + x[3] * y[1] + x[2] * y[2];

    // Order 1: p01 + p10 + e00, exactly as s1 plus order-2 errors c1, c2.
    double c1, c2;
    double s1 = two_sum(p01, p10, c1);
    s1 = two_sum(s1, e00, c2);

    // Order 2: seven terms summed by a TwoSum chain; each error is order 3.
    double d1, d2, d3, d4, d5, d6;
    double s2 = two_sum(p02, p20, d1);
    s2 = two_sum(s2, p11, d2);
    s2 = two_sum(s2, e01, d3);
    s2 = two_sum(s2, e10, d4);
    s2 = two_sum(s2, c1, d5);
    s2 = two_sum(s2, c2, d6);

    // Order 3 (and the order-4 remainder) in plain double.
    const double s3 = ((o3 + (e02 + e20 + e11)) + ((d1 + d2) + (d3 + d4) + (d5 + d6))) + o4;
    return qd_renormalize(p00, s1, s2, s3, 0.0);
}

// qd / qd by Hida-Li-Bailey long division with five quotient digits (kept for reference and
// the tests; operator/ uses qd_div below, which is faster at the same accuracy).
inline qd qd_div_long(const qd& a, const qd& b) noexcept {
    const double q0 = a.x[0] / b.x[0];
    qd r = qd_add(a, qd_mul_fp(b, -q0));
    const double q1 = r.x[0] / b.x[0];
    r = qd_add(r, qd_mul_fp(b, -q1));
    const double q2 = r.x[0] / b.x[0];
    r = qd_add(r, qd_mul_fp(b, -q2));
    const double q3 = r.x[0] / b.x[0];
    r = qd_add(r, qd_mul_fp(b, -q3));
    const double q4 = r.x[0] / b.x[0];
    return qd_renormalize(q0, q1, q2, q3, q4);
}

// qd * dd: qd_mul with the missing limbs of the dd removed (x * (y0 + y1)): orders 0-2 exactly,
// order 3 and the order-4 term in plain double, then renormalized. Same truncation as qd_mul.
inline qd qd_mul_dd(const qd& a, const dd& b) noexcept {
    const double* x = a.x;
    double e00, e01, e10, e02, e11;
    const double p00 = two_prod(x[0], b.hi, e00);
    const double p01 = two_prod(x[1], b.hi, e01);
    const double p10 = two_prod(x[0], b.lo, e10);
    const double p02 = two_prod(x[2], b.hi, e02);
    const double p11 = two_prod(x[1], b.lo, e11);
    const double o3 = x[3] * b.hi + x[2] * b.lo;
    const double o4 = x[3] * b.lo;
    double c1, c2;
    double s1 = two_sum(p01, p10, c1);
    s1 = two_sum(s1, e00, c2);
    double d1, d2, d3, d4, d5;
    double s2 = two_sum(p02, p11, d1);
    s2 = two_sum(s2, e01, d2);
    s2 = two_sum(s2, e10, d3);
    s2 = two_sum(s2, c1, d4);
    s2 = two_sum(s2, c2, d5);
    const double s3 = ((o3 + (e02 + e11)) + ((d1 + d2) + (d3 + d4) + d5)) + o4;
    return qd_renormalize(p00, s1, s2, s3, 0.0);
}

// x + c as a qd, for a dd value x and a dd correction |c| <~ 2^-90 |x| (a Newton step's): the sum
// is formed exactly (TwoSum of the overlapping middle limbs; should x.lo and c.hi cancel, their
// sum is exact and no smaller than c.lo), then renormalized.
inline qd qd_join_dd(const dd& x, const dd& c) noexcept {
    double e1, e2;
    const double s1 = two_sum(x.lo, c.hi, e1);
    const double s2 = two_sum(e1, c.lo, e2);
    return qd_renormalize(x.hi, s1, s2, e2, 0.0);
}

// qd / qd: ONE Newton correction from a double-double seed, the residual computed once (Karp &
// Markstein 1997, "High-precision division and square root", ACM TOMS 23(4)). q0 = a/b in dd
// (relative error d0 <= 9.8u^2 for the division plus u^2 for rounding a and b to dd: <= ~12u^2,
// u = 2^-53); r = a - q0 b in qd (the product's truncation and the sum's rounding: a few units of
// 2^-212 |a|); the correction c = r/b in dd (relative error <= ~12u^2 of |c| <= 12u^2 |a/b|); the
// result q0 + c, exact up to the final renormalization. Bound on paper ~150 units of 2^-212
// (~4e-62 relative, against the 1e-60 the tests require); measured in cpp/tests/test_scalar.cpp.
inline qd qd_div(const qd& a, const qd& b) noexcept {
    const dd bd = to_dd_impl(b);
    const dd q0 = dd_div(to_dd_impl(a), bd);
    const qd r = qd_add(a, -qd_mul_dd(b, q0));
    return qd_join_dd(q0, dd_div(to_dd_impl(r), bd));
}

// qd / double: same long division; q_k * b is exact as a TwoProd pair, so each remainder update
// subtracts a two-limb value.
inline qd qd_div_fp(const qd& a, double b) noexcept {
    double q[5];
    qd r = a;
    for (int k = 0; k < 4; ++k) {
        q[k] = r.x[0] / b;
        double pl;
        const double ph = two_prod(q[k], b, pl);
        r = qd_add(r, qd::raw(-ph, -pl, 0.0, 0.0));
    }
    q[4] = r.x[0] / b;
    return qd_renormalize(q[0], q[1], q[2], q[3], q[4]);
}

}  // namespace detail

namespace detail {
// |b| <= ulp(a) for a != 0 (normal or subnormal a).
inline bool qd_limb_fits(double a, double b) noexcept {
    if (a == 0.0) return b == 0.0;
    if (!std::isfinite(a) || !std::isfinite(b)) return false;
    const int e = std::ilogb(a);
    const double ulp = std::ldexp(1.0, (e < -1022 ? -1022 : e) - 52);
    return std::fabs(b) <= ulp;
}
}  // namespace detail

inline qd qd::from_limbs(double a0, double a1, double a2, double a3) noexcept {
    if (detail::qd_limb_fits(a0, a1) && detail::qd_limb_fits(a1, a2) &&
        detail::qd_limb_fits(a2, a3))
        return raw(a0, a1, a2, a3);
    qd r(a0);
    r = detail::qd_add_fp(r, a1);
    r = detail::qd_add_fp(r, a2);
    r = detail::qd_add_fp(r, a3);
    return r;
}

// ---- arithmetic operators ------------------------------------------------------------------

inline qd operator+(const qd& a) noexcept { return a; }

inline qd operator+(const qd& a, const qd& b) noexcept { return detail::qd_add(a, b); }
inline qd operator-(const qd& a, const qd& b) noexcept { return detail::qd_add(a, -b); }
inline qd operator*(const qd& a, const qd& b) noexcept { return detail::qd_mul(a, b); }
inline qd operator/(const qd& a, const qd& b) noexcept { return detail::qd_div(a, b); }

inline qd operator+(const qd& a, double b) noexcept { return detail::qd_add_fp(a, b); }
inline qd operator+(double a, const qd& b) noexcept { return detail::qd_add_fp(b, a); }
inline qd operator-(const qd& a, double b) noexcept { return detail::qd_add_fp(a, -b); }
inline qd operator-(double a, const qd& b) noexcept { return detail::qd_add_fp(-b, a); }
inline qd operator*(const qd& a, double b) noexcept { return detail::qd_mul_fp(a, b); }
inline qd operator*(double a, const qd& b) noexcept { return detail::qd_mul_fp(b, a); }
inline qd operator/(const qd& a, double b) noexcept { return detail::qd_div_fp(a, b); }
inline qd operator/(double a, const qd& b) noexcept { return detail::qd_div(qd(a), b); }

inline qd& qd::operator+=(const qd& b) noexcept { return *this = *this + b; }
inline qd& qd::operator-=(const qd& b) noexcept { return *this = *this - b; }
inline qd& qd::operator*=(const qd& b) noexcept { return *this = *this * b; }
inline qd& qd::operator/=(const qd& b) noexcept { return *this = *this / b; }
inline qd& qd::operator+=(double b) noexcept { return *this = *this + b; }
inline qd& qd::operator-=(double b) noexcept { return *this = *this - b; }
inline qd& qd::operator*=(double b) noexcept { return *this = *this * b; }
inline qd& qd::operator/=(double b) noexcept { return *this = *this / b; }

// ---- comparisons -------------------------------------------------------------------------
// Decided by the sign of the difference, computed with the accurate addition: its relative error
// is far below 1, so the sign is right and an exactly zero difference gives zero. (Comparing
// limbs lexicographically would need a canonical representation, which renormalization does not
// guarantee; see the invariant above.) Identical limbs short-cut to "equal".

namespace detail {
// -1, 0, +1 for a < b, a == b, a > b; 2 if unordered (NaN).
inline int qd_sign(const qd& d) noexcept {
    if (d.x[0] < 0.0) return -1;
    if (d.x[0] > 0.0) return 1;
    if (d.x[0] == 0.0) return 0;
    return 2;
}
inline int qd_compare(const qd& a, const qd& b) noexcept {
    if (a.x[0] == b.x[0] && a.x[1] == b.x[1] && a.x[2] == b.x[2] && a.x[3] == b.x[3]) return 0;
    return qd_sign(qd_add(a, -b));
}
inline int qd_compare(const qd& a, double b) noexcept {
    if (a.x[0] == b && a.x[1] == 0.0) return 0;  // zero limbs only trail
    return qd_sign(qd_add_fp(a, -b));
}
}  // namespace detail

inline bool operator==(const qd& a, const qd& b) noexcept { return detail::qd_compare(a, b) == 0; }
inline bool operator!=(const qd& a, const qd& b) noexcept { return detail::qd_compare(a, b) != 0; }
inline bool operator<(const qd& a, const qd& b) noexcept { return detail::qd_compare(a, b) == -1; }
inline bool operator>(const qd& a, const qd& b) noexcept { return detail::qd_compare(a, b) == 1; }
inline bool operator<=(const qd& a, const qd& b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == -1 || c == 0;
}
inline bool operator>=(const qd& a, const qd& b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == 1 || c == 0;
}

inline bool operator==(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == 0;
}
inline bool operator!=(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c != 0;
}
inline bool operator<(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == -1;
}
inline bool operator>(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == 1;
}
inline bool operator<=(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == -1 || c == 0;
}
inline bool operator>=(const qd& a, double b) noexcept {
    const int c = detail::qd_compare(a, b);
    return c == 1 || c == 0;
}
inline bool operator==(double a, const qd& b) noexcept { return b == a; }
inline bool operator!=(double a, const qd& b) noexcept { return b != a; }
inline bool operator<(double a, const qd& b) noexcept { return b > a; }
inline bool operator>(double a, const qd& b) noexcept { return b < a; }
inline bool operator<=(double a, const qd& b) noexcept { return b >= a; }
inline bool operator>=(double a, const qd& b) noexcept { return b <= a; }

// ---- functions ---------------------------------------------------------------------------

// x[0] alone can be one ulp off RN(value) (see the invariant); adding the tail restores it.
inline double to_double(const qd& a) noexcept { return a.x[0] + (a.x[1] + (a.x[2] + a.x[3])); }

// Round to double-double (relative error ~2^-106).
inline dd to_dd(const qd& a) noexcept { return detail::to_dd_impl(a); }

inline qd abs(const qd& a) noexcept {
    const double s = std::copysign(1.0, a.x[0]);
    return qd::raw(a.x[0] * s, a.x[1] * s, a.x[2] * s, a.x[3] * s);
}

inline bool isfinite(const qd& a) noexcept {
    return std::isfinite(a.x[0]) && std::isfinite(a.x[1]) && std::isfinite(a.x[2]) &&
           std::isfinite(a.x[3]);
}
inline bool isnan(const qd& a) noexcept {
    return std::isnan(a.x[0]) || std::isnan(a.x[1]) || std::isnan(a.x[2]) || std::isnan(a.x[3]);
}

inline qd ldexp(const qd& a, int n) noexcept {
    return qd::raw(std::ldexp(a.x[0], n), std::ldexp(a.x[1], n), std::ldexp(a.x[2], n),
                   std::ldexp(a.x[3], n));
}

// sqrt: ONE Newton (Heron) correction from the double-double root, the residual computed once
// (Karp & Markstein 1997): y0 = sqrt(a) in dd (relative error d <= ~3.5u^2 measured, see
// double_double.hpp, plus rounding a to dd), r = a - y0^2 in qd (y0^2 by the truncated qd * dd
// product), y = y0 + r / (2 y0) with the correction in dd. The exact step leaves d^2/2 (~6 units of
// 2^-212); the dd correction adds ~12u^2 of |r/(2 y0)| <= d |y| (~40 units). Measured in
// cpp/tests/test_scalar.cpp against the 1e-60 required.
inline qd sqrt(const qd& a) noexcept {
    const double a0 = a.x[0];
    if (!(a0 > 0.0 && a0 < std::numeric_limits<double>::infinity())) {
        if (a0 == 0.0 || a0 > 0.0) return a;  // +-0 and +inf
        return qd(std::numeric_limits<double>::quiet_NaN());
    }
    const dd y0 = sqrt(detail::to_dd_impl(a));
    const qd r = detail::qd_add(a, -detail::qd_mul_dd(qd(y0), y0));
    const dd twice = dd::raw(2.0 * y0.hi, 2.0 * y0.lo);  // exact
    return detail::qd_join_dd(y0, detail::dd_div(detail::to_dd_impl(r), twice));
}

// 1/sqrt(a), for inverse distances in force loops (r^-3 = rsqrt(r^2)^3). ONE Newton correction
// x0 + x0 e / 2 from the dd seed x0 = rsqrt(a) (double_double.hpp: d <= ~5u^2, plus rounding a to
// dd), with the residual e = 1 - a x0^2 computed once in qd (x0^2 by the truncated qd * dd
// product, then a qd product), the correction in dd. The exact step leaves 3d^2/2 (~45 units of
// 2^-212 on paper); the dd correction adds ~6u^2 of |x0 e / 2| <= d |x| (~35 units). Measured in
// cpp/tests/test_scalar.cpp against the 1e-60 required.
inline qd rsqrt(const qd& a) noexcept {
    const double a0 = a.x[0];
    if (!(a0 > 0.0 && a0 < std::numeric_limits<double>::infinity())) {
        if (a0 == 0.0) return qd(std::copysign(std::numeric_limits<double>::infinity(), a0));
        if (a0 > 0.0) return qd(0.0);  // 1/sqrt(inf)
        return qd(std::numeric_limits<double>::quiet_NaN());
    }
    const dd x0 = rsqrt(detail::to_dd_impl(a));
    const qd e = detail::qd_add_fp(-detail::qd_mul(a, detail::qd_mul_dd(qd(x0), x0)), 1.0);
    const dd c = detail::dd_mul(x0, detail::to_dd_impl(e));
    return detail::qd_join_dd(x0, dd::raw(0.5 * c.hi, 0.5 * c.lo));  // halving exact
}

}  // namespace loschmidt
