"""Memory of a sweep against ensemble size: peak resident memory stays flat.

Each size runs in a fresh child process: a Sweep (task "integrate", double precision, gbs, a short
span) over a stream of free-fall triples (``ics.free_fall_random`` pieces of 1,000 members, each
piece made only when the sweep asks for it, so the ensemble is never held whole), into a store in a
temporary directory. The child reports its peak resident set size (``ru_maxrss``) and the store is
then checked: one row per member, members 0..M-1 once each (read column by column, in the parent).

The figure of merit is the ratio of peak RSS at the largest size to that at the smallest, in the
same run: 1.0 means no growth with the ensemble; the table also gives MB per 10,000 members above
the smallest run's peak.

Not part of the test run. Usage:
  python benchmarks/bench_memory.py [--sizes 10000 30000 100000] [--chunk-size 2000] [--t 0.01]
(about 1-2 minutes on 2 cores with the defaults).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, resource, sys, time
import loschmidt
from loschmidt import ics

members, chunk, t, store = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3], sys.argv[4]
piece = 1000

def stream():
    for k in range(0, members, piece):
        # one seeded family: every piece is free-fall triples, seeds in order
        yield ics.free_fall_random(min(piece, members - k), seed=k // piece)

start = time.perf_counter()
loschmidt.Sweep(stream(), task="integrate", store=store, t=t, precision="f64", chunk_size=chunk,
                threads=2).run(progress=False)
wall = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"peak_kb": peak, "wall": wall}))
"""


def _check_store(store: Path, members: int) -> str:
    import numpy as np
    import pyarrow.parquet as pq

    seen = np.zeros(members, dtype=np.int64)
    rows = 0
    for f in sorted((store / "chunks").glob("*.parquet")):
        col = pq.read_table(f, columns=["member"]).column("member").to_numpy()
        np.add.at(seen, col, 1)
        rows += len(col)
    if rows != members or not np.all(seen == 1):
        return f"BAD ({rows} rows, {int(np.sum(seen != 1))} members not exactly once)"
    return "ok"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--sizes", type=int, nargs="+", default=[10_000, 30_000, 100_000])
    ap.add_argument("--chunk-size", type=int, default=2000)
    ap.add_argument("--t", default="0.01")
    args = ap.parse_args()

    results = []
    with tempfile.TemporaryDirectory(prefix="loschmidt-memory-") as tmp:
        for m in args.sizes:
            store = Path(tmp) / f"sweep-{m}"
            t0 = time.perf_counter()
            out = subprocess.run([sys.executable, "-c", CHILD, str(m), str(args.chunk_size), args.t, str(store)],
                                 capture_output=True, text=True, check=False)
            if out.returncode != 0:
                print(out.stderr, file=sys.stderr)
                return 1
            rec = json.loads(out.stdout.strip().splitlines()[-1])
            rec.update(members=m, check=_check_store(store, m), total=time.perf_counter() - t0)
            results.append(rec)
            print(f"  {m} members: peak {rec['peak_kb'] / 1024:.0f} MB, {rec['wall']:.1f} s", flush=True)

    first = results[0]
    print()
    print(f"Sweep memory: task integrate, f64 gbs, t = {args.t}, chunks of {args.chunk_size}, streamed ensemble")
    print(f"{'members':>9} {'chunks':>7} {'peak RSS MB':>12} {'vs smallest':>12} "
          f"{'MB / 10k above':>15} {'members/s':>10}  store")
    for r in results:
        chunks = -(-r["members"] // args.chunk_size)
        extra = (r["peak_kb"] - first["peak_kb"]) / 1024
        per10k = extra / ((r["members"] - first["members"]) / 1e4) if r is not first else 0.0
        print(f"{r['members']:>9} {chunks:>7} {r['peak_kb'] / 1024:>12.0f} "
              f"{r['peak_kb'] / first['peak_kb']:>12.3f} {per10k:>15.2f} {r['members'] / r['wall']:>10.0f}  {r['check']}")
    ratio = results[-1]["peak_kb"] / first["peak_kb"]
    bounded = ratio < 1.10
    print()
    print(f"peak RSS ratio, {results[-1]['members']} against {first['members']} members: {ratio:.3f} "
          f"({'bounded: no growth with the ensemble' if bounded else 'GROWS with the ensemble'})")
    return 0 if bounded and all(r["check"] == "ok" for r in results) else 1


if __name__ == "__main__":
    sys.exit(main())
