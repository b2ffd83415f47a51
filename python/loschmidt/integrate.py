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

from . import _core
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
]

METHODS = ("gbs", "chain")

#: Regularizations of the chain method's leapfrog substep.
REGULARIZATIONS = ("logarithmic", "time_transformed")

#: Default relative tolerance per precision: a few hundred units of round-off, so the truncation
#: error of the extrapolation sits just above the precision's floor.
DEFAULT_TOLERANCE = {"f64": 1e-13, "f64c": 1e-14, "dd": 1e-28, "qd": 1e-56}


@dataclass(frozen=True)
class Trajectory:
    """States at the requested output times, in full precision.

    ``times`` are float64 offsets from the start; ``limbs("positions")`` is (M, N, 3, k).
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
        """Full-precision ``"t"`` (M,k), ``"positions"`` or ``"velocities"`` (M,N,3,k)."""
        table = {"t": self.t_limbs, "positions": self.positions_limbs, "velocities": self.velocities_limbs}
        if name not in table:
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
        |E(t) - E(0)| / |E(0)| computed in the working precision (absolute when E(0) = 0).
    trajectory : Trajectory or None
        States at the requested ``times``.
    collision : (i, j) or None
        The pair in contact when ``status == "collision"`` (chain method with radii).
    rechains : int
        Times the chain was rebuilt (chain method).
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

    @property
    def success(self) -> bool:
        """True when the run ended as asked (or at a physical event it was asked to detect)."""
        return self.status in SUCCESS_STATUSES

    # -- exact save and load -------------------------------------------------------------------------
    _FIELDS = ("t", "status", "message", "steps", "rejected", "evaluations", "wall_time", "energy_error",
               "method", "precision", "tol", "rechains")

    def to_dict(self) -> dict:
        """A JSON-ready record: the final system (exact limbs), settings, status, counters, trajectory."""
        from . import __version__
        from .serialize import FORMAT_VERSION, limbs_to_json

        out = {"format": "loschmidt.result", "format_version": FORMAT_VERSION, "loschmidt": __version__}
        for name in self._FIELDS:
            value = getattr(self, name)
            out[name] = value.hex() if isinstance(value, float) else value
        out["collision"] = list(self.collision) if self.collision else None
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
        """Rebuild a Result from ``to_dict`` output (floats and limbs bit for bit)."""
        from .serialize import limbs_from_json

        if not isinstance(data, dict) or data.get("format") != "loschmidt.result":
            raise ValueError("data: not a 'loschmidt.result' record")
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
        return cls(system=System.from_dict(data["system"]), trajectory=traj,
                   collision=tuple(col) if col else None, **kw)

    def save(self, path: Any) -> None:
        """Write this result to ``path`` as JSON, exactly (atomically)."""
        from .serialize import write_json

        write_json(path, self.to_dict())

    @classmethod
    def load(cls, path: Any) -> "Result":
        """Read a result written by ``save``."""
        from .serialize import read_json

        return cls.from_dict(read_json(path, "loschmidt.result"))


def _check_number(value: Any, name: str) -> None:
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name}: expected a number, got bool")


def _time_limbs(t: Any, prec: str, name: str) -> np.ndarray:
    _check_number(t, name)
    limbs = _p.to_limbs(t, prec, name=name)
    if limbs.ndim != 1:
        raise ValueError(f"{name}: expected a single number")
    return limbs


def _positive_or_none(value: Any, name: str, integer: bool = False) -> Any:
    if value is None:
        return None
    _check_number(value, name)
    if integer:
        if not isinstance(value, numbers.Integral):
            raise TypeError(f"{name}: expected an integer, got {type(value).__name__}")
        if value <= 0:
            raise ValueError(f"{name}: must be positive, got {value}")
        return int(value)
    if not isinstance(value, numbers.Real):
        raise TypeError(f"{name}: expected a number, got {type(value).__name__}")
    v = float(value)
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{name}: must be a positive finite number, got {value}")
    return v


def check_tolerance(tol: Any, prec: str, name: str = "tol") -> float:
    """Validate a relative tolerance for ``prec`` (None: the precision's default)."""
    if tol is None:
        return DEFAULT_TOLERANCE[prec]
    _check_number(tol, name)
    if not isinstance(tol, numbers.Real):
        raise TypeError(f"{name}: expected a number, got {type(tol).__name__}")
    v = float(tol)
    if not (0 < v < 1) or not math.isfinite(v):
        raise ValueError(f"{name}: must lie in (0, 1), got {tol}")
    floor = 50 * _p.epsilon(prec)  # below this the error estimate is round-off noise
    if v < floor:
        raise ValueError(
            f"{name}: {v:g} is below what precision {prec!r} can resolve (about {floor:.1e}); "
            "use a higher precision"
        )
    return v


def _check_method(method: Any) -> str:
    if not isinstance(method, str):
        raise TypeError(f"method: expected one of {METHODS}, got {type(method).__name__}")
    if method not in METHODS:
        raise ValueError(f"method: unknown method {method!r}; expected one of {METHODS}")
    return method


def _output_times(times: Any, t: np.ndarray, prec: str) -> np.ndarray:
    k = _p.limb_count(prec)
    if times is None:
        return np.zeros((0, k))
    if isinstance(times, (str, bytes)) or np.ndim(np.array(times, dtype=object)) != 1:
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
    method: str = "gbs",
    tol: float | None = None,
    atol: float | None = None,
    times: Sequence[Any] | None = None,
    max_steps: int | None = None,
    max_wall_time: float | None = None,
    max_order: int | None = None,
    initial_step: float | None = None,
    regularization: str = "logarithmic",
) -> Result:
    """Integrate ``system`` over a time span ``t`` (negative: backward) in its working precision.

    Parameters
    ----------
    system : System
    t : number or decimal string
        Span of the integration, converted exactly to the working precision.
    method : {"gbs", "chain"}
        ``"gbs"``: Gragg-Bulirsch-Stoer extrapolation with order and step control, in the bodies'
        coordinates. ``"chain"``: the same extrapolation over a regularized leapfrog in chain
        coordinates (Mikkola & Aarseth 1993; Mikkola & Tanikawa 1999): close encounters and
        collision orbits cost little, and body radii (``System.radii``) end the run with status
        ``collision`` when two bodies touch.
    tol : float, optional
        Relative tolerance of the local error; default per precision (``DEFAULT_TOLERANCE``).
    atol : float, optional
        Absolute tolerance (defaults to ``tol``).
    times : sequence of numbers, optional
        Offsets from the start, strictly monotonic in the direction of ``t``, within ``(0, t]``:
        the engine lands exactly on each (no interpolation) and ``Result.trajectory`` holds them.
    max_steps : int, optional
        Budget of macro steps (status ``max_steps`` when spent). Default: no limit beyond 10**9.
    max_wall_time : float, optional
        Budget of seconds (status ``max_wall_time``).
    max_order : int, optional
        Highest extrapolation column; default grows with the precision.
    initial_step : float, optional
        First step size; default chosen automatically.
    regularization : {"logarithmic", "time_transformed"}
        Time transformation of the chain method's leapfrog (Mikkola & Tanikawa 1999; Mikkola &
        Aarseth 2002). Ignored by ``gbs``.

    Returns
    -------
    Result
    """
    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    prec = system.precision
    method = _check_method(method)
    t_limbs = _time_limbs(t, prec, "t")
    rtol = check_tolerance(tol, prec, "tol")
    a_tol = rtol if atol is None else _positive_or_none(atol, "atol")
    outs = _output_times(times, t_limbs, prec)
    steps = _positive_or_none(max_steps, "max_steps", integer=True) or 10**9
    wall = _positive_or_none(max_wall_time, "max_wall_time") or math.inf
    order = 0 if max_order is None else _positive_or_none(max_order, "max_order", integer=True)
    if order and order < 3:
        raise ValueError(f"max_order: must be at least 3, got {max_order}")
    h0 = 0.0 if initial_step is None else _positive_or_none(initial_step, "initial_step")
    if regularization not in REGULARIZATIONS:
        raise ValueError(f"regularization: expected one of {REGULARIZATIONS}, got {regularization!r}")
    radii = [] if (system.radii is None or method != "chain") else [float(r) for r in system.radii]

    kernel = getattr(_core, f"integrate_{prec}")
    raw = kernel(
        method, system.limbs("masses"), system.limbs("positions"), system.limbs("velocities"),
        t_limbs, outs, rtol, a_tol, steps, wall, order, h0, radii, REGULARIZATIONS.index(regularization),
    )
    return _wrap(system, raw, method, prec, rtol, bool(outs.shape[0]))


def _wrap(system: System, raw: dict, method: str, prec: str, rtol: float, want_trajectory: bool) -> Result:
    t0 = system.limbs("time")
    t_abs = _p.add(t0, raw["t"], prec) if np.any(t0) else raw["t"]
    final = System.from_limbs(
        system.limbs("masses"), raw["positions"], raw["velocities"], prec,
        radii=system.radii, time=t_abs, check=False,
    )
    traj = None
    if want_trajectory:
        tt = raw["trajectory_t"]
        if np.any(t0) and tt.shape[0]:
            tt = _p.add(np.broadcast_to(t0, tt.shape), tt, prec)
        traj = Trajectory(prec, tt, raw["trajectory_positions"], raw["trajectory_velocities"], system)
    code = int(raw["status"])
    return Result(
        system=final,
        t=float(_p.to_float(t_abs)),
        status=status_name(code),
        message=status_message(code),
        steps=int(raw["steps"]),
        rejected=int(raw["rejected"]),
        evaluations=int(raw["evaluations"]),
        wall_time=float(raw["wall_time"]),
        energy_error=float(raw["energy_error"]),
        method=method,
        precision=prec,
        tol=rtol,
        trajectory=traj,
        collision=tuple(int(i) for i in raw["collision_pair"]) if raw["collision_pair"][0] >= 0 else None,
        rechains=int(raw["rechains"]),
    )


def _common(a: System, b: System) -> tuple[System, System, str]:
    if not isinstance(a, System) or not isinstance(b, System):
        raise TypeError("a, b: expected two loschmidt.System objects")
    if a.n != b.n:
        raise ValueError(f"a, b: different numbers of bodies ({a.n} and {b.n})")
    order = {"f64": 0, "f64c": 0, "dd": 1, "qd": 2}
    prec = a.precision if order[a.precision] >= order[b.precision] else b.precision
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

    Returns floats ``{"delta", "delta_position", "delta_velocity"}`` with
    ``delta = sqrt(sum_i |dr_i|^2 + |dv_i|^2)`` (N-body units).
    """
    a, b, prec = _common(a, b)
    dx = _p.sub(a.limbs("positions"), b.limbs("positions"), prec)
    dv = _p.sub(a.limbs("velocities"), b.limbs("velocities"), prec)
    sx = _sum_of_squares(dx, prec)
    sv = _sum_of_squares(dv, prec)
    total = _p.add(sx, sv, prec)
    return {
        "delta": float(_p.to_float(_p.sqrt(total, prec))),
        "delta_position": float(_p.to_float(_p.sqrt(sx, prec))),
        "delta_velocity": float(_p.to_float(_p.sqrt(sv, prec))),
    }


def phase_distance(a: System, b: System) -> float:
    """``sqrt(sum_i |dr_i|^2 + |dv_i|^2)`` between two states, computed in the working precision."""
    return phase_distances(a, b)["delta"]
