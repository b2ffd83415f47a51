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
import math
import numbers
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np

from . import _core

__all__ = [
    "PRECISIONS",
    "TABLE",
    "Precision",
    "info",
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
    "default_tolerance",
    "mul",
    "div",
    "sqrt",
    "neg",
    "absolute",
]

@dataclass(frozen=True)
class Precision:
    """The facts of one working precision, read from the engine's scalar traits
    (cpp/include/loschmidt/scalar/traits.hpp, through ``_core.precisions``).

    Two different facts bound round-off, and each use takes the one it means:

    - ``unit_roundoff``: half an ulp of 1 in the representation, 2^-53, 2^-106, 2^-212 (a 106-bit
      or 212-bit significand). How finely a value is resolved: decimal output, and the floor of a
      tolerance (an error estimate is a difference of two states, resolved no finer than this).
    - ``operation_error``: the guaranteed relative error of one + - * / sqrt, 2^-53, 2^-103,
      2^-208 (dd and qd operations are not correctly rounded; proven bounds 3u^2 to 9.8u^2 for dd,
      u = 2^-53, see double_double.hpp; measured maxima <= 3 units of 2^-212 for qd). What error
      bounds of computed results are measured in; the engine's step floor uses it.

    Attributes
    ----------
    name : str
        The precision's name.
    limbs : int
        float64 limbs per value.
    digits : int
        Decimal digits carried.
    unit_roundoff, operation_error : float
        See above.
    default_tolerance : float
        Default relative tolerance of the integrations.
    order_limit : int
        Default largest number of rows of the extrapolation tableau.
    compensated : bool
        Double with the compensated state update ("f64c").
    """

    name: str
    limbs: int
    digits: int
    unit_roundoff: float
    operation_error: float
    default_tolerance: float
    order_limit: int
    compensated: bool

    @property
    def bits(self) -> int:
        """Significand bits: -log2(unit_roundoff) (53, 106, 212)."""
        return -math.frexp(self.unit_roundoff)[1] + 1


#: The working precisions by name, narrowest first, from the engine's one table.
TABLE: dict[str, Precision] = {str(row[0]): Precision(str(row[0]), int(row[1]), int(row[2]), float(row[3]),
                                                       float(row[4]), float(row[5]), int(row[6]), bool(row[7]))
                               for row in _core.precisions}

#: Names of the working precisions, narrowest first (double, compensated double, double-double,
#: quad-double).
PRECISIONS = tuple(TABLE)

# Digits that make to_string -> to_limbs a round trip for values whose limbs are contiguous.
_ROUNDTRIP_DIGITS = {"f64": 17, "f64c": 17, "dd": 34, "qd": 66}


def check_precision(precision: Any, name: str = "precision") -> str:
    """Validate the name of a working precision.

    Parameters
    ----------
    precision : str
        One of ``PRECISIONS``.
    name : str, optional
        The argument name used in error messages.

    Returns
    -------
    str
        ``precision`` itself.

    Raises
    ------
    TypeError
        If ``precision`` is not a string.
    ValueError
        If it names no working precision.
    """
    if not isinstance(precision, str):
        raise TypeError(f"{name}: expected one of {PRECISIONS}, got {type(precision).__name__}")
    if precision not in TABLE:
        raise ValueError(f"{name}: unknown precision {precision!r}; expected one of {PRECISIONS}")
    return precision


def limb_count(precision: str) -> int:
    """Number of float64 limbs a value of ``precision`` occupies.

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    int
        1, 1, 2 or 4.

    Examples
    --------
    >>> from loschmidt import precision
    >>> [precision.limb_count(p) for p in precision.PRECISIONS]
    [1, 1, 2, 4]
    """
    return TABLE[check_precision(precision)].limbs


def info(precision: str) -> Precision:
    """Every fact of a working precision (``TABLE``).

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    Precision

    Examples
    --------
    >>> from loschmidt import precision
    >>> p = precision.info("dd")
    >>> p.limbs, p.bits, p.unit_roundoff == 2.0**-106, p.operation_error == 2.0**-103
    (2, 106, True, True)
    """
    return TABLE[check_precision(precision)]


def epsilon(precision: str) -> float:
    """Unit roundoff of a working precision (``Precision.unit_roundoff``: the resolution of the
    representation; the bound of one operation is ``Precision.operation_error``).

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    float
        2**-53, 2**-53, 2**-106 or 2**-212.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.epsilon("dd") == 2.0**-106
    True
    """
    return TABLE[check_precision(precision)].unit_roundoff


def default_tolerance(precision: str) -> float:
    """Default relative tolerance of the integrations in a working precision.

    A few hundred units of round-off, so the truncation error of the extrapolation sits just
    above the precision's floor.

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    float

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.default_tolerance("dd")
    1e-28
    """
    return TABLE[check_precision(precision)].default_tolerance


def digits(precision: str) -> int:
    """Decimal digits carried by a working precision.

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    int
        15, 15, 31 or 62.
    """
    return TABLE[check_precision(precision)].digits


# ---------------------------------------------------------------------------------------------------
# Exact rationals from user values


#: Largest decimal exponent |e| of a number converted exactly (doubles span about 1e-324 to 1e308).
#: Beyond it the exact rational would be an integer of millions of digits (``"1e999999999"`` took
#: minutes and gigabytes), so such numbers are refused before they are built.
_EXPONENT_LIMIT = 5000


def _real(value: Any) -> float:
    """``float(value)``, an integer beyond the double range giving +-inf (then refused as non-finite)."""
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf


def _check_exponent(exponent: int, x: Any, name: str) -> None:
    if abs(exponent) > _EXPONENT_LIMIT:
        text = repr(x) if len(repr(x)) <= 40 else repr(x)[:37] + "..."
        raise ValueError(f"{name}: {text} lies far outside the range of double precision "
                         f"(decimal exponent {exponent})")


def _magnitude(value: Fraction) -> str:
    """``"1e+400"``-style order of magnitude of a rational, without converting it to a string."""
    bits = abs(value.numerator).bit_length() - value.denominator.bit_length()
    return f"about 1e{int(bits * 0.30103):+d}"


def _mpf_to_fraction(x: Any, name: str = "value") -> Fraction:
    sign, man, exp, bc = x._mpf_
    if not man and exp:  # mpmath encodes inf and nan as zero mantissa with a nonzero exponent code
        raise ValueError("non-finite mpmath value")
    if not man:
        return Fraction(0)
    _check_exponent(int((int(exp) + int(bc)) * 0.30103), x, name)
    value = Fraction(int(man)) * (Fraction(2) ** int(exp))
    return -value if sign else value


def exact_fraction(x: Any, name: str = "value") -> Fraction:
    """The exact rational value of one number.

    Parameters
    ----------
    x : int, float, str, Decimal, Fraction or mpmath.mpf
        A finite number; a string is a decimal or ``"p/q"``.
    name : str, optional
        The argument name used in error messages.

    Returns
    -------
    Fraction

    Raises
    ------
    ValueError
        For non-finite values and strings that are no number.
    TypeError
        For booleans and other types.
    """
    if isinstance(x, Fraction):
        return x
    if isinstance(x, (bool, np.bool_)):
        raise TypeError(f"{name}: booleans are not numbers here")
    if isinstance(x, numbers.Integral):
        return Fraction(int(x))
    if isinstance(x, (float, np.floating)):
        if not np.isfinite(x):
            raise ValueError(f"{name}: must be finite, got {x}")
        if isinstance(x, np.floating) and x.dtype.itemsize > 8:  # long double: exact, not via a double
            return Fraction(*x.as_integer_ratio())
        return Fraction(float(x))
    if isinstance(x, decimal.Decimal):
        if not x.is_finite():
            raise ValueError(f"{name}: must be finite, got {x}")
        if not x:
            return Fraction(0)
        _check_exponent(x.adjusted(), x, name)
        return Fraction(x)
    if isinstance(x, str):
        text = x.strip().replace("_", "")
        if "/" not in text:
            try:
                d = decimal.Decimal(text)
            except (decimal.InvalidOperation, ValueError):
                d = None  # Fraction below reports it
            if d is not None and d.is_finite():
                if not d:
                    return Fraction(0)
                _check_exponent(d.adjusted(), x, name)
        try:
            return Fraction(text)
        except (ValueError, ZeroDivisionError):
            text = repr(x) if len(repr(x)) <= 40 else repr(x)[:37] + "..."
            raise ValueError(f"{name}: {text} is not a finite decimal or rational number") from None
    if type(x).__module__.startswith("mpmath") and hasattr(x, "_mpf_"):
        try:
            return _mpf_to_fraction(x, name)
        except ValueError as exc:
            if str(exc).startswith(name + ":"):
                raise
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
            raise ValueError(f"{name}: a value of {_magnitude(value)} overflows double range") from None
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
    """Convert numbers exactly to a float64 limb array (see the module docstring for the rule).

    Parameters
    ----------
    values : number or array-like of numbers
        int, float, str (decimal or ``"p/q"``), ``decimal.Decimal``, ``fractions.Fraction``,
        ``mpmath.mpf``, or (nested) sequences or numpy arrays of these.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision: k = 1, 1, 2 or 4 limbs per value.
    name : str, optional
        The argument name used in error messages.

    Returns
    -------
    numpy.ndarray
        float64 array of shape ``shape(values) + (k,)``, largest limb first.

    Raises
    ------
    ValueError
        For non-finite values, ragged arrays, or values beyond the double range.
    TypeError
        For booleans and other types.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.to_limbs("0.1", "dd")
    array([ 1.00000000e-01, -5.55111512e-18])
    >>> precision.to_limbs([1, 2], "f64").shape
    (2, 1)
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


#: Most significant digits ``to_string`` writes (the exact expansion of any limb sum has fewer than 1200).
_MAX_DIGITS = 100_000


def _check_limbs(limbs: Any, name: str = "limbs") -> np.ndarray:
    try:
        raw = np.asarray(limbs)
        if raw.dtype.kind in "bcmMSUV":  # booleans, complex numbers (their imaginary part), dates, text
            raise TypeError
        a = np.asarray(raw, dtype=np.float64)
    except (TypeError, ValueError, OverflowError):
        raise TypeError(f"{name}: expected a float64 limb array") from None
    if a.ndim < 1 or a.shape[-1] not in (1, 2, 4):
        raise ValueError(f"{name}: expected a limb array of shape (..., k) with k in (1, 2, 4)")
    return a


def to_fraction(limbs: Any) -> Any:
    """Exact rational value(s) of a limb array.

    Parameters
    ----------
    limbs : array-like, shape (..., k)
        Finite float64 limbs, k in (1, 2, 4).

    Returns
    -------
    Fraction or numpy.ndarray
        A ``Fraction`` for shape ``(k,)``, else an object array of shape ``limbs.shape[:-1]``.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.to_fraction([0.5, 2.0**-60])
    Fraction(576460752303423489, 1152921504606846976)
    """
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
    """Exact ``mpmath.mpf`` value(s) of a limb array.

    Parameters
    ----------
    limbs : array-like, shape (..., k)
        Finite float64 limbs.

    Returns
    -------
    mpmath.mpf or numpy.ndarray
        One ``mpf`` for shape ``(k,)``, else an object array; each mantissa holds every bit of
        every limb, whatever mpmath's working precision.
    """
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
    """Decimal string(s) of a limb array, correctly rounded.

    Parameters
    ----------
    limbs : array-like, shape (..., k)
        Finite float64 limbs.
    digits : int, optional
        Significant digits. Default: enough for the string to convert back to the same limbs
        (17, 34 or 66 by limb count).
    exact : bool, optional
        Give the full, exact decimal expansion instead (``digits`` is then ignored).

    Returns
    -------
    str or numpy.ndarray
        One string for shape ``(k,)``, else an object array of strings.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.to_string(precision.to_limbs("2/3", "qd"), 40)
    '6.666666666666666666666666666666666666667e-1'
    >>> precision.to_string([0.1], exact=True)
    '1.000000000000000055511151231257827021181583404541015625e-1'
    """
    a = _check_limbs(limbs)
    if digits is not None and (isinstance(digits, (bool, np.bool_)) or not isinstance(digits, numbers.Integral)
                               or not 1 <= digits <= _MAX_DIGITS):
        raise ValueError(f"digits: expected a positive integer up to {_MAX_DIGITS}, got {digits!r}")
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
    """Round a limb array to float64.

    Parameters
    ----------
    limbs : array-like, shape (..., k)
        Float64 limbs.

    Returns
    -------
    numpy.ndarray
        The sum of the limbs, smallest first (shape ``limbs.shape[:-1]``).
    """
    a = _check_limbs(limbs)
    with np.errstate(over="ignore"):  # limbs whose sum is beyond the double range round to +-inf
        return a[..., ::-1].sum(axis=-1) if a.shape[-1] > 1 else a[..., 0].copy()


def convert(limbs: Any, precision: str) -> np.ndarray:
    """Re-express limbs in another precision.

    Parameters
    ----------
    limbs : array-like, shape (..., k)
        Float64 limbs.
    precision : {"f64", "f64c", "dd", "qd"}
        The target precision.

    Returns
    -------
    numpy.ndarray
        Limbs of shape ``(..., k')``: widening is exact (zero limbs appended), narrowing rounds once,
        as ``to_limbs`` does.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.convert([0.5], "dd")
    array([0.5, 0. ])
    """
    a = _check_limbs(limbs)
    k = limb_count(precision)
    if a.shape[-1] <= k:
        out = np.zeros(a.shape[:-1] + (k,))
        out[..., : a.shape[-1]] = a
        return out
    return to_limbs(to_fraction(a) if a.ndim > 1 else to_fraction(a), precision, name="limbs")


# ---------------------------------------------------------------------------------------------------
# Element-wise arithmetic on limb arrays through the C++ kernels


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
    from . import engine

    res = engine.limb_binary(op, np.ascontiguousarray(la).reshape(-1, k), np.ascontiguousarray(lb).reshape(-1, k),
                             check_precision(precision))
    return res.reshape(shape)


def _unary(op: int, a: Any, precision: str) -> np.ndarray:
    k = limb_count(precision)
    la = _operand(a, precision, "a")
    from . import engine

    res = engine.limb_unary(op, np.ascontiguousarray(la).reshape(-1, k), check_precision(precision))
    return res.reshape(la.shape)


def add(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a + b`` in a working precision, by the engine's arithmetic.

    Parameters
    ----------
    a, b : limb arrays (..., k) or numbers
        Operands; numbers are converted with ``to_limbs``. Shapes broadcast.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision (``f64c`` computes as ``f64``).

    Returns
    -------
    numpy.ndarray
        Limbs of the sums.

    Examples
    --------
    >>> from loschmidt import precision
    >>> s = precision.add("0.1", "0.2", "dd")
    >>> precision.to_string(s, 20)
    '3.0000000000000000000e-1'
    """
    return _binary(0, a, b, precision)


def sub(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a - b`` in a working precision.

    Parameters
    ----------
    a, b : limb arrays (..., k) or numbers
        Operands (broadcasting).
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of the differences.
    """
    return _binary(1, a, b, precision)


def mul(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a * b`` in a working precision.

    Parameters
    ----------
    a, b : limb arrays (..., k) or numbers
        Operands (broadcasting).
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of the products.
    """
    return _binary(2, a, b, precision)


def div(a: Any, b: Any, precision: str) -> np.ndarray:
    """Element-wise ``a / b`` in a working precision.

    Parameters
    ----------
    a, b : limb arrays (..., k) or numbers
        Operands (broadcasting).
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of the quotients.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.to_string(precision.div(1, 3, "qd"), 64)
    '3.333333333333333333333333333333333333333333333333333333333333333e-1'
    """
    return _binary(3, a, b, precision)


def sqrt(a: Any, precision: str) -> np.ndarray:
    """Element-wise square root in a working precision.

    Parameters
    ----------
    a : limb array (..., k) or numbers
        Non-negative operands.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of the square roots.

    Examples
    --------
    >>> from loschmidt import precision
    >>> precision.to_string(precision.sqrt(2, "dd"), 30)
    '1.41421356237309504880168872421e+0'
    """
    return _unary(0, a, precision)


def neg(a: Any, precision: str) -> np.ndarray:
    """Element-wise negation (exact).

    Parameters
    ----------
    a : limb array (..., k) or numbers
        Operands.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of ``-a``.
    """
    return _unary(1, a, precision)


def absolute(a: Any, precision: str) -> np.ndarray:
    """Element-wise absolute value (exact).

    Parameters
    ----------
    a : limb array (..., k) or numbers
        Operands.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision.

    Returns
    -------
    numpy.ndarray
        Limbs of ``abs(a)``.
    """
    return _unary(2, a, precision)
