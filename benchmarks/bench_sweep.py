"""Throughput of batches and sweeps: free-fall round trips in double-double over t = 100.

Measures, on one ensemble of seeded free-fall triples (Agekyan & Anosova 1967 region):
  batch, 1 thread     the C++ batch driver alone
  batch, 2 threads    the same, two threads: parallel efficiency = speed-up / 2
  sweep, local        Sweep on the local C++ thread pool (2 threads) with its Parquet store
  sweep, Dask         Sweep on a dask.distributed LocalCluster (2 processes x 1 thread, loopback);
                      cluster start-up is timed apart and left out of the ratio
and prints systems and steps per second with the ratios, then the per-chunk cost of the sweep
machinery (many chunks of negligible work) on local threads and on Dask. 'cores used' is the
process's CPU time over wall time: below 1 per thread, other load on the machine took the rest. Each leg of a round trip is capped at a
fixed number of steps (deterministic, unlike a wall-clock budget), so a few long close encounters
cannot dominate the run; the fraction of completed round trips is shown. Every configuration must
give the same bits (checked).

Not part of the test run. Usage: python benchmarks/bench_sweep.py [--members 6] [--max-steps 40000]
[--method gbs|chain] (about 2 minutes on 2 idle cores with the defaults; the chain method completes
every round trip: --method chain --max-steps 0).
"""

from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import time

import numpy as np

import loschmidt
from loschmidt.batch import roundtrip_batch
from loschmidt.sweep import Sweep


def _bits(a: np.ndarray) -> np.ndarray:
    return np.ascontiguousarray(a).view(np.uint64)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--members", type=int, default=6)
    ap.add_argument("--t", default="100")
    ap.add_argument("--method", default="gbs", help="gbs (default) or chain")
    ap.add_argument("--max-steps", type=int, default=40000, help="step cap per leg (0: none)")
    ap.add_argument("--chunk-size", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--tiny-chunks", type=int, default=100, help="chunks of the per-chunk cost measurement")
    ap.add_argument("--no-dask", action="store_true")
    args = ap.parse_args()

    import pandas  # noqa: F401  (imported now, not inside the first timed sweep)
    import pyarrow.parquet  # noqa: F401

    ens = loschmidt.ics.free_fall_random(args.members, seed=args.seed)
    cap = args.max_steps or None
    opts = dict(precision="dd", t=args.t, max_steps=cap, method=args.method)
    rows = []

    def record(name: str, seconds: float, steps: int, done: int, extra: str = "") -> None:
        rows.append((name, seconds, args.members / seconds, steps / seconds, done, extra))

    def timed(fn):
        w0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        return out, time.perf_counter() - w0, time.process_time() - c0

    one, sec, cpu = timed(lambda: roundtrip_batch(ens, threads=1, **opts))
    steps, done = int(one.steps.sum()), int(one.success.sum())
    record("batch, 1 thread", sec, steps, done, f"cores used {cpu / sec:.2f}")
    two, sec, cpu = timed(lambda: roundtrip_batch(ens, threads=2, **opts))
    record("batch, 2 threads", sec, steps, done, f"cores used {cpu / sec:.2f}")
    assert np.array_equal(_bits(one.returned_positions), _bits(two.returned_positions))

    tmp = tempfile.mkdtemp(prefix="bench_sweep_")
    overhead = []
    try:
        local, sec, cpu = timed(lambda: Sweep(ens, task="roundtrip", store=os.path.join(tmp, "local"),
                                              chunk_size=args.chunk_size, threads=2, **opts).run(progress=False))
        record("sweep, local threads", sec, steps, done, f"{args.chunk_size}/chunk, cores used {cpu / sec:.2f}")
        ref = local.limbs("returned_positions")
        assert np.array_equal(_bits(ref), _bits(one.returned_positions))

        # Per-chunk cost of the machinery: many chunks of negligible work (f64, t = 1/100).
        tiny = loschmidt.ics.free_fall_random(args.tiny_chunks * 2, seed=args.seed)
        tiny_opts = dict(precision="f64", t="0.01")
        _, sec, _ = timed(lambda: Sweep(tiny, task="roundtrip", store=os.path.join(tmp, "tiny_local"), chunk_size=2,
                                        threads=2, **tiny_opts).run(progress=False))
        overhead.append(("local threads", sec))

        if not args.no_dask:
            from distributed import Client, LocalCluster

            t0 = time.perf_counter()
            with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                              dashboard_address=":0") as cluster, Client(cluster) as client:
                client.run(__import__, "loschmidt.sweep")  # workers import the package before timing
                startup = time.perf_counter() - t0
                dsw, sec, _ = timed(lambda: Sweep(ens, task="roundtrip", store=os.path.join(tmp, "dask"),
                                                  chunk_size=args.chunk_size, executor=client, **opts).run(progress=False))
                record("sweep, Dask 2x1", sec, steps, done, f"{args.chunk_size}/chunk, start-up {startup:.1f} s excluded")
                _, sec, _ = timed(lambda: Sweep(tiny, task="roundtrip", store=os.path.join(tmp, "tiny_dask"),
                                                chunk_size=2, executor=client, **tiny_opts).run(progress=False))
                overhead.append(("Dask 2x1", sec))
            assert np.array_equal(_bits(dsw.limbs("returned_positions")), _bits(ref))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)

    base = rows[0][1]
    print(f"\nfree-fall round trips, {args.method}, dd, t = {args.t}, {args.members} members, "
          f"step cap {args.max_steps or 'none'}/leg; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores "
          "(other load lowers 'cores used' and every ratio)")
    print(f"{'configuration':22s} {'seconds':>8s} {'systems/s':>10s} {'steps/s':>9s} {'speed-up':>9s} "
          f"{'completed':>10s}  note")
    for name, sec, sps, stps, ok, extra in rows:
        print(f"{name:22s} {sec:8.2f} {sps:10.3f} {stps:9.0f} {base / sec:9.2f} {ok:>4d}/{args.members:<5d}  {extra}")
    speedup = base / rows[1][1]
    print(f"\nparallel efficiency, batch on 2 threads: {speedup / 2:.2f}")
    print(f"sweep on local threads / batch on 2 threads (chunking and store): {rows[2][1] / rows[1][1]:.2f}")
    if len(rows) > 3:
        print(f"sweep on Dask / sweep on local threads (same ensemble and chunks): {rows[3][1] / rows[2][1]:.2f}")
    print(f"\nper-chunk cost, {args.tiny_chunks} chunks of 2 tiny round trips (f64, t = 0.01):")
    for name, sec in overhead:
        print(f"  {name:14s} {sec:6.2f} s  = {1000 * sec / args.tiny_chunks:6.1f} ms per chunk")
    if len(overhead) == 2:
        print(f"  Dask / local threads: {overhead[1][1] / overhead[0][1]:.2f}")


if __name__ == "__main__":
    main()
