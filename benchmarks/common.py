"""Shared pieces of the benchmark: timing, runs of loschmidt and of the peers as uniform rows,
digits against a reference, matching at equal accuracy, and the printed table."""

from __future__ import annotations

import math
import os
import time
from typing import Any, Callable

import numpy as np

import loschmidt
from loschmidt.chaos import agreement_digits

DEFAULT_TOL = loschmidt.DEFAULT_TOLERANCE


def load() -> float | None:
    try:
        return os.getloadavg()[0]
    except OSError:  # pragma: no cover
        return None


def timed(fn: Callable[[], Any], repeats: int = 1, budget: float = 0.0) -> tuple[Any, float, float]:
    """Run fn once, and again up to ``repeats`` times while the total stays below ``budget`` s.
    Returns (result, least wall seconds, least thread CPU seconds) over the runs. The runs are
    deterministic (same result each time); the minimum is the least disturbed by other work, and
    the thread's CPU time is what this computation cost, whatever else the machine was doing."""
    res = None
    wall = cpu = math.inf
    total = 0.0
    for _ in range(max(1, repeats)):
        c0, w0 = time.thread_time(), time.perf_counter()
        res = fn()
        w, c = time.perf_counter() - w0, time.thread_time() - c0
        total += w
        wall, cpu = min(wall, w), min(cpu, c)
        if total + w > budget:
            break
    return res, wall, cpu


class Reference:
    """The converged solution of a problem: a state, and how many digits of it are trustworthy
    (``digits``: agreement with a second, looser run; math.inf for an exact solution)."""

    def __init__(self, system: loschmidt.System, digits: float, how: str):
        self.system = system
        self.digits = digits
        self.how = how

    def grade(self, final: loschmidt.System | None) -> tuple[float | None, bool]:
        """(digits agreeing with the reference, capped?)."""
        if final is None:
            return None, False
        d = agreement_digits(final, self.system)
        if d >= self.digits:
            return float(self.digits), True
        return float(max(d, 0.0)), False


def row_base(problem: str, engine: str, precision: str, method: str | None, tol: float | None) -> dict:
    return {
        "problem": problem, "engine": engine, "precision": precision, "method": method, "tol": tol,
        "status": None, "wall": None, "cpu": None, "engine_time": None, "evaluations": None,
        "ns_per_eval": None, "energy_error": None, "digits": None, "digits_capped": False,
        "rt_delta": None, "rt_wall": None, "rt_evaluations": None, "rt_cpu": None, "speedup": None, "matched": None,
        "eval_ratio": None, "note": None,
    }


class LoschmidtRunner:
    """Runs of loschmidt on one problem, memoised by (precision, method, tol) so that a reference run
    and a table row with the same settings are computed once."""

    def __init__(self, problem: str, build: Callable[[str], loschmidt.System], t: Any):
        self.problem = problem
        self.build = build
        self.t = t
        self._forward: dict = {}
        self._systems: dict = {}

    def system(self, precision: str) -> loschmidt.System:
        if precision not in self._systems:
            self._systems[precision] = self.build(precision)
        return self._systems[precision]

    def forward(self, precision: str, method: str = "gbs", tol: float | None = None, repeats: int = 3,
                budget: float = 0.6) -> tuple[loschmidt.Result, float, float]:
        tol = DEFAULT_TOL[precision] if tol is None else tol
        key = (precision, method, tol)
        if key not in self._forward:
            s = self.system(precision)
            self._forward[key] = timed(lambda: loschmidt.integrate(s, self.t, method=method, tol=tol), repeats, budget)
        return self._forward[key]

    def row(self, precision: str, method: str = "gbs", tol: float | None = None, roundtrip: bool = False,
            reference: Reference | None = None, repeats: int = 3, budget: float = 0.6) -> dict:
        tol = DEFAULT_TOL[precision] if tol is None else tol
        r = row_base(self.problem, "loschmidt", precision, method, tol)
        fwd, wall, cpu = self.forward(precision, method, tol, repeats, budget)
        r.update(status=fwd.status, wall=wall, cpu=cpu, engine_time=fwd.wall_time, evaluations=fwd.evaluations,
                 energy_error=fwd.energy_error)
        if fwd.evaluations:
            r["ns_per_eval"] = 1e9 * cpu / fwd.evaluations
        if reference is not None and fwd.success:
            if fwd.system is reference.system:
                r["note"] = "this run is the reference"
            else:
                r["digits"], r["digits_capped"] = reference.grade(fwd.system)
        if roundtrip and fwd.success:
            start = self.system(precision)
            back, bwall, bcpu = timed(
                lambda: loschmidt.integrate(fwd.system.reversed(), self.t, method=method, tol=tol), repeats, budget)
            if back.success:
                r["rt_delta"] = loschmidt.phase_distance(back.system.reversed(), start)
            else:
                r["note"] = f"return leg: {back.status}"
            r["rt_wall"], r["rt_cpu"] = wall + bwall, cpu + bcpu
            r["rt_evaluations"] = fwd.evaluations + back.evaluations
        return r


def peer_row(problem: str, engine: str, run: Callable[..., Any], masses, x, v, t: float, tol: float,
             roundtrip: bool = False, reference: Reference | None = None, precision: str = "f64",
             method: str | None = None, **options: Any) -> dict:
    """A float64 peer run (PeerResult interface) as a row; its wall time is measured around the call."""
    r = row_base(problem, engine, precision, method, tol)
    res, wall, cpu = timed(lambda: run(masses, x, v, t, rtol=tol, **options))
    r.update(status=res.status, wall=wall, cpu=cpu, evaluations=res.evaluations, energy_error=res.energy_error,
             ns_per_eval=1e9 * cpu / res.evaluations if res.evaluations else None)
    if reference is not None and res.success:
        final = _f64_system(masses, res.positions, res.velocities)
        r["digits"], r["digits_capped"] = reference.grade(final)
    if roundtrip and res.success:
        back, bwall, bcpu = timed(lambda: run(masses, res.positions, -res.velocities, t, rtol=tol, **options))
        if back.success:
            x0 = np.asarray(x, dtype=float).reshape(-1, 3)
            v0 = np.asarray(v, dtype=float).reshape(-1, 3)
            r["rt_delta"] = math.sqrt(float(np.sum((back.positions - x0) ** 2) + np.sum((-back.velocities - v0) ** 2)))
        else:
            r["note"] = f"return leg: {back.status}"
        r["rt_wall"], r["rt_cpu"] = wall + bwall, cpu + bcpu
        r["rt_evaluations"] = res.evaluations + back.evaluations
    return r


def _f64_system(masses, x, v) -> loschmidt.System | None:
    x = np.asarray(x, dtype=float)
    v = np.asarray(v, dtype=float)
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(v))):
        return None
    return loschmidt.System([float(q) for q in masses], x, v, precision="f64")


def match(row: dict, candidates: list[dict], key: str) -> None:
    """Set row["speedup"] = row CPU time / CPU time of the cheapest candidate at least as accurate in
    ``key`` (``energy_error``: smaller is better; ``digits``: larger is better), and row["matched"]."""
    if row.get(key) is None or row.get("cpu") is None:
        return
    ok = []
    for c in candidates:
        if c.get(key) is None or c.get("cpu") is None or c.get("status") != "success":
            continue
        if key == "energy_error" and c[key] <= row[key]:
            ok.append(c)
        elif key == "digits" and c[key] >= row[key]:
            ok.append(c)
    if not ok:
        best = (min if key == "energy_error" else max)(
            (c[key] for c in candidates if c.get(key) is not None), default=None)
        row["matched"] = f"none as accurate (best {fmt_sci(best) if key == 'energy_error' else fmt_num(best)})"
        return
    best = min(ok, key=lambda c: c["cpu"])
    row["speedup"] = row["cpu"] / best["cpu"]
    row["matched"] = f"{best['precision']} {best['method']} tol {fmt_tol(best['tol'])}"


# ---------------------------------------------------------------------------------------------------
# formatting


def fmt_sci(x: Any, digits: int = 1) -> str:
    if x is None:
        return "-"
    x = float(x)
    if math.isnan(x):
        return "nan"
    if x == 0:
        return "0"
    return f"{x:.{digits}e}"


def fmt_num(x: Any, digits: int = 1) -> str:
    if x is None:
        return "-"
    return f"{float(x):.{digits}f}"


def fmt_tol(x: Any) -> str:
    if x is None:
        return "-"
    return f"{float(x):.0e}"


def fmt_time(x: Any) -> str:
    if x is None:
        return "-"
    x = float(x)
    if x < 0.01:
        return f"{x * 1e3:.2f}ms"
    if x < 1:
        return f"{x * 1e3:.0f}ms"
    return f"{x:.2f}s"


def fmt_ns(x: Any) -> str:
    if x is None:
        return "-"
    x = float(x)
    if x >= 1e5:
        return f"{x / 1e3:.0f}us"
    if x >= 1e4:
        return f"{x / 1e3:.1f}us"
    return f"{x:.0f}ns"


def fmt_ratio(x: Any) -> str:
    if x is None:
        return "-"
    x = float(x)
    if x >= 100:
        return f"{x:.0f}x"
    if x >= 10:
        return f"{x:.1f}x"
    return f"{x:.2f}x"


COLUMNS = [
    ("engine", 20, lambda r: r["engine"]),
    ("prec", 5, lambda r: r["precision"]),
    ("meth", 5, lambda r: r["method"] or "-"),
    ("tol", 6, lambda r: fmt_tol(r["tol"])),
    ("cpu", 8, lambda r: fmt_time(r["cpu"])),
    ("wall", 8, lambda r: fmt_time(r["wall"])),
    ("evals", 9, lambda r: "-" if r["evaluations"] is None else str(r["evaluations"])),
    ("/eval", 7, lambda r: fmt_ns(r["ns_per_eval"])),
    ("eval/f64", 8, lambda r: fmt_ratio(r["eval_ratio"])),
    ("dE/E", 8, lambda r: fmt_sci(r["energy_error"])),
    ("digits", 6, lambda r: "-" if r["digits"] is None else (">=" if r["digits_capped"] else "") + fmt_num(r["digits"])),
    ("rt delta", 8, lambda r: fmt_sci(r["rt_delta"])),
    ("rt cpu", 8, lambda r: fmt_time(r["rt_cpu"])),
    ("loschmidt faster", 16, lambda r: _faster(r)),
]


def _faster(r: dict) -> str:
    if r["speedup"] is not None:
        return f"{fmt_ratio(r['speedup'])} ({r['matched']})"
    return r["matched"] or ""


def table(rows: list[dict]) -> list[str]:
    head = "  ".join(name.ljust(w) if i == 0 else name.rjust(w) for i, (name, w, _) in enumerate(COLUMNS))
    lines = [head, "-" * len(head)]
    for r in rows:
        cells = []
        for i, (_, w, f) in enumerate(COLUMNS):
            s = str(f(r))
            cells.append(s.ljust(w) if i == 0 or i == len(COLUMNS) - 1 else s.rjust(w))
        lines.append("  ".join(cells).rstrip())
        if r.get("note"):
            lines.append(f"    note: {r['note']}")
    return lines
