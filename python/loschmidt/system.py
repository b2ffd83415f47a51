"""The state of a few-body system: masses, positions and velocities in a chosen working precision.

A ``System`` keeps every value as float64 limbs (see ``loschmidt.precision``), converted from the
user's numbers as exactly as the precision allows. Units are N-body units (G = 1); see
``loschmidt.units`` for physical scales. Coordinates stay in the frame the user gave (they are not
shifted to the centre of mass), so a round trip is compared with exactly the numbers put in.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from . import precision as _p

__all__ = ["System"]


def _limbs_of(values: Any, prec: str, name: str) -> np.ndarray:
    return _p.to_limbs(values, prec, name=name)


def _object_ndim(values: Any) -> int:
    """Dimensions of a (nested) sequence taken as an object array; -1 when numpy cannot lay it out."""
    try:
        return np.ndim(np.array(values, dtype=object))
    except ValueError:
        return -1


def _radii_array(radii: Any, n: int) -> np.ndarray:
    """N finite, non-negative radii as a new float64 array; errors name ``radii``."""
    if isinstance(radii, (str, bytes)):
        raise TypeError(f"radii: expected a sequence of {n} numbers, got {type(radii).__name__}")
    try:
        raw = np.asarray(radii)
    except ValueError:
        raise ValueError(f"radii: expected {n} numbers, not a ragged sequence") from None
    if raw.dtype.kind in "bcmMV":
        raise TypeError(f"radii: expected real numbers, got an array of {raw.dtype}")
    try:
        r = raw.astype(np.float64)
    except (TypeError, ValueError, OverflowError):
        raise TypeError(f"radii: expected a sequence of {n} real numbers") from None
    if r.shape != (n,):
        raise ValueError(f"radii: expected {n} values, got shape {r.shape}")
    if not np.all(np.isfinite(r)) or np.any(r < 0):
        raise ValueError("radii: must be finite and non-negative")
    return r


def _limb_array(values: Any, name: str) -> np.ndarray:
    """A float64 limb array from ``values``; errors name ``name``."""
    try:
        raw = np.asarray(values)
    except ValueError:
        raise ValueError(f"{name}: not a rectangular limb array") from None
    if raw.dtype.kind not in "fiuO":
        raise TypeError(f"{name}: expected a float64 limb array, got an array of {raw.dtype}")
    try:
        return np.ascontiguousarray(raw, dtype=np.float64)
    except (TypeError, ValueError, OverflowError):
        raise TypeError(f"{name}: expected a float64 limb array of real numbers") from None


def _vectors(values: Any, n: int | None, prec: str, name: str) -> np.ndarray:
    """(N,3) or (N,2) numbers -> (N,3,k) limbs, z = 0 for planar input."""
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiu":
        shape = values.shape
    else:
        try:
            shape = np.shape(np.array(values, dtype=object))
        except ValueError:
            raise ValueError(f"{name}: not a rectangular (N, 3) or (N, 2) array") from None
    if len(shape) != 2 or shape[1] not in (2, 3):
        raise ValueError(f"{name}: expected shape (N, 3) or (N, 2), got {tuple(shape)}")
    if n is not None and shape[0] != n:
        raise ValueError(f"{name}: has {shape[0]} rows but masses has {n}")
    limbs = _limbs_of(values, prec, name)
    if shape[1] == 2:
        k = limbs.shape[-1]
        limbs = np.concatenate([limbs, np.zeros((shape[0], 1, k))], axis=1)
    return np.ascontiguousarray(limbs)


class System:
    """Masses, positions and velocities of N point masses in one working precision.

    Parameters
    ----------
    masses : sequence of N numbers
        Positive masses (G = 1).
    positions, velocities : (N, 3) or (N, 2) array-like
        Planar input means z = 0. Every element may be int, float, str (decimal), ``Decimal``,
        ``Fraction`` or ``mpmath.mpf`` and is converted exactly as far as the precision allows.
    precision : {"f64", "f64c", "dd", "qd"}
        Working precision of every later computation on this system.
    radii : sequence of N non-negative numbers, optional
        Physical radii; integrators that honour them stop with status ``collision`` when two bodies
        touch.
    time : number, optional
        The epoch of this state (default 0); integration reports times from it.

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.System([3, 4, 5], [[1, 3], [-2, -1], [1, -1]], [[0, 0]] * 3, precision="dd")
    >>> s.n, s.precision
    (3, 'dd')
    >>> round(s.energy(), 12)  # Burrau's problem: E = -769/60
    -12.816666666667

    Decimal strings and fractions are converted exactly, so nothing is rounded to double first:

    >>> from fractions import Fraction
    >>> t = loschmidt.System([1, 1], [["0.1", 0], [Fraction(-1, 10), 0]], [[0, "0.5"], [0, "-0.5"]],
    ...                      precision="qd")
    >>> loschmidt.precision.to_string(t.limbs("positions")[0, 0], 40)
    '1.000000000000000000000000000000000000000e-1'
    >>> t.reversed().velocities[:, 1]
    array([-0.5,  0.5])
    """

    __slots__ = ("_m", "_x", "_v", "_precision", "_radii", "_time")

    def __init__(
        self,
        masses: Any,
        positions: Any,
        velocities: Any,
        precision: str = "dd",
        radii: Any = None,
        time: Any = 0,
    ) -> None:
        prec = _p.check_precision(precision)
        if isinstance(masses, (str, bytes)) or _object_ndim(masses) != 1:
            raise ValueError("masses: expected a one-dimensional sequence of N numbers")
        m = _limbs_of(masses, prec, "masses")
        n = m.shape[0]
        if n < 2:
            raise ValueError(f"masses: need at least 2 bodies, got {n}")
        if np.any(m[:, 0] <= 0):
            raise ValueError("masses: every mass must be positive")
        x = _vectors(positions, n, prec, "positions")
        v = _vectors(velocities, n, prec, "velocities")
        self._m = m
        self._x = x
        self._v = v
        self._precision = prec
        self._radii = None if radii is None else _radii_array(radii, n)
        t = _limbs_of(time, prec, "time")
        if t.ndim != 1:
            raise ValueError("time: expected one number")
        self._time = t
        self._check_distinct()

    # -- construction helpers -------------------------------------------------------------------------
    @classmethod
    def from_limbs(
        cls,
        masses: np.ndarray,
        positions: np.ndarray,
        velocities: np.ndarray,
        precision: str,
        radii: Any = None,
        time: Any = None,
        check: bool = True,
    ) -> "System":
        """Build a System directly from limb arrays, without rounding.

        Parameters
        ----------
        masses : numpy.ndarray, shape (N, k)
            Limbs of the masses (k of ``precision``).
        positions, velocities : numpy.ndarray, shape (N, 3, k)
            Limbs of the positions and velocities.
        precision : {"f64", "f64c", "dd", "qd"}
            Working precision.
        radii : sequence of N numbers, optional
            Body radii.
        time : numpy.ndarray, shape (k,), optional
            Limbs of the epoch (default 0).
        check : bool, optional
            Refuse coincident bodies (default True).

        Returns
        -------
        System
        """
        prec = _p.check_precision(precision)
        k = _p.limb_count(prec)
        m = _limb_array(masses, "masses")
        x = _limb_array(positions, "positions")
        v = _limb_array(velocities, "velocities")
        n = m.shape[0] if m.ndim == 2 else -1
        for name, a, shape in (("masses", m, (n, k)), ("positions", x, (n, 3, k)), ("velocities", v, (n, 3, k))):
            if a.shape != shape:
                raise ValueError(f"{name}: expected limb shape {shape}, got {a.shape}")
            if not np.all(np.isfinite(a)):
                raise ValueError(f"{name}: must be finite")
        if n < 2:
            raise ValueError(f"masses: need at least 2 bodies, got {n}")
        if np.any(m[:, 0] <= 0):
            raise ValueError("masses: every mass must be positive")
        r = None if radii is None else _radii_array(radii, n)
        if time is None:
            t = np.zeros(k)
        else:
            t = _limb_array(time, "time")
            if t.size != k:
                raise ValueError(f"time: expected {k} limbs, got shape {t.shape}")
            t = t.reshape(k)
            if not np.all(np.isfinite(t)):
                raise ValueError("time: must be finite")
        self = cls._unchecked(m, x, v, prec, r, t)
        if check:
            self._check_distinct()
        return self

    @classmethod
    def _unchecked(cls, m: np.ndarray, x: np.ndarray, v: np.ndarray, prec: str, radii: Any,
                   time: np.ndarray) -> "System":
        """Wrap limb arrays as they are (the engine's output, which may hold the non-finite values of
        a failed run): no validation, no copies."""
        self = object.__new__(cls)
        self._m, self._x, self._v, self._precision = m, x, v, prec
        self._radii = radii
        self._time = time
        return self

    def _check_distinct(self) -> None:
        x = self._x.reshape(self.n, -1)
        for i in range(self.n):
            same = np.all(x[i + 1 :] == x[i], axis=1)
            if np.any(same):
                j = i + 1 + int(np.argmax(same))
                raise ValueError(f"positions: bodies {i} and {j} are at the same position")

    def _replace(self, x: np.ndarray | None = None, v: np.ndarray | None = None, time: np.ndarray | None = None) -> "System":
        new = object.__new__(System)
        new._m = self._m
        new._x = self._x if x is None else x
        new._v = self._v if v is None else v
        new._precision = self._precision
        new._radii = self._radii
        new._time = self._time if time is None else time
        return new

    # -- views ----------------------------------------------------------------------------------------
    @property
    def n(self) -> int:
        """Number of bodies."""
        return int(self._m.shape[0])

    @property
    def precision(self) -> str:
        """Working precision name."""
        return self._precision

    @property
    def masses(self) -> np.ndarray:
        """Masses rounded to float64, shape (N,)."""
        return _p.to_float(self._m)

    @property
    def positions(self) -> np.ndarray:
        """Positions rounded to float64, shape (N, 3)."""
        return _p.to_float(self._x)

    @property
    def velocities(self) -> np.ndarray:
        """Velocities rounded to float64, shape (N, 3)."""
        return _p.to_float(self._v)

    @property
    def radii(self) -> np.ndarray | None:
        """Body radii (float64, shape (N,)) or None."""
        return None if self._radii is None else self._radii.copy()

    @property
    def time(self) -> float:
        """Epoch of this state, rounded to float64."""
        return float(_p.to_float(self._time))

    def limbs(self, name: str) -> np.ndarray:
        """Full-precision values as limb arrays (copies).

        Parameters
        ----------
        name : {"masses", "positions", "velocities", "time"}
            Which values.

        Returns
        -------
        numpy.ndarray
            Shape (N, k) for masses, (N, 3, k) for positions and velocities, (k,) for the time.
        """
        table = {"masses": self._m, "positions": self._x, "velocities": self._v, "time": self._time}
        if not isinstance(name, str) or name not in table:
            raise ValueError(f"name: expected one of {tuple(table)}, got {name!r}")
        return table[name].copy()

    def to_mpmath(self) -> dict:
        """The exact values as mpmath numbers.

        Returns
        -------
        dict
            ``{"masses": [...], "positions": [[...]], "velocities": [[...]]}`` of ``mpmath.mpf``.
        """
        return {
            "masses": list(_p.to_mpmath(self._m)),
            "positions": [list(row) for row in _p.to_mpmath(self._x)],
            "velocities": [list(row) for row in _p.to_mpmath(self._v)],
        }

    # -- derived systems ------------------------------------------------------------------------------
    def copy(self) -> "System":
        """An independent copy.

        Returns
        -------
        System
        """
        new = self._replace(self._x.copy(), self._v.copy(), self._time.copy())
        new._m = self._m.copy()
        return new

    def reversed(self) -> "System":
        """The same state with every velocity negated (exact).

        Returns
        -------
        System
            Integrating it forward retraces the past.
        """
        return self._replace(v=-self._v)

    def with_precision(self, precision: str) -> "System":
        """The same state in another precision.

        Parameters
        ----------
        precision : {"f64", "f64c", "dd", "qd"}
            The new working precision.

        Returns
        -------
        System
            Widening is exact; narrowing rounds each value once.

        Examples
        --------
        >>> import loschmidt
        >>> s = loschmidt.ics.figure_eight("qd")
        >>> s.with_precision("f64").with_precision("qd") == s    # the decimal digits do not fit a double
        False
        >>> s.with_precision("dd").precision
        'dd'
        """
        prec = _p.check_precision(precision)
        new = object.__new__(System)
        new._m = _p.convert(self._m, prec)
        new._x = _p.convert(self._x, prec)
        new._v = _p.convert(self._v, prec)
        new._time = _p.convert(self._time, prec)
        new._precision = prec
        new._radii = self._radii
        return new

    def with_radii(self, radii: Any) -> "System":
        """The same state with body radii set (or removed).

        Parameters
        ----------
        radii : sequence of N non-negative numbers, or None
            Body radii (``method="chain"`` stops with status ``collision`` when two bodies touch);
            None removes them.

        Returns
        -------
        System
        """
        new = self._replace()
        if radii is None:
            new._radii = None
            return new
        new._radii = _radii_array(radii, self.n)
        return new

    def centered(self) -> "System":
        """The state moved to the centre-of-mass frame (computed in the working precision).

        Returns
        -------
        System
        """
        k = _p.limb_count(self._precision)
        mtot = self._m[0]
        for i in range(1, self.n):
            mtot = _p.add(mtot, self._m[i], self._precision)
        out = []
        for arr in (self._x, self._v):
            acc = np.zeros((3, k))
            for i in range(self.n):
                acc = _p.add(acc, _p.mul(arr[i], np.broadcast_to(self._m[i], (3, k)), self._precision), self._precision)
            com = _p.div(acc, np.broadcast_to(mtot, (3, k)), self._precision)
            out.append(_p.sub(arr, np.broadcast_to(com, arr.shape), self._precision))
        return self._replace(np.ascontiguousarray(out[0]), np.ascontiguousarray(out[1]))

    # -- diagnostics ----------------------------------------------------------------------------------
    def _diagnostics(self) -> dict:
        from . import engine

        return engine.diagnostics(self._m, self._x, self._v, self._precision)

    def energy(self, limbs: bool = False) -> Any:
        """Total energy T + U (G = 1), computed in the working precision with compensated sums.

        Parameters
        ----------
        limbs : bool, optional
            Return the full-precision limbs instead of a float.

        Returns
        -------
        float or numpy.ndarray
            The energy rounded to a float, or its limbs (k,).
        """
        e = self._diagnostics()["energy"]
        return e.copy() if limbs else float(_p.to_float(e))

    def kinetic_energy(self, limbs: bool = False) -> Any:
        """Kinetic energy, in the working precision.

        Parameters
        ----------
        limbs : bool, optional
            Return the full-precision limbs instead of a float.

        Returns
        -------
        float or numpy.ndarray
            A float, or the limbs (k,).
        """
        e = self._diagnostics()["kinetic"]
        return e.copy() if limbs else float(_p.to_float(e))

    def potential_energy(self, limbs: bool = False) -> Any:
        """Potential energy -sum m_i m_j / r_ij, in the working precision.

        Parameters
        ----------
        limbs : bool, optional
            Return the full-precision limbs instead of a float.

        Returns
        -------
        float or numpy.ndarray
            A float, or the limbs (k,).
        """
        e = self._diagnostics()["potential"]
        return e.copy() if limbs else float(_p.to_float(e))

    def momentum(self, limbs: bool = False) -> np.ndarray:
        """Total linear momentum, in the working precision.

        Parameters
        ----------
        limbs : bool, optional
            Return the full-precision limbs instead of a float.

        Returns
        -------
        numpy.ndarray
            Shape (3,), or its limbs (3, k).
        """
        p = self._diagnostics()["momentum"]
        return p.copy() if limbs else _p.to_float(p)

    def angular_momentum(self, limbs: bool = False) -> np.ndarray:
        """Total angular momentum about the origin, in the working precision.

        Parameters
        ----------
        limbs : bool, optional
            Return the full-precision limbs instead of a float.

        Returns
        -------
        numpy.ndarray
            Shape (3,), or its limbs (3, k).
        """
        ell = self._diagnostics()["angular_momentum"]
        return ell.copy() if limbs else _p.to_float(ell)

    # -- exact save and load -------------------------------------------------------------------------
    def to_dict(self) -> dict:
        """A JSON-ready record with every limb as a hex-float string (see ``loschmidt.serialize``).

        Returns
        -------
        dict
            Format ``"loschmidt.system"``; ``from_dict`` reads it back bit for bit.
        """
        from ._version import __version__
        from .serialize import FORMAT_VERSION, decimal_strings, limbs_to_json

        return {
            "format": "loschmidt.system",
            "format_version": FORMAT_VERSION,
            "loschmidt": __version__,
            "precision": self._precision,
            "n": self.n,
            "masses": limbs_to_json(self._m),
            "positions": limbs_to_json(self._x),
            "velocities": limbs_to_json(self._v),
            "time": limbs_to_json(self._time),
            "radii": None if self._radii is None else [float(r).hex() for r in self._radii],
            "decimal": {
                "masses": decimal_strings(self._m),
                "positions": decimal_strings(self._x),
                "velocities": decimal_strings(self._v),
                "time": decimal_strings(self._time),
            },
        }

    @classmethod
    def from_dict(cls, data: dict) -> "System":
        """Rebuild a System from ``to_dict`` output, bit for bit.

        Parameters
        ----------
        data : dict
            A ``"loschmidt.system"`` record.

        Returns
        -------
        System
        """
        from .serialize import limbs_from_json

        if not isinstance(data, dict) or data.get("format") != "loschmidt.system":
            raise ValueError("data: not a 'loschmidt.system' record")
        prec = _p.check_precision(data.get("precision"), "precision")
        radii = data.get("radii")
        if radii is not None:
            radii = limbs_from_json(radii, "radii")
        return cls.from_limbs(
            limbs_from_json(data.get("masses"), "masses"),
            limbs_from_json(data.get("positions"), "positions"),
            limbs_from_json(data.get("velocities"), "velocities"),
            prec,
            radii=radii,
            time=limbs_from_json(data.get("time"), "time"),
        )

    def save(self, path: Any) -> None:
        """Write this state to a JSON file, exactly (written atomically).

        Parameters
        ----------
        path : str or os.PathLike
            The file.

        Examples
        --------
        >>> import os, tempfile
        >>> import loschmidt
        >>> s = loschmidt.ics.figure_eight("qd")
        >>> with tempfile.TemporaryDirectory() as d:
        ...     s.save(os.path.join(d, "eight.json"))
        ...     back = loschmidt.System.load(os.path.join(d, "eight.json"))
        >>> back == s     # every limb, bit for bit
        True
        """
        from .serialize import write_json

        write_json(path, self.to_dict())

    @classmethod
    def load(cls, path: Any) -> "System":
        """Read a state written by ``save``; the limbs come back bit for bit.

        Parameters
        ----------
        path : str or os.PathLike
            The file.

        Returns
        -------
        System
        """
        from .serialize import read_json

        return cls.from_dict(read_json(path, "loschmidt.system"))

    def __repr__(self) -> str:
        return f"System(n={self.n}, precision={self._precision!r}, time={self.time:g})"

    def __eq__(self, other: object) -> bool:
        """Bitwise equality of every limb (and the same precision)."""
        if not isinstance(other, System):
            return NotImplemented
        return (
            self._precision == other._precision
            and np.array_equal(self._m, other._m)
            and np.array_equal(self._x, other._x)
            and np.array_equal(self._v, other._v)
            and np.array_equal(self._time, other._time)
        )

    __hash__ = None  # type: ignore[assignment]
