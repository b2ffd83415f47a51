"""Cost of an equal-mass binary-single cross-section table, with its unresolved fraction.

    python benchmarks/bench_scattering.py [--members 2000] [--speeds 0.1,0.3,0.7,1.5,3] [--out DIR]
                                          [--threads 2] [--dask] [--budget-periods 1000]

Equal masses, circular binary (a = 1), five speeds from 0.1 to 3 v_c, ``--members`` encounters
each (impact parameters uniform in area up to b_max from r_p,max = 4 a by gravitational
focusing), run as the sweep task "scattering" (f64, gbs, escape stop, event log) into a store in
``--out`` (default: a temporary folder, deleted at the end). Prints the cross sections per outcome
with Monte Carlo errors, the mean binding-energy change per speed, the unresolved fraction, the
wall time and, as the ratio against a peer measured in the same run, the time inside the engine
against the whole (the rest is the exact mpmath classification of each stopped state and the
initial conditions). Writes ``cross_sections.csv`` and ``cross_sections.png`` beside the store.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=2000)
    ap.add_argument("--speeds", default="0.1,0.3,0.7,1.5,3")
    ap.add_argument("--out", default=None)
    ap.add_argument("--threads", type=int, default=2)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--budget-periods", type=float, default=1000)
    ap.add_argument("--dask", action="store_true", help="run the chunks on a local Dask cluster of --threads workers")
    args = ap.parse_args(argv)

    import loschmidt
    from loschmidt import scattering

    speeds = [float(x) for x in args.speeds.split(",")]
    out = args.out or tempfile.mkdtemp(prefix="loschmidt-scattering-")
    os.makedirs(out, exist_ok=True)
    t0 = time.perf_counter()
    ens = scattering.binary_single_ensemble(args.members, args.seed, v_over_vc=speeds)
    t_ics = time.perf_counter() - t0
    client = None
    executor = None
    if args.dask:
        from dask.distributed import Client, LocalCluster

        client = Client(LocalCluster(n_workers=args.threads, threads_per_worker=1, processes=True, host="127.0.0.1",
                                     dashboard_address=":0"))
        executor = client
    t1 = time.perf_counter()
    sweep = loschmidt.Sweep(ens, task="scattering", store=os.path.join(out, "store"), chunk_size=200,
                            executor=executor, threads=None if args.dask else args.threads,
                            budget_periods=args.budget_periods)
    df = sweep.run(progress=sys.stderr.isatty()).results()
    t_run = time.perf_counter() - t1
    if client is not None:
        client.close()
    cs = scattering.cross_sections(df)
    cs.to_csv(os.path.join(out, "cross_sections.csv"), index=False)
    try:
        from loschmidt import plots

        plots.save(plots.cross_section_plot(df), os.path.join(out, "cross_sections.png"))
    except Exception as exc:  # the figure is a convenience here; the numbers are the result
        print(f"(no figure: {exc})")
    engine = float(df["wall_time"].sum())
    n = len(df)
    print(f"members {n} ({args.members} x {len(speeds)} speeds), initial conditions {t_ics:.1f} s, "
          f"sweep {t_run:.1f} s on {args.threads} {'Dask workers' if args.dask else 'threads'}: "
          f"{1e3 * t_run / n:.1f} ms per encounter")
    print(f"engine time {engine:.1f} s = {engine / (t_run * args.threads):.2f} of the cores' time "
          f"(the rest: exact classification in mpmath and bookkeeping)")
    print(f"unresolved fraction {float((df['outcome'] == 'unresolved').mean()):.4f} "
          f"(budget 2 t_pericentre + {args.budget_periods:g} binary periods)")
    pivot = cs.pivot(index="v_over_vc", columns="outcome", values="sigma_pi_a2")
    err = cs.pivot(index="v_over_vc", columns="outcome", values="sigma_pi_a2_error")
    print("\ncross sections / (pi a^2), +- Monte Carlo error")
    cols = list(scattering.ENCOUNTER_OUTCOMES)
    print("v/v_c   " + "".join(f"{c:>22}" for c in cols) + "   mean dB/B")
    means = cs.groupby("v_over_vc")[["mean_energy_change", "mean_energy_change_error"]].first()
    for v in pivot.index:
        cells = "".join(f"{pivot.loc[v, c]:>13.4g} +- {err.loc[v, c]:<6.2g}" for c in cols)
        m = means.loc[v]
        print(f"{v:<8g}{cells}   {m.mean_energy_change:+.4f} +- {m.mean_energy_change_error:.4f}")
    print(f"\nresults in {out}")
    if args.out is None:
        shutil.rmtree(out, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
