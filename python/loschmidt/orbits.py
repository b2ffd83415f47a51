"""Two-body orbital elements, both ways, computed in the working precision.

Conventions (G = 1, N-body units):

- The relative state of a pair is that of body 2 about body 1: ``position = r2 - r1``,
  ``velocity = v2 - v1``; the gravitational parameter is ``m1 + m2``.
- Angles are in radians. Orientation is the rotation Rz(longitude_of_node) Rx(inclination)
  Rz(argument_of_periapsis) from the orbital frame (periapsis along x, angular momentum along z) to
  the reference frame. ``inclination`` is in [0, pi]; the node and argument of periapsis in [0, 2 pi).
- Degenerate cases, decided against a threshold of 16 units in the last place of the working precision
  (2^(4 - bits)): an equatorial orbit (sin i below it) has ``longitude_of_node = 0`` and its argument of
  periapsis measured from the x axis (the longitude of periapsis); a circular orbit (e below it) has
  ``argument_of_periapsis = 0`` and its anomalies measured from the ascending node (from the x axis
  when also equatorial). A radial orbit (zero angular momentum) has e = 1, a finite semimajor axis
  and NaN angles.
- Bound orbits (e < 1, a > 0): true, eccentric and mean anomalies in [0, 2 pi), period
  2 pi sqrt(a^3 / (m1 + m2)). Unbound (e > 1): a < 0, true anomaly in (-pi, pi) (negative before
  periapsis), hyperbolic anomaly H and mean anomaly e sinh H - H signed, period infinite. A parabolic
  state (zero energy, only when exact) has an infinite semimajor axis and NaN mean anomaly.
- ``energy`` is the pair's energy in its own centre-of-mass frame, mu (v^2/2 - (m1 + m2)/r), with
  mu = m1 m2 / (m1 + m2); ``angular_momentum`` is its magnitude ``mu |r x v|``.

Precision: every computation runs in mpmath at the bits of the requested precision (53 for f64 and
f64c, 106 for dd, 212 for qd) plus 64 guard bits, and each result is rounded once, to a double for the
float attributes or to the precision's limbs (via ``loschmidt.precision.to_limbs``) for ``limbs()``.
Kepler's equation is solved by Newton's method kept inside a bracket (bisection when a Newton step
would leave it), so it converges for every eccentricity.
"""

from __future__ import annotations

import numbers
from decimal import Decimal
from fractions import Fraction
from typing import Any, Iterable, Sequence

import mpmath
import numpy as np

from . import precision as _precision

__all__ = [
    "OrbitalElements",
    "orbital_elements",
    "pair_elements",
    "relative_state",
    "eccentric_anomaly",
    "working_bits",
]

_BITS = {name: p.bits for name, p in _precision.TABLE.items()}  # from the engine's table
GUARD_BITS = 64


# ---------------------------------------------------------------------------------------------
# shared helpers (also used by loschmidt.ics)
# ---------------------------------------------------------------------------------------------
def _check_precision(precision: Any) -> str:
    if not isinstance(precision, str) or precision not in _BITS:
        raise ValueError(f"precision must be one of {tuple(_BITS)}, got {precision!r}")
    return precision


def working_bits(precision: str) -> int:
    """Significand bits of a working precision, without guard bits.

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}
        A working precision.

    Returns
    -------
    int
        53, 53, 106 or 212.
    """
    return _BITS[_check_precision(precision)]


def _mpf(value: Any, name: str, *, finite: bool = True) -> mpmath.mpf:
    """Convert an exact-ish scalar to mpmath at the current working precision, rounding once.

    Accepts int, float, numpy real scalars, decimal strings, Decimal, Fraction and mpmath.mpf.
    """
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be a real number, got bool")
    prec = mpmath.mp.prec
    if isinstance(value, mpmath.mpf):
        x = +value
    elif isinstance(value, (int, np.integer)):
        x = mpmath.mpf(int(value))
    elif isinstance(value, (float, np.floating)):
        x = mpmath.mpf(float(value))
    elif isinstance(value, Fraction):
        x = mpmath.mp.make_mpf(mpmath.libmp.from_rational(value.numerator, value.denominator, prec, "n"))
    elif isinstance(value, Decimal):
        x = _mpf(str(value), name, finite=finite)
    elif isinstance(value, str):
        try:
            x = mpmath.mpf(value.strip())
        except (ValueError, ZeroDivisionError):  # mpmath reads "p/q" too, and "1/0" divides by zero
            raise ValueError(f"{name} is not a decimal number: {value!r}") from None
    elif isinstance(value, numbers.Rational):
        x = mpmath.mp.make_mpf(mpmath.libmp.from_rational(int(value.numerator), int(value.denominator), prec, "n"))
    elif isinstance(value, np.ndarray) and value.ndim == 0:
        return _mpf(value.item(), name, finite=finite)
    else:
        raise TypeError(
            f"{name} must be int, float, str, Decimal, Fraction or mpmath.mpf, got {type(value).__name__}"
        )
    if finite and not mpmath.isfinite(x):
        raise ValueError(f"{name} must be finite, got {value!r}")
    if x and mpmath.isfinite(x) and abs(int(mpmath.mag(x))) > 16600:  # |log10 x| > 5000
        # far beyond double range; sin and cos of it would need millions of digits of pi
        raise ValueError(f"{name} lies far outside the range of double precision, got {mpmath.nstr(x, 5)}")
    return x


def _mp_vector(values: Any, name: str, length: int | None = None) -> list:
    """A sequence of 2 or 3 scalars -> list of 3 mpf (z = 0 for planar input)."""
    if isinstance(values, np.ndarray):
        values = values.tolist() if values.dtype != object else list(values)
    if isinstance(values, (str, bytes)) or not isinstance(values, Iterable):
        raise TypeError(f"{name} must be a sequence of 2 or 3 numbers")
    items = list(values)
    if len(items) not in (2, 3) or (length is not None and len(items) != length):
        raise ValueError(f"{name} must have 2 or 3 components, got {len(items)}")
    out = [_mpf(v, f"{name}[{k}]") for k, v in enumerate(items)]
    if len(out) == 2:
        out.append(mpmath.mpf(0))
    return out


def _limbs(value: mpmath.mpf, precision: str) -> np.ndarray:
    """One value -> float64 limbs (k,), via loschmidt.precision; non-finite values as [v, 0, ...]."""
    from loschmidt.precision import limb_count, to_limbs

    k = limb_count(precision)
    if not mpmath.isfinite(value) or abs(value) > mpmath.mpf(np.finfo(np.float64).max):
        out = np.zeros(k)
        out[0] = float(value)  # NaN, or +-inf as the float attribute gives for a value beyond double range
        return out
    return np.asarray(to_limbs(value, precision), dtype=np.float64).reshape(k)


def _dot(a: Sequence, b: Sequence) -> mpmath.mpf:
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _cross(a: Sequence, b: Sequence) -> list:
    return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]


def _norm(a: Sequence) -> mpmath.mpf:
    return mpmath.sqrt(_dot(a, a))


def _mod2pi(x: mpmath.mpf) -> mpmath.mpf:
    twopi = 2 * mpmath.pi
    y = x - twopi * mpmath.floor(x / twopi)
    return y if y < twopi else y - twopi


# ---------------------------------------------------------------------------------------------
# Kepler's equation (current mpmath precision)
# ---------------------------------------------------------------------------------------------
def _newton_bracketed(f, df, x, lo, hi, max_iter: int = 400) -> mpmath.mpf:
    """Root of an increasing f in [lo, hi] by Newton's method, bisecting when a step leaves the bracket."""
    eps = mpmath.mpf(2) ** (4 - mpmath.mp.prec)
    for _ in range(max_iter):
        fx = f(x)
        if fx == 0:
            return x
        if fx > 0:
            hi = x
        else:
            lo = x
        d = df(x)
        new = x - fx / d if d > 0 else (lo + hi) / 2
        if not (lo < new < hi):
            new = (lo + hi) / 2
        step = abs(new - x)
        x = new
        if step <= eps * max(1, abs(x)) or hi - lo <= eps * max(1, abs(x)):
            return x
    return x  # the bracket has shrunk far below any precision here


def _kepler_elliptic(M: mpmath.mpf, e: mpmath.mpf) -> mpmath.mpf:
    """E in [0, 2 pi) with E - e sin E = M (M reduced mod 2 pi), 0 <= e < 1."""
    M = _mod2pi(M)
    if e == 0 or M == 0:
        return M
    lo, hi = M - e, M + e  # since |E - M| = e |sin E| <= e
    x0 = M + e * mpmath.sin(M) if e < mpmath.mpf("0.8") else mpmath.pi
    x0 = min(max(x0, lo), hi)
    E = _newton_bracketed(lambda E: E - e * mpmath.sin(E) - M, lambda E: 1 - e * mpmath.cos(E), x0, lo, hi)
    return _mod2pi(E)


def _kepler_hyperbolic(M: mpmath.mpf, e: mpmath.mpf) -> mpmath.mpf:
    """H with e sinh H - H = M, e > 1."""
    if M == 0:
        return mpmath.mpf(0)
    if M < 0:
        return -_kepler_hyperbolic(-M, e)
    # e sinh H = M + H >= M and (e - 1) sinh H <= e sinh H - H = M
    lo, hi = mpmath.asinh(M / e), mpmath.asinh(M / (e - 1))
    x0 = min(max(mpmath.log(2 * M / e + mpmath.mpf("1.8")), lo), hi)
    return _newton_bracketed(
        lambda H: e * mpmath.sinh(H) - H - M, lambda H: e * mpmath.cosh(H) - 1, x0, lo, hi
    )


# ---------------------------------------------------------------------------------------------
# core conversions (current mpmath precision, mpf in and out)
# ---------------------------------------------------------------------------------------------
_STATE_NAMES = ("mass", "semimajor_axis", "eccentricity", "true_anomaly")


def _validate_conic(gm, a, e, names=_STATE_NAMES[:3]) -> None:
    if gm <= 0:
        raise ValueError(f"{names[0]} must be positive, got {mpmath.nstr(gm, 17)}")
    if e < 0:
        raise ValueError(f"{names[2]} must be >= 0, got {mpmath.nstr(e, 17)}")
    if e == 1:
        raise ValueError(f"{names[2]} = 1 (parabolic) is not supported from a semimajor axis")
    if e < 1 and not a > 0:
        raise ValueError(f"{names[1]} must be positive for a bound orbit (eccentricity < 1), got {mpmath.nstr(a, 17)}")
    if e > 1 and not a < 0:
        raise ValueError(f"{names[1]} must be negative for an unbound orbit (eccentricity > 1), got {mpmath.nstr(a, 17)}")


def _state_mp(gm, a, e, inc, node, peri, true_anomaly=None, mean_anomaly=None, names=_STATE_NAMES):
    """Relative position and velocity (lists of 3 mpf) from elements, at the current precision.

    ``names`` are the argument names used in error messages (mass, a, e, true anomaly).
    """
    _validate_conic(gm, a, e, names[:3])
    if true_anomaly is not None and mean_anomaly is not None:
        raise ValueError("give either true_anomaly or mean_anomaly, not both")
    if mean_anomaly is not None:
        if e < 1:
            E = _kepler_elliptic(mean_anomaly, e)
            nu = 2 * mpmath.atan2(mpmath.sqrt(1 + e) * mpmath.sin(E / 2), mpmath.sqrt(1 - e) * mpmath.cos(E / 2))
        else:
            H = _kepler_hyperbolic(mean_anomaly, e)
            nu = 2 * mpmath.atan(mpmath.sqrt((e + 1) / (e - 1)) * mpmath.tanh(H / 2))
    else:
        nu = true_anomaly if true_anomaly is not None else mpmath.mpf(0)
    p = a * (1 - e * e)
    denom = 1 + e * mpmath.cos(nu)
    if denom <= 0:
        raise ValueError(
            f"{names[3]} lies beyond the asymptotes of the hyperbola "
            f"(|nu| must be below acos(-1/e))"
        )
    r = p / denom
    cn, sn = mpmath.cos(nu), mpmath.sin(nu)
    x, y = r * cn, r * sn
    k = mpmath.sqrt(gm / p)
    vx, vy = -k * sn, k * (e + cn)
    cO, sO = mpmath.cos(node), mpmath.sin(node)
    ci, si = mpmath.cos(inc), mpmath.sin(inc)
    cw, sw = mpmath.cos(peri), mpmath.sin(peri)
    P = [cO * cw - sO * sw * ci, sO * cw + cO * sw * ci, sw * si]
    Q = [-cO * sw - sO * cw * ci, -sO * sw + cO * cw * ci, cw * si]
    pos = [x * P[k_] + y * Q[k_] for k_ in range(3)]
    vel = [vx * P[k_] + vy * Q[k_] for k_ in range(3)]
    return pos, vel


_FIELDS = (
    "semimajor_axis",
    "eccentricity",
    "inclination",
    "longitude_of_node",
    "argument_of_periapsis",
    "true_anomaly",
    "eccentric_anomaly",
    "mean_anomaly",
    "period",
    "energy",
    "angular_momentum",
    "mass",
    "reduced_mass",
)

_FIELD_DOCS = {
    "semimajor_axis": "Semimajor axis a (negative for unbound orbits, infinite for parabolic).",
    "eccentricity": "Eccentricity e.",
    "inclination": "Inclination in [0, pi] against the x-y plane.",
    "longitude_of_node": "Longitude of the ascending node in [0, 2 pi) (0 for equatorial orbits).",
    "argument_of_periapsis": "Argument of periapsis in [0, 2 pi) (0 for circular orbits).",
    "true_anomaly": "True anomaly: [0, 2 pi) bound, (-pi, pi) unbound.",
    "eccentric_anomaly": "Eccentric anomaly E (bound) or hyperbolic anomaly H (unbound).",
    "mean_anomaly": "Mean anomaly: E - e sin E in [0, 2 pi) bound, e sinh H - H unbound.",
    "period": "Orbital period 2 pi sqrt(a^3 / (m1 + m2)); infinite when unbound.",
    "energy": "Energy of the pair in its centre-of-mass frame, mu (v^2/2 - (m1 + m2)/r).",
    "angular_momentum": "Magnitude of the pair's angular momentum, ``mu |r x v|``.",
    "mass": "Total mass m1 + m2 (the gravitational parameter, G = 1).",
    "reduced_mass": "Reduced mass m1 m2 / (m1 + m2).",
}


def _elements_mp(m1, m2, r_vec, v_vec, bits: int) -> dict:
    """Elements (dict of mpf) from a relative state, at the current precision."""
    nan = mpmath.mpf("nan")
    gm = m1 + m2
    mu = m1 * m2 / gm
    r = _norm(r_vec)
    if r == 0:
        raise ValueError("position must be nonzero (the bodies coincide)")
    v2 = _dot(v_vec, v_vec)
    rv = _dot(r_vec, v_vec)
    h_vec = _cross(r_vec, v_vec)
    h = _norm(h_vec)
    eps = v2 / 2 - gm / r  # specific orbital energy
    e_vec = [((v2 - gm / r) * r_vec[k] - rv * v_vec[k]) / gm for k in range(3)]
    e = _norm(e_vec)
    a = -gm / (2 * eps) if eps != 0 else mpmath.mpf("inf")
    out = {
        "semimajor_axis": a,
        "eccentricity": e,
        "energy": mu * eps,
        "angular_momentum": mu * h,
        "mass": gm,
        "reduced_mass": mu,
        "period": 2 * mpmath.pi * mpmath.sqrt(a**3 / gm) if eps < 0 else mpmath.mpf("inf"),
    }
    if h == 0:  # radial orbit: no plane, no periapsis direction
        out["eccentricity"] = mpmath.mpf(1)
        for name in ("inclination", "longitude_of_node", "argument_of_periapsis", "true_anomaly",
                     "eccentric_anomaly", "mean_anomaly"):
            out[name] = nan
        return out
    tol = mpmath.mpf(2) ** (4 - bits)
    W = [c / h for c in h_vec]
    sini = mpmath.sqrt(W[0] ** 2 + W[1] ** 2)
    inc = mpmath.atan2(sini, W[2])
    equatorial = sini < tol
    node = mpmath.mpf(0) if equatorial else _mod2pi(mpmath.atan2(W[0], -W[1]))
    circular = e < tol
    if circular:
        P = [mpmath.cos(node), mpmath.sin(node), mpmath.mpf(0)]
        if not equatorial:  # node line lies in the plane: re-project for safety
            P = _cross(_cross(W, P), W)
            nP = _norm(P)
            P = [c / nP for c in P]
        peri = mpmath.mpf(0)
    else:
        P = [c / e for c in e_vec]
    Q = _cross(W, P)
    if not circular:
        if equatorial:
            sign = 1 if W[2] > 0 else -1
            peri = _mod2pi(mpmath.atan2(sign * P[1], P[0]))
        else:
            peri = _mod2pi(mpmath.atan2(P[2], Q[2]))
    nu_signed = mpmath.atan2(_dot(r_vec, Q), _dot(r_vec, P))
    out.update(inclination=inc, longitude_of_node=node, argument_of_periapsis=peri)
    if eps < 0 and e < 1:
        nu = _mod2pi(nu_signed)
        E = _mod2pi(mpmath.atan2(mpmath.sqrt(1 - e * e) * mpmath.sin(nu), e + mpmath.cos(nu)))
        M = _mod2pi(E - e * mpmath.sin(E))
        out.update(true_anomaly=nu, eccentric_anomaly=E, mean_anomaly=M)
    elif e > 1 and eps > 0:
        nu = nu_signed
        H = mpmath.asinh(mpmath.sqrt(e * e - 1) * mpmath.sin(nu) / (1 + e * mpmath.cos(nu)))
        out.update(true_anomaly=nu, eccentric_anomaly=H, mean_anomaly=e * mpmath.sinh(H) - H)
    else:  # parabolic, or e and the energy disagree at round-off level
        out.update(true_anomaly=_mod2pi(nu_signed) if eps < 0 else nu_signed, eccentric_anomaly=nan, mean_anomaly=nan)
    return out


# ---------------------------------------------------------------------------------------------
# public API
# ---------------------------------------------------------------------------------------------
class OrbitalElements:
    """Elements of a two-body orbit, held in the working precision.

    Attributes (plain floats, each correctly rounded): ``semimajor_axis``, ``eccentricity``,
    ``inclination``, ``longitude_of_node``, ``argument_of_periapsis``, ``true_anomaly``,
    ``eccentric_anomaly``, ``mean_anomaly``, ``period``, ``energy``, ``angular_momentum``, ``mass``,
    ``reduced_mass``; ``bound`` (bool) and ``precision``.
    Full precision: ``limbs(name)`` -> float64 limbs (k,), ``to_mpmath()`` -> dict of mpmath values
    (carrying the guard bits), ``as_dict()`` -> dict of floats. Made by :func:`orbital_elements`
    and :func:`pair_elements`, not by hand.

    Parameters
    ----------
    values : dict
        Every name of ``FIELDS`` -> its mpmath value.
    precision : {"f64", "f64c", "dd", "qd"}
        The working precision the values belong to.
    """

    __slots__ = ("_values", "_precision")
    FIELDS = _FIELDS

    def __init__(self, values: dict, precision: str) -> None:
        self._precision = _check_precision(precision)
        missing = [f for f in _FIELDS if f not in values]
        if missing:
            raise ValueError(f"values is missing {missing}")
        self._values = {f: values[f] for f in _FIELDS}

    @property
    def precision(self) -> str:
        """The working precision of the elements."""
        return self._precision

    @property
    def bound(self) -> bool:
        """True when the pair's energy is negative."""
        return bool(self._values["energy"] < 0)

    def limbs(self, name: str) -> np.ndarray:
        """One element in full precision.

        Parameters
        ----------
        name : str
            One of ``FIELDS`` (``"semimajor_axis"``, ``"eccentricity"`` ...).

        Returns
        -------
        numpy.ndarray, shape (k,)
            float64 limbs of the working precision, rounded once from the mpmath value.
        """
        if name not in _FIELDS:
            raise ValueError(f"name must be one of {_FIELDS}, got {name!r}")
        return _limbs(self._values[name], self._precision)

    def to_mpmath(self) -> dict:
        """Every element as its mpmath value (carrying the guard bits).

        Returns
        -------
        dict
            Name -> ``mpmath.mpf``.
        """
        return dict(self._values)

    def as_dict(self) -> dict:
        """Every element rounded to a float.

        Returns
        -------
        dict
            Name -> float.
        """
        return {f: float(self._values[f]) for f in _FIELDS}

    def __repr__(self) -> str:
        body = ", ".join(f"{f}={float(self._values[f])!r}" for f in _FIELDS[:6])
        return f"OrbitalElements({body}, precision={self._precision!r})"


def _make_property(name: str) -> property:
    def getter(self: OrbitalElements) -> float:
        return float(self._values[name])

    getter.__name__ = name
    return property(getter, doc=_FIELD_DOCS[name])


for _name in _FIELDS:
    setattr(OrbitalElements, _name, _make_property(_name))
del _name


def orbital_elements(m1: Any, m2: Any, position: Any, velocity: Any, precision: str = "dd") -> OrbitalElements:
    """Elements of body 2 about body 1 from their relative state (G = 1).

    Parameters
    ----------
    m1, m2 : number
        Positive masses; the gravitational parameter is m1 + m2.
    position, velocity : sequence of 2 or 3 numbers
        ``r2 - r1`` and ``v2 - v1``; any exact scalar type.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the result (default ``"dd"``).

    Returns
    -------
    OrbitalElements

    Examples
    --------
    >>> from loschmidt import orbits
    >>> e = orbits.orbital_elements(0.5, 0.5, [1, 0], [0, 1])
    >>> e.semimajor_axis, e.eccentricity, e.bound
    (1.0, 0.0, True)
    >>> round(e.period, 12)     # 2 pi for a = 1 about unit mass
    6.28318530718
    """
    bits = working_bits(precision)
    with mpmath.workprec(bits + GUARD_BITS):
        a = _mpf(m1, "m1")
        b = _mpf(m2, "m2")
        if a <= 0:
            raise ValueError("m1 must be positive")
        if b <= 0:
            raise ValueError("m2 must be positive")
        r = _mp_vector(position, "position")
        v = _mp_vector(velocity, "velocity")
        if all(c == 0 for c in r):
            raise ValueError("position must be nonzero (the bodies coincide)")
        values = _elements_mp(a, b, r, v, bits)
    return OrbitalElements(values, precision)


def _group(indices: Any, n: int, name: str) -> list:
    if isinstance(indices, (bool, np.bool_)):
        raise TypeError(f"{name} must be a body index or a sequence of them")
    if isinstance(indices, (int, np.integer)):
        idx = [int(indices)]
    else:
        try:
            items = list(indices)
        except TypeError:
            raise TypeError(f"{name} must be a body index or a sequence of them") from None
        if not all(isinstance(i, (int, np.integer)) and not isinstance(i, (bool, np.bool_)) for i in items):
            raise TypeError(f"{name} must be a body index or a sequence of them (integers)")
        idx = [int(i) for i in items]
    if not idx:
        raise ValueError(f"{name} must name at least one body")
    for i in idx:
        if not -n <= i < n:
            raise ValueError(f"{name} has index {i} out of range for {n} bodies")
    idx = [i % n for i in idx]
    if len(set(idx)) != len(idx):
        raise ValueError(f"{name} repeats a body")
    return idx


def _system_mp(system: Any) -> tuple:
    """(masses, positions (N x 3), velocities (N x 3)) of a System as mpf lists."""
    d = system.to_mpmath()
    masses = [mpmath.mpf(m) for m in d["masses"]]
    pos = [[mpmath.mpf(c) for c in row] + [mpmath.mpf(0)] * (3 - len(row)) for row in d["positions"]]
    vel = [[mpmath.mpf(c) for c in row] + [mpmath.mpf(0)] * (3 - len(row)) for row in d["velocities"]]
    return masses, pos, vel


def pair_elements(system: Any, i: Any = 0, j: Any = 1) -> OrbitalElements:
    """Elements of body (or group) ``j`` about body (or group) ``i`` of a System, in its precision.

    Parameters
    ----------
    system : System
        The state.
    i, j : int or sequence of int, optional
        Body indices or groups of them (default bodies 0 and 1); a group counts as one body of its
        total mass at its centre of mass (``pair_elements(s, (0, 1), 2)`` is the outer orbit of a
        triple).

    Returns
    -------
    OrbitalElements

    Examples
    --------
    >>> from loschmidt import ics, orbits
    >>> b = ics.binary(1, 1, 3, 0.25, mean_anomaly=2.0)
    >>> e = orbits.pair_elements(b, 0, 1)
    >>> round(e.semimajor_axis, 12), round(e.eccentricity, 12), round(e.mean_anomaly, 12)
    (3.0, 0.25, 2.0)
    """
    precision = _check_precision(system.precision)
    bits = working_bits(precision)
    with mpmath.workprec(bits + GUARD_BITS):
        masses, pos, vel = _system_mp(system)
        n = len(masses)
        gi, gj = _group(i, n, "i"), _group(j, n, "j")
        if set(gi) & set(gj):
            raise ValueError("i and j must name different bodies")

        def centre(g):
            m = mpmath.fsum(masses[k] for k in g)
            r = [mpmath.fsum(masses[k] * pos[k][c] for k in g) / m for c in range(3)]
            v = [mpmath.fsum(masses[k] * vel[k][c] for k in g) / m for c in range(3)]
            return m, r, v

        mi, ri, vi = centre(gi)
        mj, rj, vj = centre(gj)
        r = [rj[c] - ri[c] for c in range(3)]
        v = [vj[c] - vi[c] for c in range(3)]
        if all(c == 0 for c in r):
            raise ValueError("the two bodies (or centres of mass) coincide")
        values = _elements_mp(mi, mj, r, v, bits)
    return OrbitalElements(values, precision)


def _element_args(semimajor_axis, eccentricity, inclination, longitude_of_node, argument_of_periapsis,
                  true_anomaly, mean_anomaly, prefix: str = ""):
    a = _mpf(semimajor_axis, prefix + "semimajor_axis")
    e = _mpf(eccentricity, prefix + "eccentricity")
    inc = _mpf(inclination, prefix + "inclination")
    node = _mpf(longitude_of_node, prefix + "longitude_of_node")
    peri = _mpf(argument_of_periapsis, prefix + "argument_of_periapsis")
    nu = None if true_anomaly is None else _mpf(true_anomaly, prefix + "true_anomaly")
    M = None if mean_anomaly is None else _mpf(mean_anomaly, prefix + "mean_anomaly")
    if nu is not None and M is not None:
        raise ValueError(f"give either {prefix}true_anomaly or {prefix}mean_anomaly, not both")
    return a, e, inc, node, peri, nu, M


def relative_state(
    m1: Any,
    m2: Any,
    semimajor_axis: Any,
    eccentricity: Any,
    inclination: Any = 0,
    longitude_of_node: Any = 0,
    argument_of_periapsis: Any = 0,
    *,
    true_anomaly: Any = None,
    mean_anomaly: Any = None,
    precision: str = "dd",
) -> tuple[np.ndarray, np.ndarray]:
    """Relative position and velocity of body 2 about body 1 from elements (G = 1).

    Parameters
    ----------
    m1, m2 : number
        Positive masses.
    semimajor_axis, eccentricity : number
        Bound: a > 0, 0 <= e < 1; unbound: a < 0, e > 1 (a mean anomaly then goes through the
        hyperbolic Kepler equation e sinh H - H = M).
    inclination, longitude_of_node, argument_of_periapsis : number, optional
        Orientation in radians (default 0).
    true_anomaly, mean_anomaly : number, optional
        At most one; periapsis when neither is given.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the result (default ``"dd"``).

    Returns
    -------
    position, velocity : numpy.ndarray, shape (3, k)
        float64 limbs of ``r2 - r1`` and ``v2 - v1``.

    Examples
    --------
    >>> from loschmidt import orbits, precision
    >>> r, v = orbits.relative_state(0.5, 0.5, 1, 0)
    >>> precision.to_float(r), precision.to_float(v)
    (array([1., 0., 0.]), array([0., 1., 0.]))
    """
    bits = working_bits(precision)
    with mpmath.workprec(bits + GUARD_BITS):
        a1 = _mpf(m1, "m1")
        a2 = _mpf(m2, "m2")
        if a1 <= 0:
            raise ValueError("m1 must be positive")
        if a2 <= 0:
            raise ValueError("m2 must be positive")
        args = _element_args(semimajor_axis, eccentricity, inclination, longitude_of_node,
                             argument_of_periapsis, true_anomaly, mean_anomaly)
        pos, vel = _state_mp(a1 + a2, *args)
        P = np.stack([_limbs(c, precision) for c in pos])
        V = np.stack([_limbs(c, precision) for c in vel])
    if not (np.all(np.isfinite(P)) and np.all(np.isfinite(V))):
        raise ValueError("semimajor_axis: the relative state lies beyond the double range")
    return P, V


def eccentric_anomaly(mean_anomaly: Any, eccentricity: Any, precision: str = "dd") -> np.ndarray:
    """Solve Kepler's equation: E - e sin E = M (e < 1; E in [0, 2 pi)) or e sinh H - H = M (e > 1).

    Parameters
    ----------
    mean_anomaly : number
        M in radians.
    eccentricity : number
        e >= 0, not 1.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the result (default ``"dd"``).

    Returns
    -------
    numpy.ndarray, shape (k,)
        float64 limbs of E (or H).

    Examples
    --------
    >>> import math
    >>> from loschmidt import orbits, precision
    >>> E = float(precision.to_float(orbits.eccentric_anomaly(1.0, 0.5, "f64")))
    >>> round(E - 0.5 * math.sin(E), 15)
    1.0
    """
    bits = working_bits(precision)
    with mpmath.workprec(bits + GUARD_BITS):
        M = _mpf(mean_anomaly, "mean_anomaly")
        e = _mpf(eccentricity, "eccentricity")
        if e < 0:
            raise ValueError("eccentricity must be >= 0")
        if e == 1:
            raise ValueError("eccentricity = 1 (parabolic) has no Kepler equation in this form")
        E = _kepler_elliptic(M, e) if e < 1 else _kepler_hyperbolic(M, e)
        return _limbs(E, precision)

