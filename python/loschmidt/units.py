"""Physical units for N-body work: the scale that turns G = 1 numbers into metres, seconds and m/s.

An N-body unit system is fixed by a mass unit and a length unit with G = 1; the time unit follows as
sqrt(L^3 / (G M)) and the velocity unit as sqrt(G M / L). Everything is derived from GM_sun (known to
about ten digits) rather than from G and the solar mass in kg (each known to five): the product is
what the dynamics sees.

Constants (SI, plain floats):

- ``AU``            149 597 870 700 m, exact (IAU 2012 Resolution B2).
- ``PARSEC``        (648000 / pi) au (IAU 2015 Resolution B2), correctly rounded to a double.
- ``GM_SUN``        1.3271244e20 m^3 s^-2, nominal solar mass parameter (IAU 2015 Resolution B3).
- ``C``             299 792 458 m/s, exact (SI definition).
- ``PLANCK_LENGTH`` 1.616255e-35 m (CODATA 2018).
- ``NEWTON_G``      6.67430e-11 m^3 kg^-1 s^-2 (CODATA 2018); only for ``SOLAR_MASS`` in kg.
- ``SOLAR_MASS``    GM_SUN / NEWTON_G in kg (nominal solar mass; relative uncertainty about 2e-5 from G).
- ``DAY``           86400 s; ``YEAR`` the Julian year, 365.25 days (IAU), so a Myr is 1e6 Julian years.

Derived values are computed once in 50-digit arithmetic (mpmath) from the exact double inputs and then
rounded once to a double, so every attribute of a :class:`Scale` is correctly rounded.
``Scale.decimal`` gives the same quantities as decimal strings of any length, for feeding an
extended-precision run (a speed of light in N-body units for post-Newtonian terms, say) without a
detour through a double.

astropy is never required. When it is installed, a ``Quantity`` is accepted wherever a mass, a length
or a time in physical units is expected, and converted with astropy's own unit machinery; astropy is
imported only when such an object is seen.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import mpmath
import numpy as np

__all__ = [
    "AU",
    "PARSEC",
    "GM_SUN",
    "C",
    "PLANCK_LENGTH",
    "NEWTON_G",
    "SOLAR_MASS",
    "DAY",
    "YEAR",
    "Scale",
]

_DPS = 50  # working digits for derived constants; far more than a double needs

#: The astronomical unit in metres, exact (IAU 2012 Resolution B2).
AU = 149597870700.0  # m, exact (IAU 2012 B2)
#: Nominal solar mass parameter GM_sun in m^3 s^-2 (IAU 2015 Resolution B3).
GM_SUN = 1.3271244e20  # m^3 s^-2, nominal (IAU 2015 B3)
#: Speed of light in m/s, exact (SI definition).
C = 299792458.0  # m/s, exact (SI)
#: Planck length in metres (CODATA 2018).
PLANCK_LENGTH = 1.616255e-35  # m (CODATA 2018)
#: Newton's constant in m^3 kg^-1 s^-2 (CODATA 2018); used only for ``SOLAR_MASS`` in kg.
NEWTON_G = 6.67430e-11  # m^3 kg^-1 s^-2 (CODATA 2018)
#: One day, 86400 s.
DAY = 86400.0  # s
#: The Julian year, 365.25 days = 31 557 600 s (IAU).
YEAR = 365.25 * DAY  # s, Julian year (exact: 31 557 600 s)

with mpmath.workdps(_DPS):
    #: The parsec in metres, (648000 / pi) au (IAU 2015 Resolution B2), rounded once to a double.
    PARSEC = float(mpmath.mpf(648000) / mpmath.pi * mpmath.mpf(AU))
    #: Nominal solar mass in kg, GM_SUN / NEWTON_G (relative uncertainty about 2e-5, from G).
    SOLAR_MASS = float(mpmath.mpf(GM_SUN) / mpmath.mpf(NEWTON_G))


def _is_quantity(value: Any) -> bool:
    """True for an astropy Quantity, detected without importing astropy."""
    cls = type(value)
    return hasattr(value, "unit") and hasattr(value, "to_value") and "astropy" in cls.__module__


def _astropy_units():
    import astropy.units as u  # lazy: only reached when a Quantity was passed

    return u


def _positive_scalar(value: Any, name: str, unit: str | None = None) -> float:
    """A positive finite float from a number (or an astropy Quantity convertible to ``unit``)."""
    if _is_quantity(value):
        if unit is None:
            raise TypeError(f"{name} must be a plain number, not an astropy Quantity")
        u = _astropy_units()
        try:
            value = value.to_value(u.Unit(unit))
        except u.UnitConversionError as exc:
            raise ValueError(f"{name} must be convertible to {unit}: {exc}") from None
        if np.ndim(value) != 0:
            raise ValueError(f"{name} must be a scalar, got shape {np.shape(value)}")
        value = float(value)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (numbers.Real, np.floating, np.integer)):
        raise TypeError(f"{name} must be a real number, got {type(value).__name__}")
    from .precision import _real

    x = _real(value)
    if not math.isfinite(x) or x <= 0.0:
        raise ValueError(f"{name} must be positive and finite, got {value!r}")
    return x


def _values(value: Any, name: str, unit: str | None = None) -> Any:
    """A float or float64 array from a number, an array-like or an astropy Quantity (in ``unit``)."""
    if _is_quantity(value):
        if unit is None:
            raise TypeError(f"{name} is in N-body units and must be a plain number, not an astropy Quantity")
        u = _astropy_units()
        try:
            value = value.to_value(u.Unit(unit))
        except u.UnitConversionError as exc:
            raise ValueError(f"{name} must be convertible to {unit}: {exc}") from None
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be a real number, got bool")
    if isinstance(value, (numbers.Real, np.floating, np.integer)):
        from .precision import _real

        arr = _real(value)
    else:
        try:
            raw = np.asarray(value)
            if raw.dtype.kind in "bcmMSUV":  # booleans, complex numbers (their imaginary part), dates, text
                raise TypeError
            arr = np.asarray(raw, dtype=np.float64)
        except (TypeError, ValueError, OverflowError):
            raise TypeError(f"{name} must be a real number or an array of them, got {type(value).__name__}") from None
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite")
    return arr


def _apply(value: Any, op: str, factor: float) -> Any:
    """``value * factor`` or ``value / factor``; a result beyond double range is +-inf, without a warning
    (as for Python floats)."""
    with np.errstate(over="ignore", under="ignore"):
        return value * factor if op == "*" else value / factor


class Scale:
    """N-body units (G = 1) anchored to a physical mass and length.

    ``Scale(mass=1.0, length=PARSEC)``: ``mass`` in solar masses, ``length`` in metres (or astropy
    Quantities of mass and length). Attributes, all plain floats:

    - ``mass`` (solar masses), ``length`` (m), ``mass_kg`` (kg, through the nominal solar mass),
    - ``gm`` (m^3 s^-2): G times the mass unit, ``mass * GM_SUN``,
    - ``time`` (s): sqrt(length^3 / gm),
    - ``velocity`` (m/s): sqrt(gm / length),
    - ``c``: the speed of light in N-body velocity units,
    - ``planck_length``: the Planck length in N-body length units.

    Conversions take a float or an array (N-body units in, SI out, and the reverse) and return the
    same kind: ``to_seconds``, ``from_seconds``, ``to_years``, ``from_years``, ``to_metres``,
    ``from_metres``, ``to_metres_per_second``, ``from_metres_per_second``.

    Parameters
    ----------
    mass : float or astropy Quantity, optional
        The mass unit in solar masses (default 1).
    length : float or astropy Quantity, optional
        The length unit in metres (default one parsec, ``PARSEC``).

    Examples
    --------
    >>> from loschmidt import units
    >>> s = units.Scale(mass=1e6, length=units.PARSEC)   # a million suns, one parsec
    >>> print(f"{s.to_years(1):.1f} yr, {s.velocity / 1e3:.2f} km/s, c = {s.c:.2f}")
    14909.6 yr, 65.58 km/s, c = 4571.30
    >>> s.decimal("c", 30)             # for an extended-precision run
    '4.57130457797273665850218368779e+3'
    >>> print(f"{s.planck_length:.4e}")
    5.2379e-52
    >>> earth = units.Scale(mass=1, length=units.AU)
    >>> round(earth.to_years(2 * 3.141592653589793), 4)   # one orbit at 1 au: a year
    1.0
    """

    __slots__ = ("_mass", "_length", "_derived")

    _QUANTITIES = ("gm", "mass_kg", "time", "velocity", "c", "planck_length")

    def __init__(self, mass: Any = 1.0, length: Any = PARSEC) -> None:
        self._mass = _positive_scalar(mass, "mass", "M_sun")
        self._length = _positive_scalar(length, "length", "m")
        self._derived = {name: float(self._exact(name, _DPS)) for name in self._QUANTITIES}
        for name, value in self._derived.items():
            if not (math.isfinite(value) and value >= np.finfo(np.float64).tiny):  # beyond the normal doubles
                raise ValueError(
                    f"mass, length: with mass={self._mass!r} and length={self._length!r} the unit of {name} "
                    f"({mpmath.nstr(self._exact(name, 10), 5)}) lies outside the range of a double"
                )

    # exact derivation ----------------------------------------------------------------------------
    def _exact(self, name: str, dps: int) -> mpmath.mpf:
        with mpmath.workdps(dps + 10):
            m = mpmath.mpf(self._mass)
            L = mpmath.mpf(self._length)
            gm = m * mpmath.mpf(GM_SUN)
            if name == "gm":
                v = gm
            elif name == "mass_kg":
                v = gm / mpmath.mpf(NEWTON_G)
            elif name == "time":
                v = mpmath.sqrt(L**3 / gm)
            elif name == "velocity":
                v = mpmath.sqrt(gm / L)
            elif name == "c":
                v = mpmath.mpf(C) / mpmath.sqrt(gm / L)
            elif name == "planck_length":
                v = mpmath.mpf(PLANCK_LENGTH) / L
            elif name == "mass":
                v = m
            elif name == "length":
                v = L
            else:
                raise ValueError(
                    f"name must be one of {('mass', 'length') + self._QUANTITIES}, got {name!r}"
                )
        return v

    def decimal(self, name: str, digits: int = 40) -> str:
        """A derived quantity as a decimal string, computed from the exact inputs.

        Parameters
        ----------
        name : str
            ``"gm"``, ``"mass_kg"``, ``"time"``, ``"velocity"``, ``"c"``, ``"planck_length"``,
            ``"mass"`` or ``"length"``.
        digits : int, optional
            Significant digits, 1 to 1000 (default 40).

        Returns
        -------
        str
            The value, correctly rounded; feed it to an extended-precision run (``c=`` of
            ``loschmidt.integrate``) without a detour through a double.
        """
        if isinstance(digits, bool) or not isinstance(digits, (int, np.integer)) or not 1 <= digits <= 1000:
            raise ValueError(f"digits must be an integer in [1, 1000], got {digits!r}")
        v = self._exact(name, int(digits) + 10)
        with mpmath.workdps(int(digits) + 10):
            return mpmath.nstr(v, int(digits), strip_zeros=False, min_fixed=1, max_fixed=0)

    # attributes ----------------------------------------------------------------------------------
    @property
    def mass(self) -> float:
        """Mass unit in solar masses."""
        return self._mass

    @property
    def length(self) -> float:
        """Length unit in metres."""
        return self._length

    @property
    def gm(self) -> float:
        """G times the mass unit, m^3 s^-2."""
        return self._derived["gm"]

    @property
    def mass_kg(self) -> float:
        """Mass unit in kg (through CODATA 2018 G; uncertain at about 2e-5)."""
        return self._derived["mass_kg"]

    @property
    def time(self) -> float:
        """Time unit in seconds: sqrt(length^3 / (G mass))."""
        return self._derived["time"]

    @property
    def velocity(self) -> float:
        """Velocity unit in m/s: sqrt(G mass / length)."""
        return self._derived["velocity"]

    @property
    def c(self) -> float:
        """Speed of light in N-body velocity units."""
        return self._derived["c"]

    @property
    def planck_length(self) -> float:
        """Planck length in N-body length units."""
        return self._derived["planck_length"]

    # conversions ---------------------------------------------------------------------------------
    def to_seconds(self, t: Any) -> Any:
        """N-body time to seconds.

        Parameters
        ----------
        t : float or array-like
            Time in N-body units.

        Returns
        -------
        float or numpy.ndarray
            Seconds.
        """
        return _apply(_values(t, "t"), "*", self.time)

    def from_seconds(self, seconds: Any) -> Any:
        """Seconds to N-body time.

        Parameters
        ----------
        seconds : float, array-like or astropy Quantity
            Time in seconds (or any time unit, as a Quantity).

        Returns
        -------
        float or numpy.ndarray
            N-body time.
        """
        return _apply(_values(seconds, "seconds", "s"), "/", self.time)

    def to_years(self, t: Any) -> Any:
        """N-body time to Julian years.

        Parameters
        ----------
        t : float or array-like
            Time in N-body units.

        Returns
        -------
        float or numpy.ndarray
            Julian years.
        """
        return _apply(_values(t, "t"), "*", self.time / YEAR)

    def from_years(self, years: Any) -> Any:
        """Julian years to N-body time.

        Parameters
        ----------
        years : float or array-like
            Time in Julian years.

        Returns
        -------
        float or numpy.ndarray
            N-body time.
        """
        return _apply(_values(years, "years"), "*", YEAR / self.time)

    def to_metres(self, x: Any) -> Any:
        """N-body length to metres.

        Parameters
        ----------
        x : float or array-like
            Length in N-body units.

        Returns
        -------
        float or numpy.ndarray
            Metres.
        """
        return _apply(_values(x, "x"), "*", self.length)

    def from_metres(self, metres: Any) -> Any:
        """Metres to N-body length.

        Parameters
        ----------
        metres : float, array-like or astropy Quantity
            Length in metres (or any length unit, as a Quantity).

        Returns
        -------
        float or numpy.ndarray
            N-body length.
        """
        return _apply(_values(metres, "metres", "m"), "/", self.length)

    def to_metres_per_second(self, v: Any) -> Any:
        """N-body velocity to metres per second.

        Parameters
        ----------
        v : float or array-like
            Velocity in N-body units.

        Returns
        -------
        float or numpy.ndarray
            Metres per second.
        """
        return _apply(_values(v, "v"), "*", self.velocity)

    def from_metres_per_second(self, metres_per_second: Any) -> Any:
        """Metres per second to N-body velocity.

        Parameters
        ----------
        metres_per_second : float, array-like or astropy Quantity
            Velocity in m/s (or any velocity unit, as a Quantity).

        Returns
        -------
        float or numpy.ndarray
            N-body velocity.
        """
        return _apply(_values(metres_per_second, "metres_per_second", "m/s"), "/", self.velocity)

    # -------------------------------------------------------------------------------------------
    def __repr__(self) -> str:
        return f"Scale(mass={self._mass!r}, length={self._length!r})"

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Scale):
            return NotImplemented
        return self._mass == other._mass and self._length == other._length

    def __hash__(self) -> int:
        return hash((self._mass, self._length))
