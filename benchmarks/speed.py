"""The cost of high precision in the chain method, measured side by side in one run.

Compiles kernels/chain.cpp (free-fall round trips in f64, dd and qd, the Pythagorean problem in
f64, and a reference loop of independent double-double multiply-adds) against the engine headers
and, with ``--baseline REV``, against the headers of a git revision too (``git archive``), then
prints each figure of the speed table as a ratio measured in the same run, with the machine's limit
beside it:

- qd / dd cost per evaluation and per round trip (same members, same span);
- evaluations per accepted step (qd, dd; f64 on the Pythagorean problem);
- the dd cost of one chain evaluation in units of the reference loop's dd multiply-add, beside the
  operation count of an evaluation in the same units (the limit: every operation at the loop's
  rate) and the share of that limit reached;
- the dd round trip of a free-fall triple (CPU time, evaluations) and, with a baseline, the speed-up.

Times are thread CPU time of the compiled program (a loaded machine steals wall time, not cycles);
figures are medians over the members. Members: ``loschmidt.ics.free_fall_random(n, seed=2024)`` when
loschmidt imports, else fixed points of the Agekyan-Anosova region.

    python -m benchmarks.speed [--quick] [--baseline REV] [--members N] [--t-dd T] [--t-qd T]
    python benchmarks/speed.py ...   (the same, as a script)
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tarfile
import tempfile
from pathlib import Path

if __package__:
    from . import machine
else:  # run as a script (python benchmarks/speed.py): import the package from the source tree
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    from benchmarks import machine

__all__ = ["chain_ops", "measure", "figures", "main"]

#: dd flops of one multiply-add of the reference loop (dd_mul 9 + dd_add 20, machine.OPS).
MADD_FLOPS = 29

#: Floating-point instructions per operation as the chain kernel uses them (machine.OPS, with the
#: inverse square root, the same-sign addition and the faster qd division of this revision).
CHAIN_OPS = {
    "dd": {"add": 20, "add_same": 11, "mul": 9, "div": 31, "rsqrt": 31},
    # qd [estimate]: add 81 (the no-cancellation path: 7 TwoSum + 3 adds + renormalization with 4
    # TwoSum and up to 4 FastTwoSum); mul 107; div 310 (2 dd divisions, qd*dd product, qd add,
    # conversions, join); rsqrt 330 (dd rsqrt, qd*dd and qd products, qd+double, dd product, join).
    "qd": {"add": 81, "add_same": 81, "mul": 107, "div": 310, "rsqrt": 330},
}


def chain_ops(rows: float, n: int = 3) -> dict:
    """Operations of one chain evaluation of n bodies (kick + drift of the regularized leapfrog, and
    the tableau's share at ``rows`` rows of the consecutive sequence: row j costs j evaluations and
    (j - 1) * dim * (2 add + 1 mul) of extrapolation), counted from chain_coordinates.hpp and
    leapfrog.hpp. Returns counts per kind."""
    pairs = n * (n - 1) // 2
    links = n - 1
    far = max(0, pairs - links)  # pairs not adjacent in the chain need a sum of links
    c = {"add": 0.0, "add_same": 0.0, "mul": 0.0, "div": 0.0, "rsqrt": 0.0}
    # kick: X = X0 + dX; per pair: separation (far), r^2, rsqrt, r^-3, U, m_j q, m_i q, accelerations
    c["add"] += 3 * links + 3 * far + pairs * 6 + 3 * links  # + link accelerations A
    c["add_same"] += pairs * (2 + 1)
    c["mul"] += pairs * (3 + 2 + 2 + 2 + 6)
    c["rsqrt"] += pairs
    c["div"] += 1  # dt' = h / U
    c["add"] += 3 * links
    c["mul"] += 3 * links  # dW += dt' A
    # drift: W = W0 + dW; kinetic energy (Lagrange's identity); rate; dt; t; dX += dt W
    c["add"] += 3 * links + 3 * far + 2 + 1 + 3 * links
    c["add_same"] += pairs * 3 + n
    c["mul"] += pairs * 4 + n + 1 + 3 * links
    c["div"] += 1
    # tableau
    dim = 6 * links + 3
    j = max(1.0, rows)
    share = (j - 1) / j  # per evaluation, averaged over a step of j rows ~ j^2/2 evaluations
    c["add"] += 2 * dim * share
    c["mul"] += dim * share
    return c


def flops(counts: dict, prec: str) -> float:
    o = CHAIN_OPS[prec]
    return sum(counts[k] * o[k] for k in counts)


def _members(n: int) -> list[tuple[float, float]]:
    try:
        from loschmidt import ics

        ens = ics.free_fall_random(n, seed=2024)
        return [(float(x), float(y)) for x, y in zip(ens.params["x"], ens.params["y"], strict=True)]
    except Exception:  # noqa: BLE001 - any import or API problem: fixed points instead
        pts = [(0.2, 0.5), (0.1, 0.3), (0.3, 0.4), (0.05, 0.6), (0.25, 0.2), (0.4, 0.5)]
        return pts[:n]


def _headers_at(rev: str, root: Path) -> Path:
    """cpp/include of git revision ``rev``, extracted into a temporary folder."""
    out = Path(tempfile.mkdtemp(prefix="loschmidt-speed-"))
    with tempfile.TemporaryFile() as tmp:
        subprocess.run(["git", "-C", str(root), "archive", rev, "cpp/include"], stdout=tmp, check=True)
        tmp.seek(0)
        with tarfile.open(fileobj=tmp) as tar:
            tar.extractall(out)  # noqa: S202 - our own repository
    return out / "cpp" / "include"


def _compile(include: Path) -> Path:
    base = ["-O3", "-std=c++17", "-ffp-contract=off", "-fno-fast-math", "-mfma", "-DLOSCHMIDT_HW_FMA=1"]
    headers = sorted(include.rglob("*.hpp"))
    exe, how = machine._compile(machine.KERNELS / "chain.cpp", base + ["-I", str(include)], headers)
    if exe is None:
        raise RuntimeError(how)
    return exe


def measure(include: Path, members: list[tuple[float, float]], t_dd: float, t_qd: float, t_f64: float) -> dict:
    """Run the compiled kernel (one process) and return its JSON."""
    exe = _compile(include)
    args = [str(exe), repr(t_dd), repr(t_qd), repr(t_f64)] + [repr(v) for p in members for v in p]
    proc = subprocess.run(args, capture_output=True, text=True, check=True)
    return json.loads(proc.stdout)


def figures(d: dict, t_dd: float, t_qd: float) -> dict:
    runs = d["runs"]

    def sel(prec: str, t: float) -> list[dict]:
        return [r for r in runs if r["precision"] == prec and r["t"] == t]

    out: dict = {"dd_madd_ns": d["dd_madd_ns"]}
    dq, qq = sel("dd", t_qd), sel("qd", t_qd)
    if qq:
        per_eval = [(q["cpu"] / q["evaluations"]) / (a["cpu"] / a["evaluations"]) for a, q in zip(dq, qq, strict=True)]
        per_rt = [q["cpu"] / a["cpu"] for a, q in zip(dq, qq, strict=True)]
        out["qd_dd_eval"] = statistics.median(per_eval)
        out["qd_dd_roundtrip"] = statistics.median(per_rt)
        out["qd_evals_per_step"] = sum(q["evaluations"] for q in qq) / sum(q["steps"] for q in qq)
        out["dd_evals_per_step_tqd"] = sum(a["evaluations"] for a in dq) / sum(a["steps"] for a in dq)
        out["qd_delta_max"] = max(q["delta"] for q in qq)
    dd = sel("dd", t_dd)
    if dd:
        ns = [1e9 * r["cpu"] / r["evaluations"] for r in dd]
        out["dd_ns_per_eval"] = statistics.median(ns)
        out["dd_madds_per_eval"] = out["dd_ns_per_eval"] / d["dd_madd_ns"]
        out["dd_evals_per_step"] = sum(r["evaluations"] for r in dd) / sum(r["steps"] for r in dd)
        out["dd_roundtrip_cpu"] = statistics.median(r["cpu"] for r in dd)
        out["dd_roundtrip_evals"] = statistics.median(r["evaluations"] for r in dd)
        out["dd_delta_max"] = max(r["delta"] for r in dd)
        out["dd_ok"] = all(r["success"] for r in dd)
        rows = _rows(out["dd_evals_per_step"])
        out["dd_limit_madds"] = flops(chain_ops(rows), "dd") / MADD_FLOPS
        out["dd_share_of_limit"] = out["dd_limit_madds"] / out["dd_madds_per_eval"]
    if qq:
        out["qd_dd_limit_eval"] = flops(chain_ops(_rows(out["qd_evals_per_step"])), "qd") / flops(
            chain_ops(_rows(out["dd_evals_per_step_tqd"])), "dd")
    f = sel("f64", t_dd)
    if f:
        out["f64_evals_per_step_freefall"] = sum(r["evaluations"] for r in f) / sum(r["steps"] for r in f)
    p = d.get("pythagorean")
    if p:
        out["f64_pyth_evals_per_step"] = p["evaluations"] / p["steps"]
        out["f64_pyth_evals"] = p["evaluations"]
        out["f64_pyth_cpu"] = p["cpu"]
    return out


def _rows(evals_per_step: float) -> float:
    """Rows j of the consecutive sequence with j (j + 1) / 2 evaluations per step."""
    return (-1 + (1 + 8 * evals_per_step) ** 0.5) / 2


TARGETS = [
    ("qd / dd cost per evaluation", "qd_dd_eval", "<= 6", "{:.2f}", "qd_dd_limit_eval"),
    ("qd / dd cost per round trip (t = T_QD)", "qd_dd_roundtrip", "<= 20", "{:.1f}", None),
    ("qd evaluations per accepted step", "qd_evals_per_step", "measured optimum", "{:.0f}", None),
    ("dd evaluations per accepted step (t = T_DD)", "dd_evals_per_step", "measured optimum", "{:.0f}", None),
    ("dd cost per chain evaluation [dd multiply-adds]", "dd_madds_per_eval", "<= 200", "{:.0f}", "dd_limit_madds"),
    ("dd round trip (t = T_DD), CPU seconds, median", "dd_roundtrip_cpu", ">= 3.5x faster", "{:.3f}", None),
    ("dd round trip (t = T_DD), evaluations, median", "dd_roundtrip_evals", "-", "{:.3g}", None),
    ("f64 chain evaluations per step, Pythagorean (t = 70)", "f64_pyth_evals_per_step", "order minimising work",
     "{:.1f}", None),
    ("f64 chain evaluations, Pythagorean (t = 70)", "f64_pyth_evals", "-", "{:.0f}", None),
]


def report(after: dict, before: dict | None, t_dd: float, t_qd: float, out=print) -> None:
    out(f"reference: dd multiply-add {after['dd_madd_ns']:.2f} ns"
        + (f" (baseline build: {before['dd_madd_ns']:.2f} ns)" if before else ""))
    head = f"{'figure':58s} {'before':>10s} {'after':>10s} {'ratio':>7s} {'target':>22s} {'limit':>8s}"
    out(head)
    out("-" * len(head))
    for name, key, target, fmt, lim in TARGETS:
        name = name.replace("T_QD", f"{t_qd:g}").replace("T_DD", f"{t_dd:g}")
        a = after.get(key)
        b = before.get(key) if before else None
        if a is None:
            continue
        ratio = f"{b / a:.2f}x" if (b is not None and a) else ""
        limit = fmt.format(after[lim]) if lim and lim in after else ""
        out(f"{name:58s} {fmt.format(b) if b is not None else '':>10s} {fmt.format(a):>10s} {ratio:>7s} "
            f"{target:>22s} {limit:>8s}")
    if "dd_share_of_limit" in after:
        out(f"dd share of the operation-count limit reached: {100 * after['dd_share_of_limit']:.0f}% "
            f"({after['dd_limit_madds']:.0f} multiply-adds of work per evaluation at the loop's rate)")
    out("precision beyond qd: not in this revision (no figure)")


def main(argv: list[str] | None = None) -> dict:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.speed", description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="3 members, dd to t = 10, qd to t = 2")
    ap.add_argument("--baseline", metavar="REV", help="also measure the headers of this git revision")
    ap.add_argument("--members", type=int)
    ap.add_argument("--t-dd", type=float)
    ap.add_argument("--t-qd", type=float)
    ap.add_argument("--json", metavar="PATH")
    a = ap.parse_args(argv)
    members = a.members or (3 if a.quick else 4)
    t_dd = a.t_dd or (10.0 if a.quick else 100.0)
    t_qd = a.t_qd or (2.0 if a.quick else 20.0)
    root = machine.engine_root()
    if root is None:
        raise SystemExit("benchmarks/speed.py needs the source tree (cpp/include beside benchmarks/)")
    pts = _members(members)
    print(f"members: {len(pts)} free-fall triples; dd/f64 round trips to t = {t_dd:g}, qd/dd to t = {t_qd:g}, "
          f"Pythagorean f64 to t = 70; CPU time of one thread", flush=True)
    before = None
    raw = {}
    if a.baseline:
        print(f"baseline {a.baseline} ...", flush=True)
        raw["before"] = measure(_headers_at(a.baseline, root), pts, t_dd, t_qd, 70.0)
        before = figures(raw["before"], t_dd, t_qd)
    print("this tree ...", flush=True)
    raw["after"] = measure(root / "cpp" / "include", pts, t_dd, t_qd, 70.0)
    after = figures(raw["after"], t_dd, t_qd)
    report(after, before, t_dd, t_qd)
    res = {"members": pts, "t_dd": t_dd, "t_qd": t_qd, "before": before, "after": after, "raw": raw}
    if a.json:
        Path(a.json).write_text(json.dumps(res, indent=1))
    return res


if __name__ == "__main__":
    main()
