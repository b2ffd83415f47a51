"""Integrating a System forward or backward in time: ``integrate``, its ``Result``, and distances.

The work happens in the C++ engine with the GIL released; this module validates the arguments,
converts times exactly to the working precision and wraps what comes back. Ctrl-C during a run raises
``KeyboardInterrupt`` promptly (within about 50 ms of engine time).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from . import engine as _engine
from . import options as _o
from . import precision as _p
from .status import SUCCESS_STATUSES, status_message, status_name
from .system import System

__all__ = [
    "METHODS",
    "DEFAULT_TOLERANCE",
    "integrate",
    "Result",
    "Trajectory",
    "phase_distance",
    "phase_distances",
    "merged",
]

#: Names of the integration methods (declared in :mod:`loschmidt.options`).
METHODS = _o.METHODS

#: Regularizations of the chain method's leapfrog substep (declared in :mod:`loschmidt.options`).
REGULARIZATIONS = _o.REGULARIZATIONS

#: Post-Newtonian orders and their bits in the engine's mask (declared in :mod:`loschmidt.options`).
PN_ORDERS = _o.PN_ORDERS

#: Default merger distance in summed Schwarzschild radii (declared in :mod:`loschmidt.options`).
DEFAULT_MERGER_FACTOR = _o.DEFAULT_MERGER_FACTOR

#: Default relative tolerance per precision (``loschmidt.precision.default_tolerance``, from the
#: engine's scalar traits).
DEFAULT_TOLERANCE = {p: _p.default_tolerance(p) for p in _p.PRECISIONS}


@dataclass(frozen=True)
class Trajectory:
    """States at the requested output times, in full precision (``Result.trajectory``).

    ``len(trajectory)`` is the number M of outputs reached; ``trajectory[i]`` is the state at output
    ``i`` as a System.

    Attributes
    ----------
    precision : str
        The working precision.
    t_limbs : numpy.ndarray, shape (M, k)
        Output times (the start's epoch plus the offsets), limbs.
    positions_limbs, velocities_limbs : numpy.ndarray, shape (M, N, 3, k)
        States at the outputs, limbs.
    start : System
        The state integrated from.
    """

    precision: str
    t_limbs: np.ndarray
    positions_limbs: np.ndarray
    velocities_limbs: np.ndarray
    start: System = field(repr=False)

    @property
    def times(self) -> np.ndarray:
        """Output times (float64, absolute: the start system's epoch plus the offset)."""
        return _p.to_float(self.t_limbs)

    @property
    def positions(self) -> np.ndarray:
        """Positions rounded to float64, (M, N, 3)."""
        return _p.to_float(self.positions_limbs)

    @property
    def velocities(self) -> np.ndarray:
        """Velocities rounded to float64, (M, N, 3)."""
        return _p.to_float(self.velocities_limbs)

    def limbs(self, name: str) -> np.ndarray:
        """Full-precision values as limb arrays (copies).

        Parameters
        ----------
        name : {"t", "positions", "velocities"}
            Which values.

        Returns
        -------
        numpy.ndarray
            Shape (M, k) for ``"t"``, (M, N, 3, k) for the others.
        """
        table = {"t": self.t_limbs, "positions": self.positions_limbs, "velocities": self.velocities_limbs}
        if not isinstance(name, str) or name not in table:
            raise ValueError(f"name: expected one of {tuple(table)}, got {name!r}")
        return table[name].copy()

    def __len__(self) -> int:
        return int(self.t_limbs.shape[0])

    def __getitem__(self, i: int) -> System:
        if not -len(self) <= i < len(self):
            raise IndexError(f"trajectory index {i} out of range for {len(self)} outputs")
        s = self.start
        return System.from_limbs(
            s.limbs("masses"), self.positions_limbs[i], self.velocities_limbs[i], self.precision,
            radii=s.radii, time=self.t_limbs[i], check=False,
        )


@dataclass(frozen=True)
class Result:
    """Outcome of ``integrate``.

    Attributes
    ----------
    system : System
        The final state (full precision), its ``time`` the epoch reached.
    t : float
        The time reached (float64; the exact value is ``system.limbs("time")``).
    status : str
        One of the engine's statuses (``loschmidt.STATUSES``); ``success`` tells whether it is one
        that means a finished, trustworthy run.
    message : str
        The status explained.
    steps, rejected, evaluations : int
        Accepted macro steps, rejected steps, force evaluations.
    wall_time : float
        Seconds spent in the engine.
    energy_error : float
        ``|E(t) - E(0)| / |E(0)|`` computed in the working precision (absolute when E(0) = 0). With
        ``pn``: the error of the energy bookkeeping, ``|E(t) - E(0) - W| / |E(0)|``, E the Newtonian
        energy relative to the centre of mass and W the work done by the post-Newtonian forces.
    method, precision : str
        The method and working precision used.
    tol : float
        The relative tolerance used.
    trajectory : Trajectory or None
        States at the requested ``times``.
    collision : (i, j) or None
        The pair in contact when ``status == "collision"`` (chain method with radii), or the
        merging pair when ``status == "merger"`` (post-Newtonian runs).
    rechains : int
        Times the chain was rebuilt (chain method).
    lifetime : float or None
        With ``stop="escape"``: the time from the start at which the run stopped because a body
        escaped (status ``stop_condition``); None otherwise.
    mergers : tuple of (float, int, int)
        With ``merge=True``: the mergers, as (time, i, j) with the body indices at that moment.
    events : loschmidt.events.EventLog or None
        With ``events=True`` (or the pair-distance stop): pericentre passages and closest
        approaches of every pair.
    stop_pair : (int, int) or None
        The pair that met the pair-distance stop (status ``stop_condition``).

    Examples
    --------
    >>> import loschmidt
    >>> r = loschmidt.integrate(loschmidt.ics.pythagorean("dd"), 10, times=[2.5, 5, 7.5, 10])
    >>> r.status, r.success, r.t
    ('success', True, 10.0)
    >>> len(r.trajectory), r.trajectory.times
    (4, array([ 2.5,  5. ,  7.5, 10. ]))
    >>> r.trajectory[-1] == r.system
    True
    """

    system: System
    t: float
    status: str
    message: str
    steps: int
    rejected: int
    evaluations: int
    wall_time: float
    energy_error: float
    method: str
    precision: str
    tol: float
    trajectory: Trajectory | None = None
    collision: tuple[int, int] | None = None
    rechains: int = 0
    lifetime: float | None = None
    mergers: tuple = ()
    events: Any = field(default=None, compare=False, repr=False)
    stop_pair: tuple[int, int] | None = None

    @property
    def success(self) -> bool:
        """True when the run ended as asked (or at a physical event it was asked to detect)."""
        return self.status in SUCCESS_STATUSES

    # -- exact save and load -------------------------------------------------------------------------
    _FIELDS = ("t", "status", "message", "steps", "rejected", "evaluations", "wall_time", "energy_error",
               "method", "precision", "tol", "rechains")

    def to_dict(self) -> dict:
        """A JSON-ready record: the final system (exact limbs), settings, status, counters, trajectory.

        Returns
        -------
        dict
            Format ``"loschmidt.result"``; ``from_dict`` reads it back bit for bit.
        """
        from ._version import __version__
        from .serialize import FORMAT_VERSION, limbs_to_json

        out = {"format": "loschmidt.result", "format_version": FORMAT_VERSION, "loschmidt": __version__}
        for name in self._FIELDS:
            value = getattr(self, name)
            out[name] = value.hex() if isinstance(value, float) else value
        out["collision"] = list(self.collision) if self.collision else None
        out["lifetime"] = None if self.lifetime is None else float(self.lifetime).hex()
        out["mergers"] = [[float(t).hex(), int(i), int(j)] for t, i, j in self.mergers]
        out["system"] = self.system.to_dict()
        if self.trajectory is not None:
            out["trajectory"] = {
                "start": self.trajectory.start.to_dict(),
                "t": limbs_to_json(self.trajectory.t_limbs),
                "positions": limbs_to_json(self.trajectory.positions_limbs),
                "velocities": limbs_to_json(self.trajectory.velocities_limbs),
            }
        return out

    @classmethod
    def from_dict(cls, data: dict) -> "Result":
        """Rebuild a Result from ``to_dict`` output (floats and limbs bit for bit).

        Parameters
        ----------
        data : dict
            A ``"loschmidt.result"`` record.

        Returns
        -------
        Result
        """
        from .serialize import limbs_from_json

        if not isinstance(data, dict) or data.get("format") != "loschmidt.result":
            raise ValueError("data: not a 'loschmidt.result' record")
        try:
            kw = {}
            for name in cls._FIELDS:
                value = data.get(name)
                kw[name] = float.fromhex(value) if name in ("t", "wall_time", "energy_error", "tol") else value
            traj = None
            if data.get("trajectory"):
                tr = data["trajectory"]
                traj = Trajectory(
                    kw["precision"], limbs_from_json(tr["t"], "trajectory.t"),
                    limbs_from_json(tr["positions"], "trajectory.positions"),
                    limbs_from_json(tr["velocities"], "trajectory.velocities"), System.from_dict(tr["start"]),
                )
            col = data.get("collision")
            kw["lifetime"] = None if data.get("lifetime") is None else float.fromhex(data["lifetime"])
            kw["mergers"] = tuple((float.fromhex(t), int(i), int(j)) for t, i, j in data.get("mergers") or ())
            return cls(system=_final_state(data), trajectory=traj, collision=tuple(col) if col else None, **kw)
        except (KeyError, TypeError, ValueError, AttributeError, IndexError, OverflowError) as exc:
            raise ValueError(f"data: a malformed 'loschmidt.result' record ({type(exc).__name__}: {exc})") from None

    def save(self, path: Any) -> None:
        """Write this result to a JSON file, exactly (atomically).

        Parameters
        ----------
        path : str or os.PathLike
            The file.

        Examples
        --------
        >>> import os, tempfile
        >>> import loschmidt
        >>> r = loschmidt.integrate(loschmidt.ics.pythagorean("dd"), 5, method="chain")
        >>> with tempfile.TemporaryDirectory() as d:
        ...     r.save(os.path.join(d, "run.json"))
        ...     back = loschmidt.Result.load(os.path.join(d, "run.json"))
        >>> back.system == r.system, back.energy_error == r.energy_error
        (True, True)
        >>> more = loschmidt.integrate(back.system, 5, method="chain")   # continues bit for bit
        >>> more.system == loschmidt.integrate(r.system, 5, method="chain").system
        True
        """
        from .serialize import write_json

        write_json(path, self.to_dict())

    @classmethod
    def load(cls, path: Any) -> "Result":
        """Read a result written by ``save``.

        Parameters
        ----------
        path : str or os.PathLike
            The file.

        Returns
        -------
        Result
        """
        from .serialize import read_json

        return cls.from_dict(read_json(path, "loschmidt.result"))


def _final_state(data: dict) -> System:
    """The final System of a result record; that of a failed run may hold non-finite values."""
    from .serialize import limbs_from_json

    rec = data.get("system")
    try:
        return System.from_dict(rec)
    except ValueError:
        if data.get("status") in SUCCESS_STATUSES or not isinstance(rec, dict):
            raise
    prec = _p.check_precision(rec.get("precision"), "precision")
    m = limbs_from_json(rec.get("masses"), "masses")
    x = limbs_from_json(rec.get("positions"), "positions", finite=False)
    v = limbs_from_json(rec.get("velocities"), "velocities", finite=False)
    t = limbs_from_json(rec.get("time"), "time", finite=False)
    k = _p.limb_count(prec)
    n = m.shape[0] if m.ndim == 2 else -1
    if m.shape != (n, k) or x.shape != (n, 3, k) or v.shape != (n, 3, k) or t.shape != (k,):
        raise ValueError("system: limb arrays of inconsistent shapes")
    radii = rec.get("radii")
    return System._unchecked(m, x, v, prec, None if radii is None else limbs_from_json(radii, "radii"), t)


def _check_number(value: Any, name: str) -> None:
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name}: expected a number, got bool")


def _time_limbs(t: Any, prec: str, name: str) -> np.ndarray:
    _check_number(t, name)
    limbs = _p.to_limbs(t, prec, name=name)
    if limbs.ndim != 1:
        raise ValueError(f"{name}: expected a single number")
    return limbs


# The checks of the options live in loschmidt.options; these names stay for the modules that used them.
check_tolerance = _o.check_tolerance
_check_method = _o.check_method
resolve_method = _o.resolve_method
CHAIN_MAX_BODIES = _o.CHAIN_MAX_BODIES


def _output_times(times: Any, t: np.ndarray, prec: str) -> np.ndarray:
    k = _p.limb_count(prec)
    if times is None:
        return np.zeros((0, k))
    from .system import _object_ndim

    if isinstance(times, (str, bytes)) or _object_ndim(times) != 1:
        raise ValueError("times: expected a one-dimensional sequence of output times")
    limbs = _p.to_limbs(times, prec, name="times")
    if limbs.shape[0] == 0:
        return np.zeros((0, k))
    frac_t = _p.to_fraction(t)
    fr = list(_p.to_fraction(limbs))
    sign = 1 if frac_t >= 0 else -1
    prev = 0
    for i, f in enumerate(fr):
        if sign * f <= sign * prev:
            raise ValueError("times: must be strictly monotonic in the direction of t, after 0")
        if sign * f > sign * frac_t:
            raise ValueError(f"times: time {float(f):g} lies beyond t = {float(frac_t):g}")
        prev = f
    return np.ascontiguousarray(limbs)


def integrate(
    system: System,
    t: Any,
    method: str | None = None,
    *,
    times: Sequence[Any] | None = None,
    merge: bool = False,
    **options: Any,
) -> Result:
    """Integrate ``system`` over a time span ``t`` (negative: backward) in its working precision.

    Parameters
    ----------
    system : System
        The start; its precision is the working precision. Its radii (``System.radii``) need
        method ``"chain"``.
    t : number or decimal string
        Span of the integration, converted exactly to the working precision.
    method : {None, "gbs", "chain"}, optional
        Default None: chosen by ``resolve_method`` (``"chain"`` for at most ``CHAIN_MAX_BODIES``
        bodies, ``"gbs"`` above that; an option or radii only one method takes choose it).
        ``"gbs"``: Gragg-Bulirsch-Stoer extrapolation with order and step control, in the bodies'
        coordinates. ``"chain"``: the same extrapolation over a regularized leapfrog in chain
        coordinates (Mikkola & Aarseth 1993; Mikkola & Tanikawa 1999): close encounters and
        collision orbits cost little, and body radii (``System.radii``) end the run with status
        ``collision`` when two bodies touch.
    times : sequence of numbers, optional
        Offsets from the start, strictly monotonic in the direction of ``t``, within ``(0, t]``:
        the engine lands exactly on each (no interpolation) and ``Result.trajectory`` holds them.
    merge : bool, optional
        With ``pn``: instead of ending the run at a merger, replace the pair by one body
        (``merged``: masses added, momentum and centre of mass conserved) and go on to ``t``, as
        often as mergers happen. ``Result.mergers`` lists them as (time, i, j), indices of the
        bodies at that moment (the merged body takes index ``min(i, j)``), and ``Result.system``
        has fewer bodies; counters add up over the pieces and ``energy_error`` is that of the
        last piece. Not with ``times``.
    **options
        The integration options (:mod:`loschmidt.options`), below.
    <options>

    Returns
    -------
    Result
        The final state, the status (see ``loschmidt.STATUSES``), counters and the energy error.

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.pythagorean("dd")
    >>> r = loschmidt.integrate(s, 10, method="chain")
    >>> r.status, r.energy_error < 1e-24
    ('success', True)
    >>> back = loschmidt.integrate(r.system.reversed(), 10, method="chain").system.reversed()
    >>> loschmidt.phase_distance(back, s) < 1e-20     # a round trip by hand
    True
    >>> loschmidt.integrate(s, "-0.5").t               # backward, an exact decimal span
    -0.5
    """
    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    prec = system.precision
    method = _o.resolve_method(method, system.n, options, carries_radii=system.radii is not None)
    t_limbs = _time_limbs(t, prec, "t")
    settings = _o.resolve(options, method=method, precision=prec, entry="integrate", t_limbs=t_limbs,
                          bodies=system.n)
    radii = _o.system_radii(system.radii, method)
    outs = _output_times(times, t_limbs, prec)
    if not isinstance(merge, (bool, np.bool_)):
        raise TypeError(f"merge: expected True or False, got {type(merge).__name__}")
    if merge and not settings.pn_mask:
        raise ValueError("merge: merging is for post-Newtonian mergers; pass pn and c with it")
    if merge and outs.shape[0]:
        raise ValueError("times: not available with merge=True (the number of bodies changes at a merger)")

    if merge and settings["events"]:
        raise ValueError("events: not available with merge=True (the bodies change at a merger)")
    raw = _engine.integrate(method, system.limbs("masses"), system.limbs("positions"), system.limbs("velocities"),
                            t_limbs, outs, settings, radii)
    result = _wrap(system, raw, method, prec, settings["tol"], bool(outs.shape[0]))
    if not merge or result.status != "merger":
        return result
    return _after_mergers(system, t_limbs, result, dict(options, method=method))


integrate.__doc__ = _o.document(integrate.__doc__, "integrate")


def merged(system: System, i: int, j: int) -> System:
    """``system`` with bodies ``i`` and ``j`` replaced by one body at index ``min(i, j)``.

    The merged body has mass m_i + m_j (no mass is taken off for the energy radiated), the
    position of the pair's centre of mass and its velocity (so momentum and the centre of mass of
    the whole system are conserved), all computed in the working precision; its radius, if the
    system has radii, is the larger of the two.

    Parameters
    ----------
    system : System
        The state at the merger (any precision; the result keeps it).
    i, j : int
        Two different body indices.

    Returns
    -------
    System
        N - 1 bodies, at the same epoch.
    """
    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    for name, value in (("i", i), ("j", j)):
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
            raise TypeError(f"{name}: expected a body index, got {type(value).__name__}")
        if not 0 <= value < system.n:
            raise ValueError(f"{name}: body {value} out of range for {system.n} bodies")
    if i == j:
        raise ValueError("i, j: a body cannot merge with itself")
    if system.n < 2:
        raise ValueError("system: needs two bodies to merge")
    i, j = sorted((int(i), int(j)))
    prec = system.precision
    m, x, v = system.limbs("masses"), system.limbs("positions"), system.limbs("velocities")
    total = _p.add(m[i], m[j], prec)

    def centre(q: np.ndarray) -> np.ndarray:
        weighted = _p.add(_p.mul(m[i], q[i], prec), _p.mul(m[j], q[j], prec), prec)
        return _p.div(weighted, np.broadcast_to(total, weighted.shape), prec)

    keep = [b for b in range(system.n) if b != j]
    m2, x2, v2 = m[keep].copy(), x[keep].copy(), v[keep].copy()
    m2[i], x2[i], v2[i] = total, centre(x), centre(v)
    radii = system.radii
    if radii is not None:
        r = radii[keep].copy()
        r[i] = max(radii[i], radii[j])
        radii = r
    return System.from_limbs(m2, x2, v2, prec, radii=radii, time=system.limbs("time"), check=False)


def _after_mergers(start: System, t_limbs: np.ndarray, result: Result, options: dict) -> Result:
    """Continue a run that stopped at a merger: merge the pair and integrate the rest of ``t``,
    as often as mergers happen; counters add up over the pieces."""
    import dataclasses

    prec = start.precision
    t0 = start.limbs("time")
    events = []
    steps, rejected, evaluations, wall, rechains = (result.steps, result.rejected, result.evaluations,
                                                     result.wall_time, result.rechains)
    current = result
    while current.status == "merger" and current.collision is not None:
        i, j = current.collision
        events.append((current.t, i, j))
        state = merged(current.system, i, j)
        elapsed = _p.sub(state.limbs("time"), t0, prec)
        remaining = _p.sub(t_limbs, elapsed, prec)
        left = _p.to_fraction(remaining)
        span = str(_p.to_string(remaining, exact=True))
        if left == 0 or (left > 0) != (_p.to_fraction(t_limbs) > 0):
            current = dataclasses.replace(current, system=state, status="success", message=status_message("success"),
                                          collision=None)
            break
        if state.n == 1:  # a single body moves freely
            x = _p.add(state.limbs("positions"), _p.mul(state.limbs("velocities"),
                       np.broadcast_to(remaining, state.limbs("velocities").shape), prec), prec)
            end = _p.add(state.limbs("time"), remaining, prec)
            state = System.from_limbs(state.limbs("masses"), x, state.limbs("velocities"), prec, radii=state.radii,
                                      time=end, check=False)
            current = dataclasses.replace(current, system=state, t=float(_p.to_float(end)), status="success",
                                          message=status_message("success"), collision=None)
            break
        current = integrate(state, span, **options)
        steps += current.steps
        rejected += current.rejected
        evaluations += current.evaluations
        wall += current.wall_time
        rechains += current.rechains
    return dataclasses.replace(current, steps=steps, rejected=rejected, evaluations=evaluations, wall_time=wall,
                               rechains=rechains, mergers=tuple(events))


def _wrap(system: System, raw: Any, method: str, prec: str, rtol: float, want_trajectory: bool) -> Result:
    t0 = system.limbs("time")
    t_abs = _p.add(t0, raw.t, prec) if np.any(t0) else raw.t
    # As the engine returned it: a failed run (status nonfinite) may hold infinities or NaN.
    final = System._unchecked(
        system.limbs("masses"), np.ascontiguousarray(raw.positions), np.ascontiguousarray(raw.velocities),
        prec, system.radii, np.ascontiguousarray(t_abs),
    )
    traj = None
    if want_trajectory:
        tt = raw.trajectory_t
        if np.any(t0) and tt.shape[0]:
            tt = _p.add(np.broadcast_to(t0, tt.shape), tt, prec)
        traj = Trajectory(prec, tt, raw.trajectory_positions, raw.trajectory_velocities, system)
    code = int(raw.stats.status)
    return Result(
        system=final,
        t=float(_p.to_float(t_abs)),
        status=status_name(code),
        message=status_message(code),
        steps=int(raw.stats.steps),
        rejected=int(raw.stats.rejected),
        evaluations=int(raw.stats.evaluations),
        wall_time=float(raw.stats.wall_time),
        energy_error=float(raw.energy_error),
        method=method,
        precision=prec,
        tol=rtol,
        trajectory=traj,
        collision=(int(raw.collision_i), int(raw.collision_j)) if raw.collision_i >= 0 else None,
        rechains=int(raw.rechains),
        lifetime=float(_p.to_float(raw.t)) if status_name(code) == "stop_condition" else None,
        events=_events(raw, system.time),
        stop_pair=(int(raw.stats.stop_i), int(raw.stats.stop_j)) if raw.stats.stopped_by == _o.STOP_CODES["pair_distance"]
        else None,
    )


def _events(raw: Any, t0: float) -> Any:
    if raw.events is None:
        return None
    from .events import EventLog

    return EventLog._from_record(raw.events, t0)


def _common(a: System, b: System) -> tuple[System, System, str]:
    if not isinstance(a, System) or not isinstance(b, System):
        raise TypeError("a, b: expected two loschmidt.System objects")
    if a.n != b.n:
        raise ValueError(f"a, b: different numbers of bodies ({a.n} and {b.n})")
    finer = _p.info(b.precision).unit_roundoff < _p.info(a.precision).unit_roundoff
    prec = b.precision if finer else a.precision
    return a.with_precision(prec), b.with_precision(prec), prec


def _sum_of_squares(d: np.ndarray, prec: str) -> np.ndarray:
    k = d.shape[-1]
    sq = _p.mul(d, d, prec).reshape(-1, k)
    acc = sq[0]
    for row in sq[1:]:
        acc = _p.add(acc, row, prec)
    return acc


def phase_distances(a: System, b: System) -> dict:
    """Position, velocity and phase-space distances between two states, in the working precision.

    Parameters
    ----------
    a, b : System
        Two states of the same number of bodies; the higher of their precisions is used.

    Returns
    -------
    dict
        Floats ``{"delta", "delta_position", "delta_velocity"}`` with
        ``delta = sqrt(sum_i |dr_i|^2 + |dv_i|^2)`` (N-body units).
    """
    a, b, prec = _common(a, b)
    dx = _p.sub(a.limbs("positions"), b.limbs("positions"), prec)
    dv = _p.sub(a.limbs("velocities"), b.limbs("velocities"), prec)
    return {
        "delta": _norm([dx, dv], prec),
        "delta_position": _norm([dx], prec),
        "delta_velocity": _norm([dv], prec),
    }


def _norm(parts: list, prec: str) -> float:
    """sqrt of the sum of squares of limb arrays, in the working precision. The values are scaled by a
    power of two first (exact), so squares of 1e200 do not overflow nor those of 1e-200 underflow;
    otherwise the result has the same bits as without the scaling."""
    flat = [np.asarray(d).reshape(-1, d.shape[-1]) for d in parts]
    lead = np.concatenate([f[:, 0] for f in flat])
    big = float(np.max(np.abs(lead))) if lead.size else 0.0
    if big == 0.0 or not all(np.all(np.isfinite(f)) for f in flat):
        e = 0  # zero, or the non-finite values of a failed run: nothing to scale
    else:
        e = math.frexp(big)[1]
    acc = None
    for f in flat:
        sq = _sum_of_squares(np.ldexp(f, -e), prec)
        acc = sq if acc is None else _p.add(acc, sq, prec)
    root = float(_p.to_float(_p.sqrt(acc, prec)))
    try:
        return math.ldexp(root, e)
    except OverflowError:  # the distance itself exceeds the double range
        return math.inf


def phase_distance(a: System, b: System) -> float:
    """Phase-space distance ``sqrt(sum_i |dr_i|^2 + |dv_i|^2)`` between two states.

    Parameters
    ----------
    a, b : System
        Two states of the same number of bodies; computed in the higher of their precisions.

    Returns
    -------
    float

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.pythagorean("qd")
    >>> loschmidt.phase_distance(s, loschmidt.chaos.displaced(s, "1e-40"))
    1e-40
    """
    return phase_distances(a, b)["delta"]
