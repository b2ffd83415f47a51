"""The sweep tasks beyond plain batches: "lifetime" and "amplification".

Both are registered in the sweep registry when :mod:`loschmidt.sweep` is imported, beside
"roundtrip" and "integrate" (``loschmidt.available_tasks()``).

Task "lifetime"
    Options ``t_max`` (required), ``interval`` (default 2), ``precision`` (default "f64"),
    ``method`` (default "chain"), ``tol``, ``max_steps``, ``max_wall_time`` (per interval),
    ``distance_factor``, and for the chain method ``regularization``, ``pn``, ``c``,
    ``merger_factor`` (post-Newtonian black-hole systems: a merger ends a member's run). Each member
    is integrated in spans of ``interval`` until ``loschmidt.outcome`` reports an escape or a
    collision, the engine stops at a contact or a merger, or ``t_max`` is reached
    (``loschmidt.integrate_until_escape``), on ``threads`` Python threads (the engine releases the
    GIL). Columns: ``lifetime`` (the end of the first span at which the escape test holds, or the
    exact time of a contact or merger; NaN when none by ``t_max``), ``outcome`` (the kind at the end,
    ``"merger"`` for a merger), ``escaper`` (index of the first escaper, -1 if none), ``status``,
    ``t_reached``, ``energy_error``, ``steps``, ``evaluations``, ``wall_time``, ``pair_i``,
    ``pair_j`` (the pair of a contact or merger, else -1).

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

import concurrent.futures as cf
import math
import numbers
import os
from typing import Any, Callable, Mapping

import numpy as np

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

__all__ = ["prepare_lifetime", "run_lifetime", "prepare_amplification", "run_amplification"]


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _unknown(options: Mapping[str, Any], keys: tuple) -> None:
    unknown = sorted(set(options) - set(keys))
    if unknown:
        raise ValueError(f"options: unknown {unknown}; expected some of {list(keys)}")


# ---------------------------------------------------------------------------------------------------
# lifetime

_CHAIN_KEYS = ("regularization", "pn", "c", "merger_factor")
_LIFETIME_KEYS = ("t_max", "interval", "precision", "method", "tol", "max_steps", "max_wall_time",
                  "distance_factor") + _CHAIN_KEYS


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
    from .outcome import DEFAULT_DISTANCE_FACTOR, _check_factor

    _unknown(options, _LIFETIME_KEYS)
    if "t_max" not in options:
        raise ValueError("t_max: the longest span to follow each member is required")
    opts = batch_options(
        options["t_max"], precision=options.get("precision", "f64"), method=options.get("method", "chain"),
        tol=options.get("tol"), max_steps=options.get("max_steps"), max_wall_time=options.get("max_wall_time"),
        **{k: options[k] for k in _CHAIN_KEYS if k in options},
    )
    interval = options.get("interval", 2)
    for name, value in (("t_max", options["t_max"]), ("interval", interval)):
        if isinstance(value, bool):
            raise TypeError(f"{name}: expected a number, got bool")
        if _p.exact_fraction(value, name) <= 0:
            raise ValueError(f"{name}: must be positive, got {value!r}")
    factor = options.get("distance_factor", DEFAULT_DISTANCE_FACTOR)
    _check_factor(factor)
    out = {
        "t_max": opts["t"],
        "interval": str(_p.to_string(_p.to_limbs(interval, opts["precision"], name="interval"), exact=True)),
        "precision": opts["precision"],
        "method": opts["method"],
        "tol": opts["tol"],
        "max_steps": opts["max_steps"],
        "max_wall_time": opts["max_wall_time"],
        "distance_factor": float(factor),
    }
    out.update({k: opts[k] for k in _CHAIN_KEYS if k in opts})  # only those given, as batch_options
    return out


def _one_lifetime(system: Any, options: Mapping[str, Any]) -> tuple:
    from .outcome import integrate_until_escape

    kw: dict = {"method": options["method"], "tol": options["tol"]}
    for key in ("max_steps", "max_wall_time"):
        if options.get(key):
            kw[key] = options[key]
    kw.update({k: options[k] for k in _CHAIN_KEYS if k in options})
    res, found, lifetime = integrate_until_escape(
        system, options["t_max"], interval=options["interval"], distance_factor=options["distance_factor"], **kw)
    escaper = found.escaper if found.kind == "escape" and found.escaper is not None else -1
    kind = "merger" if res.status == "merger" else found.kind
    pair = res.collision if res.collision is not None else (-1, -1)
    return (float("nan") if lifetime is None else lifetime, kind, escaper, res.status, res.t,
            res.energy_error, res.steps, res.evaluations, res.wall_time, pair[0], pair[1])


def run_lifetime(chunk: Any, options: Mapping[str, Any]) -> dict:
    """Task "lifetime" on one chunk: the members on ``threads`` threads, in member order.

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
    from . import _core

    threads = options.get("threads") or _cores()
    progress: Callable[[int], Any] | None = options.get("progress")
    prec = options["precision"]
    rows: list[Any] = [None] * len(chunk)
    pool = cf.ThreadPoolExecutor(max_workers=max(1, min(int(threads), len(chunk))))
    try:
        futures = {pool.submit(_one_lifetime, chunk.system(i, prec), options): i for i in range(len(chunk))}
        done = 0
        for fut in cf.as_completed(futures):
            rows[futures[fut]] = fut.result()
            done += 1
            if progress is not None:
                progress(done)
    except BaseException:
        _core.request_stop(True)  # stop the members still running on the other threads
        pool.shutdown(wait=True, cancel_futures=True)
        _core.request_stop(False)
        raise
    pool.shutdown(wait=True)
    names = ("lifetime", "outcome", "escaper", "status", "t_reached", "energy_error", "steps", "evaluations",
             "wall_time", "pair_i", "pair_j")
    dtypes = (np.float64, object, np.int64, object, np.float64, np.float64, np.int64, np.int64, np.float64,
              np.int64, np.int64)
    return {n: np.array([r[k] for r in rows], dtype=d) for k, (n, d) in enumerate(zip(names, dtypes))}


# ---------------------------------------------------------------------------------------------------
# amplification

_BATCH_KEYS = ("t", "method", "precision", "tol", "atol", "max_steps", "max_wall_time", "max_order",
               "initial_step", "radii") + _CHAIN_KEYS
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
    from .integrate import resolve_method

    opts["method"] = resolve_method(opts["method"], n)
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
    code = np.asarray(both["status"], dtype=np.int64)
    ref, tw = code[:count], code[count:]
    ok = _SUCCESS[ref] & _SUCCESS[tw]

    def norm(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        d = _p.to_float(_p.sub(a, b, prec)).reshape(a.shape[0], -1)
        return np.sqrt(np.sum(d * d, axis=1))

    x1, v1 = both["positions"], both["velocities"]
    delta0 = norm(np.concatenate([x, v], axis=1), np.concatenate([twin, v], axis=1))
    delta = norm(np.concatenate([x1[:count], v1[:count]], axis=1), np.concatenate([x1[count:], v1[count:]], axis=1))
    delta = np.where(ok, delta, np.nan)
    t = float(_p.to_float(_p.to_limbs(opts["t"], prec)))
    with np.errstate(divide="ignore", invalid="ignore"):
        amp = delta / delta0
        log10 = np.log10(amp)
        exponent = np.log(amp) / t if t != 0 else np.full(count, np.nan)
    status = np.where(_SUCCESS[ref], tw, ref)
    pair = lambda key: np.asarray(both[key], dtype=np.int64)  # noqa: E731
    steps, evals, wall = (np.asarray(both[k]) for k in ("steps", "evaluations", "wall_time"))
    return {
        "status": _STATUS_NAMES[status],
        "reference_status": _STATUS_NAMES[ref],
        "twin_status": _STATUS_NAMES[tw],
        "delta0": delta0,
        "delta": delta,
        "amplification": amp,
        "log10_amplification": log10,
        "exponent": exponent,
        "energy_error": np.asarray(both["energy_error"])[:count],
        "steps": steps[:count] + steps[count:],
        "evaluations": evals[:count] + evals[count:],
        "wall_time": wall[:count] + wall[count:],
        "pair_i": pair("pair_i")[:count],
        "pair_j": pair("pair_j")[:count],
        "t": both["t"][:count],
        "positions": x1[:count],
        "velocities": v1[:count],
    }
