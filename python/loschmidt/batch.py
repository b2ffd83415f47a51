"""Many systems at once: ``integrate_batch``, ``roundtrip_batch`` and their ``BatchResult``.

M systems of N bodies each (arrays shaped (M, N), (M, N, 3) or (M, N, 2), or an ``Ensemble``) are
integrated by the C++ engine on a pool of threads with the GIL released. Each system is integrated
on its own, exactly as ``integrate`` would, so the results are the same bits whatever the thread
count, and ``roundtrip_batch`` gives the bits of ``integrate`` -> ``reversed`` -> ``integrate`` ->
``reversed`` on each member, with ``delta`` equal to ``phase_distance`` to the start.

Ctrl-C raises ``KeyboardInterrupt`` within about 50 ms; ``loschmidt._core.request_stop()`` instead
stops the batch with status ``interrupted`` for the systems not finished.
"""

from __future__ import annotations

import math
import numbers
import os
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from . import engine as _engine
from . import options as _o
from . import precision as _p
from .ensemble import Ensemble
from .integrate import _time_limbs
from .status import STATUSES, SUCCESS_STATUSES
from .system import System

__all__ = ["integrate_batch", "roundtrip_batch", "BatchResult", "batch_options"]

_STATUS_NAMES = np.array([STATUSES[i][0] for i in range(len(STATUSES))], dtype=object)
_SUCCESS = np.array([STATUSES[i][0] in SUCCESS_STATUSES for i in range(len(STATUSES))])


# ---------------------------------------------------------------------------------------------------
# validation


def batch_options(t: Any, *, precision: str = "dd", method: str | None = None, **options: Any) -> dict:
    """Validate the options of a batch (as ``integrate`` does) and return them in a plain form.

    The result holds only JSON-friendly values (``t`` as its exact decimal string in the working
    precision, unset budgets as None) and is what sweeps record in their manifest
    (``loschmidt.options.Settings.manifest``). The chain method's options (``radii``,
    ``regularization``, ``pn``, ``c``, ``merger_factor``) appear only when given, ``pn`` as a sorted
    list of orders and ``c`` as its exact decimal string in the working precision, so definitions
    without them keep their form.

    Parameters
    ----------
    t : number or decimal string
        Time span.
    precision, method : str, optional
        As for ``integrate_batch``.
    **options
        The batch options (:mod:`loschmidt.options`), as for ``integrate_batch``.

    Returns
    -------
    dict
        The options in plain form.

    Examples
    --------
    >>> from loschmidt.batch import batch_options
    >>> o = batch_options("0.1", precision="f64")
    >>> o["t"], o["tol"], o["max_steps"]
    ('1.000000000000000055511151231257827021181583404541015625e-1', 1e-13, None)
    """
    prec = _p.check_precision(precision)
    # None (automatic) stays None until the number of bodies is known (``_run``), unless the options
    # decide; with none that only one method takes, both methods accept the same checks.
    method = _o.resolve_method(method, None, options)
    t_limbs = _time_limbs(t, prec, "t")
    settings = _o.resolve(options, method=method or "chain", precision=prec, entry="batch", t_limbs=t_limbs)
    return {"t": str(_p.to_string(t_limbs, exact=True)), "precision": prec, "method": method,
            **settings.manifest("batch")}


def _settings(opts: dict) -> "_o.Settings":
    """The Settings of ``batch_options`` output (checked again: cheap, and the form is the one
    recorded, so a manifest read back gives the same engine options)."""
    given = {k: v for k, v in opts.items() if k not in ("t", "precision", "method")}
    return _o.resolve(given, method=opts["method"], precision=opts["precision"], entry="batch")


def _threads(threads: Any, count: int) -> int:
    if threads is None:
        try:
            cores = len(os.sched_getaffinity(0))
        except AttributeError:  # pragma: no cover - not Linux
            cores = os.cpu_count() or 1
        return max(1, min(cores, count))
    if isinstance(threads, (bool, np.bool_)) or not isinstance(threads, numbers.Integral):
        raise TypeError(f"threads: expected a positive integer, got {type(threads).__name__}")
    if threads < 1:
        raise ValueError(f"threads: must be at least 1, got {threads}")
    return int(min(threads, max(count, 1)))  # the engine uses at most one thread per system


def _members(masses: Any, positions: Any, velocities: Any, prec: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Limb arrays (M,N,k), (M,N,3,k), (M,N,3,k), validated like System's."""
    k = _p.limb_count(prec)
    if isinstance(masses, Ensemble):
        ens = masses

        def widen(a: np.ndarray) -> np.ndarray:  # the ensemble's doubles are exact in every precision
            out = np.zeros(a.shape + (k,))
            out[..., 0] = a
            return out

        ml, x, v = widen(ens.masses), widen(ens.positions), widen(ens.velocities)
    else:
        ml, x, v = _arrays(masses, positions, velocities, prec)
    n = x.shape[1]
    for i in range(n):
        for j in range(i + 1, n):
            same = np.all(x[:, i] == x[:, j], axis=(1, 2))
            if np.any(same):
                raise ValueError(f"positions: bodies {i} and {j} of system {int(np.argmax(same))} are at the same position")
    return ml, x, v


def _arrays(masses: Any, positions: Any, velocities: Any, prec: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    k = _p.limb_count(prec)
    vecs = []
    for name, value in (("positions", positions), ("velocities", velocities)):
        if value is None:
            raise TypeError(f"{name}: required (or pass an Ensemble as the first argument)")
        if isinstance(value, np.ndarray) and value.dtype.kind in "fiu":
            shape = value.shape
        else:
            try:
                shape = np.shape(np.array(value, dtype=object))
            except ValueError:
                raise ValueError(f"{name}: not a rectangular (M, N, 3) or (M, N, 2) array") from None
        if len(shape) != 3 or shape[2] not in (2, 3):
            raise ValueError(f"{name}: expected shape (M, N, 3) or (M, N, 2), got {tuple(shape)}")
        limbs = _p.to_limbs(value, prec, name=name)
        if shape[2] == 2:
            limbs = np.concatenate([limbs, np.zeros(shape[:2] + (1, k))], axis=2)
        vecs.append(np.ascontiguousarray(limbs))
    x, v = vecs
    if x.shape != v.shape:
        raise ValueError(f"positions, velocities: shapes {x.shape[:2]} and {v.shape[:2]} (M, N) differ")
    m_count, n = x.shape[:2]
    if n < 2:
        raise ValueError(f"positions: need at least 2 bodies per system, got {n}")
    if isinstance(masses, (str, bytes)):
        raise ValueError("masses: expected an (M, N) or (N,) array of numbers")
    ml = _p.to_limbs(masses, prec, name="masses")
    if ml.shape[:-1] == (n,):
        ml = np.broadcast_to(ml, (m_count, n, k))
    elif ml.shape[:-1] != (m_count, n):
        raise ValueError(f"masses: expected shape ({m_count}, {n}) or ({n},), got {ml.shape[:-1]}")
    if np.any(ml[..., 0] <= 0):
        bad = int(np.argmax(np.any(ml[..., 0] <= 0, axis=1)))
        raise ValueError(f"masses: every mass must be positive (system {bad})")
    return np.ascontiguousarray(ml), x, v


def _split_args(masses: Any, positions: Any, velocities: Any, t: Any) -> tuple[Any, Any, Any, Any]:
    """``f(ensemble, t)`` or ``f(masses, positions, velocities, t)``."""
    if isinstance(masses, Ensemble):
        if velocities is not None:
            raise TypeError("with an Ensemble, pass only the time span t after it")
        if positions is not None and t is not None:
            raise TypeError("t given twice")
        return masses, None, None, positions if t is None else t
    return masses, positions, velocities, t


# ---------------------------------------------------------------------------------------------------
# result


#: The full-precision fields of each task.
_LIMB_FIELDS = {
    "integrate": ("t", "positions", "velocities"),
    "roundtrip": ("forward_t", "forward_positions", "forward_velocities", "returned_t", "returned_positions",
                  "returned_velocities"),
}


@dataclass(frozen=True, eq=False)
class BatchResult:
    """Outcome of ``integrate_batch`` or ``roundtrip_batch``: one entry per system, in input order.

    Full-precision fields are float64 limb arrays (last axis k): ``masses`` (M,N,k), ``start_positions``
    and ``start_velocities`` (M,N,3,k); for task ``"integrate"`` ``positions``, ``velocities`` (the final
    state) and ``t`` (M,k, the time reached); for ``"roundtrip"`` ``forward_positions``,
    ``forward_velocities``, ``forward_t`` (the turning point) and ``returned_positions``,
    ``returned_velocities``, ``returned_t`` (after the return leg and the final negation; NaN when the
    forward leg failed).

    Per system: ``status`` (names), ``steps``, ``rejected``, ``evaluations`` (int64), ``wall_time``
    (seconds), ``energy_error`` (``|E - E0| / |E0|`` at the end: for a round trip, of the returned state) and
    for a round trip ``forward_status``, ``forward_energy_error``, ``delta``, ``delta_position``,
    ``delta_velocity`` (distances of the returned state to the start in the working precision, rounded
    to float64; NaN unless both legs succeeded). Counts and times of a round trip add both legs.
    """

    task: str
    method: str
    precision: str
    tol: float
    t_limbs: np.ndarray
    masses: np.ndarray
    start_positions: np.ndarray
    start_velocities: np.ndarray
    fields: dict

    # -- per-system columns ---------------------------------------------------------------------------
    def __getattr__(self, name: str) -> Any:
        fields = object.__getattribute__(self, "fields")
        if name in fields:
            return fields[name]
        raise AttributeError(f"BatchResult has no field {name!r}")

    def __len__(self) -> int:
        return int(self.masses.shape[0])

    @property
    def n(self) -> int:
        """Bodies per system."""
        return int(self.masses.shape[1])

    @property
    def t(self) -> float:
        """The requested time span (float64; exact: ``t_limbs``)."""
        return float(_p.to_float(self.t_limbs))

    @property
    def success(self) -> np.ndarray:
        """(M,) bool: the run (both legs of a round trip) ended as asked."""
        return _SUCCESS[self.fields["status_code"]]

    def reversible(self, threshold: float | None = None) -> np.ndarray:
        """(M,) bool: round trips that came back, both legs finished and ``delta <= threshold``.

        Parameters
        ----------
        threshold : float, optional
            Largest ``delta`` that counts (default ``loschmidt.chaos.REVERSIBLE_THRESHOLD``, 1e-10,
            a phase-space distance in N-body units).

        Returns
        -------
        numpy.ndarray
            False for every system of an ``integrate_batch`` (no round trip) and for NaN deltas.
        """
        from .chaos import REVERSIBLE_THRESHOLD, _positive

        limit = REVERSIBLE_THRESHOLD if threshold is None else _positive(threshold, "threshold")
        if self.task != "roundtrip":
            raise ValueError("reversible: only a roundtrip_batch result has round trips")
        with np.errstate(invalid="ignore"):
            return self.success & (np.asarray(self.fields["delta"], dtype=float) <= limit)

    def __repr__(self) -> str:
        ok = int(np.count_nonzero(self.success))
        text = (f"BatchResult(task={self.task!r}, systems={len(self)}, bodies={self.n}, "
                f"precision={self.precision!r}, succeeded={ok}")
        if self.task == "roundtrip":
            text += f", reversible={int(np.count_nonzero(self.reversible()))}"
        return text + ")"

    # -- systems -------------------------------------------------------------------------------------
    def systems(self, i: Any) -> dict:
        """The states of one system as ``System`` objects.

        Parameters
        ----------
        i : int
            System index.

        Returns
        -------
        dict
            ``{"start", "final"}`` for integrate, ``{"start", "forward", "returned"}`` for a round
            trip (None where not reached).
        """
        if isinstance(i, (bool, np.bool_)) or not isinstance(i, numbers.Integral):
            raise TypeError(f"i: expected an integer, got {type(i).__name__}")
        if not -len(self) <= i < len(self):
            raise IndexError(f"system {i} out of range for a batch of {len(self)}")
        i = int(i) % len(self)
        f = self.fields
        m = self.masses[i]

        def make(x: np.ndarray, v: np.ndarray, t: np.ndarray | None) -> System | None:
            if not (np.all(np.isfinite(x)) and np.all(np.isfinite(v))):
                return None
            return System.from_limbs(m, x, v, self.precision, time=t, check=False)

        out = {"start": make(self.start_positions[i], self.start_velocities[i], None)}
        if self.task == "integrate":
            out["final"] = make(f["positions"][i], f["velocities"][i], f["t"][i])
        else:
            out["forward"] = make(f["forward_positions"][i], f["forward_velocities"][i], f["forward_t"][i])
            out["returned"] = make(f["returned_positions"][i], f["returned_velocities"][i], None)
        return out

    # -- table ---------------------------------------------------------------------------------------
    def to_table(self) -> dict:
        """Columns, one row per system.

        Returns
        -------
        dict of str to numpy.ndarray
            Scalars as (M,) arrays, full-precision fields as their limb arrays (M, ..., k). (A
            sweep store keeps the latter as fixed-size lists, shape recorded.)
        """
        f = self.fields
        cols: dict = {"status": np.asarray(f["status"], dtype=object)}
        if self.task == "roundtrip":
            cols["forward_status"] = np.asarray(f["forward_status"], dtype=object)
            for name in ("delta", "delta_position", "delta_velocity"):
                cols[name] = f[name]
        for name in ("energy_error",) + (("forward_energy_error",) if self.task == "roundtrip" else ()):
            cols[name] = f[name]
        for name in ("steps", "rejected", "evaluations", "wall_time", "pair_i", "pair_j", "rechains"):
            cols[name] = f[name]
        for name in _LIMB_FIELDS[self.task]:
            cols[name] = f[name]
        return cols


# ---------------------------------------------------------------------------------------------------
# entry points


def _run(task: str, masses: Any, positions: Any, velocities: Any, t: Any, options: dict,
         threads: Any, progress: Callable[[int], Any] | None) -> BatchResult:
    masses, positions, velocities, t = _split_args(masses, positions, velocities, t)
    if t is None:
        raise TypeError("t: the time span is required")
    opts = batch_options(t, **options)
    if progress is not None and not callable(progress):
        raise TypeError("progress: expected a callable taking the number of systems finished")
    prec = opts["precision"]
    ml, x, v = _members(masses, positions, velocities, prec)
    n_threads = _threads(threads, ml.shape[0])
    t_limbs = _time_limbs(opts["t"], prec, "t")
    opts["method"] = _o.resolve_method(opts["method"], ml.shape[1],
                                       carries_radii=isinstance(masses, Ensemble) and masses.radii is not None)
    given = opts.get("radii")
    if isinstance(masses, Ensemble) and masses.radii is not None:
        _o.system_radii(masses.radii, opts["method"])  # refused with another method, as integrate does
        if given is not None:
            raise ValueError("radii: the ensemble has radii of its own; pass one or the other")
        given = masses.radii  # as integrate takes a System's radii
    raw = _execute(task, ml, x, v, opts, _radii_for(given, ml.shape[0], ml.shape[1]), n_threads, progress)
    fields = _fields(task, raw)
    return BatchResult(task, opts["method"], prec, opts["tol"], t_limbs, ml, x, v, fields)


def _execute(task: str, ml: np.ndarray, x: np.ndarray, v: np.ndarray, opts: dict, radii: list, threads: int,
             progress: Callable[[int], Any] | None) -> Any:
    """The engine's batch kernel on validated limb arrays and ``batch_options`` output: a
    ``_core.BatchRecord``."""
    prec = opts["precision"]
    t_limbs = _time_limbs(opts["t"], prec, "t")
    return _engine.batch(task, ml, x, v, t_limbs, _settings(opts), radii, threads, progress)


def _radii_for(radii: Any, count: int, n: int) -> list:
    """The engine's flat radii: none, N shared, or M * N row-major."""
    if radii is None:
        return []
    r = np.asarray(radii, dtype=np.float64)
    if r.shape not in ((n,), (count, n)):
        raise ValueError(f"radii: expected shape ({n},) or ({count}, {n}), got {r.shape}")
    return r.ravel().tolist()


def _fields(task: str, raw: Any) -> dict:
    """BatchResult's fields from the engine's ``_core.BatchRecord``."""
    code = np.asarray(raw.status, dtype=np.int64)
    f = {
        "status_code": code,
        "status": _STATUS_NAMES[code],
        "steps": np.asarray(raw.steps, dtype=np.int64),
        "rejected": np.asarray(raw.rejected, dtype=np.int64),
        "evaluations": np.asarray(raw.evaluations, dtype=np.int64),
        "wall_time": np.asarray(raw.wall_time, dtype=np.float64),
        "energy_error": raw.energy_error,
        "pair_i": np.asarray(raw.pair_i, dtype=np.int64),
        "pair_j": np.asarray(raw.pair_j, dtype=np.int64),
        "rechains": np.asarray(raw.rechains, dtype=np.int64),
        "stopped_by": np.asarray(raw.stopped_by, dtype=np.int64),
        "stop_i": np.asarray(raw.stop_i, dtype=np.int64),
        "stop_j": np.asarray(raw.stop_j, dtype=np.int64),
    }
    if task == "integrate":
        f.update(t=raw.t, positions=raw.positions, velocities=raw.velocities)
    else:
        fcode = np.asarray(raw.forward_status, dtype=np.int64)
        f.update(
            forward_status_code=fcode,
            forward_status=_STATUS_NAMES[fcode],
            forward_energy_error=raw.forward_energy_error,
            forward_t=raw.t,
            forward_positions=raw.positions,
            forward_velocities=raw.velocities,
            returned_t=raw.returned_t,
            returned_positions=raw.returned_positions,
            returned_velocities=raw.returned_velocities,
            delta=raw.delta,
            delta_position=raw.delta_position,
            delta_velocity=raw.delta_velocity,
        )
    return f


def integrate_batch(
    masses: Any,
    positions: Any = None,
    velocities: Any = None,
    t: Any = None,
    *,
    method: str | None = None,
    precision: str = "dd",
    threads: int | None = None,
    progress: Callable[[int], Any] | None = None,
    **options: Any,
) -> BatchResult:
    """Integrate M systems over the time span ``t`` on ``threads`` threads (default: all cores).

    Call as ``integrate_batch(masses, positions, velocities, t)`` with masses (M, N) or (N,) and
    positions, velocities (M, N, 3) or (M, N, 2) (elements as ``System`` accepts them, converted
    exactly to ``precision``), or as ``integrate_batch(ensemble, t)``. The other options are those of
    ``integrate`` and apply to every system (``max_wall_time`` per system); ``radii`` (method
    ``"chain"``) is one radius per body shared by all systems, or an (M, N) array. ``progress``, if
    given, is called on the calling thread about every 100 ms with the number of systems finished.

    With ``method="chain"``, ``pair_i``/``pair_j`` give the pair in contact (status ``collision``)
    or merging (``merger``; post-Newtonian runs), -1 otherwise, and ``rechains`` the re-chainings.

    Parameters
    ----------
    masses : array-like, shape (M, N) or (N,), or Ensemble
        Masses (or the whole ensemble, followed by ``t``).
    positions, velocities : array-like, shape (M, N, 3) or (M, N, 2)
        Elements as ``System`` accepts them, converted exactly to ``precision``; omitted with an
        Ensemble.
    t : number or decimal string
        Time span (of each leg, for a round trip).
    method : {None, "gbs", "chain"}, optional
        Integration method; default None chooses by the number of bodies
        (``loschmidt.options.resolve_method``: ``"chain"`` for few bodies).
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision (default ``"dd"``).
    threads : int, optional
        C++ threads (default: all cores, at most one per system).
    progress : callable, optional
        Called on the calling thread about every 100 ms with the number of systems finished.
    **options
        The integration options of a batch (:mod:`loschmidt.options`), below; budgets apply per
        system (and leg).
    <options>

    Returns
    -------
    BatchResult

    Examples
    --------
    >>> import loschmidt
    >>> b = loschmidt.integrate_batch([3, 4, 5], [[[1, 3], [-2, -1], [1, -1]]] * 2,
    ...                               [[[0, 0]] * 3] * 2, 10, method="chain", threads=1)
    >>> b.status
    array(['success', 'success'], dtype=object)
    >>> b.systems(1)["final"] == loschmidt.integrate(loschmidt.ics.pythagorean(), 10, method="chain").system
    True
    """
    options = dict(options, precision=precision, method=method)
    return _run("integrate", masses, positions, velocities, t, options, threads, progress)


integrate_batch.__doc__ = _o.document(integrate_batch.__doc__, "batch")


def roundtrip_batch(
    masses: Any,
    positions: Any = None,
    velocities: Any = None,
    t: Any = None,
    *,
    method: str | None = None,
    precision: str = "dd",
    threads: int | None = None,
    progress: Callable[[int], Any] | None = None,
    **options: Any,
) -> BatchResult:
    """Round trips (Loschmidt tests) of M systems: forward ``t``, negate velocities, forward ``t``,
    negate; ``delta`` is the phase-space distance to the start in the working precision.

    Arguments as for ``integrate_batch``; ``max_steps`` and ``max_wall_time`` apply to each leg. The
    return leg runs only when the forward leg succeeded.

    Parameters
    ----------
    masses : array-like, shape (M, N) or (N,), or Ensemble
        Masses (or the whole ensemble, followed by ``t``).
    positions, velocities : array-like, shape (M, N, 3) or (M, N, 2)
        Elements as ``System`` accepts them, converted exactly to ``precision``; omitted with an
        Ensemble.
    t : number or decimal string
        Time span (of each leg, for a round trip).
    method : {None, "gbs", "chain"}, optional
        Integration method; default None chooses by the number of bodies
        (``loschmidt.options.resolve_method``: ``"chain"`` for few bodies).
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision (default ``"dd"``).
    threads : int, optional
        C++ threads (default: all cores, at most one per system).
    progress : callable, optional
        Called on the calling thread about every 100 ms with the number of systems finished.
    **options
        The integration options of a batch (:mod:`loschmidt.options`), below; budgets apply per
        system (and leg).
    <options>

    Returns
    -------
    BatchResult
        With ``delta``, ``delta_position``, ``delta_velocity``, ``forward_status`` per system.

    Examples
    --------
    >>> import loschmidt
    >>> ens = loschmidt.ics.free_fall_grid(3, 5)
    >>> b = loschmidt.roundtrip_batch(ens, 1, method="chain", threads=2)
    >>> len(b), bool(b.success.all()), bool((b.delta < 1e-20).all())
    (11, True, True)
    >>> float(b.delta[0]) == loschmidt.roundtrip(ens.system(0), 1, method="chain").delta
    True
    """
    options = dict(options, precision=precision, method=method)
    return _run("roundtrip", masses, positions, velocities, t, options, threads, progress)


roundtrip_batch.__doc__ = _o.document(roundtrip_batch.__doc__, "batch")
