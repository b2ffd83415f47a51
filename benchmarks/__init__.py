"""loschmidt's benchmark suite: loschmidt side by side with the engines a user would otherwise use,
measured in one run, every speed figure a ratio against a peer in that run.

    python -m benchmarks [--quick] [--json PATH] [--only NAME[,NAME...]]

or, from Python (the CLI's ``loschmidt bench`` does this when the source tree is present):

    import benchmarks
    results = benchmarks.run(quick=True, out=print)

Peers: scipy's solve_ivp DOP853 with a pure-Python and a numpy right-hand side (peer_scipy.py),
mpmath.odefun on short problems (peer_mpmath.py), a plain numpy Gragg-Bulirsch-Stoer engine
(peer_numpy_gbs.py) and, when numba is importable, the same engine compiled (peer_numba_gbs.py).
Problems: problems.py. Machine limit: machine.py. Not part of the test run, not installed with the
wheel.
"""

from __future__ import annotations

import datetime
import os
import math
import platform
import sys
import time
from typing import Any, Callable

__all__ = ["run", "PROBLEMS", "TARGETS"]

#: Problem names in run order (``only`` selects among them; "machine" is the peak-rate kernel).
PROBLEMS = ("machine", "pythagorean", "figure_eight", "kepler", "hierarchical", "free_fall", "mpmath")

#: The targets of the benchmark issue, each reported met / not met (a finding, not a failure).
TARGETS = {
    "roundtrip_dd": "Pythagorean round trip in dd: delta <= 1e-15 in <= 0.15 s both ways, one core",
    "dd_per_eval": "dd <= 8x f64 per force evaluation",
    "qd_per_eval": "qd <= 60x f64 per force evaluation",
    "vs_dop853": ">= 100x faster than DOP853 at equal energy error, f64",
    "vs_mpmath": ">= 1000x faster than mpmath.odefun at equal digits",
    "free_fall_rate": ">= 10 free-fall round trips per second in dd on 2 cores (t = 100, delta <= 1e-10)",
    "parallel_efficiency": "parallel efficiency >= 90% at 2 threads",
}


def _versions() -> dict:
    import mpmath
    import numpy
    import scipy

    import loschmidt

    from . import peer_numba_gbs

    v = {"python": platform.python_version(), "numpy": numpy.__version__, "scipy": scipy.__version__,
         "mpmath": mpmath.__version__, "loschmidt": loschmidt.__version__}
    if peer_numba_gbs.available():
        v["numba"] = peer_numba_gbs.numba.__version__
    return v


def _cpu() -> str:
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def run(quick: bool = False, out: Callable[[str], None] = print, only: Any = None,
        batch_budget: float | None = None) -> dict:
    """Run the suite (``quick``: under ~2 minutes; full: under ~10 on an idle 2-core machine) and
    return the results as a JSON-friendly dict; ``out`` receives the printed lines. ``only`` is a
    problem name or a list of them (see PROBLEMS); ``batch_budget`` caps the seconds of the free-fall
    throughput run (0: run all 256 members)."""
    import loschmidt

    from . import common, machine, peer_numba_gbs, problems, report

    names = _selection(only)
    t_start = time.perf_counter()
    results: dict = {
        "meta": {
            "mode": "quick" if quick else "full",
            "date": datetime.datetime.now().isoformat(timespec="seconds"),
            "cpu": _cpu(), "platform": platform.platform(), "versions": _versions(),
            "hardware_fma": bool(getattr(loschmidt._core, "hardware_fma", False)),
            "load_start": common.load(),
        },
        "problems": {},
    }
    out(f"loschmidt benchmarks ({results['meta']['mode']}): {results['meta']['cpu']}, "
        f"load average {results['meta']['load_start']:.1f} on {os.cpu_count()} cores")
    if "machine" in names:
        out("machine: compiling and running the peak-rate and force kernels ...")
        try:
            results["machine"] = machine.measure(results["meta"]["hardware_fma"])
        except Exception as exc:  # a broken compiler must not stop the suite
            results["machine"] = {"notes": [f"machine kernels failed: {exc}"]}
        for line in report.machine_lines(results["machine"]):
            out(line)
    if peer_numba_gbs.available() and any(n in names for n in ("pythagorean", "figure_eight", "kepler", "hierarchical")):
        out("numba: compiling the GBS peer ...")
        results["meta"]["numba_compile_s"] = peer_numba_gbs.compile()
        out(f"numba: compiled in {results['meta']['numba_compile_s']:.1f} s (not counted in its times)")
    runners = {
        "pythagorean": problems.pythagorean, "figure_eight": problems.figure_eight, "kepler": problems.kepler,
        "hierarchical": problems.hierarchical, "mpmath": problems.mpmath_short,
    }
    for name in PROBLEMS[1:]:
        if name not in names:
            continue
        t0 = time.perf_counter()
        out("")
        out(f"== {name} ==")
        if name == "free_fall":
            res = problems.free_fall(quick, out, batch_budget)
        else:
            res = runners[name](quick, out)
        res["seconds"] = time.perf_counter() - t0
        results["problems"][name] = res
        for line in report.problem_lines(res):
            out(line)
    results["targets"] = report.targets(results)
    results["meta"]["seconds"] = time.perf_counter() - t_start
    results["meta"]["load_end"] = common.load()
    out("")
    for line in report.target_lines(results):
        out(line)
    out(f"total {results['meta']['seconds']:.0f} s, load average at the end {results['meta']['load_end']}")
    return _clean(results)


def _selection(only: Any) -> list[str]:
    if only is None:
        return list(PROBLEMS)
    if isinstance(only, str):
        only = [s.strip() for s in only.split(",") if s.strip()]
    bad = [n for n in only if n not in PROBLEMS]
    if bad:
        raise ValueError(f"only: unknown problem(s) {bad}; expected some of {PROBLEMS}")
    return list(only)


def _clean(x: Any) -> Any:
    """JSON-friendly: numpy scalars to Python, non-finite floats to strings."""
    import numpy as np

    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return str(x)
    return x


def main(argv: list[str] | None = None) -> int:
    """The command line (``python -m benchmarks``)."""
    import argparse
    import json
    from pathlib import Path

    parser = argparse.ArgumentParser(prog="python -m benchmarks", description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="shorter problems (about 2 minutes)")
    parser.add_argument("--json", metavar="PATH", help="write the results here (default: benchmarks/results/)")
    parser.add_argument("--only", metavar="NAME", action="append",
                        help=f"run only these problems (repeat or comma-separate): {', '.join(PROBLEMS)}")
    parser.add_argument("--batch-budget", type=float, default=None, metavar="SECONDS",
                        help="cap on the free-fall throughput run (default 150 s full, 30 s quick; 0: all members)")
    args = parser.parse_args(argv)
    only = None
    if args.only:
        only = [s.strip() for part in args.only for s in part.split(",") if s.strip()]
    try:
        results = run(quick=args.quick, out=lambda s: print(s, flush=True), only=only, batch_budget=args.batch_budget)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    path = Path(args.json) if args.json else (Path(__file__).resolve().parent / "results" /
                                              f"bench-{results['meta']['mode']}.json")
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(results, indent=1))
    print(f"results written to {path}")
    return 0
