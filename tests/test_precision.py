"""Extended-precision arithmetic and exact conversions, checked against outside references.

References: exact rational arithmetic (``fractions.Fraction``) for the error-free transformations and
conversions; mpmath at 400 bits (about 120 digits) for dd and qd operations. Error bounds: accurate
double-word operations have proven relative error bounds of at most 15u^2 + O(u^3) (Joldes, Muller &
Popescu 2017, ACM TOMS 44(2)); the project asks <= 8u^2 for dd (u = 2^-53) and <= 1e-60 for qd
(Hida, Li & Bailey 2001 give about 2^-209 for their accurate quad-double operations).
"""

from __future__ import annotations

import decimal
from fractions import Fraction

import mpmath
import numpy as np
import pytest

import loschmidt
from loschmidt import _core
from loschmidt import precision as P

U = 2.0**-53
N_PAIRS = 10_000


# ---------------------------------------------------------------------------------------------------
# operand generation


def _expansion(rng: np.random.Generator, count: int, k: int, emin: int, emax: int) -> np.ndarray:
    """Random normalized k-limb expansions with exponents in [emin, emax]."""
    hi = rng.uniform(1.0, 2.0, count) * np.exp2(rng.integers(emin, emax + 1, count).astype(float))
    hi *= rng.choice([-1.0, 1.0], count)
    limbs = [hi]
    for _ in range(1, k):
        prev = limbs[-1]
        limbs.append(prev * U * rng.uniform(-1.0, 1.0, count))
    arr = np.stack(limbs, axis=-1)
    # renormalize exactly through the exact rational value
    return _renormalize(arr, k)


def _renormalize(arr: np.ndarray, k: int) -> np.ndarray:
    prec = {2: "dd", 4: "qd"}[k]
    out = np.empty_like(arr)
    for i, row in enumerate(arr):
        out[i] = P.to_limbs(sum((Fraction(float(x)) for x in row), Fraction(0)), prec)
    return out


def _special(k: int) -> np.ndarray:
    """Signed zeros, exact powers of two, and small integers."""
    vals = []
    for x in (0.0, -0.0, 1.0, -1.0, 2.0**-500, 2.0**500, -(2.0**-37), 3.0, 0.5, 2.0**52, 2.0**-1022):
        row = np.zeros(k)
        row[0] = x
        vals.append(row)
    return np.array(vals)


def _operands(precision: str, op: str, seed: int) -> tuple[np.ndarray, np.ndarray]:
    k = P.limb_count(precision)
    rng = np.random.default_rng(seed)
    n_wide = N_PAIRS // 2
    n_near = N_PAIRS // 4
    n_same = N_PAIRS - n_wide - n_near
    if op in ("mul", "div"):
        ea, eb = (-200, 200), (-200, 200)
    else:
        ea, eb = (-300, 300), (-300, 300)
    a_wide = _expansion(rng, n_wide, k, *ea)
    b_wide = _expansion(rng, n_wide, k, *eb)
    # near-cancellation: b = -a * (1 + tiny), so a + b loses most leading bits
    a_near = _expansion(rng, n_near, k, -60, 60)
    tiny = np.exp2(-rng.integers(20, 53 * k - 4, n_near).astype(float)) * rng.choice([-1.0, 1.0], n_near)
    b_near = np.empty_like(a_near)
    for i in range(n_near):
        fa = sum((Fraction(float(x)) for x in a_near[i]), Fraction(0))
        b_near[i] = P.to_limbs(-fa * (1 + Fraction(float(tiny[i]))), precision)
    if op == "sub":
        b_near = -b_near
    a_same = _expansion(rng, n_same, k, -4, 4)
    b_same = _expansion(rng, n_same, k, -4, 4)
    sp = _special(k)
    a = np.concatenate([a_wide, a_near, a_same, sp, np.repeat(sp[:3], 3, axis=0)])
    b = np.concatenate([b_wide, b_near, b_same, sp[::-1], np.tile(sp[:3], (3, 1))])
    return a, b


def _mp(row: np.ndarray):
    return mpmath.fsum([mpmath.mpf(float(x)) for x in row])


def _max_relative_error(got: np.ndarray, ref: list) -> float:
    worst = 0.0
    for g, r in zip(got, ref):
        val = _mp(g)
        if r == 0:
            assert val == 0, f"expected an exact zero, got {val}"
            continue
        err = abs((val - r) / r)
        worst = max(worst, float(err))
    return worst


BOUND = {"dd": 8 * U * U, "qd": 1e-60}


@pytest.mark.parametrize("prec", ["dd", "qd"])
@pytest.mark.parametrize("op", ["add", "sub", "mul", "div"])
def test_binary_operations_match_mpmath(prec: str, op: str) -> None:
    seed = {"add": 1, "sub": 2, "mul": 3, "div": 4}[op] + (10 if prec == "qd" else 0)
    a, b = _operands(prec, op, seed)
    if op == "div":
        keep = b[:, 0] != 0
        a, b = a[keep], b[keep]
    got = getattr(P, op)(a, b, prec)
    with mpmath.workprec(400):
        fn = {"add": lambda x, y: x + y, "sub": lambda x, y: x - y, "mul": lambda x, y: x * y, "div": lambda x, y: x / y}[op]
        ref = [fn(_mp(x), _mp(y)) for x, y in zip(a, b)]
        worst = _max_relative_error(got, ref)
    assert len(a) >= N_PAIRS
    assert worst <= BOUND[prec], f"{prec} {op}: max relative error {worst:.3e} (bound {BOUND[prec]:.1e})"


@pytest.mark.parametrize("prec", ["dd", "qd"])
def test_sqrt_matches_mpmath(prec: str) -> None:
    k = P.limb_count(prec)
    rng = np.random.default_rng(20 + k)
    a = np.abs(_expansion(rng, N_PAIRS, k, -600, 600))
    a[:, :] = np.where(a[:, :1] < 0, -a, a)
    a = np.concatenate([a, np.abs(_special(k))])
    a = np.array([r if r[0] >= 0 else -r for r in a])
    got = P.sqrt(a, prec)
    with mpmath.workprec(400):
        ref = [mpmath.sqrt(_mp(x)) for x in a]
        worst = _max_relative_error(got, ref)
    assert worst <= BOUND[prec], f"{prec} sqrt: max relative error {worst:.3e}"


def test_two_sum_is_exact() -> None:
    # Knuth's TwoSum: s + e == a + b exactly (checked with exact rationals).
    rng = np.random.default_rng(5)
    for _ in range(5000):
        a = float(rng.uniform(-1, 1) * 2.0 ** int(rng.integers(-60, 60)))
        b = float(rng.uniform(-1, 1) * 2.0 ** int(rng.integers(-60, 60)))
        s, e = _core.two_sum(a, b)
        assert s == a + b
        assert Fraction(s) + Fraction(e) == Fraction(a) + Fraction(b)


def test_two_prod_is_exact() -> None:
    # TwoProd with FMA: p + e == a * b exactly.
    rng = np.random.default_rng(6)
    for _ in range(5000):
        a = float(rng.uniform(-1, 1) * 2.0 ** int(rng.integers(-200, 200)))
        b = float(rng.uniform(-1, 1) * 2.0 ** int(rng.integers(-200, 200)))
        p, e = _core.two_prod(a, b)
        assert p == a * b
        assert Fraction(p) + Fraction(e) == Fraction(a) * Fraction(b)


# ---------------------------------------------------------------------------------------------------
# conversions


@pytest.mark.parametrize("prec", ["f64", "dd", "qd"])
def test_decimal_strings_round_correctly(prec: str) -> None:
    # Reference: mpmath at 500 bits, limbs peeled off one at a time by correctly rounded conversion.
    k = P.limb_count(prec)
    for text in ["0.97000436", "-0.24308753", "-0.93240737", "6.32591398", "0.1", "1e-20", "123456789.000000001"]:
        got = P.to_limbs(text, prec)
        with mpmath.workprec(500):
            rest = mpmath.mpf(text)
            expect = []
            for _ in range(k):
                h = float(rest)
                expect.append(h)
                rest -= h
        assert list(got) == expect, text
        # and the error is below half an ulp of the last limb
        err = abs(P.to_fraction(got) - Fraction(text))
        assert err <= Fraction(abs(np.spacing(got[-1]))) / 2 or err == 0


@pytest.mark.parametrize("prec", ["f64", "dd", "qd"])
def test_fraction_round_trip_is_exact(prec: str) -> None:
    rng = np.random.default_rng(7)
    k = P.limb_count(prec)
    if k == 1:
        x = rng.uniform(-1e10, 1e10, (50, 1))
    else:
        x = _expansion(rng, 50, k, -100, 100)
    for row in x:
        assert np.array_equal(P.to_limbs(P.to_fraction(row), prec), row)
        mp = P.to_mpmath(row)
        with mpmath.workprec(2000):
            assert P.to_fraction(P.to_limbs(mp, prec)) == P.to_fraction(row)


def test_accepted_input_types_agree() -> None:
    third = Fraction(1, 3)
    a = P.to_limbs(third, "qd")
    assert np.array_equal(P.to_limbs("1/3", "qd"), a)
    with mpmath.workprec(1000):
        assert np.array_equal(P.to_limbs(mpmath.mpf(1) / 3, "qd"), a)
    with decimal.localcontext() as ctx:
        ctx.prec = 40
        d = decimal.Decimal("0.97000436")
    assert np.array_equal(P.to_limbs(d, "dd"), P.to_limbs("0.97000436", "dd"))
    nested = P.to_limbs([[1, "2.5"], [Fraction(1, 4), 0.125]], "dd")
    assert nested.shape == (2, 2, 2)
    assert nested[0, 1, 0] == 2.5 and nested[1, 0, 0] == 0.25
    big = P.to_limbs(2**60 + 1, "dd")
    assert P.to_fraction(big) == 2**60 + 1


def test_to_string_digits() -> None:
    x = P.to_limbs("1/3", "dd")
    assert P.to_string(x, 20) == "3.3333333333333333333e-1"
    assert np.array_equal(P.to_limbs(P.to_string(x), "dd"), x)
    assert Fraction(P.to_string(x, exact=True)) == P.to_fraction(x)


def test_convert_between_precisions() -> None:
    x = P.to_limbs("1/3", "qd")
    dd = P.convert(x, "dd")
    assert np.array_equal(dd, P.to_limbs("1/3", "dd"))
    assert np.array_equal(P.convert(dd, "qd")[:2], dd)


# ---------------------------------------------------------------------------------------------------
# bad input


@pytest.mark.parametrize(
    "value, exc",
    [("nan", ValueError), ("inf", ValueError), (float("nan"), ValueError), ("abc", ValueError),
     (object(), TypeError), (True, TypeError), ([[1, 2], [3]], ValueError), (1e400 if False else 10**400, ValueError)],
)
def test_bad_values_name_the_argument(value, exc) -> None:
    with pytest.raises(exc, match="speed"):
        P.to_limbs(value, "dd", name="speed")


def test_unknown_precision() -> None:
    with pytest.raises(ValueError, match="precision"):
        P.to_limbs(1, "float128")
    with pytest.raises(TypeError, match="precision"):
        P.limb_count(3)
    assert loschmidt.PRECISIONS == ("f64", "f64c", "dd", "qd")


def test_nan_array_rejected() -> None:
    with pytest.raises(ValueError, match="values"):
        P.to_limbs(np.array([1.0, np.nan]), "qd")


def test_shape_mismatch_in_operations() -> None:
    with pytest.raises(ValueError, match="broadcast"):
        P.add(np.zeros((3, 2)), np.zeros((4, 2)), "dd")
