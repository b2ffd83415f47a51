"""Ensembles: many initial conditions of one family, held as numpy arrays, cheap at a million members.

An :class:`Ensemble` is M members of N bodies each: ``masses`` (M, N), ``positions`` (M, N, 3) and
``velocities`` (M, N, 3), float64. The double values ARE the initial conditions (not roundings of
something else), so a member is exactly the same problem in every precision: ``ens.system(i, "qd")``
and ``ens.system(i, "f64")`` start from identical numbers.

Arrays are read-only. A quantity shared by all members (the masses of a grid, zero velocities) may be
held as a zero-stride broadcast view, so a grid of 10^6 free-fall triples costs one positions array.
``params`` maps names to (M,) arrays describing each member (grid indices, coordinates, seeds...);
``meta`` is a small dict of scalars describing the whole ensemble (grid size, seed, energy...);
``family`` names the generator.

Indexing: ``ens[i]`` is member i as a System in double-double (``ens.system(i, precision=...)`` for
another precision); ``ens[a:b]``, ``ens[mask]`` and ``ens[index_array]`` are Ensembles (slices are
views). ``ens.chunks(size)`` iterates over consecutive sub-ensembles; ``Ensemble.concat`` joins them.
``kinetic_energy``, ``potential_energy``, ``energy``, ``momentum`` and ``angular_momentum`` are
vectorised float64 diagnostics, good to about 1e-16 relative; exact checks belong to System.
"""

from __future__ import annotations

import numbers
from typing import Any, Iterator, Mapping, Sequence

import numpy as np

__all__ = ["Ensemble"]


def _float_array(value: Any, name: str) -> np.ndarray:
    if isinstance(value, np.ndarray) and value.dtype == np.float64:
        arr = value
    else:
        try:
            raw = np.asarray(value)
            if raw.dtype.kind in "bcmMSUV":  # booleans, complex numbers (their imaginary part), dates, text
                raise TypeError
            arr = np.asarray(raw, dtype=np.float64)
        except (TypeError, ValueError, OverflowError):
            raise TypeError(f"{name} must be an array of real numbers") from None
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite")
    return arr


def _ndim(value: Any) -> int:
    """Dimensions of an array-like; -1 for a ragged sequence."""
    try:
        return np.ndim(value)
    except ValueError:
        return -1


def _readonly(arr: np.ndarray) -> np.ndarray:
    if arr.flags.writeable:
        arr.flags.writeable = False
    return arr


def _owned(arr: np.ndarray, source: Any) -> np.ndarray:
    """A private, read-only version of ``arr``: copied when it may share memory with a writeable
    array of the caller's (``source``), so later writes there cannot change the ensemble."""
    if isinstance(source, np.ndarray) and source.flags.writeable and np.may_share_memory(arr, source):
        arr = arr.copy()
    return _readonly(arr)


def _vectors(value: Any, name: str, m: int | None, n: int | None) -> np.ndarray:
    """(M, N, 3), (M, N, 2) or a shared (N, 3) / (N, 2) -> read-only (M, N, 3)."""
    arr = _float_array(value, name)
    if arr.ndim not in (2, 3) or arr.shape[-1] not in (2, 3):
        raise ValueError(f"{name} must have shape (M, N, 3), (M, N, 2), (N, 3) or (N, 2); got {arr.shape}")
    if arr.shape[-1] == 2:
        arr = np.concatenate([arr, np.zeros(arr.shape[:-1] + (1,))], axis=-1)
    arr = _owned(arr, value)
    if arr.ndim == 2:
        if m is None:
            raise ValueError(f"{name} must have shape (M, N, 3) when M cannot be inferred")
        arr = np.broadcast_to(arr, (m,) + arr.shape)
    if m is not None and arr.shape[0] != m:
        raise ValueError(f"{name} has {arr.shape[0]} members, expected {m}")
    if n is not None and arr.shape[1] != n:
        raise ValueError(f"{name} has {arr.shape[1]} bodies, expected {n}")
    return arr


class Ensemble:
    """M few-body initial conditions of one family (see the module docstring).

    Parameters
    ----------
    masses : array-like, shape (M, N) or (N,)
        Positive masses; one row shared by every member when 1-D.
    positions, velocities : array-like, shape (M, N, 3), (M, N, 2), (N, 3) or (N, 2)
        float64 values (planar input means z = 0); a 2-D array is shared by every member. At least
        one of the two must be 3-D to fix M.
    params : mapping of str to (M,) arrays, optional
        Per-member descriptors (numeric, boolean or string arrays; names are identifiers).
    family : str, optional
        Name of the generator (default ``"custom"``).
    radii : array-like, shape (M, N) or (N,), optional
        Non-negative body radii.
    meta : mapping of str to scalars, optional
        Scalars (or tuples of them) describing the whole ensemble.

    Examples
    --------
    >>> import numpy as np
    >>> from loschmidt.ensemble import Ensemble
    >>> pos = np.zeros((4, 3, 3))
    >>> pos[:, 1, 0] = 1.0
    >>> pos[:, 2, 1] = [1.0, 2.0, 3.0, 4.0]
    >>> ens = Ensemble([1.0, 1.0, 1.0], pos, np.zeros((3, 3)), params={"y": pos[:, 2, 1]})
    >>> len(ens), ens.n, ens.member_params(2)
    (4, 3, {'y': 3.0})
    >>> ens[1:3].params["y"]
    array([2., 3.])
    >>> ens.system(0, "qd").precision
    'qd'
    """

    __slots__ = ("_masses", "_positions", "_velocities", "_radii", "_params", "_family", "_meta")

    def __init__(
        self,
        masses: Any,
        positions: Any,
        velocities: Any,
        params: Mapping[str, Any] | None = None,
        family: str = "custom",
        radii: Any = None,
        meta: Mapping[str, Any] | None = None,
    ) -> None:
        if not isinstance(family, str) or not family:
            raise ValueError(f"family must be a non-empty string, got {family!r}")
        if _ndim(positions) == 3:
            pos = _vectors(positions, "positions", None, None)
            m, n = pos.shape[0], pos.shape[1]
            vel = _vectors(velocities, "velocities", m, n)
        elif _ndim(velocities) == 3:
            vel = _vectors(velocities, "velocities", None, None)
            m, n = vel.shape[0], vel.shape[1]
            pos = _vectors(positions, "positions", m, n)
        else:
            raise ValueError("positions or velocities must have shape (M, N, 3) or (M, N, 2) to fix M")
        if n < 2:
            raise ValueError(f"positions must describe at least two bodies per member, got {n}")
        ms = _float_array(masses, "masses")
        if ms.ndim == 1:
            if ms.shape[0] != n:
                raise ValueError(f"masses has {ms.shape[0]} bodies, expected {n}")
            ms = np.broadcast_to(_owned(ms, masses), (m, n))
        elif ms.ndim == 2:
            if ms.shape != (m, n):
                raise ValueError(f"masses must have shape ({m}, {n}) or ({n},), got {ms.shape}")
            ms = _owned(ms, masses)
        else:
            raise ValueError(f"masses must have shape (M, N) or (N,), got {ms.shape}")
        if ms.size and not np.all(ms > 0):
            raise ValueError("masses must be positive")
        rad = None
        if radii is not None:
            rad = _float_array(radii, "radii")
            if rad.shape == (n,):
                rad = np.broadcast_to(_owned(rad, radii), (m, n))
            elif rad.shape == (m, n):
                rad = _owned(rad, radii)
            else:
                raise ValueError(f"radii must have shape ({m}, {n}) or ({n},), got {rad.shape}")
            if rad.size and not np.all(rad >= 0):
                raise ValueError("radii must be non-negative")
        self._masses = ms
        self._positions = pos
        self._velocities = vel
        self._radii = rad
        self._params = self._check_params(params, m)
        self._family = family
        self._meta = self._check_meta(meta)

    @staticmethod
    def _check_params(params: Mapping[str, Any] | None, m: int) -> dict:
        if params is None:
            return {}
        if not isinstance(params, Mapping):
            raise TypeError("params must be a mapping of names to (M,) arrays")
        out = {}
        for key, value in params.items():
            if not isinstance(key, str) or not key.isidentifier():
                raise ValueError(f"params keys must be identifiers, got {key!r}")
            try:
                arr = np.asarray(value)
            except ValueError:  # ragged
                raise ValueError(f"params[{key!r}] must have shape ({m},), not a ragged sequence") from None
            if arr.dtype == object:
                raise TypeError(f"params[{key!r}] must be a numeric, boolean or string array")
            if arr.shape != (m,):
                raise ValueError(f"params[{key!r}] must have shape ({m},), got {arr.shape}")
            out[key] = _owned(arr, value)
        return out

    @staticmethod
    def _check_meta(meta: Mapping[str, Any] | None) -> dict:
        if meta is None:
            return {}
        if not isinstance(meta, Mapping):
            raise TypeError("meta must be a mapping of names to scalars")
        out = {}
        for key, value in meta.items():
            if not isinstance(key, str):
                raise ValueError(f"meta keys must be strings, got {key!r}")
            if isinstance(value, (list, tuple)):
                value = tuple(value)
            elif not (value is None or isinstance(value, (str, bool, numbers.Number))):
                raise TypeError(f"meta[{key!r}] must be a scalar, string or tuple")
            out[key] = value
        return out

    @classmethod
    def _wrap(cls, masses, positions, velocities, radii, params, family, meta) -> "Ensemble":
        """Build without validation or copies (arrays already checked and read-only)."""
        self = object.__new__(cls)
        self._masses = _readonly(masses)
        self._positions = _readonly(positions)
        self._velocities = _readonly(velocities)
        self._radii = None if radii is None else _readonly(radii)
        self._params = {k: _readonly(v) for k, v in params.items()}
        self._family = family
        self._meta = dict(meta)
        return self

    # attributes ----------------------------------------------------------------------------------
    @property
    def masses(self) -> np.ndarray:
        """(M, N) float64, read-only."""
        return self._masses

    @property
    def positions(self) -> np.ndarray:
        """(M, N, 3) float64, read-only."""
        return self._positions

    @property
    def velocities(self) -> np.ndarray:
        """(M, N, 3) float64, read-only."""
        return self._velocities

    @property
    def radii(self) -> np.ndarray | None:
        """(M, N) float64 or None."""
        return self._radii

    @property
    def params(self) -> dict:
        """Per-member descriptors: name -> (M,) array (a new dict; arrays are read-only)."""
        return dict(self._params)

    @property
    def meta(self) -> dict:
        """Scalars describing the whole ensemble (grid size, seed ...; a new dict)."""
        return dict(self._meta)

    @property
    def family(self) -> str:
        """Name of the generator (``"free_fall_grid"``, ``"custom"`` ...)."""
        return self._family

    @property
    def n(self) -> int:
        """Bodies per member."""
        return self._positions.shape[1]

    def __len__(self) -> int:
        return self._positions.shape[0]

    def __repr__(self) -> str:
        return f"Ensemble(family={self._family!r}, members={len(self)}, bodies={self.n})"

    # members -------------------------------------------------------------------------------------
    def _index(self, i: Any) -> int:
        if isinstance(i, (bool, np.bool_)) or not isinstance(i, (int, np.integer)):
            raise TypeError(f"i must be an integer, got {type(i).__name__}")
        m = len(self)
        i = int(i)
        if not -m <= i < m:
            raise IndexError(f"member {i} out of range for an ensemble of {m}")
        return i % m

    def system(self, i: Any, precision: str = "dd"):
        """One member as a System.

        Parameters
        ----------
        i : int
            Member index (negative counts from the end).
        precision : {"f64", "f64c", "dd", "qd"}, optional
            Working precision of the System (default ``"dd"``); exact in every precision, since the
            member's values are doubles.

        Returns
        -------
        System
        """
        from .precision import limb_count
        from .system import System

        i = self._index(i)
        k = limb_count(precision)

        def limbs(a: np.ndarray) -> np.ndarray:  # a double is exact in every precision: (v, 0, ...)
            out = np.zeros(a.shape + (k,))
            out[..., 0] = a
            return out

        radii = None if self._radii is None else self._radii[i].copy()
        return System.from_limbs(
            limbs(self._masses[i]),
            limbs(self._positions[i]),
            limbs(self._velocities[i]),
            precision,
            radii=radii,
        )

    def systems(self, precision: str = "dd") -> Iterator:
        """Every member as a System (one Python object each: for small ensembles).

        Parameters
        ----------
        precision : {"f64", "f64c", "dd", "qd"}, optional
            Working precision of the Systems (default ``"dd"``).

        Yields
        ------
        System
        """
        for i in range(len(self)):
            yield self.system(i, precision)

    def __iter__(self) -> Iterator:
        return self.systems()

    def member_params(self, i: Any) -> dict:
        """The params of one member.

        Parameters
        ----------
        i : int
            Member index.

        Returns
        -------
        dict
            Name -> Python scalar.
        """
        i = self._index(i)
        return {k: v[i].item() for k, v in self._params.items()}

    def __getitem__(self, key: Any):
        if isinstance(key, (int, np.integer)) and not isinstance(key, (bool, np.bool_)):
            return self.system(key)
        if isinstance(key, slice):
            sel: Any = key
        else:
            sel = np.asarray(key)
            if sel.dtype == bool:
                if sel.shape != (len(self),):
                    raise IndexError(f"a boolean mask must have shape ({len(self)},), got {sel.shape}")
            elif np.issubdtype(sel.dtype, np.integer) and sel.ndim == 1:
                if sel.size and (sel.max() >= len(self) or sel.min() < -len(self)):
                    raise IndexError("member index out of range")
            else:
                raise TypeError("an ensemble is indexed by an int, a slice, a boolean mask or an integer array")
        return self._wrap(
            self._masses[sel],
            self._positions[sel],
            self._velocities[sel],
            None if self._radii is None else self._radii[sel],
            {k: v[sel] for k, v in self._params.items()},
            self._family,
            self._meta,
        )

    def chunks(self, size: Any) -> Iterator["Ensemble"]:
        """Consecutive sub-ensembles (views).

        Parameters
        ----------
        size : int
            Members per chunk (the last may have fewer).

        Yields
        ------
        Ensemble
        """
        if isinstance(size, (bool, np.bool_)) or not isinstance(size, (int, np.integer)) or size < 1:
            raise ValueError(f"size must be a positive integer, got {size!r}")
        size = int(size)
        for start in range(0, len(self), size):
            yield self[start : start + size]

    @classmethod
    def concat(cls, ensembles: Sequence["Ensemble"]) -> "Ensemble":
        """Join ensembles with the same number of bodies and the same params names.

        Parameters
        ----------
        ensembles : sequence of Ensemble
            At least one; all with or all without radii.

        Returns
        -------
        Ensemble
            The members of each in turn. The family is kept when all agree (``"mixed"``
            otherwise); meta entries are kept where all agree.
        """
        items = list(ensembles)
        if not items:
            raise ValueError("ensembles must contain at least one Ensemble")
        for k, e in enumerate(items):
            if not isinstance(e, Ensemble):
                raise TypeError(f"ensembles[{k}] is not an Ensemble")
        n = items[0].n
        keys = set(items[0]._params)
        with_radii = items[0]._radii is not None
        for k, e in enumerate(items[1:], 1):
            if e.n != n:
                raise ValueError(f"ensembles[{k}] has {e.n} bodies, expected {n}")
            if set(e._params) != keys:
                raise ValueError(f"ensembles[{k}] has params {sorted(e._params)}, expected {sorted(keys)}")
            if (e._radii is not None) != with_radii:
                raise ValueError(f"ensembles[{k}] {'lacks' if with_radii else 'has'} radii, unlike ensembles[0]")
        families = {e.family for e in items}
        family = items[0].family if len(families) == 1 else "mixed"
        meta = {
            k: v
            for k, v in items[0]._meta.items()
            if all(k in e._meta and e._meta[k] == v for e in items[1:])
        }
        cat = np.concatenate
        return cls._wrap(
            cat([e._masses for e in items]),
            cat([e._positions for e in items]),
            cat([e._velocities for e in items]),
            cat([e._radii for e in items]) if with_radii else None,
            {k: cat([e._params[k] for e in items]) for k in items[0]._params},
            family,
            meta,
        )

    # float64 diagnostics (G = 1) -----------------------------------------------------------------
    def kinetic_energy(self) -> np.ndarray:
        """Kinetic energy of each member (float64).

        Returns
        -------
        numpy.ndarray, shape (M,)
            Sum of m v^2 / 2.
        """
        v2 = np.einsum("mnk,mnk->mn", self._velocities, self._velocities)
        return 0.5 * np.einsum("mn,mn->m", self._masses, v2)

    def potential_energy(self) -> np.ndarray:
        """Potential energy of each member (float64).

        Returns
        -------
        numpy.ndarray, shape (M,)
            Minus the sum over pairs of m_i m_j / r_ij.
        """
        u = np.zeros(len(self))
        with np.errstate(divide="ignore"):  # coincident bodies give -inf, not a warning
            return self._pair_sum(u)

    def _pair_sum(self, u: np.ndarray) -> np.ndarray:
        for i in range(self.n):
            for j in range(i + 1, self.n):
                d = self._positions[:, j] - self._positions[:, i]
                r = np.sqrt(np.einsum("mk,mk->m", d, d))
                u = u - self._masses[:, i] * self._masses[:, j] / r
        return u

    def energy(self) -> np.ndarray:
        """Total energy of each member (float64).

        Returns
        -------
        numpy.ndarray, shape (M,)
        """
        return self.kinetic_energy() + self.potential_energy()

    def momentum(self) -> np.ndarray:
        """Total linear momentum of each member (float64).

        Returns
        -------
        numpy.ndarray, shape (M, 3)
        """
        return np.einsum("mn,mnk->mk", self._masses, self._velocities)

    def angular_momentum(self) -> np.ndarray:
        """Total angular momentum of each member about the origin (float64).

        Returns
        -------
        numpy.ndarray, shape (M, 3)
        """
        return np.einsum("mn,mnk->mk", self._masses, np.cross(self._positions, self._velocities))
