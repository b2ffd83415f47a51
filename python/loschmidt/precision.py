"""Working precisions and exact conversion of numbers to and from float64 limb arrays.

A value in precision ``dd`` is the unevaluated sum of 2 doubles, in ``qd`` of 4; ``f64`` and ``f64c``
use one. Values cross the Python boundary as float64 arrays of shape ``(..., k)`` whose last axis holds
the limbs, largest first, so nothing is silently rounded to double.

Conversion rule (``to_limbs``): the input is first made an exact rational number (ints, floats,
Fractions, Decimals and decimal strings are all exact; an ``mpmath.mpf`` is exact too), then each limb
is the correctly rounded double of what the previous limbs left over. For ``f64`` this is correct
rounding; for ``dd`` and ``qd`` it gives the canonical non-overlapping expansion whose error is at most
half a unit in the last place of the last limb (relative error <= 2**-107 for dd, 2**-213 for qd away
from the underflow range). In rare ties a non-canonical expansion could lie closer; the canonical one
is returned. A remainder below the smallest subnormal is lost (values near 1e-308 keep fewer digits).
"""

from __future__ import annotations

import decimal
import numbers
from fractions import Fraction
from typing import Any

import numpy as np

__all__ = [
    "PRECISIONS",
    "limb_count",
    "check_precision",
    "epsilon",
    "digits",
    "to_limbs",
    "to_fraction",
    "to_mpmath",
    "to_string",
    "to_float",
    "convert",
    "add",
    "sub",
    "mul",
    "div",
    "sqrt",
    "neg",
    "absolute",
]

PRECISIONS = ("f64", "f64c", "dd", "qd")

_LIMBS = {"f64": 1, "f64c": 1, "dd": 2, "qd": 4}
# Unit roundoff of each precision (METHODS.md section 1) and the decimal digits it carries.
_EPSILON = {"f64": 2.0**-53, "f64c": 2.0**-53, "dd": 2.0**-106, "qd": 2.0**-212}
_DIGITS = {"f64": 15, "f64c": 15, "dd": 31, "qd": 62}
# Digits that make to_string -> to_limbs a round trip for values whose limbs are contiguous.
_ROUNDTRIP_DIGITS = {"f64": 17, "f64c": 17, "dd": 34, "qd": 66}
# The C++ kernels: f64c computes in plain double.
_KERNEL = {"f64": "f64", "f64c": "f64", "dd": "dd", "qd": "qd"}


def check_precision(precision: Any, name: str = "precision") -> str:
    """Return ``precision`` if it names a working precision, else raise ``ValueError``."""
    if not isinstance(precision, str):
        raise TypeError(f"{name}: expected one of {PRECISIONS}, got {type(precision).__name__}")
    if precision not in _LIMBS:
        raise ValueError(f"{name}: unknown precision {precision!r}; expected one of {PRECISIONS}")
    return precision


def limb_count(precision: str) -> int:
    """Number of float64 limbs a value of ``precision`` occupies (1, 1, 2, 4)."""
    return _LIMBS[check_precision(precision)]


def epsilon(precision: str) -> float:
    """Unit roundoff of ``precision`` (2**-53, 2**-53, 2**-106, 2**-212)."""
    return _EPSILON[check_precision(precision)]


def digits(precision: str) -> int:
    """Decimal digits carried by ``precision`` (15, 15, 31, 62)."""
    return _DIGITS[check_precision(precision)]


# ---------------------------------------------------------------------------------------------------
# Exact rationals from user values


def _mpf_to_fraction(x: Any) -> Fraction:
    sign, man, exp, _bc = x._mpf_
    if not man and exp:  # mpmath encodes inf and nan as zero mantissa with a nonzero exponent code
        raise ValueError("non-finite mpmath value")
    value = Fraction(int(man)) * (Fraction(2) ** int(exp))
    return -value if sign else value


def exact_fraction(x: Any, name: str = "value") -> Fraction:
    """The exact rational value of one number; raises ``ValueError``/``TypeError`` naming ``name``."""
    if isinstance(x, Fraction):
        return x
    if isinstance(x, (bool, np.bool_)):
        raise TypeError(f"{name}: booleans are not numbers here")
    if isinstance(x, numbers.Integral):
        return Fraction(int(x))
    if isinstance(x, (float, np.floating)):
        xf = float(x)
        if not np.isfinite(xf):
            raise ValueError(f"{name}: must be finite, got {xf}")
        return Fraction(xf)
    if isinstance(x, decimal.Decimal):
        if not x.is_finite():
            raise ValueError(f"{name}: must be finite, got {x}")
        return Fraction(x)
    if isinstance(x, str):
        text = x.strip().replace("_", "")
        try:
            return Fraction(text)
        except (ValueError, ZeroDivisionError):
            raise ValueError(f"{name}: {x!r} is not a finite decimal or rational number") from None
    if type(x).__module__.startswith("mpmath") and hasattr(x, "_mpf_"):
        try:
            return _mpf_to_fraction(x)
        except ValueError:
            raise ValueError(f"{name}: must be finite, got {x}") from None
    if isinstance(x, numbers.Rational):
        return Fraction(x.numerator, x.denominator)
    raise TypeError(f"{name}: cannot convert {type(x).__name__} to a number")


def _fraction_limbs(value: Fraction, k: int, name: str) -> list[float]:
    out = []
    rest = value
    for _ in range(k):
        try:
            h = float(rest)  # float(Fraction) is correctly rounded
        except OverflowError:
            raise ValueError(f"{name}: {float(value) if abs(value) < 10**400 else value} overflows double range") from None
        out.append(h)
        rest -= Fraction(h)
        if rest == 0:
            out.extend([0.0] * (k - len(out)))
            break
    return out


def _as_object_array(values: Any, name: str) -> np.ndarray:
    try:
        arr = np.array(values, dtype=object)
    except ValueError as exc:
        raise ValueError(f"{name}: not a rectangular array of numbers ({exc})") from None
    return arr


def to_limbs(values: Any, precision: str, *, name: str = "values") -> np.ndarray:
    """Convert numbers to a float64 limb array of shape ``values.shape + (k,)``.

    Accepts int, float, str (decimal or ``"p/q"``), ``decimal.Decimal``, ``fractions.Fraction``,
    ``mpmath.mpf`` and (nested) sequences or numpy arrays of these. Non-finite values raise
    ``ValueError`` naming ``name``; other types raise ``TypeError``.
    """
    k = limb_count(precision)
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiu":
        if values.dtype.kind == "f":
            if values.dtype.itemsize > 8:
                values = values.astype(object)  # long double: convert exactly below
            else:
                a = values.astype(np.float64)
                if not np.all(np.isfinite(a)):
                    raise ValueError(f"{name}: must be finite (found NaN or infinity)")
                out = np.zeros(a.shape + (k,))
                out[..., 0] = a
                return out
        elif np.all(np.abs(values.astype(object)) <= 2**53) if values.size else True:
            out = np.zeros(values.shape + (k,))
            out[..., 0] = values.astype(np.float64)
            return out
        else:
            values = values.astype(object)
    if isinstance(values, (float, int, np.floating, np.integer)) and not isinstance(values, (bool, np.bool_)):
        fr = exact_fraction(values, name)
        return np.array(_fraction_limbs(fr, k, name))
    arr = _as_object_array(values, name)
    if arr.dtype == object and arr.ndim > 0 and any(isinstance(e, (list, tuple, np.ndarray)) for e in arr.flat):
        raise ValueError(f"{name}: not a rectangular array of numbers")
    out = np.zeros(arr.shape + (k,))
    flat_out = out.reshape(-1, k)
    for i, element in enumerate(arr.flat):
        flat_out[i] = _fraction_limbs(exact_fraction(element, name), k, name)
    return out


def _check_limbs(limbs: Any, name: str = "limbs") -> np.ndarray:
    a = np.asarray(limbs, dtype=np.float64)
    if a.ndim < 1 or a.shape[-1] not in (1, 2, 4):
        raise ValueError(f"{name}: expected a limb array of shape (..., k) with k in (1, 2, 4)")
    return a


def to_fraction(limbs: Any) -> Any:
    """Exact rational value(s) of a limb array: a ``Fraction`` for shape ``(k,)``, else an object array."""
    a = _check_limbs(limbs)
    if not np.all(np.isfinite(a)):
        raise ValueError("limbs: must be finite")
    flat = a.reshape(-1, a.shape[-1])
    vals = [sum((Fraction(float(x)) for x in row), Fraction(0)) for row in flat]
    if a.ndim == 1:
        return vals[0]
    out = np.empty(len(vals), dtype=object)
    out[:] = vals
    return out.reshape(a.shape[:-1])


def _fraction_to_mpf(fr: Fraction) -> Any:
    import mpmath

    if fr == 0:
        return mpmath.mpf(0)
    num, den = fr.numerator, fr.denominator
    # Limb sums are dyadic: den is a power of two, so the value is exactly num * 2**-e.
    e = den.bit_length() - 1
    if den != 1 << e:
        raise ValueError("not a dyadic rational")
    with mpmath.workprec(max(53, abs(num).bit_length() + 8)):
        return mpmath.mpf((num, -e))


def to_mpmath(limbs: Any) -> Any:
    """Exact ``mpmath.mpf`` value(s) of a limb array (the mantissa holds every bit of every limb)."""
    fr = to_fraction(limbs)
    if isinstance(fr, Fraction):
        return _fraction_to_mpf(fr)
    out = np.empty(fr.shape, dtype=object)
    for idx, v in np.ndenumerate(fr):
        out[idx] = _fraction_to_mpf(v)
    return out


def _fraction_to_decimal_string(fr: Fraction, ndigits: int | None) -> str:
    if ndigits is None:
        # exact: a dyadic rational has a finite decimal expansion
        num, den = fr.numerator, fr.denominator
        e = den.bit_length() - 1
        d = decimal.Decimal(num) * (decimal.Decimal(5) ** e)
        text = format(d.scaleb(-e), "e") if num else "0e+0"
        return text
    with decimal.localcontext() as ctx:
        ctx.prec = ndigits
        d = decimal.Decimal(fr.numerator) / decimal.Decimal(fr.denominator)
        return format(d, f".{ndigits - 1}e")


def to_string(limbs: Any, digits: int | None = None, *, exact: bool = False) -> Any:
    """Decimal string(s) of a limb array, correctly rounded to ``digits`` significant digits.

    ``digits=None`` uses enough digits for the string to convert back to the same limbs (17, 34 or 66
    by limb count); ``exact=True`` gives the full, exact decimal expansion.
    """
    a = _check_limbs(limbs)
    if digits is not None and (not isinstance(digits, numbers.Integral) or digits < 1):
        raise ValueError(f"digits: expected a positive integer, got {digits!r}")
    nd = None if exact else (int(digits) if digits is not None else {1: 17, 2: 34, 4: 66}[a.shape[-1]])
    with decimal.localcontext() as ctx:
        ctx.prec = 100000
        ctx.Emax = decimal.MAX_EMAX
        ctx.Emin = decimal.MIN_EMIN
        fr = to_fraction(a)
        if isinstance(fr, Fraction):
            return _fraction_to_decimal_string(fr, nd)
        out = np.empty(fr.shape, dtype=object)
        for idx, v in np.ndenumerate(fr):
            out[idx] = _fraction_to_decimal_string(v, nd)
        return out


def to_float(limbs: Any) -> Any:
    """Round a limb array to float64 (sum of limbs, largest first)."""
    a = _check_limbs(limbs)
    return a[..., ::-1].sum(axis=-1) if a.shape[-1] > 1 else a[..., 0].copy()


def convert(limbs: Any, precision: str) -> np.ndarray:
    """Re-express limbs in another precision: widening is exact, narrowing rounds as ``to_limbs`` does."""
    a = _check_limbs(limbs)
    k = limb_count(precision)
    if a.shape[-1] <= k:
        out = np.zeros(a.shape[:-1] + (k,))
        out[..., : a.shape[-1]] = a
        return out
    return to_limbs(to_fraction(a) if a.ndim > 1 else to_fraction(a), precision, name="limbs")


# ---------------------------------------------------------------------------------------------------
# Element-wise arithmetic on limb arrays through the C++ kernels


def _kernel(precision: str, kind: str):
    from . import _core

    return getattr(_core, f"limb_{kind}_{_KERNEL[check_precision(precision)]}")


def _operand(x: Any, precision: str, name: str) -> np.ndarray:
    k = limb_count(precision)
    if isinstance(x, np.ndarray) and x.dtype == np.float64 and x.ndim >= 1 and x.shape[-1] == k:
        return x
    return to_limbs(x, precision, name=name)


def _binary(op: int, a: Any, b: Any, precision: str) -> np.ndarray:
    k = limb_count(precision)
    la = _operand(a, precision, "a")
    lb = _operand(b, precision, "b")
    try:
        la, lb = np.broadcast_arrays(la, lb)
    except ValueError:
        raise ValueError(f"a, b: shapes {la.shape[:-1]} and {lb.shape[:-1]} do not broadcast") from None
    shape = la.shape
    res = _kernel(precision, "binary")(op, np.ascontiguousarray(la).reshape(-1, k), np.ascontiguousarray(lb).reshape(-1, k))
    return res.reshape(shape)


def _unary(op: int, a: Any, precision: str) -> np.ndarray:
    k = limb_count(precision)
    la = _operand(a, precision, "a")
    res = _kernel(precision, "unary")(op, np.ascontiguousarray(la).reshape(-1, k))
    return res.reshape(la.shape)


def add(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a + b`` in ``precision`` (limb arrays or numbers; broadcasting)."""
    return _binary(0, a, b, precision)


def sub(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a - b`` in ``precision``."""
    return _binary(1, a, b, precision)


def mul(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a * b`` in ``precision``."""
    return _binary(2, a, b, precision)


def div(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a / b`` in ``precision``."""
    return _binary(3, a, b, precision)


def sqrt(a: Any, precision: str) -> np.ndarray:
    """Element-wise square root in ``precision``."""
    return _unary(0, a, precision)


def neg(a: Any, precision: str) -> np.ndarray:
    """Element-wise negation (exact)."""
    return _unary(1, a, precision)


def absolute(a: Any, precision: str) -> np.ndarray:
    """Element-wise absolute value (exact)."""
    return _unary(2, a, precision)
