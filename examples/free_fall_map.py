"""A reversibility map of the free-fall three-body problem, as a resumable sweep and a PNG.

Three equal masses start at rest: bodies 0 and 1 at (-1/2, 0) and (1/2, 0), body 2 at a point of
the free-fall region x >= 0, y >= 0, (x + 1/2)^2 + y^2 <= 1 (Agekyan & Anosova 1967), here the
centre of each cell of a grid over it (``loschmidt.ics.free_fall_grid``). ``loschmidt.Sweep`` runs
a round trip of every member -- forward ``t``, velocities reversed, forward ``t`` again -- with the
regularized chain method on the local threads, in double (f64) and in double-double (dd), and
keeps the results in a Parquet store per precision; ``loschmidt.plots.reversibility_map`` draws
log10 of the round-trip distance over the region, one panel per precision.

Usage::

    python examples/free_fall_map.py [--quick] [--out DIR] [--threads N]

``--quick``: a 3 x 5 grid (11 members) followed for 5 time units (a few seconds). Full: an 8 x 14
grid (80 members) for 10 time units (about 30 CPU-seconds, most of it in dd). Output in ``--out``
(default: a new temporary directory, printed): ``free_fall_map.png`` and the stores
``free-fall-<quick|full>-<precision>/`` (run the script again and finished chunks are kept; Ctrl-C
at any time loses at most the running chunks).

Expected output (measured on the development machine): one line per precision,

- quick: f64 brings back 1 of 11 members to within 1e-10 (median log10 delta about -8), dd all 11
  (median about -22);
- full: f64 1 of 80 (median log10 delta about -6), dd 78 of 80 (median about -20); the two dd
  misses start close to the line through bodies 0 and 1, near body 1.

Reversible means back within delta <= 1e-10 (phase-space distance, N-body units).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

import loschmidt
from loschmidt import ics, plots

THRESHOLD = 1e-10
NAMES = {"f64": "f64 (double)", "dd": "dd (double-double)"}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="3 x 5 grid, t = 5 (instead of 8 x 14, t = 10)")
    parser.add_argument("--out", type=Path, default=None, help="directory for the stores and the PNG (default: a new temporary directory)")
    parser.add_argument("--threads", type=int, default=None, help="C++ threads (default: all cores)")
    args = parser.parse_args(argv)
    if args.out is None:  # never into the checkout: a fresh temporary directory
        import tempfile

        args.out = Path(tempfile.mkdtemp(prefix="loschmidt-example-"))
        print(f"output directory: {args.out}")
    nx, ny, t = (3, 5, 5) if args.quick else (8, 14, 10)
    mode = "quick" if args.quick else "full"
    args.out.mkdir(parents=True, exist_ok=True)

    ens = ics.free_fall_grid(nx, ny)
    print(f"free fall: body 2 at the centres of a {nx} x {ny} grid over the region, {len(ens)} members; "
          f"round trips of {t} time units each way, method 'chain'")
    tables = {}
    for prec in ("f64", "dd"):
        store = args.out / f"free-fall-{mode}-{prec}"
        sweep = loschmidt.Sweep(ens, task="roundtrip", store=store, chunk_size=8, threads=args.threads,
                                t=t, precision=prec, method="chain", max_wall_time=60)
        sweep.run(progress=False)
        tables[NAMES[prec]] = sweep.results(columns=["member", "ix", "iy", "x", "y", "status", "delta", "wall_time"])

    print()
    print(f"{'precision':<20} {'members':>7} {'finished':>8} {'reversible':>10} {'median log10 delta':>18} {'engine time':>11}")
    for label, df in tables.items():
        delta = np.asarray(df["delta"], dtype=float)
        finished = np.isfinite(delta)
        reversible = int(np.count_nonzero(delta <= THRESHOLD))
        median = float(np.median(np.log10(np.maximum(delta[finished], 1e-300)))) if finished.any() else float("nan")
        print(f"{label:<20} {len(df):>7} {int(finished.sum()):>8} {reversible:>10} {median:>18.1f} "
              f"{float(df['wall_time'].sum()):>10.1f}s")
    print(f"  reversible: back within delta <= {THRESHOLD:.0e} of the start (phase-space distance, N-body units)")

    fig = plots.reversibility_map(tables, threshold=THRESHOLD,
                                  title=f"Free fall, {len(ens)} starts of body 2: round trips of {t} time units")
    png = plots.save(fig, args.out / "free_fall_map.png")
    print(f"map written to {png}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
