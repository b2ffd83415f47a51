"""A sweep on a Dask cluster, checked bit for bit against the same sweep on local threads.

``loschmidt.Sweep`` hands its chunks to any ``concurrent.futures`` executor or to a
``dask.distributed.Client``: the workers receive only each chunk's initial conditions and the
options, integrate them in the C++ engine, and send the columns back; the calling process writes
the store. Because every member is integrated on its own, the results are the same bits wherever
and in whatever order the chunks run. This script runs round trips of free-fall triples (body 2
released from rest at the cell centres of a grid over the Agekyan & Anosova 1967 region) twice:

1. on the local C++ thread pool (``executor=None``, 2 threads), and
2. on a ``dask.distributed.LocalCluster`` of 2 worker processes with 1 thread each, listening on
   the loopback interface only (127.0.0.1, no dashboard),

and compares the two stores column by column (every column but ``wall_time``; floats compared by
their bits, NaN included). Needs ``dask[distributed]`` (``pip install ".[cluster]"``).

Usage::

    python examples/dask_sweep.py [--quick] [--out DIR] [--scheduler ADDRESS]

``--quick``: a 4 x 7 grid (21 members), 1 time unit each way, in f64 (a few seconds, most of it
starting the cluster). Full: an 8 x 14 grid (80 members), 5 time units each way, in dd (about 20 s). ``--scheduler tcp://host:8786`` uses an existing cluster instead of starting one. The
stores ``dask-<quick|full>-local/`` and ``dask-<quick|full>-cluster/`` are written afresh in
``--out`` (default: a new temporary directory, printed) on every run.

Expected output: the cluster's address and workers, one line per run with its member count and
time, the number of reversible members (quick: 18 of 21 in f64; full: 80 of 80 in dd), then
``tables equal: True`` (and exit code 0; 1 if they differ).
"""

from __future__ import annotations

import argparse
import shutil
import sys
import time
from pathlib import Path

import numpy as np

import loschmidt
from loschmidt import ics


def same_bits(a, b) -> bool:
    """Two pyarrow tables with the same schema and the same bits in every cell (NaN included)."""
    import pyarrow as pa

    if a.schema != b.schema or len(a) != len(b):
        return False
    for name in a.column_names:
        x, y = a.column(name).combine_chunks(), b.column(name).combine_chunks()
        if pa.types.is_fixed_size_list(x.type):  # full-precision limb columns
            x, y = x.flatten(), y.flatten()
        xs, ys = x.to_numpy(zero_copy_only=False), y.to_numpy(zero_copy_only=False)
        if xs.dtype.kind == "f":
            xs, ys = xs.view(np.uint64), ys.view(np.uint64)
        if not np.array_equal(xs, ys):
            return False
    return True


def run_sweep(ens, store: Path, executor=None, threads=None, **options) -> tuple:
    if store.exists():
        shutil.rmtree(store)  # this example's own store: start afresh so both runs do the work
    began = time.perf_counter()
    sweep = loschmidt.Sweep(ens, task="roundtrip", store=store, chunk_size=4, executor=executor,
                            threads=threads, **options)
    sweep.run(progress=False)
    return sweep.results(format="arrow").drop_columns(["wall_time"]), time.perf_counter() - began


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="4 x 7 grid, t = 1, f64 (instead of 8 x 14, t = 5, dd)")
    parser.add_argument("--out", type=Path, default=None, help="directory for the two stores (default: a new temporary directory)")
    parser.add_argument("--scheduler", default=None, help="address of a running Dask scheduler (default: start a LocalCluster)")
    args = parser.parse_args(argv)
    if args.out is None:  # never into the checkout: a fresh temporary directory
        import tempfile

        args.out = Path(tempfile.mkdtemp(prefix="loschmidt-example-"))
        print(f"output directory: {args.out}")
    nx, ny, t, prec = (4, 7, 1, "f64") if args.quick else (8, 14, 5, "dd")
    mode = "quick" if args.quick else "full"
    args.out.mkdir(parents=True, exist_ok=True)
    from distributed import Client, LocalCluster

    ens = ics.free_fall_grid(nx, ny)
    options = dict(t=t, precision=prec, method="chain")
    print(f"free fall, {nx} x {ny} grid: {len(ens)} round trips of {t} time unit{'' if t == 1 else 's'} each way in {prec}, method 'chain', "
          f"chunks of 4")

    local, took_local = run_sweep(ens, args.out / f"dask-{mode}-local", threads=2, **options)
    print(f"local threads (2):            {len(local)} members in {took_local:.1f} s")

    began = time.perf_counter()
    if args.scheduler:
        client = Client(args.scheduler)
        cluster = None
    else:
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                               dashboard_address=":0")
        client = Client(cluster)
    try:
        workers = client.nthreads()
        print(f"dask cluster at {client.scheduler.address}: {len(workers)} workers, "
              f"{sum(workers.values())} threads (started in {time.perf_counter() - began:.1f} s)")
        remote, took_remote = run_sweep(ens, args.out / f"dask-{mode}-cluster", executor=client, **options)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    print(f"dask workers ({len(workers)} processes):   {len(remote)} members in {took_remote:.1f} s")

    equal = same_bits(local, remote)
    delta = local.column("delta").to_numpy()
    print(f"reversible (delta <= 1e-10): {int(np.count_nonzero(delta <= 1e-10))} of {len(delta)}")
    print(f"tables equal: {equal}")
    return 0 if equal else 1


if __name__ == "__main__":
    sys.exit(main())
