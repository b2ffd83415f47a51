"""Acceptance run of the sweep engine at scale: a free-fall round-trip sweep of 1,022 members
(the default 30 x 48 grid).

Three stores of the same definition (free-fall grid of the Agekyan & Anosova 1967 region,
double-double, chain method, round trips over t):
  threads      Sweep on the local C++ thread pool, uninterrupted;
  interrupted  the same sweep in a child process that is killed with SIGKILL part way (no chance to
               clean up), then SIGINT-interrupted on a second attempt, then resumed to the end;
  dask         the same sweep on a dask.distributed LocalCluster (2 worker processes x 1 thread,
               loopback).
The three tables must be identical (every column but wall_time, bit for bit, same members, no
duplicates). Prints a table of what each run did and the verdict; exits 1 on any difference.

Not part of the test run (minutes). Usage:
  python benchmarks/acceptance_sweep.py [--nx 30 --ny 48] [--t 10] [--out DIR] [--no-dask]
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

CHILD = """
import sys, loschmidt
from loschmidt import ics
nx, ny, t, store, chunk = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3], sys.argv[4], int(sys.argv[5])
ens = ics.free_fall_grid(nx, ny)
try:
    loschmidt.Sweep(ens, task="roundtrip", store=store, t=t, precision="dd", method="chain",
                    chunk_size=chunk).run(progress=False)
except KeyboardInterrupt:
    sys.exit(130)
"""


def _sweep(ens, store, args, **kw):
    import loschmidt

    return loschmidt.Sweep(ens, task="roundtrip", store=store, t=args.t, precision="dd", method="chain",
                           chunk_size=args.chunk_size, **kw)


def _chunks(store: Path) -> int:
    return len(list((store / "chunks").glob("*.parquet")))


def _child(args, store: Path) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", CHILD, str(args.nx), str(args.ny), args.t, str(store),
                             str(args.chunk_size)])


def _wait_for_chunks(store: Path, count: int, proc: subprocess.Popen, limit: float = 3600) -> None:
    start = time.monotonic()
    while _chunks(store) < count and proc.poll() is None and time.monotonic() - start < limit:
        time.sleep(0.2)


def _compare(a, b) -> list[str]:
    problems = []
    if len(a) != len(b):
        return [f"row counts {len(a)} and {len(b)}"]
    if a["member"].duplicated().any() or b["member"].duplicated().any():
        problems.append("duplicated members")
    for col in a.columns:
        if col == "wall_time":
            continue
        x, y = a[col].to_numpy(), b[col].to_numpy()
        if x.dtype == object:
            same = all((np.array_equal(np.asarray(p), np.asarray(q), equal_nan=True) if not isinstance(p, str) else p == q)
                       for p, q in zip(x, y))
        else:
            same = np.array_equal(x, y, equal_nan=True)
        if not same:
            problems.append(f"column {col!r} differs")
    return problems


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--nx", type=int, default=30)
    ap.add_argument("--ny", type=int, default=48)
    ap.add_argument("--t", default="10")
    ap.add_argument("--chunk-size", type=int, default=25)
    ap.add_argument("--out", default=None, help="where the stores go (default: a temporary directory)")
    ap.add_argument("--no-dask", action="store_true")
    args = ap.parse_args()

    import loschmidt
    from loschmidt import ics

    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="loschmidt-acceptance-"))
    out.mkdir(parents=True, exist_ok=True)
    ens = ics.free_fall_grid(args.nx, args.ny)
    chunks = -(-len(ens) // args.chunk_size)
    print(f"free-fall grid {args.nx} x {args.ny}: {len(ens)} members in {chunks} chunks of {args.chunk_size}; "
          f"round trips over t = {args.t} in dd, method chain; stores in {out}", flush=True)
    rows = []

    # 1. uninterrupted, local threads
    store = out / "threads"
    shutil.rmtree(store, ignore_errors=True)
    t0, c0 = time.perf_counter(), time.process_time()
    ref = _sweep(ens, store, args).run(progress=False).results()
    rows.append(("threads", time.perf_counter() - t0, time.process_time() - c0, "uninterrupted"))
    print(f"  threads: {rows[-1][1]:.0f} s", flush=True)

    # 2. killed (SIGKILL), interrupted (SIGINT), resumed
    store = out / "interrupted"
    shutil.rmtree(store, ignore_errors=True)
    t0 = time.perf_counter()
    proc = _child(args, store)
    _wait_for_chunks(store, max(1, chunks // 4), proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    after_kill = _chunks(store)
    proc = _child(args, store)
    _wait_for_chunks(store, max(after_kill + 1, chunks // 2), proc)
    proc.send_signal(signal.SIGINT)
    t_int = time.monotonic()
    rc = proc.wait()
    stop_latency = time.monotonic() - t_int
    after_int = _chunks(store)
    resumed = _sweep(ens, store, args).run(progress=False).results()
    note = (f"SIGKILL at {after_kill}/{chunks} chunks; SIGINT at {after_int}/{chunks} (exit {rc}, "
            f"stopped {stop_latency:.1f} s after the signal); resumed")
    rows.append(("interrupted", time.perf_counter() - t0, float("nan"), note))
    print(f"  interrupted: {note}", flush=True)
    problems = {"interrupted": _compare(ref, resumed)}

    # 3. Dask LocalCluster
    if not args.no_dask:
        from dask.distributed import Client, LocalCluster

        store = out / "dask"
        shutil.rmtree(store, ignore_errors=True)
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                          dashboard_address=":0") as cluster, Client(cluster) as client:
            t0 = time.perf_counter()
            dask_df = _sweep(ens, store, args, executor=client).run(progress=False).results()
            rows.append(("dask", time.perf_counter() - t0, float("nan"), "2 worker processes x 1 thread"))
        problems["dask"] = _compare(ref, dask_df)
        print(f"  dask: {rows[-1][1]:.0f} s", flush=True)

    ok = int((ref["status"] == "success").sum())
    reversible = int((ref["delta"] <= 1e-10).sum())
    print()
    print(f"{'run':<12} {'wall s':>8} {'members/s':>10}  notes")
    for name, wall, _cpu, note in rows:
        print(f"{name:<12} {wall:8.0f} {len(ens) / wall:10.2f}  {note}")
    print()
    print(f"members: {len(ref)}; round trips finished: {ok}; delta <= 1e-10: {reversible}; "
          f"median delta {np.nanmedian(ref['delta']):.2e}")
    verdict = True
    for name, found in problems.items():
        same = "identical to the threads table" if not found else "DIFFERS: " + "; ".join(found)
        verdict &= not found
        print(f"{name}: {same}")
    if not args.out:
        shutil.rmtree(out, ignore_errors=True)
    return 0 if verdict else 1


if __name__ == "__main__":
    sys.exit(main())
