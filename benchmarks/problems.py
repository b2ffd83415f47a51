"""The benchmark problems. Each function runs loschmidt and its peers on one problem and returns
``{"title", "rows", "reference", "notes", ...}``; the rows are those of common.row_base.

Sizes differ between the full run and ``quick`` (shorter spans, fewer tolerances, qd only where it
is cheap); every problem says what it ran.
"""

from __future__ import annotations

import math
import time
from concurrent.futures import ThreadPoolExecutor
from typing import Any, Callable

import mpmath
import numpy as np

import loschmidt
from loschmidt.chaos import agreement_digits

from . import peer_mpmath, peer_numba_gbs, peer_numpy_gbs, peer_scipy
from .common import DEFAULT_TOL, LoschmidtRunner, Reference, load, match, peer_row, row_base, timed

DOP_PY = "DOP853 (python rhs)"
DOP_NP = "DOP853 (numpy rhs)"
NP_GBS = "numpy GBS"
NB_GBS = "numba GBS"
MPMATH = "mpmath.odefun"


def _dop(rhs: str) -> Callable:
    def run(m, x, v, t, rtol, **kw):
        return peer_scipy.integrate(m, x, v, t, rtol=rtol, rhs=rhs, **kw)
    return run


PEERS = {
    DOP_PY: _dop("python"),
    DOP_NP: _dop("numpy"),
    NP_GBS: peer_numpy_gbs.integrate,
    NB_GBS: peer_numba_gbs.integrate,
}


def _reference_runs(runner: LoschmidtRunner, ref: tuple[str, float | None], check: tuple[str, float | None],
                    method: str = "gbs") -> Reference:
    """Reference = the run ``ref`` (precision, tol); its trustworthy digits = agreement with ``check``."""
    r, _, _ = runner.forward(ref[0], method, ref[1], repeats=1)
    c, _, _ = runner.forward(check[0], method, check[1], repeats=1)
    if not (r.success and c.success):
        raise RuntimeError(f"{runner.problem}: reference runs did not finish ({r.status}, {c.status})")
    digits = agreement_digits(c.system, r.system)
    tol_r = DEFAULT_TOL[ref[0]] if ref[1] is None else ref[1]
    tol_c = DEFAULT_TOL[check[0]] if check[1] is None else check[1]
    how = (f"loschmidt {ref[0]} {method} tol {tol_r:.0e}; trusted to {digits:.1f} digits "
           f"(agreement with {check[0]} tol {tol_c:.0e})")
    return Reference(r.system, digits, how)


def _standard(name: str, title: str, build: Callable[[str], loschmidt.System], t: Any, t_float: float,
              reference: Callable[[LoschmidtRunner], Reference], own: list[dict], peers: list[tuple],
              out: Callable[[str], None]) -> dict:
    """loschmidt rows ``own`` (kwargs of LoschmidtRunner.row) and peer rows ``peers`` = [(engine, tols,
    roundtrip_tols)] on one problem; ratios against loschmidt f64 in the same run."""
    out(f"  {name}: reference ...")
    runner = LoschmidtRunner(name, build, t)
    ref = reference(runner)
    rows = []
    notes = []
    out(f"  {name}: loschmidt ...")
    for cfg in _supported(own, notes):
        rows.append(runner.row(reference=ref, **cfg))
    s64 = runner.system("f64")
    m, x, v = s64.masses, s64.positions, s64.velocities
    for engine, tols, rt_tols in peers:
        if engine == NB_GBS and not peer_numba_gbs.available():
            continue
        out(f"  {name}: {engine} ...")
        for tol in tols:
            rows.append(peer_row(name, engine, PEERS[engine], m, x, v, t_float, tol, roundtrip=tol in rt_tols,
                                 reference=ref))
    base = _base_row(rows)
    f64 = [r for r in rows if r["engine"] == "loschmidt" and r["precision"] == "f64"]
    for r in rows:
        if base is not None and r["ns_per_eval"] is not None:
            r["eval_ratio"] = r["ns_per_eval"] / base["ns_per_eval"]
        if r["engine"] != "loschmidt":
            match(r, f64, "energy_error")
    if not peer_numba_gbs.available():
        notes.append("numba not importable: numba GBS peer skipped")
    return {"title": title, "t": t_float, "reference": ref.how, "reference_digits": ref.digits, "rows": rows,
            "notes": notes}


def _supported(own: list[dict], notes: list[str]) -> list[dict]:
    """The configurations whose tolerance the engine accepts for their precision (the floor moves
    with the engine's version); the others are noted and skipped."""
    from loschmidt.integrate import check_tolerance

    keep = []
    for cfg in own:
        prec = cfg["precision"]
        try:
            check_tolerance(cfg.get("tol"), prec)
        except ValueError:
            notes.append(f"loschmidt {prec} tol {cfg['tol']:.0e} skipped: below the engine's floor for {prec}")
            continue
        keep.append(cfg)
    return keep


def _base_row(rows: list[dict]) -> dict | None:
    for r in rows:
        if (r["engine"], r["precision"], r["method"]) == ("loschmidt", "f64", "gbs") and r["tol"] == DEFAULT_TOL["f64"]:
            return r
    return None


def _ladder(precision: str, tols: list[float], method: str = "gbs", roundtrip_at: tuple = ()) -> list[dict]:
    return [dict(precision=precision, method=method, tol=tol, roundtrip=tol in roundtrip_at) for tol in tols]


# ---------------------------------------------------------------------------------------------------
# problems


def pythagorean(quick: bool, out: Callable[[str], None]) -> dict:
    """Burrau's problem to t = 70 (through the last close triple encounter), forward and round trip."""
    d13 = DEFAULT_TOL["f64"]
    if quick:
        own = (_ladder("f64", [1e-9, 1e-11, d13, 1e-14], roundtrip_at=(d13,))
               + [dict(precision="f64", method="chain", roundtrip=True)]
               + _ladder("dd", [1e-24, DEFAULT_TOL["dd"]], roundtrip_at=(1e-24, DEFAULT_TOL["dd"]))
               + [dict(precision="dd", method="chain", roundtrip=True)])
        peers = [(DOP_PY, [1e-11], ()), (NP_GBS, [1e-10], ()), (NB_GBS, [1e-8, 1e-10, 1e-12, 1e-13], (1e-13,))]
        ref = lambda r: _reference_runs(r, ("dd", 1e-30), ("dd", 1e-26))  # noqa: E731
    else:
        own = (_ladder("f64", [1e-8, 1e-9, 1e-10, 1e-11, 1e-12, d13, 1e-14], roundtrip_at=(d13,))
               + [dict(precision="f64", method="chain", roundtrip=True)]
               + _ladder("dd", [1e-24, 1e-26, DEFAULT_TOL["dd"], 1e-30],
                         roundtrip_at=(1e-24, 1e-26, DEFAULT_TOL["dd"], 1e-30))
               + [dict(precision="dd", method="chain", roundtrip=True)]
               + [dict(precision="qd", roundtrip=True, repeats=1)])
        peers = [(DOP_PY, [1e-8, 1e-10, 1e-13], (1e-13,)), (DOP_NP, [1e-12], ()),
                 (NP_GBS, [1e-10, 1e-13], (1e-13,)), (NB_GBS, [1e-8, 1e-10, 1e-12, 1e-13], (1e-13,))]
        ref = lambda r: _reference_runs(r, ("qd", None), ("dd", 1e-30))  # noqa: E731
    res = _standard("pythagorean", "Pythagorean problem (masses 3, 4, 5 at rest), t = 70, forward and round trip",
                    lambda p: loschmidt.ics.pythagorean(precision=p), 70, 70.0, ref, own, peers, out)
    return res


def figure_eight(quick: bool, out: Callable[[str], None]) -> dict:
    """The figure-eight choreography over 10 periods: smooth, linearly stable."""
    periods = 10
    t_exact = _decimal_product(periods, "6.32591398")  # the published period, exactly times 10
    d13 = DEFAULT_TOL["f64"]
    if quick:
        own = (_ladder("f64", [1e-9, 1e-11, d13, 1e-14], roundtrip_at=(d13,))
               + [dict(precision="dd", roundtrip=True)] + [dict(precision="qd", repeats=1)])
        peers = [(DOP_PY, [1e-10, 1e-13], (1e-13,)), (DOP_NP, [1e-13], ()), (NP_GBS, [1e-13], ()),
                 (NB_GBS, [1e-9, 1e-11, 1e-13], (1e-13,))]
        ref = lambda r: _reference_runs(r, ("qd", None), ("dd", 1e-30))  # noqa: E731
    else:
        own = (_ladder("f64", [1e-8, 1e-9, 1e-10, 1e-11, 1e-12, d13, 1e-14], roundtrip_at=(d13,))
               + [dict(precision="f64", method="chain", roundtrip=True)]
               + [dict(precision="dd", roundtrip=True), dict(precision="dd", method="chain", roundtrip=True)]
               + [dict(precision="qd", roundtrip=True, repeats=1)])
        peers = [(DOP_PY, [1e-8, 1e-10, 1e-12, 1e-13], (1e-13,)), (DOP_NP, [1e-10, 1e-13], (1e-13,)),
                 (NP_GBS, [1e-10, 1e-13], (1e-13,)), (NB_GBS, [1e-8, 1e-9, 1e-10, 1e-11, 1e-12, 1e-13], (1e-13,))]
        ref = lambda r: _reference_runs(r, ("qd", None), ("dd", 1e-30))  # noqa: E731
    return _standard("figure_eight", f"Figure-eight choreography, {periods} periods (t = {float(t_exact):.4f})",
                     lambda p: loschmidt.ics.figure_eight(precision=p), t_exact, float(t_exact), ref, own, peers, out)


def _decimal_product(k: int, s: str) -> str:
    from decimal import Decimal

    return str(k * Decimal(s))


def kepler(quick: bool, out: Callable[[str], None]) -> dict:
    """An equal-mass binary, a = 1, e = 0.9, over whole periods: the exact solution is the start."""
    periods = 20 if quick else 1000
    with mpmath.workdps(90):
        t_exact = mpmath.nstr(2 * periods * mpmath.pi, 80, min_fixed=-1, max_fixed=10)  # P = 2 pi sqrt(a^3 / M), M = 1
    t_float = float(mpmath.mpf(t_exact))

    def build(p):
        return loschmidt.ics.binary(0.5, 0.5, 1, 0.9, precision=p)

    def ref(runner):
        return Reference(build("qd"), math.inf, "exact: after whole periods the orbit is back at its start "
                                                "(initial state in qd; f64 engines also carry the f64 rounding of t)")
    d13 = DEFAULT_TOL["f64"]
    if quick:
        own = (_ladder("f64", [1e-9, 1e-11, d13, 1e-14]) + [dict(precision="f64", method="chain")]
               + [dict(precision="dd"), dict(precision="dd", method="chain")])
        peers = [(DOP_PY, [1e-10, 1e-13], ()), (DOP_NP, [1e-13], ()), (NP_GBS, [1e-10, 1e-13], ()),
                 (NB_GBS, [1e-9, 1e-11, 1e-13], ())]
    else:
        own = (_ladder("f64", [1e-8, 1e-9, 1e-10, 1e-11, 1e-12, d13, 1e-14])
               + [dict(precision="f64", method="chain")]
               + [dict(precision="dd", repeats=1), dict(precision="dd", method="chain", repeats=1)])
        peers = [(DOP_PY, [1e-10], ()), (NB_GBS, [1e-8, 1e-10, 1e-12, 1e-13], ())]
    res = _standard("kepler", f"Kepler binary, e = 0.9, {periods} periods", build, t_exact, t_float, ref, own, peers,
                    out)
    if not quick:
        res["notes"].append("not run over 1000 periods: DOP853 (numpy rhs) and numpy GBS (about 45 s of CPU each; "
                            "both are in the quick run's 20 periods) and qd (about 80 s)")
    else:
        res["notes"].append("quick mode: 20 periods instead of 1000")
    return res


HIERARCHICAL = dict(inner=dict(m1=1, m2=1, a=1, e=0.5), outer=dict(m3=0.5, a=10, e=0.2, inclination=0.5))


def hierarchical(quick: bool, out: Callable[[str], None]) -> dict:
    """A hierarchical triple: inner binary m = 1 + 1, a = 1, e = 0.5; outer body m = 0.5 at a = 10,
    e = 0.2, inclined 0.5 rad (our own scenario). Outer period 2 pi sqrt(1000 / 2.5) = 125.7."""
    t = 100 if quick else 500
    d13 = DEFAULT_TOL["f64"]

    def build(p):
        return loschmidt.ics.hierarchical(precision=p, **HIERARCHICAL)

    ref = lambda r: _reference_runs(r, ("dd", 1e-30), ("dd", 1e-27))  # noqa: E731
    if quick:
        own = (_ladder("f64", [1e-9, 1e-11, d13, 1e-14]) + [dict(precision="f64", method="chain")]
               + [dict(precision="dd"), dict(precision="dd", method="chain")])
        peers = [(DOP_PY, [1e-10], ()), (NP_GBS, [1e-10], ()), (NB_GBS, [1e-9, 1e-11, 1e-13], ())]
    else:
        own = (_ladder("f64", [1e-8, 1e-9, 1e-10, 1e-11, 1e-12, d13, 1e-14], roundtrip_at=(d13,))
               + [dict(precision="f64", method="chain")]
               + [dict(precision="dd", roundtrip=True), dict(precision="dd", method="chain")])
        peers = [(DOP_PY, [1e-10, 1e-13], ()), (DOP_NP, [1e-13], ()), (NP_GBS, [1e-10, 1e-13], ()),
                 (NB_GBS, [1e-8, 1e-10, 1e-12, 1e-13], ())]
    title = f"Hierarchical triple (inner a = 1, e = 0.5; outer a = 10, e = 0.2, i = 0.5), t = {t}"
    res = _standard("hierarchical", title, build, t, float(t), ref, own, peers, out)
    res["notes"].append("qd not run (about 30 s at t = 500)")
    return res


def mpmath_short(quick: bool, out: Callable[[str], None]) -> dict:
    """The start of the Pythagorean problem at 20 to 30 digits: mpmath.odefun against the cheapest
    loschmidt run (dd or qd) with at least as many correct digits."""
    t = "0.25" if quick else "1"
    name = "mpmath"
    runner = LoschmidtRunner(name, lambda p: loschmidt.ics.pythagorean(precision=p), t)
    out(f"  {name}: reference ...")
    ref = _reference_runs(runner, ("qd", 1e-60), ("qd", 1e-50))
    own = (_ladder("f64", [DEFAULT_TOL["f64"]]) + _ladder("dd", [1e-18, 1e-20, 1e-22, 1e-24, 1e-26, 1e-28, 1e-30])
           + _ladder("qd", [1e-28, 1e-30, 1e-32, 1e-34, 1e-36, 1e-40]))
    notes = ["mpmath's dE/E of 0 means below its working precision"]
    rows = [runner.row(reference=ref, **cfg) for cfg in _supported(own, notes)]
    qd_start = runner.system("qd").to_mpmath()
    dps_list = [25] if quick else [20, 25, 30]
    for dps in dps_list:
        out(f"  {name}: mpmath.odefun at {dps} digits ...")
        res, wall, cpu = timed(lambda d=dps: peer_mpmath.integrate(qd_start["masses"], qd_start["positions"],
                                                                   qd_start["velocities"], t, dps=d))
        r = row_base(name, MPMATH, f"mp{dps}", None, None)
        r.update(status=res.status, wall=wall, cpu=cpu, evaluations=res.evaluations, energy_error=res.energy_error,
                 ns_per_eval=1e9 * cpu / res.evaluations)
        with mpmath.workdps(80):
            final = loschmidt.System(qd_start["masses"], res.positions, res.velocities, precision="qd")
        r["digits"], r["digits_capped"] = ref.grade(final)
        rows.append(r)
    # (no eval/f64 column here: runs of a few hundred evaluations are dominated by call overhead)
    mine = [r for r in rows if r["engine"] == "loschmidt"]
    for r in rows:
        if r["engine"] == MPMATH:
            match(r, mine, "digits")
    digits = "-".join(map(str, dps_list))
    return {"title": f"Pythagorean problem to t = {t} at {digits} digits: mpmath.odefun vs loschmidt dd/qd",
            "t": float(t), "reference": ref.how, "reference_digits": ref.digits, "rows": rows,
            "notes": notes}


# ---------------------------------------------------------------------------------------------------
# free-fall batch


def _batch_api():
    fn = getattr(loschmidt, "roundtrip_batch", None)
    if fn is None:
        try:
            from loschmidt.batch import roundtrip_batch as fn  # type: ignore[no-redef]
        except ImportError:
            fn = None
    return fn


def _batch(ens, t: float, threads: int, tol: float | None) -> tuple[dict, float, float, str]:
    """Round trips of every member in dd on ``threads`` threads: per-member arrays, wall seconds,
    process CPU seconds (all threads), and which API ran them."""
    api = _batch_api()
    if api is not None:
        c0, w0 = time.process_time(), time.perf_counter()
        res = api(ens, t, precision="dd", threads=threads, tol=tol)
        wall, cpu = time.perf_counter() - w0, time.process_time() - c0
        data = {"delta": np.asarray(res.delta, dtype=float), "evaluations": np.asarray(res.evaluations),
                "member_time": np.asarray(res.wall_time, dtype=float), "success": np.asarray(res.success)}
        return data, wall, cpu, "loschmidt.batch.roundtrip_batch"
    systems = [ens.system(i, precision="dd") for i in range(len(ens))]

    def one(s):
        rt = loschmidt.roundtrip(s, t, tol=tol)
        ev = rt.forward.evaluations + (rt.backward.evaluations if rt.backward else 0)
        tm = rt.forward.wall_time + (rt.backward.wall_time if rt.backward else 0)
        return rt.delta, ev, tm, rt.success

    c0, w0 = time.process_time(), time.perf_counter()
    with ThreadPoolExecutor(max_workers=threads) as pool:
        got = list(pool.map(one, systems))
    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
    arr = list(zip(*got, strict=True))
    data = {"delta": np.array(arr[0], dtype=float), "evaluations": np.array(arr[1]),
            "member_time": np.array(arr[2], dtype=float), "success": np.array(arr[3])}
    return data, wall, cpu, "loop over loschmidt.roundtrip on a thread pool (no batch API found)"


def _makespan(costs: np.ndarray, threads: int) -> float:
    """Finish time of greedy in-order scheduling (each free worker takes the next index), as the
    engine's pool does (batch.hpp: an atomic counter hands out the next system)."""
    free = [0.0] * threads
    for c in costs:
        k = int(np.argmin(free))
        free[k] += float(c)
    return max(free)


def free_fall(quick: bool, out: Callable[[str], None], budget: float | None = None) -> dict:
    """256 free-fall triples (equal masses, body 3 uniform over the Agekyan-Anosova region, seed 2024)
    as round trips in dd: throughput on 2 threads at t = 100, and thread scaling 1 -> 2.

    Quick: 16 members at t = 5, run on 1 and 2 threads; the 2-thread run is also the throughput.
    Full: scaling on 32 members at t = 10; throughput at t = 100 in chunks of 8 members until
    ``budget`` wall seconds are spent (0: all 256)."""
    members = 256
    t_main = 5.0 if quick else 100.0
    t_scale = 5.0 if quick else 10.0
    n_scale = 16 if quick else 32
    chunk = 8
    budget = 150.0 if budget is None else budget
    ens = loschmidt.ics.free_fall_random(members, seed=2024)
    tol = DEFAULT_TOL["dd"]
    notes = []
    out(f"  free_fall: thread scaling, {n_scale} members, t = {t_scale:g} ...")
    scale = {}
    runs = {}
    load_before = load()
    for threads in (1, 2):
        data, wall, cpu, api = _batch(ens[0:n_scale], t_scale, threads, tol)
        runs[threads] = (data, wall, cpu)
        scale[threads] = {"wall": wall, "cpu": cpu, "cores_used": cpu / wall,
                          "member_time_sum": float(data["member_time"].sum()),
                          "evaluations": int(data["evaluations"].sum())}
    eff = scale[1]["wall"] / (2 * scale[2]["wall"])
    # what two free cores would give: per-member costs from the 1-thread run (its per-member wall
    # times, scaled to its CPU time), scheduled greedily on 2 workers, and the extra CPU work of 2 threads
    costs = runs[1][0]["member_time"] * (runs[1][2] / max(runs[1][0]["member_time"].sum(), 1e-300))
    imbalance = float(costs.sum() / (2 * _makespan(costs, 2)))
    work_ratio = scale[2]["cpu"] / scale[1]["cpu"]
    scaling = {"members": n_scale, "t": t_scale, "threads": scale, "efficiency": eff, "api": api,
               "work_ratio": work_ratio, "imbalance_efficiency": imbalance,
               "estimated_free_efficiency": imbalance / max(work_ratio, 1.0),
               "load_before": load_before, "load_after": load()}
    if quick:
        done = [runs[2][0]]
        wall, cpu_total = runs[2][1], runs[2][2]
    else:
        out(f"  free_fall: throughput, up to {members} members, t = {t_main:g}, 2 threads, budget {budget:g} s ...")
        done = []
        cpu_total = 0.0
        start = time.perf_counter()
        last = 0.0
        for part in ens.chunks(chunk):
            spent = time.perf_counter() - start
            if done and budget > 0 and spent + 0.5 * last > budget:  # expected end at most half a chunk late
                break
            data, w, cpu, api = _batch(part, t_main, 2, tol)
            last = w
            cpu_total += cpu
            done.append(data)
        wall = time.perf_counter() - start
    delta = np.concatenate([d["delta"] for d in done])
    evals = np.concatenate([d["evaluations"] for d in done])
    mtime = np.concatenate([d["member_time"] for d in done])
    ok = np.concatenate([d["success"] for d in done])
    count = len(delta)
    reversible = int(np.count_nonzero(np.isfinite(delta) & (delta <= 1e-10)))
    if quick:
        notes.append(f"quick mode: {count} members at t = {t_main:g} (the target is stated at t = 100)")
    elif count < members:
        notes.append(f"time budget {budget:g} s: {count} of {members} members run (members in generation order; "
                     "--batch-budget 0 runs all)")
    if api.startswith("loop"):
        notes.append("no batch API: " + api)
    cpu_rate = count / cpu_total if cpu_total else None
    order = np.sort(mtime)[::-1]
    top = float(order[: max(1, count // 10)].sum() / mtime.sum()) if mtime.sum() else None
    throughput = {
        "members": count, "requested": members, "t": t_main, "threads": 2, "wall": wall,
        "rate": count / wall, "cpu": cpu_total, "cores_used": cpu_total / wall, "rate_per_cpu_second": cpu_rate,
        "rate_two_free_cores": 2 * cpu_rate if cpu_rate else None,
        "reversible": reversible, "reversible_rate": reversible / wall,
        "reversible_two_free_cores": 2 * reversible / cpu_total if cpu_total else None,
        "succeeded": int(np.count_nonzero(ok)), "evaluations_mean": float(evals.mean()),
        "cpu_per_member": cpu_total / count, "member_time_max": float(mtime.max()),
        "ns_per_eval": 1e9 * cpu_total / float(evals.sum()) if evals.sum() else None,
        "top10_share": top, "api": api, "tol": tol,
        "median_delta": float(np.nanmedian(delta)) if np.any(np.isfinite(delta)) else None,
    }
    return {"title": f"Free-fall triples: round trips in dd (tol {tol:.0e}), batch of {members}",
            "scaling": scaling, "throughput": throughput, "rows": [], "notes": notes}
