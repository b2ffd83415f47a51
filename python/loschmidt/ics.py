"""Initial-condition families: classic three-body problems, free-fall and virial ensembles, orbits.

G = 1 throughout. Single configurations return a ``loschmidt.System`` in the requested ``precision``;
ensembles return an :class:`~loschmidt.ensemble.Ensemble` whose float64 values are the exact initial
conditions of each member. Seeded families draw from ``numpy.random.default_rng(seed)`` in fixed
batches of 4096 candidates, so a given (arguments, seed) always gives the same bits; for
``free_fall_random`` and ``virial_triples`` asking for fewer members gives a prefix of the larger draw.

Single configurations:

- :func:`pythagorean`  masses 3, 4, 5 at rest at (1, 3), (-2, -1), (1, -1): exact integers,
  E = -769/60, L = 0 (Burrau 1913; Szebehely & Peters 1967, AJ 72, 876).
- :func:`figure_eight` the published eight-digit decimal initial conditions (Chenciner & Montgomery
  2000, Ann. Math. 152, 881, with Simo's digits), passed to System as decimal strings so each
  precision holds them as exactly as it can.
- :func:`lagrange` the equilateral triangle in rigid rotation (or its homographic elliptic
  generalisation), computed in the working precision.
- :func:`binary`, :func:`hierarchical` pairs and triples from orbital elements.
- :func:`plummer` a small Plummer sphere (Plummer 1911; sampling of Aarseth, Henon & Wielen 1974).

Ensembles:

- :func:`free_fall_grid`, :func:`free_fall_random` the free-fall problem over the Agekyan-Anosova
  region (Agekyan & Anosova 1967).
- :func:`virial_triples` random triples in virial equilibrium with a chosen angular momentum.

Scattering: :func:`loschmidt.scattering.binary_single` (one binary-single encounter, the incomer
on its exact hyperbola from infinity) and :func:`loschmidt.scattering.binary_single_ensemble`
(seeded encounters with impact parameters uniform in area; Hut & Bahcall 1983, ApJ 268, 319) live
in their own module, which builds on this one.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from decimal import Decimal, InvalidOperation
from fractions import Fraction
from typing import Any, Sequence

import mpmath
import numpy as np

from .ensemble import Ensemble
from .orbits import GUARD_BITS, _check_precision, _element_args, _mpf, _state_mp, working_bits

__all__ = [
    "pythagorean",
    "figure_eight",
    "FIGURE_EIGHT_PERIOD",
    "lagrange",
    "lagrange_stable",
    "binary",
    "hierarchical",
    "plummer",
    "free_fall_grid",
    "free_fall_random",
    "free_fall_region",
    "virial_triples",
]

_BATCH = 4096  # candidates drawn per batch by the seeded families (fixed: results do not depend on n)
_STALL = 64  # batches without a usable candidate before a virial target is declared out of reach

#: Period of the figure-eight orbit from the published digits (Chenciner & Montgomery 2000).
#: A float: pass the decimal string ``"6.32591398"`` to keep more than double precision of it.
FIGURE_EIGHT_PERIOD = 6.32591398


# ---------------------------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------------------------
def _system(masses, positions, velocities, precision, context: str = ""):
    from .system import System

    try:
        return System(masses, positions, velocities, precision=precision)
    except ValueError as exc:  # e.g. bodies that coincide, or values beyond double range, once rounded
        if not context:
            raise
        raise ValueError(f"{context}: the configuration cannot be held in precision {precision!r} ({exc})") from None


def _three(masses: Any) -> bool:
    """Whether ``masses`` is a sequence of three entries."""
    if isinstance(masses, (str, bytes)):
        return False
    try:
        return len(masses) == 3
    except TypeError:  # no length, or a 0-d array
        return False


def _fraction(value: Any, name: str) -> Fraction:
    """The exact rational value of an int, float, decimal string, Decimal, Fraction or mpf."""
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be a real number, got bool")
    if isinstance(value, mpmath.mpf):
        if not mpmath.isfinite(value):
            raise ValueError(f"{name} must be finite, got {value!r}")
        from .precision import exact_fraction

        return exact_fraction(value, name)  # refuses exponents whose exact value would be huge
    if isinstance(value, (int, np.integer)):
        return Fraction(int(value))
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(float(value)):
            raise ValueError(f"{name} must be finite, got {value!r}")
        return Fraction(float(value))
    if isinstance(value, str):
        try:
            value = Decimal(value.strip())
        except InvalidOperation:
            raise ValueError(f"{name} is not a decimal number: {value!r}") from None
    if isinstance(value, Decimal):
        if not value.is_finite():
            raise ValueError(f"{name} must be finite, got {value!r}")
        from .precision import exact_fraction

        return exact_fraction(value, name)  # refuses exponents whose exact value would be huge
    if isinstance(value, numbers.Rational):
        return Fraction(int(value.numerator), int(value.denominator))
    raise TypeError(f"{name} must be int, float, str, Decimal, Fraction or mpmath.mpf, got {type(value).__name__}")


def _exact_double(value: Any, name: str) -> float:
    """A value that must be exactly a double (ensemble data are doubles by definition)."""
    q = _fraction(value, name)
    f = float(q)
    if not math.isfinite(f) or Fraction(f) != q:
        raise ValueError(
            f"{name} = {value!r} is not exactly representable as a double; ensemble values are doubles, "
            f"so pass the double you mean (e.g. float({value!r}))"
        )
    return f


def _masses(masses: Any, name: str, count: int | None = None) -> np.ndarray:
    if isinstance(masses, (str, bytes)) or not isinstance(masses, (Sequence, np.ndarray)):
        raise TypeError(f"{name} must be a sequence of masses")
    ms = [_exact_double(m, f"{name}[{k}]") for k, m in enumerate(masses)]
    if count is not None and len(ms) != count:
        raise ValueError(f"{name} must have {count} entries, got {len(ms)}")
    for k, m in enumerate(ms):
        if m <= 0:
            raise ValueError(f"{name}[{k}] must be positive, got {m!r}")
    return np.array(ms, dtype=np.float64)


def _count(n: Any, name: str, minimum: int = 1) -> int:
    if isinstance(n, (bool, np.bool_)) or not isinstance(n, (int, np.integer)):
        raise TypeError(f"{name} must be an integer, got {type(n).__name__}")
    if n < minimum:
        raise ValueError(f"{name} must be >= {minimum}, got {n}")
    return int(n)


def _seed(seed: Any) -> int:
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)):
        raise TypeError(f"seed must be a non-negative integer, got {type(seed).__name__}")
    if seed < 0:
        raise ValueError(f"seed must be a non-negative integer, got {seed}")
    return int(seed)


def _positive_mp(value: Any, name: str) -> mpmath.mpf:
    x = _mpf(value, name)
    if x <= 0:
        raise ValueError(f"{name} must be positive, got {value!r}")
    return x


# ---------------------------------------------------------------------------------------------
# classic configurations
# ---------------------------------------------------------------------------------------------
def pythagorean(precision: str = "dd"):
    """The Pythagorean three-body problem (Burrau 1913; Szebehely & Peters 1967, AJ 72, 876).

    Masses 3, 4, 5 at rest at the corners of a 3-4-5 right triangle, (1, 3), (-2, -1), (1, -1).
    All values are small integers, exact in every precision; the centre of mass is at the origin,
    E = -769/60, L = 0.

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> from loschmidt import ics
    >>> s = ics.pythagorean("qd")
    >>> s.masses, s.precision
    (array([3., 4., 5.]), 'qd')
    >>> from fractions import Fraction
    >>> from loschmidt.precision import to_fraction
    >>> to_fraction(s.energy(limbs=True)) - Fraction(-769, 60) < Fraction(1, 10**60)
    True
    """
    _check_precision(precision)
    return _system([3, 4, 5], [[1, 3, 0], [-2, -1, 0], [1, -1, 0]], [[0, 0, 0]] * 3, precision)


def figure_eight(precision: str = "dd"):
    """The figure-eight choreography of three unit masses (Moore 1993; Chenciner & Montgomery 2000).

    Initial conditions by Simo: x1 = -x2 = (0.97000436, -0.24308753), x3 = 0,
    v3 = (-0.93240737, -0.86473146), v1 = v2 = -v3/2, period ``FIGURE_EIGHT_PERIOD`` = 6.32591398.
    The digits are passed as decimal strings (-v3/2 is exact in decimal), so each precision holds the
    published numbers to its own accuracy; the total momentum and angular momentum of these digits
    are exactly zero, E = -1.287142 (from these digits).

    Parameters
    ----------
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.figure_eight("dd")
    >>> round(s.energy(), 6)
    -1.287142
    >>> r = loschmidt.integrate(s, loschmidt.ics.FIGURE_EIGHT_PERIOD)
    >>> loschmidt.phase_distance(r.system, s) < 1e-7    # back where it started, to the digits given
    True
    """
    _check_precision(precision)
    x1 = ["0.97000436", "-0.24308753", "0"]
    x2 = ["-0.97000436", "0.24308753", "0"]
    v3 = ["-0.93240737", "-0.86473146", "0"]
    v12 = ["0.466203685", "0.43236573", "0"]  # -v3 / 2, exact in decimal
    return _system([1, 1, 1], [x1, x2, ["0", "0", "0"]], [v12, v12, v3], precision)


def lagrange(
    masses: Sequence[Any] = (1, 1, 1),
    side: Any = 1,
    eccentricity: Any = 0,
    precision: str = "dd",
):
    """Lagrange's equilateral solution, in the x-y plane with the centre of mass at rest at the origin.

    In an equilateral configuration the force on each body points at the centre of mass with
    magnitude ``m_i M |r_i| / s^3`` (M the total mass, s the side), so the triangle rotates rigidly when
    every velocity is omega z x r_i with the exact condition omega^2 = M / s^3. With ``eccentricity``
    e > 0 the velocities are multiplied by sqrt(1 + e): each side then follows a Kepler ellipse of
    eccentricity e about total mass M starting at periapsis (homographic motion), with period
    2 pi sqrt((s / (1 - e))^3 / M).

    Body 0 starts at (0, 0), body 1 at (s, 0), body 2 at (s/2, s sqrt(3)/2), shifted to the centre of
    mass. Everything (sqrt(3), the centre of mass, omega) is computed in mpmath at the working
    precision plus 64 guard bits and rounded once by System. Linearly stable only when
    27 (m1 m2 + m2 m3 + m3 m1) < M^2 (Gascheau 1843; Routh 1875): see :func:`lagrange_stable`;
    equal masses are unstable.

    Parameters
    ----------
    masses : sequence of 3 numbers, optional
        Positive masses (default three unit masses); any exact scalar type.
    side : number, optional
        Side of the triangle (default 1).
    eccentricity : number, optional
        e in [0, 1) of the homographic ellipse (default 0: rigid rotation).
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.lagrange(side=2, precision="qd")
    >>> r = loschmidt.integrate(s, 1)
    >>> d = r.system.positions[1] - r.system.positions[0]
    >>> round(float((d @ d) ** 0.5), 12)    # still equilateral, side 2
    2.0
    """
    precision = _check_precision(precision)
    if not _three(masses):
        raise ValueError("masses must have 3 entries")
    with mpmath.workprec(working_bits(precision) + GUARD_BITS):
        m = [_positive_mp(v, f"masses[{k}]") for k, v in enumerate(masses)]
        s = _positive_mp(side, "side")
        e = _mpf(eccentricity, "eccentricity")
        if not 0 <= e < 1:
            raise ValueError(f"eccentricity must be in [0, 1), got {eccentricity!r}")
        M = m[0] + m[1] + m[2]
        verts = [
            [mpmath.mpf(0), mpmath.mpf(0)],
            [s, mpmath.mpf(0)],
            [s / 2, s * mpmath.sqrt(3) / 2],
        ]
        cx = mpmath.fsum(m[k] * verts[k][0] for k in range(3)) / M
        cy = mpmath.fsum(m[k] * verts[k][1] for k in range(3)) / M
        pos = [[verts[k][0] - cx, verts[k][1] - cy, mpmath.mpf(0)] for k in range(3)]
        omega = mpmath.sqrt(M / s**3) * mpmath.sqrt(1 + e)
        vel = [[-omega * p[1], omega * p[0], mpmath.mpf(0)] for p in pos]
    return _system(m, pos, vel, precision, "side")


def lagrange_stable(masses: Sequence[Any]) -> bool:
    """Exact Gascheau-Routh test of the linear stability of the Lagrange triangle.

    Stable iff 27 (m1 m2 + m2 m3 + m3 m1) < (m1 + m2 + m3)^2 (Gascheau 1843; Routh 1875), decided in
    rational arithmetic.

    Parameters
    ----------
    masses : sequence of 3 numbers
        Positive masses.

    Returns
    -------
    bool

    Examples
    --------
    >>> from loschmidt.ics import lagrange_stable
    >>> lagrange_stable([1, 1, 1]), lagrange_stable([1, 0.001, 100])
    (False, True)
    """
    if not _three(masses):
        raise ValueError("masses must have 3 entries")
    m = [_fraction(v, f"masses[{k}]") for k, v in enumerate(masses)]
    for k, v in enumerate(m):
        if v <= 0:
            raise ValueError(f"masses[{k}] must be positive")
    return 27 * (m[0] * m[1] + m[1] * m[2] + m[2] * m[0]) < (m[0] + m[1] + m[2]) ** 2


# ---------------------------------------------------------------------------------------------
# orbits
# ---------------------------------------------------------------------------------------------
_ELEMENT_KEYS = {
    "a": "semimajor_axis",
    "semimajor_axis": "semimajor_axis",
    "e": "eccentricity",
    "eccentricity": "eccentricity",
    "inclination": "inclination",
    "node": "longitude_of_node",
    "longitude_of_node": "longitude_of_node",
    "periapsis": "argument_of_periapsis",
    "argument_of_periapsis": "argument_of_periapsis",
    "true_anomaly": "true_anomaly",
    "mean_anomaly": "mean_anomaly",
}


def _parse_orbit(spec: Any, name: str, mass_keys: tuple) -> tuple:
    """(masses, element values) of a dict like {"m1":.., "m2":.., "a":.., "e":.., ...} as mpf."""
    if not isinstance(spec, Mapping):
        raise TypeError(f"{name} must be a dict of orbital elements")
    canon: dict = {}
    keyname: dict = {}
    for key, value in spec.items():
        if key in mass_keys:
            continue
        if key not in _ELEMENT_KEYS:
            allowed = sorted(set(_ELEMENT_KEYS) | set(mass_keys))
            raise ValueError(f"{name}[{key!r}] is not a known element (allowed: {allowed})")
        c = _ELEMENT_KEYS[key]
        if c in canon:
            raise ValueError(f"{name} gives {c} twice ({keyname[c]!r} and {key!r})")
        canon[c] = value
        keyname[c] = key
    for k in mass_keys:
        if k not in spec:
            raise ValueError(f"{name}[{k!r}] (a mass) is required")
    for c, short in (("semimajor_axis", "a"), ("eccentricity", "e")):
        if c not in canon:
            raise ValueError(f"{name}[{short!r}] is required")
        keyname.setdefault(c, short)
    if "true_anomaly" in canon and "mean_anomaly" in canon:
        raise ValueError(f"{name} must give either 'true_anomaly' or 'mean_anomaly', not both")
    label = {c: f"{name}[{keyname.get(c, c)!r}]" for c in _ELEMENT_KEYS.values()}
    masses = [_positive_mp(spec[k], f"{name}[{k!r}]") for k in mass_keys]
    vals = {
        c: _mpf(canon[c], label[c]) if c in canon else None
        for c in ("semimajor_axis", "eccentricity", "inclination", "longitude_of_node",
                  "argument_of_periapsis", "true_anomaly", "mean_anomaly")
    }
    for c in ("inclination", "longitude_of_node", "argument_of_periapsis"):
        if vals[c] is None:
            vals[c] = mpmath.mpf(0)
    names = (f"{name} masses", label["semimajor_axis"], label["eccentricity"], label["true_anomaly"])
    return masses, vals, names


def _orbit_state(gm, vals, names):
    return _state_mp(
        gm,
        vals["semimajor_axis"],
        vals["eccentricity"],
        vals["inclination"],
        vals["longitude_of_node"],
        vals["argument_of_periapsis"],
        vals["true_anomaly"],
        vals["mean_anomaly"],
        names=names,
    )


def binary(
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
):
    """A two-body System in its centre-of-mass frame from the elements of body 2 about body 1.

    Conventions of :mod:`loschmidt.orbits`; computed in mpmath at the working precision plus 64 guard
    bits and rounded once.

    Parameters
    ----------
    m1, m2 : number
        Positive masses.
    semimajor_axis, eccentricity : number
        Bound (a > 0, 0 <= e < 1) or hyperbolic (a < 0, e > 1).
    inclination, longitude_of_node, argument_of_periapsis : number, optional
        Orientation angles in radians (default 0).
    true_anomaly, mean_anomaly : number, optional
        At most one; periapsis when neither is given.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> from loschmidt import ics, orbits
    >>> b = ics.binary(1, 0.5, 2, 0.6, true_anomaly=1.0, precision="qd")
    >>> e = orbits.pair_elements(b)
    >>> e.semimajor_axis, e.eccentricity, e.true_anomaly
    (2.0, 0.6, 1.0)
    """
    precision = _check_precision(precision)
    with mpmath.workprec(working_bits(precision) + GUARD_BITS):
        a1 = _positive_mp(m1, "m1")
        a2 = _positive_mp(m2, "m2")
        args = _element_args(semimajor_axis, eccentricity, inclination, longitude_of_node,
                             argument_of_periapsis, true_anomaly, mean_anomaly)
        M = a1 + a2
        r, v = _state_mp(M, *args, names=("m1 + m2", "semimajor_axis", "eccentricity", "true_anomaly"))
        pos = [[-a2 / M * c for c in r], [a1 / M * c for c in r]]
        vel = [[-a2 / M * c for c in v], [a1 / M * c for c in v]]
    return _system([a1, a2], pos, vel, precision, "semimajor_axis")


def hierarchical(inner: Mapping[str, Any], outer: Mapping[str, Any], precision: str = "dd"):
    """A hierarchical triple from two sets of orbital elements, in its centre-of-mass frame.

    ``inner = dict(m1=, m2=, a=, e=, inclination=, node=, periapsis=, true_anomaly= | mean_anomaly=)``
    is body 2 about body 1; ``outer = dict(m3=, a=, e=, ...)`` is body 3 about the centre of mass
    of the inner pair, with gravitational parameter m1 + m2 + m3. Long names (``semimajor_axis``,
    ``eccentricity``, ``longitude_of_node``, ``argument_of_periapsis``) are accepted too; angles in
    radians, missing angles and anomalies are 0 (periapsis). Either orbit may be bound or hyperbolic
    (a < 0, e > 1). Computed in mpmath at the working precision plus 64 guard bits.
    ``orbits.pair_elements(s, 0, 1)`` and ``pair_elements(s, (0, 1), 2)`` give the elements back.
    No stability criterion is applied.

    Parameters
    ----------
    inner : mapping
        ``m1``, ``m2``, ``a``, ``e`` and optionally ``inclination``, ``node``, ``periapsis``,
        ``true_anomaly`` or ``mean_anomaly``: body 2 about body 1.
    outer : mapping
        ``m3``, ``a``, ``e`` and optional angles: body 3 about the inner pair's centre of mass.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> from loschmidt import ics, orbits
    >>> s = ics.hierarchical(dict(m1=1, m2=1, a=1, e=0.1), dict(m3=0.5, a=10, e=0.3, inclination=0.5))
    >>> outer = orbits.pair_elements(s, (0, 1), 2)
    >>> outer.semimajor_axis, outer.eccentricity, outer.inclination
    (10.0, 0.3, 0.5)
    """
    precision = _check_precision(precision)
    with mpmath.workprec(working_bits(precision) + GUARD_BITS):
        (m1, m2), vin, nin = _parse_orbit(inner, "inner", ("m1", "m2"))
        (m3,), vout, nout = _parse_orbit(outer, "outer", ("m3",))
        m12 = m1 + m2
        M = m12 + m3
        r_in, v_in = _orbit_state(m12, vin, nin)
        r_out, v_out = _orbit_state(M, vout, nout)
        # centre of mass at rest at the origin: inner centre at -m3/M r_out, body 3 at +m12/M r_out
        R = [-m3 / M * c for c in r_out]
        V = [-m3 / M * c for c in v_out]
        pos = [
            [R[k] - m2 / m12 * r_in[k] for k in range(3)],
            [R[k] + m1 / m12 * r_in[k] for k in range(3)],
            [m12 / M * r_out[k] for k in range(3)],
        ]
        vel = [
            [V[k] - m2 / m12 * v_in[k] for k in range(3)],
            [V[k] + m1 / m12 * v_in[k] for k in range(3)],
            [m12 / M * v_out[k] for k in range(3)],
        ]
    return _system([m1, m2, m3], pos, vel, precision, "inner, outer")


# ---------------------------------------------------------------------------------------------
# Plummer sphere
# ---------------------------------------------------------------------------------------------
def _isotropic(rng: np.random.Generator, radius: np.ndarray) -> np.ndarray:
    """Vectors of the given lengths in isotropic random directions (two uniforms each)."""
    u = rng.random((radius.shape[0], 2))
    t = 1.0 - 2.0 * u[:, 0]  # cos(theta), uniform in (-1, 1]
    sin_t = np.sqrt(1.0 - t * t)
    phi = 2.0 * np.pi * u[:, 1]
    return radius[:, None] * np.stack([sin_t * np.cos(phi), sin_t * np.sin(phi), t], axis=1)


def _potential(masses: np.ndarray, pos: np.ndarray) -> float:
    """-sum over pairs m_i m_j / r_ij for one system (float64; pairs vectorised)."""
    i, j = np.triu_indices(len(masses), 1)
    d = pos[j] - pos[i]
    r = np.sqrt(np.einsum("pk,pk->p", d, d))
    return -float(np.sum(masses[i] * masses[j] / r))


def plummer(
    n: int,
    seed: int,
    precision: str = "dd",
    mass_cutoff: float = 0.999,
    virial: bool = True,
):
    """A Plummer sphere (Plummer 1911, MNRAS 71, 460) of ``n`` equal masses 1/n (as doubles), drawn
    with the method of Aarseth, Henon & Wielen 1974 (A&A 37, 183):

    - radius from the cumulative mass fraction X: r = (X^(-2/3) - 1)^(-1/2), with X redrawn above
      ``mass_cutoff`` (0.999 by default: our choice, to avoid rare far outliers; AHW74 also
      truncate the model at a large radius [memory]);
    - speed q v_esc with v_esc = sqrt(2) (1 + r^2)^(-1/4) and q in (0, 1) drawn by von Neumann
      rejection from g(q) = q^2 (1 - q^2)^(7/2) (bounded by 0.1);
    - isotropic directions for both; then the centre of mass and its velocity are removed;
    - standard units (G = M = 1, E = -1/4; Henon; Heggie & Mathieu 1986): lengths times 3 pi / 16 and
      velocities times sqrt(16 / (3 pi)), since the model's energy is -3 pi / 64 M^2 / a for scale
      radius a. With ``virial=True`` (default) the sampled system is then rescaled exactly to
      virial equilibrium 2T = -U and E = -1/4, common practice for small N.

    Float64 throughout: the double values are the initial conditions. Few-body use: the potential is
    an O(n^2) double sum.

    Parameters
    ----------
    n : int
        Number of bodies (>= 2).
    seed : int
        Seed of ``numpy.random.default_rng``.
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision of the System (default ``"dd"``).
    mass_cutoff : float, optional
        Largest cumulative mass fraction drawn, in (0, 1] (default 0.999).
    virial : bool, optional
        Rescale to exact virial equilibrium at E = -1/4 (default True).

    Returns
    -------
    System

    Examples
    --------
    >>> from loschmidt import ics
    >>> s = ics.plummer(5, seed=1)
    >>> s.n, round(s.energy(), 12)
    (5, -0.25)
    """
    n = _count(n, "n", 2)
    rng = np.random.default_rng(_seed(seed))
    precision = _check_precision(precision)
    if isinstance(mass_cutoff, (bool, np.bool_)) or not isinstance(mass_cutoff, (numbers.Real, np.floating)):
        raise TypeError("mass_cutoff must be a real number")
    from .precision import _real

    cut = _real(mass_cutoff)
    if not 0.0 < cut <= 1.0:
        raise ValueError(f"mass_cutoff must be in (0, 1], got {mass_cutoff!r}")
    if not isinstance(virial, (bool, np.bool_)):
        raise TypeError("virial must be a bool")

    # radii: X in (0, 1], rejecting X > cut (and X == 1, whose radius is infinite)
    radii: list = []
    have = 0
    empty = 0
    while have < n:
        if empty >= _STALL:  # a cutoff so small that almost no draw is kept: it would never end
            raise ValueError(f"mass_cutoff: {mass_cutoff!r} keeps no radius in {_STALL * _BATCH} draws; use a larger one")
        X = 1.0 - rng.random(_BATCH)
        X = X[(X <= cut) & (X < 1.0)]
        radii.append(1.0 / np.sqrt(X ** (-2.0 / 3.0) - 1.0))
        have += X.size
        empty = 0 if X.size else empty + 1
    r = np.concatenate(radii)[:n]
    # speeds: q by rejection from g(q) = q^2 (1 - q^2)^3.5 <= 0.1
    qs: list = []
    have = 0
    while have < n:
        u = rng.random((_BATCH, 2))
        q = u[:, 0]
        ok = 0.1 * u[:, 1] < q * q * (1.0 - q * q) ** 3.5
        qs.append(q[ok])
        have += int(ok.sum())
    q = np.concatenate(qs)[:n]
    speed = q * np.sqrt(2.0) * (1.0 + r * r) ** -0.25
    pos = _isotropic(rng, r)
    vel = _isotropic(rng, speed)
    m = np.full(n, 1.0 / n)
    M = m.sum()
    pos -= (m[:, None] * pos).sum(axis=0) / M
    vel -= (m[:, None] * vel).sum(axis=0) / M
    pos *= 3.0 * np.pi / 16.0
    vel *= np.sqrt(16.0 / (3.0 * np.pi))
    if virial:
        T = 0.5 * float(np.sum(m * np.einsum("nk,nk->n", vel, vel)))
        U = _potential(m, pos)
        vel *= math.sqrt(-U / (2.0 * T))  # now 2T = -U, E = U/2
        lam = (U / 2.0) / -0.25  # lengths * lam, velocities / sqrt(lam): E -> -1/4
        pos *= lam
        vel /= math.sqrt(lam)
    return _system(m, pos, vel, precision)


# ---------------------------------------------------------------------------------------------
# free fall (Agekyan-Anosova region)
# ---------------------------------------------------------------------------------------------
_SQRT3_2 = math.sqrt(3.0) / 2.0  # float; only bounds the random draws (the grid uses exact rounding)


def free_fall_region(x: Any, y: Any) -> np.ndarray:
    """Exact membership in the Agekyan-Anosova region x >= 0, y >= 0, (x + 1/2)^2 + y^2 <= 1.

    Decided in rational arithmetic where the float test is too close to call.

    Parameters
    ----------
    x, y : float or array-like
        Coordinates of body 2, the released one (broadcast together).

    Returns
    -------
    bool or numpy.ndarray of bool

    Examples
    --------
    >>> from loschmidt.ics import free_fall_region
    >>> free_fall_region(0.2, 0.5), free_fall_region(0.5, 0.8)
    (True, False)
    """
    x, y = np.broadcast_arrays(_coordinates(x, "x"), _coordinates(y, "y"))
    if x.ndim == 0:
        return bool(free_fall_region(x.reshape(1), y.reshape(1))[0])
    with np.errstate(over="ignore", invalid="ignore"):  # huge or NaN coordinates: simply outside
        s = (x + 0.5) ** 2 + y**2
    quadrant = (x >= 0) & (y >= 0)
    inside = quadrant & (s <= 1.0)
    near = quadrant & (np.abs(s - 1.0) <= 1e-12)
    if near.any():
        inside = inside.copy()
        for k in zip(*np.nonzero(near)):
            fx, fy = Fraction(float(x[k])), Fraction(float(y[k]))
            inside[k] = (fx + Fraction(1, 2)) ** 2 + fy**2 <= 1
    return inside


def _coordinates(value: Any, name: str) -> np.ndarray:
    """Real numbers as float64; errors name ``name``."""
    if isinstance(value, (str, bytes)):
        raise TypeError(f"{name} must be a real number or an array of them, got {type(value).__name__}")
    try:
        raw = np.asarray(value)
        if raw.dtype.kind in "bcmMSUV":
            raise TypeError
        return raw.astype(np.float64)
    except (TypeError, ValueError, OverflowError):
        raise TypeError(f"{name} must be a real number or an array of them") from None


def _free_fall_arrays(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    m = x.shape[0]
    pos = np.zeros((m, 3, 3))
    pos[:, 0, 0] = -0.5
    pos[:, 1, 0] = 0.5
    pos[:, 2, 0] = x
    pos[:, 2, 1] = y
    return pos


def free_fall_grid(nx: int, ny: int, masses: Sequence[Any] = (1, 1, 1)) -> Ensemble:
    """Free-fall triples on a grid over the Agekyan-Anosova region (Agekyan & Anosova 1967).

    Bodies 0 and 1 sit at (-1/2, 0) and (1/2, 0), body 2 at (x, y) (counted from 0, as everywhere);
    all at rest, z = 0. The region
    x >= 0, y >= 0, (x + 1/2)^2 + y^2 <= 1 lies in the box [0, 1/2] x [0, sqrt(3)/2]; the box is cut
    into nx x ny equal cells and body 2 is put at each cell centre,

        x_i = (2 i + 1) / (4 nx),            i = 0 .. nx - 1
        y_j = (2 j + 1) sqrt(3) / (4 ny),    j = 0 .. ny - 1,

    each rounded once to the nearest double (x_i by one IEEE division of exact integers, y_j from
    mpmath). Only centres inside the region (tested exactly on the doubles) are kept; about 71% of
    the box. Cell centres avoid the degenerate edges (y = 0 collinear, x = 0 isosceles, the corner
    (0, 0) a symmetric triple collision). Members are ordered row by row: j, then i.

    ``params``: ``ix``, ``iy`` (cell indices, int64), ``x``, ``y`` (body 2). ``meta``: nx, ny.
    Masses are used as the doubles given (the centre of mass is not moved to the origin: it would
    cost a rounding; it is at rest anyway).

    Parameters
    ----------
    nx, ny : int
        Cells across x in [0, 1/2] and y in [0, sqrt(3)/2] (``ny`` about 1.73 ``nx`` gives square
        cells).
    masses : sequence of 3 numbers, optional
        Masses of bodies 1, 2, 3 (default 1, 1, 1), each exactly a double.

    Returns
    -------
    Ensemble

    Examples
    --------
    >>> from loschmidt import ics
    >>> ens = ics.free_fall_grid(4, 7)
    >>> len(ens), ens.meta
    (21, {'nx': 4, 'ny': 7})
    >>> ens.params["x"][:3]
    array([0.0625, 0.1875, 0.3125])
    >>> bool(ens.system(0).velocities.any())    # released from rest
    False
    """
    nx = _count(nx, "nx")
    ny = _count(ny, "ny")
    if nx * ny > 10**8:
        raise ValueError(f"nx * ny must be at most 1e8 (memory), got {nx * ny}")
    ms = _masses(masses, "masses", 3)
    xs = (2.0 * np.arange(nx) + 1.0) / (4.0 * nx)
    with mpmath.workprec(53 + GUARD_BITS):
        s3 = mpmath.sqrt(3)
        ys = np.array([float((2 * j + 1) * s3 / (4 * ny)) for j in range(ny)], dtype=np.float64)
    X, Y = np.meshgrid(xs, ys)  # (ny, nx): row j, column i
    IX, IY = np.meshgrid(np.arange(nx, dtype=np.int64), np.arange(ny, dtype=np.int64))
    keep = free_fall_region(X, Y)
    x, y, ix, iy = X[keep], Y[keep], IX[keep], IY[keep]
    return Ensemble(
        ms,
        _free_fall_arrays(x, y),
        np.zeros((3, 3)),
        params={"ix": ix, "iy": iy, "x": x, "y": y},
        family="free_fall_grid",
        meta={"nx": nx, "ny": ny},
    )


def free_fall_random(n: int, seed: int, masses: Sequence[Any] = (1, 1, 1)) -> Ensemble:
    """Free-fall triples with body 2 uniform over the Agekyan-Anosova region.

    Rejection from the box [0, 1/2) x [0, sqrt(3)/2) in batches of 4096 candidates. Layout as in
    :func:`free_fall_grid`; ``params``: ``x``, ``y``; ``meta``: seed.

    Parameters
    ----------
    n : int
        Number of members; fewer members give a prefix of a larger draw.
    seed : int
        Seed of ``numpy.random.default_rng``.
    masses : sequence of 3 numbers, optional
        Masses (default 1, 1, 1), each exactly a double.

    Returns
    -------
    Ensemble

    Examples
    --------
    >>> from loschmidt import ics
    >>> a, b = ics.free_fall_random(10, seed=3), ics.free_fall_random(4, seed=3)
    >>> bool((a.params["x"][:4] == b.params["x"]).all())
    True
    """
    n = _count(n, "n")
    seed = _seed(seed)
    ms = _masses(masses, "masses", 3)
    rng = np.random.default_rng(seed)
    xs, ys = [], []
    have = 0
    while have < n:
        u = rng.random((_BATCH, 2))
        x = 0.5 * u[:, 0]
        y = _SQRT3_2 * u[:, 1]
        keep = free_fall_region(x, y)
        xs.append(x[keep])
        ys.append(y[keep])
        have += int(keep.sum())
    x = np.concatenate(xs)[:n]
    y = np.concatenate(ys)[:n]
    return Ensemble(
        ms,
        _free_fall_arrays(x, y),
        np.zeros((3, 3)),
        params={"x": x, "y": y},
        family="free_fall_random",
        meta={"seed": seed},
    )


# ---------------------------------------------------------------------------------------------
# virial triples
# ---------------------------------------------------------------------------------------------
def _angular_momentum(m, pos, vel):
    return np.einsum("n,bnk->bk", m, np.cross(pos, vel))


def _rotation_for(m, pos, inv, L):
    """Angular velocity w whose rigid rotation w x r carries angular momentum L: I w = L, with two
    steps of iterative refinement against the directly computed sum m r x (w x r), so thin
    triangles (ill-conditioned I) still land on L to rounding."""
    w = np.einsum("bij,bj->bi", inv, L)
    for _ in range(2):
        got = _angular_momentum(m, pos, np.cross(w[:, None, :], pos))
        w = w + np.einsum("bij,bj->bi", inv, L - got)
    return w


def _virial_candidates(rng, m, E, planar):
    """One batch of candidate triples: CoM frame, zero angular momentum, U = 2E, plus what is
    needed to add a rotation: the inverse inertia tensor and the kinetic energy of the velocities."""
    B = _BATCH
    M = m.sum()
    if planar:
        u = rng.random((B, 3, 2))
        rad = np.sqrt(u[..., 0])
        phi = 2.0 * np.pi * u[..., 1]
        pos = np.stack([rad * np.cos(phi), rad * np.sin(phi), np.zeros_like(rad)], axis=-1)
        g = rng.standard_normal((B, 3, 2))
        vel = np.concatenate([g, np.zeros((B, 3, 1))], axis=-1)
    else:
        d = rng.standard_normal((B, 3, 3))
        rad = rng.random((B, 3)) ** (1.0 / 3.0)
        norm = np.sqrt(np.einsum("bnk,bnk->bn", d, d))
        pos = d * (rad / norm)[..., None]
        vel = rng.standard_normal((B, 3, 3))
    pos -= np.einsum("n,bnk->bk", m, pos)[:, None, :] / M
    vel -= np.einsum("n,bnk->bk", m, vel)[:, None, :] / M
    # shape test: reject near-collinear triangles (inertia tensor near singular)
    area2 = np.cross(pos[:, 1] - pos[:, 0], pos[:, 2] - pos[:, 0])
    area2 = np.sqrt(np.einsum("bk,bk->b", area2, area2))
    sides = [pos[:, 1] - pos[:, 0], pos[:, 2] - pos[:, 1], pos[:, 0] - pos[:, 2]]
    longest2 = np.max([np.einsum("bk,bk->b", s, s) for s in sides], axis=0)
    ok = area2 > 1e-6 * longest2
    # remove the angular momentum: v -= w x r with I w = L
    r2 = np.einsum("bnk,bnk->bn", pos, pos)
    inertia = np.einsum("n,bn->b", m, r2)[:, None, None] * np.eye(3) - np.einsum("n,bni,bnj->bij", m, pos, pos)
    if planar:
        inertia[:, :2, :] = 0.0
        inertia[:, :, :2] = 0.0
        inertia[:, 0, 0] = inertia[:, 1, 1] = 1.0  # only the z block matters in the plane
    safe = np.where(ok[:, None, None], inertia, np.eye(3))
    inv = np.linalg.inv(safe)
    L = np.einsum("n,bnk->bk", m, np.cross(pos, vel))
    if planar:
        L[:, :2] = 0.0
    w = _rotation_for(m, pos, inv, L)
    vel -= np.cross(w[:, None, :], pos)
    # scale positions so that U = 2E (virial: E = U / 2)
    U = np.zeros(B)
    for i in range(3):
        for j in range(i + 1, 3):
            dd = pos[:, j] - pos[:, i]
            U -= m[i] * m[j] / np.sqrt(np.einsum("bk,bk->b", dd, dd))
    lam = U / (2.0 * E)
    pos *= lam[:, None, None]
    inv_scaled = inv / (lam * lam)[:, None, None]  # inertia scales as lam^2
    T = 0.5 * np.einsum("n,bn->b", m, np.einsum("bnk,bnk->bn", vel, vel))
    ok &= T > 0
    return ok, pos, vel, inv_scaled, T


def _virial_finish(m, E, pos, u, inv, T_u, Lz):
    """Velocities s u + Omega x r with L = (0, 0, Lz) and T = -E, s from the exact quadratic
    T_u s^2 + C s + T_w = -E (C = sum m u . w, ~0 but kept so T is right to rounding)."""
    L = np.zeros((Lz.shape[0], 3))
    L[:, 2] = Lz
    Om = _rotation_for(m, pos, inv, L)
    w = np.cross(Om[:, None, :], pos)
    T_w = 0.5 * np.einsum("n,bn->b", m, np.einsum("bnk,bnk->bn", w, w))
    C = np.einsum("n,bn->b", m, np.einsum("bnk,bnk->bn", u, w))
    K = -E - T_w  # > 0 for the candidates passed in
    sq = np.sqrt(C * C + 4.0 * T_u * K)
    s = np.where(C >= 0, 2.0 * K / (C + sq), (sq - C) / (2.0 * T_u))
    vel = s[:, None, None] * u + w
    # w x r carries Omega x (sum m r), which is zero only to rounding times a possibly large Omega
    # (thin triangles): take the centre-of-mass motion out once more
    M = m.sum()
    pos = pos - np.einsum("n,bnk->bk", m, pos)[:, None, :] / M
    vel = vel - np.einsum("n,bnk->bk", m, vel)[:, None, :] / M
    return pos, vel


@np.errstate(over="ignore", invalid="ignore", divide="ignore")  # extreme scales: inf/NaN candidates are dropped
def virial_triples(
    n: int,
    seed: int,
    angular_momentum: Any = 0.0,
    masses: Sequence[Any] = (1, 1, 1),
    energy: Any = None,
    planar: bool = False,
) -> Ensemble:
    """``n`` random triples in virial equilibrium (2T = -U), centre of mass at rest at the origin,
    total energy ``energy`` and angular momentum ``angular_momentum`` along z.

    ``energy`` defaults to -M^2 / 4 (M the total mass): E = -1/4 for M = 1, the standard N-body
    units of Henon and of Heggie & Mathieu 1986 (virial radius 1); common practice. With the default
    unit masses that is E = -9/4, again virial radius 1. ``angular_momentum`` is a float or an (n,)
    array of targets (N-body units, after the scaling).

    Recipe (ours): positions uniform in the unit ball (``planar``: unit disc, z = 0), velocities
    Gaussian; remove the centre of mass and its motion; remove the angular momentum by subtracting
    the rigid rotation w x r with I w = L (I the inertia tensor); scale the lengths so U = 2E; add
    the rotation Omega x r with I Omega = (0, 0, L_target) and scale the random part so T = -E
    (exact because the random part has no angular momentum). Candidates that cannot reach the
    target (rotational energy alone above -E) or are near-collinear are skipped. Every value is then
    rounded to a double, so 2T + U, P and L - L_target are zero to about 1e-16 relative: the doubles
    are the initial conditions. ``params``: ``angular_momentum`` (the target); ``meta``: seed,
    energy, planar.

    Parameters
    ----------
    n : int
        Number of members.
    seed : int
        Seed of ``numpy.random.default_rng``.
    angular_momentum : float or array-like of n floats, optional
        Target angular momentum along z (default 0).
    masses : sequence of 3 numbers, optional
        Masses (default 1, 1, 1).
    energy : float, optional
        Negative total energy (default -M^2 / 4).
    planar : bool, optional
        Keep every member in the x-y plane (default False).

    Returns
    -------
    Ensemble

    Raises
    ------
    ValueError
        When a target angular momentum cannot be reached at this energy.

    Examples
    --------
    >>> from loschmidt import ics
    >>> ens = ics.virial_triples(5, seed=2, angular_momentum=0.3)
    >>> ens.energy().round(12), ens.angular_momentum()[:, 2].round(12)
    (array([-2.25, -2.25, -2.25, -2.25, -2.25]), array([0.3, 0.3, 0.3, 0.3, 0.3]))
    """
    n = _count(n, "n")
    seed = _seed(seed)
    ms = _masses(masses, "masses", 3)
    if not isinstance(planar, (bool, np.bool_)):
        raise TypeError("planar must be a bool")
    M = float(ms.sum())
    if energy is None:
        E = -M * M / 4.0
        if not math.isfinite(E):
            raise ValueError(f"masses: the default energy -M^2/4 overflows double range (M = {M!r}); pass energy")
    else:
        if isinstance(energy, (bool, np.bool_)) or not isinstance(energy, (numbers.Real, np.floating)):
            raise TypeError("energy must be a real number")
        from .precision import _real

        E = _real(energy)
        if not (math.isfinite(E) and E < 0):
            raise ValueError(f"energy must be negative and finite (virial equilibrium is bound), got {energy!r}")
    if isinstance(angular_momentum, (bool, np.bool_)):
        raise TypeError("angular_momentum must be a real number or an array of them")
    try:
        targets = np.asarray(angular_momentum, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError("angular_momentum must be a real number or an array of them") from None
    if targets.ndim == 0:
        targets = np.full(n, float(targets))
        scalar = True
    elif targets.shape == (n,):
        scalar = False
    else:
        raise ValueError(f"angular_momentum must be a scalar or have shape ({n},), got {targets.shape}")
    if not np.all(np.isfinite(targets)):
        raise ValueError("angular_momentum must be finite")

    rng = np.random.default_rng(seed)
    out_pos = np.empty((n, 3, 3))
    out_vel = np.empty((n, 3, 3))
    filled = 0
    stalled = 0
    while filled < n:
        if stalled >= _STALL:
            raise ValueError(
                f"angular_momentum[{filled}] = {targets[filled]!r} is out of reach: no candidate in "
                f"{_STALL * _BATCH} could carry it at energy {E!r}"
            )
        try:
            ok, pos, vel, inv, T = _virial_candidates(rng, ms, E, planar)
        except np.linalg.LinAlgError:
            raise ValueError("masses: the inertia tensors of the candidate triangles are singular in double "
                             "precision (mass ratios too extreme)") from None
        # rotational energy of the target: T_rot = L^2 (I^-1)_zz / 2, feasible when below -E
        # (with a margin that covers the rounding of I^-1 for the triangles kept)
        izz = inv[:, 2, 2]
        margin = -E * (1.0 - 1e-6)
        if scalar:
            take = np.flatnonzero(ok & (0.5 * targets[0] ** 2 * izz < margin))[: n - filled]
            slots = np.arange(filled, filled + take.size)
        else:  # give each target, in order, the next candidate that can carry it
            take_list, slot_list = [], []
            for b in np.flatnonzero(ok):
                if filled + len(slot_list) >= n:
                    break
                t = targets[filled + len(slot_list)]
                if 0.5 * t * t * izz[b] < margin:
                    take_list.append(b)
                    slot_list.append(filled + len(slot_list))
            take = np.array(take_list, dtype=np.int64)
            slots = np.array(slot_list, dtype=np.int64)
        if take.size == 0:
            stalled += 1
            continue
        stalled = 0
        out_pos[slots], out_vel[slots] = _virial_finish(ms, E, pos[take], vel[take], inv[take], T[take], targets[slots])
        filled += take.size
    if not (np.all(np.isfinite(out_pos)) and np.all(np.isfinite(out_vel))):
        raise ValueError(f"energy, masses: at energy {E!r} the triples leave double range")
    return Ensemble(
        ms,
        out_pos,
        out_vel,
        params={"angular_momentum": targets},
        family="virial_triples",
        meta={"seed": seed, "energy": E, "planar": bool(planar)},
    )
