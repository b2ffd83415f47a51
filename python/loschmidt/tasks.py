"""The sweep tasks beyond plain batches: "lifetime" and "amplification".

Both are registered in the sweep registry when :mod:`loschmidt.sweep` is imported, beside
"roundtrip" and "integrate" (``loschmidt.available_tasks()``).

Task "lifetime"
    Options ``t_max`` (required), ``interval`` (default 2), ``precision`` (default "f64"),
    ``method`` (default "chain"), ``tol``, ``max_steps``, ``max_wall_time`` (per member),
    ``distance_factor``, and for the chain method ``regularization``, ``pn``, ``c``,
    ``merger_factor`` (post-Newtonian black-hole systems: a merger ends a member's run). The chunk
    runs as one batch of the C++ engine (threads as for ``integrate_batch``) with the escape stop
    condition (``stop="escape"``, the test of :mod:`loschmidt.outcome`, checked every few steps):
    each member runs until a body escapes, two bodies touch (radii) or merge, or ``t_max``; no
    stepping loop in Python. Columns: ``lifetime`` (the end of the first span of ``interval`` in
    which the escape test held, as the former span-by-span loop reported it, or the exact time of
    a contact or merger; NaN when none by ``t_max``), ``outcome`` (the kind at the end,
    ``"merger"`` for a merger), ``escaper`` (index of the escaper, -1 if none), ``status``,
    ``t_reached`` (the exact time the run stopped), ``energy_error``, ``steps``, ``evaluations``,
    ``wall_time``, ``pair_i``, ``pair_j`` (the pair of a contact or merger, else -1).

Task "amplification"
    Options ``t`` (required), ``perturbation`` (default 1e-20), ``body`` (default 0), ``axis``
    (default 0) and every option of ``integrate_batch``. Each member and a twin whose coordinate
    ``axis`` of body ``body`` is displaced by ``perturbation`` (added in the working precision) are
    integrated together in one batch; the columns are ``delta0`` (the initial phase-space distance
    of the pair), ``delta`` (at ``t``: differences in the working precision, their norm in float64),
    ``amplification`` = delta / delta0, ``log10_amplification``, ``exponent`` (ln A / t, the
    finite-time Lyapunov exponent of that displacement), ``status`` (the member's, or the twin's when
    the member succeeded and the twin did not), ``reference_status``, ``twin_status``,
    ``energy_error`` (the member's), ``steps``, ``evaluations``, ``wall_time`` (both runs), and the
    member's final ``t``, ``positions``, ``velocities`` as limb columns. ``delta`` and the ratios are
    NaN unless both runs succeeded. ``loschmidt.amplification`` does the same for one system with
    the whole history A(t).
"""

from __future__ import annotations

import math
import numbers
from fractions import Fraction
from typing import Any, Mapping

import numpy as np

from . import options as _o
from . import precision as _p
from .batch import (
    _STATUS_NAMES,
    _SUCCESS,
    _execute,
    _members,
    _radii_for,
    _threads,
    batch_options,
)

__all__ = ["LIFETIME_OPTIONS", "prepare_lifetime", "run_lifetime", "prepare_amplification", "run_amplification"]


def _unknown(options: Mapping[str, Any], keys: tuple) -> None:
    unknown = sorted(set(options) - set(keys))
    if unknown:
        raise ValueError(f"options: unknown {unknown}; expected some of {list(keys)}")


# ---------------------------------------------------------------------------------------------------
# lifetime

_CHAIN_KEYS = ("regularization", "pn", "c", "merger_factor")
#: The integration options (loschmidt.options) task "lifetime" takes.
LIFETIME_OPTIONS = ("tol", "max_steps", "max_wall_time", "distance_factor") + _CHAIN_KEYS
_LIFETIME_KEYS = ("t_max", "interval", "precision", "method") + LIFETIME_OPTIONS


def prepare_lifetime(**options: Any) -> dict:
    """Validate the options of task "lifetime" (see the module docstring).

    Parameters
    ----------
    **options
        The task's options (see the module docstring).

    Returns
    -------
    dict
        The options, validated and JSON-friendly (hashed into the store's manifest).
    """
    _unknown(options, _LIFETIME_KEYS)
    if "t_max" not in options:
        raise ValueError("t_max: the longest span to follow each member is required")
    factor = _o.check_distance_factor(options.get("distance_factor", _o.DEFAULT_DISTANCE_FACTOR))
    opts = batch_options(
        options["t_max"], precision=options.get("precision", "f64"), method=options.get("method", "chain"),
        stop="escape", distance_factor=factor, **{k: options[k] for k in LIFETIME_OPTIONS if k in options and
                                                   k != "distance_factor"},
    )
    interval = options.get("interval", 2)
    for name, value in (("t_max", options["t_max"]), ("interval", interval)):
        if isinstance(value, bool):
            raise TypeError(f"{name}: expected a number, got bool")
        if _p.exact_fraction(value, name) <= 0:
            raise ValueError(f"{name}: must be positive, got {value!r}")
    # The batch options in their manifest form, the span renamed t_max; "stop": "escape" (the
    # engine's stop since issue 16; before it, a Python loop over spans of ``interval``) makes a
    # store of the old path refuse this definition rather than mix the two.
    out = {"t_max": opts.pop("t"), **opts}
    out["interval"] = str(_p.to_string(_p.to_limbs(interval, opts["precision"], name="interval"), exact=True))
    return out


def _span_end(t: float, interval: Fraction) -> float:
    """The end of the first span of ``interval`` (from 0) that contains time t > 0."""
    q = Fraction(t) / interval
    k = q.numerator // q.denominator + (q.denominator != 1)
    return float(max(k, 1) * interval)


def run_lifetime(chunk: Any, options: Mapping[str, Any]) -> dict:
    """Task "lifetime" on one chunk: one batch of the C++ engine with the escape stop condition.

    Parameters
    ----------
    chunk : Ensemble
        The members.
    options : mapping
        The prepared options, plus ``threads`` and ``progress`` at run time.

    Returns
    -------
    dict of str to numpy.ndarray
        The columns listed in the module docstring, one row per member.
    """
    from .outcome import outcome
    from .system import System

    opts = dict(options)
    threads, progress = opts.pop("threads", None), opts.pop("progress", None)
    prec, method = opts["precision"], opts["method"]
    interval = _p.exact_fraction(opts.pop("interval"), "interval")
    factor = opts["distance_factor"]
    ml, x, v = _members(chunk, None, None, prec)
    count, n = ml.shape[:2]
    radii = None
    if chunk.radii is not None:
        _o.check_carried_radii(method)
        radii = chunk.radii
    batch = {"t": opts.pop("t_max"), **opts}
    raw = _execute("integrate", ml, x, v, batch, _radii_for(radii, count, n), _threads(threads, count), progress)
    code = np.asarray(raw.status, dtype=np.int64)
    status = _STATUS_NAMES[code]
    t_reached = _p.to_float(raw.t).reshape(count)
    t_max = float(_p.to_float(_p.to_limbs(batch["t"], prec)))
    lifetime = np.full(count, np.nan)
    kind = np.full(count, "undecided", dtype=object)
    escaper = np.full(count, -1, dtype=np.int64)
    for i in range(count):
        if not _SUCCESS[code[i]]:
            continue  # the run did not finish: no lifetime, outcome undecided
        if status[i] == "stop_condition":  # the engine's escape test held (the test of loschmidt.outcome)
            kind[i], escaper[i] = "escape", int(raw.stop_i[i])
            lifetime[i] = _span_end(float(t_reached[i]), interval)
            continue
        member_radii = None if radii is None else np.asarray(radii)[i]  # an Ensemble's radii are (M, N)
        state = System.from_limbs(ml[i], raw.positions[i], raw.velocities[i], prec, radii=member_radii, check=False)
        found = outcome(state, factor)
        kind[i] = "merger" if status[i] == "merger" else found.kind
        if found.kind == "escape" and found.escaper is not None:
            escaper[i] = int(found.escaper)
        if status[i] in ("collision", "merger"):
            lifetime[i] = float(t_reached[i])  # the exact time of the event
        elif found.kind in ("escape", "collision"):
            lifetime[i] = t_max
    return {
        "lifetime": lifetime,
        "outcome": kind,
        "escaper": escaper,
        "status": status,
        "t_reached": np.asarray(t_reached, dtype=np.float64),
        "energy_error": np.asarray(raw.energy_error, dtype=np.float64),
        "steps": np.asarray(raw.steps, dtype=np.int64),
        "evaluations": np.asarray(raw.evaluations, dtype=np.int64),
        "wall_time": np.asarray(raw.wall_time, dtype=np.float64),
        "pair_i": np.asarray(raw.pair_i, dtype=np.int64),
        "pair_j": np.asarray(raw.pair_j, dtype=np.int64),
    }


# ---------------------------------------------------------------------------------------------------
# amplification

_BATCH_KEYS = ("t", "method", "precision") + _o.names_for("batch")
_AMPLIFICATION_KEYS = _BATCH_KEYS + ("perturbation", "body", "axis")


def _index(value: Any, name: str, limit: int | None = None) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name}: expected an integer, got {type(value).__name__}")
    if value < 0 or (limit is not None and value >= limit):
        bound = f" below {limit}" if limit is not None else ""
        raise ValueError(f"{name}: expected an integer >= 0{bound}, got {value}")
    return int(value)


def prepare_amplification(**options: Any) -> dict:
    """Validate the options of task "amplification" (see the module docstring).

    Parameters
    ----------
    **options
        The task's options (see the module docstring).

    Returns
    -------
    dict
        The options, validated and JSON-friendly (hashed into the store's manifest).
    """
    _unknown(options, _AMPLIFICATION_KEYS)
    if "t" not in options:
        raise ValueError("t: the time span is required (Sweep(..., t=...))")
    base = {k: options[k] for k in _BATCH_KEYS if k in options}
    if "radii" in base and np.ndim(base["radii"]) != 1:
        raise ValueError("radii: a sweep takes one radius per body, shared by every member")
    opts = batch_options(**base)
    pert = options.get("perturbation", 1e-20)
    if isinstance(pert, bool):
        raise TypeError("perturbation: expected a number, got bool")
    frac = _p.exact_fraction(pert, "perturbation")
    if frac == 0 or not math.isfinite(float(frac)):
        raise ValueError(f"perturbation: must be a finite non-zero number, got {pert!r}")
    opts["perturbation"] = str(_p.to_string(_p.to_limbs(pert, opts["precision"], name="perturbation"), exact=True))
    opts["body"] = _index(options.get("body", 0), "body")
    opts["axis"] = _index(options.get("axis", 0), "axis", 3)
    return opts


def run_amplification(chunk: Any, options: Mapping[str, Any]) -> dict:
    """Task "amplification" on one chunk: the members and their displaced twins in one batch.

    Parameters
    ----------
    chunk : Ensemble
        The members.
    options : mapping
        The prepared options, plus ``threads`` and ``progress`` at run time.

    Returns
    -------
    dict of str to numpy.ndarray
        The columns listed in the module docstring, one row per member.
    """
    opts = dict(options)
    threads, progress = opts.pop("threads", None), opts.pop("progress", None)
    pert, body, axis = opts.pop("perturbation"), opts.pop("body"), opts.pop("axis")
    prec = opts["precision"]
    ml, x, v = _members(chunk, None, None, prec)
    count, n = ml.shape[:2]
    opts["method"] = _o.resolve_method(opts["method"], n)
    if body >= n:
        raise ValueError(f"body: expected an index below the {n} bodies, got {body}")
    twin = x.copy()
    twin[:, body, axis] = _p.add(x[:, body, axis], np.broadcast_to(_p.to_limbs(pert, prec), x[:, body, axis].shape), prec)
    radii = opts.get("radii")
    if radii is None and chunk.radii is not None and opts["method"] == "chain":
        radii = chunk.radii
    r = _radii_for(radii, count, n)
    if len(r) != n:
        r = r + r  # per-member radii (or none): the twins take their member's
    both = _execute(
        "integrate", np.concatenate([ml, ml]), np.concatenate([x, twin]), np.concatenate([v, v]), opts, r,
        _threads(threads, 2 * count), (lambda done: progress(done // 2)) if progress else None,
    )
    code = np.asarray(both.status, dtype=np.int64)
    ref, tw = code[:count], code[count:]
    ok = _SUCCESS[ref] & _SUCCESS[tw]

    def norm(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        d = _p.to_float(_p.sub(a, b, prec)).reshape(a.shape[0], -1)
        return np.sqrt(np.sum(d * d, axis=1))

    x1, v1 = both.positions, both.velocities
    delta0 = norm(np.concatenate([x, v], axis=1), np.concatenate([twin, v], axis=1))
    delta = norm(np.concatenate([x1[:count], v1[:count]], axis=1), np.concatenate([x1[count:], v1[count:]], axis=1))
    delta = np.where(ok, delta, np.nan)
    t = float(_p.to_float(_p.to_limbs(opts["t"], prec)))
    with np.errstate(divide="ignore", invalid="ignore"):
        amp = delta / delta0
        log10 = np.log10(amp)
        exponent = np.log(amp) / t if t != 0 else np.full(count, np.nan)
    status = np.where(_SUCCESS[ref], tw, ref)
    steps, evals, wall = np.asarray(both.steps), np.asarray(both.evaluations), np.asarray(both.wall_time)
    return {
        "status": _STATUS_NAMES[status],
        "reference_status": _STATUS_NAMES[ref],
        "twin_status": _STATUS_NAMES[tw],
        "delta0": delta0,
        "delta": delta,
        "amplification": amp,
        "log10_amplification": log10,
        "exponent": exponent,
        "energy_error": np.asarray(both.energy_error)[:count],
        "steps": steps[:count] + steps[count:],
        "evaluations": evals[:count] + evals[count:],
        "wall_time": wall[:count] + wall[count:],
        "pair_i": np.asarray(both.pair_i, dtype=np.int64)[:count],
        "pair_j": np.asarray(both.pair_j, dtype=np.int64)[:count],
        "t": both.t[:count],
        "positions": x1[:count],
        "velocities": v1[:count],
    }
