"""Printed tables and the target verdicts of the benchmark."""

from __future__ import annotations

from typing import Any

from . import TARGETS as _TARGETS
from .common import DEFAULT_TOL, fmt_ns, fmt_ratio, fmt_sci, fmt_time, table


def machine_lines(m: dict) -> list[str]:
    lines = []
    pk = m.get("peak")
    if pk:
        lines.append(
            f"peak (thread CPU time): scalar FMA {pk['scalar_fma_per_s']:.2e}/s, 4-wide FMA "
            f"{pk['vector_fma_per_s']:.2e} doubles/s, division {pk['div_per_s']:.2e}/s (latency "
            f"{pk['div_latency_ns']:.1f} ns), sqrt {pk['sqrt_per_s']:.2e}/s (latency {pk['sqrt_latency_ns']:.1f} ns)")
    k = m.get("kernels")
    if k and "ops" in k:
        parts = []
        for prec in ("f64", "dd", "qd"):
            o = k["ops"][prec]
            parts.append(f"{prec} + {o['add_ns']:.3g} * {o['mul_ns']:.3g} / {o['div_ns']:.3g} sqrt {o['sqrt_ns']:.3g}")
        lines.append("single operations, ns (4 independent chains): " + " | ".join(parts))
    lim = m.get("limits")
    if lim:
        lines.append("one force evaluation of 3 bodies: operation count (FP instructions) and the limit at the "
                     "scalar FMA rate, vs the engine's kernels")
        lines.append(f"  {'prec':4}  {'D':>1}  {'ops/pair':>8}  {'force ops':>9}  {'limit':>7}  {'kernel':>7}  "
                     f"{'subst. ops':>10}  {'limit':>7}  {'substep':>7}")
        for prec in ("f64", "dd", "qd"):
            for dims in (2, 3):
                d = lim[prec][f"D{dims}"]
                kk = (k or {}).get(prec, {}).get(f"D{dims}", {})
                lines.append(
                    f"  {prec:4}  {dims:>1}  {d['ops_per_pair']:>8}  {d['force_ops']:>9}  {fmt_ns(d['force_limit_ns']):>7}  "
                    f"{fmt_ns(kk.get('force_ns')):>7}  {d['substep_ops']:>10}  {fmt_ns(d['substep_limit_ns']):>7}  "
                    f"{fmt_ns(kk.get('substep_ns')):>7}")
        lines.append("  (f64 limit: the larger of the instruction count and 3 divisions + 3 square roots; "
                     "'substep' = force + the Stormer kick/drift update, per evaluation)")
    for note in m.get("notes", []):
        lines.append(f"  note: {note}")
    return lines


def problem_lines(res: dict) -> list[str]:
    lines = [res["title"]]
    if res.get("reference"):
        lines.append(f"reference: {res['reference']}")
    if res.get("rows"):
        lines.extend(table(res["rows"]))
    if "throughput" in res:
        sc, tp = res["scaling"], res["throughput"]
        th = sc["threads"]
        lines.append(f"thread scaling ({sc['members']} members, t = {sc['t']:g}, {sc['api']}):")
        lines.append(f"  1 thread {fmt_time(th[1]['wall'])}, 2 threads {fmt_time(th[2]['wall'])}: speed-up "
                     f"{th[1]['wall'] / th[2]['wall']:.2f}, efficiency {100 * sc['efficiency']:.0f}% "
                     f"(load average {_load(sc['load_before'])} -> {_load(sc['load_after'])})")
        lines.append(f"  cores obtained (process CPU / wall): {th[1]['cores_used']:.2f} with 1 thread, "
                     f"{th[2]['cores_used']:.2f} with 2; CPU work at 2 threads / at 1: {sc['work_ratio']:.3f}")
        lines.append(f"  load-free estimate: greedy scheduling of the measured per-member costs on 2 workers gives "
                     f"{100 * sc['imbalance_efficiency']:.0f}% (load imbalance), with the CPU work ratio "
                     f"{100 * sc['estimated_free_efficiency']:.0f}%")
        lines.append(f"throughput ({tp['members']} of {tp['requested']} members, t = {tp['t']:g}, 2 threads): "
                     f"{tp['rate']:.3g} round trips/s over {fmt_time(tp['wall'])} wall, {tp['cores_used']:.2f} cores "
                     f"obtained; {tp['rate_per_cpu_second']:.3g} per CPU second, so {tp['rate_two_free_cores']:.3g}/s "
                     f"on 2 free cores at perfect scaling")
        lines.append(f"  delta <= 1e-10 for {tp['reversible']} of {tp['members']} (median delta {fmt_sci(tp['median_delta'])}); "
                     f"per round trip {tp['evaluations_mean']:.3g} force evaluations x {fmt_ns(tp['ns_per_eval'])} = "
                     f"{fmt_time(tp['cpu_per_member'])} CPU; the costliest 10% of members take "
                     f"{100 * tp['top10_share']:.0f}% of the time")
    for note in res.get("notes", []):
        lines.append(f"note: {note}")
    lines.append(f"({res.get('seconds', 0):.0f} s)")
    return lines


# ---------------------------------------------------------------------------------------------------
# targets


def _find(rows: list[dict], **want: Any) -> dict | None:
    for r in rows:
        if all(r.get(k) == v for k, v in want.items()):
            return r
    return None


def _per_eval_rows(results: dict) -> tuple[str, dict, dict, dict] | None:
    """(problem, f64, dd, qd) default-tolerance gbs rows of the first problem that has all three."""
    for name in ("pythagorean", "figure_eight"):
        p = results["problems"].get(name)
        if not p:
            continue
        got = [_find(p["rows"], engine="loschmidt", method="gbs", precision=q, tol=DEFAULT_TOL[q])
               for q in ("f64", "dd", "qd")]
        if all(g is not None and g["ns_per_eval"] for g in got):
            return name, got[0], got[1], got[2]
    return None


def targets(results: dict) -> list[dict]:
    probs = results["problems"]
    mach = results.get("machine", {})
    out = []

    def add(key: str, value: str, met: bool | None, detail: str) -> None:
        out.append({"key": key, "target": _TARGETS[key], "value": value, "met": met, "detail": detail})

    # 1. round trip in dd
    p = probs.get("pythagorean")
    if p:
        r = _find(p["rows"], engine="loschmidt", precision="dd", method="gbs", tol=DEFAULT_TOL["dd"])
        if r and r["rt_delta"] is not None:
            met = r["rt_delta"] <= 1e-15 and r["rt_cpu"] <= 0.15
            evals = r["rt_evaluations"] or r["evaluations"]
            ok = [q for q in p["rows"] if q["engine"] == "loschmidt" and q["precision"] == "dd"
                  and q["rt_delta"] is not None and q["rt_delta"] <= 1e-15]
            best = min(ok, key=lambda q: q["rt_cpu"]) if ok else None
            detail = (f"default tol {DEFAULT_TOL['dd']:.0e}: delta {fmt_sci(r['rt_delta'])}, both legs "
                      f"{fmt_time(r['rt_cpu'])} CPU ({fmt_time(r['rt_wall'])} wall); {evals} force evaluations "
                      f"x {fmt_ns(r['ns_per_eval'])} per evaluation. ")
            if best is not None:
                detail += (f"Cheapest dd setting with delta <= 1e-15: {best['method']} tol {best['tol']:.0e}, "
                           f"{fmt_time(best['rt_cpu'])} CPU (delta {fmt_sci(best['rt_delta'])}). ")
            kern = (mach.get("kernels") or {}).get("dd", {}).get("D2")
            if kern:
                detail += (f"Of the {fmt_ns(r['ns_per_eval'])} per evaluation the force kernel alone is "
                           f"{fmt_ns(kern['force_ns'])}, force + substep update {fmt_ns(kern['substep_ns'])}; the rest is "
                           f"tableau and step control. ")
            if not met and r["rt_cpu"] > 0.15:
                need = 0.15 / max(evals, 1) * 1e9
                detail += (f"0.15 s at this evaluation count needs {fmt_ns(need)} per evaluation, or at this cost "
                           f"per evaluation {int(0.15 / (r['ns_per_eval'] * 1e-9)):d} evaluations.")
            add("roundtrip_dd", f"delta {fmt_sci(r['rt_delta'])} in {fmt_time(r['rt_cpu'])}", met, detail.strip())
    # 2, 3. cost per evaluation
    pe = _per_eval_rows(results)
    if pe:
        name, f, d, q = pe
        kern = mach.get("kernels", {})
        lim = mach.get("limits", {})
        dims = 2  # the problems above are planar: the engine integrates them in two dimensions
        for key, row, bound in (("dd_per_eval", d, 8.0), ("qd_per_eval", q, 60.0)):
            prec = row["precision"]
            ratio = row["ns_per_eval"] / f["ns_per_eval"]
            detail = (f"{name}, default tolerances: {fmt_ns(row['ns_per_eval'])} vs {fmt_ns(f['ns_per_eval'])} per "
                      f"evaluation (CPU time of integrate / evaluations).")
            if kern.get(prec) and kern.get("f64"):
                kf, kp = kern["f64"][f"D{dims}"], kern[prec][f"D{dims}"]
                detail += (f" Force kernel alone {fmt_ns(kp['force_ns'])} vs {fmt_ns(kf['force_ns'])} "
                           f"({kp['force_ns'] / kf['force_ns']:.1f}x); with the substep update "
                           f"{fmt_ns(kp['substep_ns'])} vs {fmt_ns(kf['substep_ns'])} "
                           f"({kp['substep_ns'] / kf['substep_ns']:.1f}x); tableau and control take the rest "
                           f"({_rest(row['ns_per_eval'], kp['substep_ns'])} vs {_rest(f['ns_per_eval'], kf['substep_ns'])}).")
            if lim:
                lf, lp = lim["f64"][f"D{dims}"], lim[prec][f"D{dims}"]
                detail += (f" Operation-count floor: {lp['substep_ops']} vs {lf['substep_ops']} instructions per "
                           f"evaluation ({lp['substep_ops'] / lf['substep_ops']:.0f}x); at the limits "
                           f"{fmt_ns(lp['substep_limit_ns'])} vs {fmt_ns(lf['substep_limit_ns'])} "
                           f"({lp['substep_limit_ns'] / lf['substep_limit_ns']:.0f}x).")
            if prec == "qd" and kern.get("ops"):
                o = kern["ops"]["qd"]
                detail += (f" qd single operations: add {o['add_ns']:.0f} ns, mul {o['mul_ns']:.0f} ns, div "
                           f"{o['div_ns']:.0f} ns, sqrt {o['sqrt_ns']:.0f} ns (each pair needs one sqrt and one "
                           f"division).")
            add(key, fmt_ratio(ratio), ratio <= bound, detail)
    # 4. DOP853
    dop = [(n, r) for n, p in probs.items() for r in p.get("rows", []) if r["engine"].startswith("DOP853")]
    if dop:
        got = [(n, r) for n, r in dop if r["speedup"] is not None]
        missing = [(n, r) for n, r in dop if r["speedup"] is None]
        if got:
            worst = min(got, key=lambda nr: nr[1]["speedup"])
            per = {}
            for n, r in got:
                per.setdefault(n, []).append(r["speedup"])
            detail = "; ".join(f"{n} {fmt_ratio(min(v))}-{fmt_ratio(max(v))}" for n, v in per.items())
            detail = (f"worst case {worst[0]} {worst[1]['engine']} tol {worst[1]['tol']:.0e} "
                      f"(vs loschmidt {worst[1]['matched']}); per problem min-max: {detail}")
            if missing:
                detail += f"; {len(missing)} DOP853 run(s) more accurate than every loschmidt f64 run, not matched"
            add("vs_dop853", fmt_ratio(worst[1]["speedup"]), worst[1]["speedup"] >= 100, detail)
    # 5. mpmath
    p = probs.get("mpmath")
    if p:
        got = [r for r in p["rows"] if r["engine"] == "mpmath.odefun" and r["speedup"] is not None]
        if got:
            worst = min(got, key=lambda r: r["speedup"])
            detail = "; ".join(f"{r['precision']}: {r['digits']:.1f} digits in {fmt_time(r['cpu'])} vs loschmidt "
                               f"{r['matched']} -> {fmt_ratio(r['speedup'])}" for r in got)
            add("vs_mpmath", fmt_ratio(worst["speedup"]), worst["speedup"] >= 1000, detail)
    # 6, 7. free fall
    p = probs.get("free_fall")
    if p:
        tp, sc = p["throughput"], p["scaling"]
        full = tp["t"] == 100
        detail = (f"{tp['members']} members at t = {tp['t']:g}: {tp['rate']:.3g}/s measured ({tp['cores_used']:.2f} cores "
                  f"obtained on the shared machine); {tp['rate_per_cpu_second']:.3g} per CPU second -> "
                  f"{tp['rate_two_free_cores']:.3g}/s on 2 free cores at perfect scaling (the verdict's figure); delta <= "
                  f"1e-10 for {tp['reversible']}/{tp['members']}. Per round trip {tp['evaluations_mean']:.3g} evaluations x "
                  f"{fmt_ns(tp['ns_per_eval'])} = {fmt_time(tp['cpu_per_member'])} CPU; 10/s on 2 cores needs 0.2 s "
                  f"per round trip per core.")
        if not full:
            detail += " Quick mode: not the t = 100 of the target."
        add("free_fall_rate", f"{tp['rate_two_free_cores']:.3g}/s", (tp["rate_two_free_cores"] >= 10) if full else None,
            detail)
        th = sc["threads"]
        detail = (f"{sc['members']} members, t = {sc['t']:g}: 1 thread {fmt_time(th[1]['wall'])}, 2 threads "
                  f"{fmt_time(th[2]['wall'])} wall; cores obtained {th[1]['cores_used']:.2f} and "
                  f"{th[2]['cores_used']:.2f}; CPU work ratio 2/1 threads {sc['work_ratio']:.3f}; load average "
                  f"{_load(sc['load_before'])} -> {_load(sc['load_after'])} on 2 cores shared with other work; {sc['api']}. "
                  f"Load-free estimate from the per-member costs: {100 * sc['imbalance_efficiency']:.0f}% "
                  f"(greedy in-order scheduling on 2 workers), {100 * sc['estimated_free_efficiency']:.0f}% with the work ratio")
        add("parallel_efficiency", f"{100 * sc['efficiency']:.0f}%", sc["efficiency"] >= 0.9, detail)
    return out


def _rest(total: float, part: float) -> str:
    d = total - part
    return fmt_ns(d) if d > 0.05 * total else "~0, within the noise of the two measurements"


def _load(x: Any) -> str:
    return "?" if x is None else f"{float(x):.1f}"


def target_lines(results: dict) -> list[str]:
    lines = ["== targets (met / not met: findings, not failures) =="]
    for t in results["targets"]:
        verdict = {True: "MET", False: "NOT MET", None: "n/a"}[t["met"]]
        lines.append(f"[{verdict:>7}] {t['target']}: {t['value']}")
        lines.append(f"          {t['detail']}")
    measured = {t["key"] for t in results["targets"]}
    for key, text in _TARGETS.items():
        if key not in measured:
            lines.append(f"[    n/a] {text}: not measured in this run")
    return lines

