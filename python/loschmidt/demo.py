"""The built-in demonstration (``loschmidt demo``).

The scenario is our own invention: the nucleus of a made-up galaxy in which three black holes of a
million solar masses each find themselves at rest, two of them a parsec apart and the third anywhere
in the free-fall region (``loschmidt.ics.free_fall_grid``). Each configuration is followed for ten
N-body time units (about 149 kyr) and brought back with reversed velocities, in double (f64) and
double-double (dd) precision with the chain method; a member is reversible when it returns to
within ``THRESHOLD`` of where it started. A third sweep follows each member in f64 until one body
escapes, for the lifetime map, and a fourth does the same with the post-Newtonian terms on (1PN,
2PN and 2.5PN radiation reaction, c in the demo's units): many of the near-collisions then end in
mergers instead of escapes. The irreversibility threshold of one representative member is then
given in metres, next to the Planck length.

Why the chain method: on this grid the extrapolation in Cartesian coordinates (``gbs``) fails to
finish about a fifth of the f64 round trips (step-size underflow in near-collisions) and is no
cheaper in dd, while the regularized chain finishes every member (measured on a 12 x 12 grid,
t = 10: f64 gbs 78 of 102 finished, chain 102 of 102; dd gbs 100 of 102 within a budget of 5 s
a member, chain 102 of 102 for about half the CPU time).

The lifetimes come from the sweep task "lifetime" (``loschmidt.tasks``).
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

__all__ = [
    "DemoSettings",
    "FULL",
    "QUICK",
    "SCALE_MASS",
    "THRESHOLD",
    "run_demo",
    "register_lifetime_task",
]

#: Mass of each black hole, in solar masses (the mass unit); the length unit is one parsec.
SCALE_MASS = 1e6

from .chaos import REVERSIBLE_THRESHOLD  # noqa: E402

#: Round-trip distance (N-body units) at or below which a member counts as reversible
#: (``loschmidt.chaos.REVERSIBLE_THRESHOLD``).
THRESHOLD = REVERSIBLE_THRESHOLD

#: Post-Newtonian orders of the demo's relativistic lifetime sweep.
PN_ORDERS = (1, 2, 2.5)


@dataclass(frozen=True)
class DemoSettings:
    """What one demo run computes."""

    nx: int  # free-fall grid: cells across x in [0, 1/2]
    ny: int  # cells across y in [0, sqrt(3)/2] (ny ~ sqrt(3) nx for square cells)
    t: float  # span of each leg of the round trip (N-body units)
    precisions: tuple[str, ...]
    method: str
    lifetime_t_max: float
    lifetime_interval: float
    chunk_size: int
    max_wall_time: float  # per leg and member (seconds): a budget against pathological members
    label: str


#: The default: about 2 CPU-minutes (116 s user time measured on the 2-core x86_64 development
#: machine; 64 s of wall-clock time when it was lightly loaded, 412 s under load average 14-18).
FULL = DemoSettings(10, 17, 10.0, ("f64", "dd"), "chain", 200.0, 2.0, 8, 60.0, "full")
#: ``--quick`` (34 CPU-seconds, measured as above): a coarser grid, the same physics.
QUICK = DemoSettings(5, 9, 10.0, ("f64", "dd"), "chain", 200.0, 2.0, 8, 60.0, "quick")

_PRECISION_NAMES = {"f64": "double", "f64c": "compensated double", "dd": "double-double", "qd": "quad-double"}


# ---------------------------------------------------------------------------------------------------
# the "lifetime" sweep task (it lives in loschmidt.tasks and is registered with the sweep module)


def register_lifetime_task() -> None:
    """Make sure task "lifetime" is registered (importing ``loschmidt.sweep`` registers it)."""
    from . import sweep  # noqa: F401


# ---------------------------------------------------------------------------------------------------
# the demo


def scale():
    """The demo's physical units: 1e6 solar masses, 1 parsec (time unit about 14.9 kyr)."""
    from .units import PARSEC, Scale

    return Scale(mass=SCALE_MASS, length=PARSEC)


def write_settings(store: Path, label: str, units: Mapping[str, Any] | None, config: str | None = None) -> None:
    """Beside a store's manifest, what the command line knows and the sweep does not: a label for
    plots and the physical units (``cli-settings.json``; the store itself ignores the file)."""
    import json

    data = {"label": label, "units": dict(units) if units else None, "config": config}
    tmp = store / ".cli-settings.json.tmp"
    tmp.write_text(json.dumps(data, indent=2, sort_keys=True))
    os.replace(tmp, store / "cli-settings.json")


def run_demo(out_dir: Any = "loschmidt-demo", quick: bool = False, qd_members: int = 0,
             progress: bool = True, say: Callable[[str], Any] = print, threads: int | None = None) -> int:
    """Run the demonstration, print its summary through ``say`` and write its files in ``out_dir``.

    Stores are resumed when rerun with the same settings (an interrupted demo continues where it
    stopped). Returns the exit code (0).
    """
    from . import ics, irreversibility_threshold
    from . import plots
    from .sweep import Sweep
    from .units import YEAR

    register_lifetime_task()
    settings = QUICK if quick else FULL
    sc = scale()
    units = {"mass": SCALE_MASS, "length": "pc"}
    kyr = sc.time / YEAR / 1e3
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    started = time.perf_counter()
    ens = ics.free_fall_grid(settings.nx, settings.ny)
    say("loschmidt demo: three black holes of 1e6 solar masses each, released from rest in an invented "
        "galactic nucleus")
    say(f"  two of them 1 pc apart, the third at {len(ens)} points of the free-fall region "
        f"(grid {settings.nx} x {settings.ny}{', quick mode' if quick else ''})")
    say(f"  each followed for {settings.t:g} time units ({settings.t * kyr:.0f} kyr; unit {kyr:.2f} kyr), "
        f"velocities reversed, and followed back: method {settings.method!r}")
    say("")

    tables: dict[str, Any] = {}
    engine_time: dict[str, float] = {}
    stores: dict[str, Path] = {}
    for prec in settings.precisions:
        store = out / f"{settings.label}-roundtrip-{prec}"
        say(f"Round trips in {prec} ({_PRECISION_NAMES[prec]}) -> {store}")
        sweep = _sweep(Sweep, out, ens, task="roundtrip", store=store, chunk_size=settings.chunk_size,
                       threads=threads, t=settings.t, precision=prec, method=settings.method,
                       max_wall_time=settings.max_wall_time)
        write_settings(store, f"round trips, {prec} ({_PRECISION_NAMES[prec]})", units)
        sweep.run(progress=progress)
        df = sweep.results(columns=_SUMMARY_COLUMNS)
        tables[prec] = df
        engine_time[prec] = float(df["wall_time"].sum())
        stores[prec] = store

    if qd_members > 0 and "dd" in tables:
        dd = tables["dd"]
        delta = np.asarray(dd["delta"], dtype=float)
        bad = np.flatnonzero(~(delta <= THRESHOLD))
        worst = bad[np.argsort(-np.nan_to_num(delta[bad], nan=np.inf), kind="stable")]
        hard = np.sort(worst[:qd_members])  # the worst dd round trips, in member order
        if hard.size:
            store = out / f"{settings.label}-roundtrip-qd-{hard.size}"  # one store per selection
            say(f"Round trips in qd (quad-double) for the {hard.size} worst member(s) dd left irreversible "
                f"(grid members {', '.join(map(str, hard))}; column grid_member of the store) -> {store}")
            sweep = _sweep(Sweep, out, _selection(ens, hard), task="roundtrip", store=store, chunk_size=1, threads=threads,
                           t=settings.t, precision="qd", method=settings.method,
                           max_wall_time=4 * settings.max_wall_time)
            write_settings(store, "round trips, qd (quad-double)", units)
            sweep.run(progress=progress)
            df = sweep.results(columns=_SUMMARY_COLUMNS)
            tables["qd"] = df
            engine_time["qd"] = float(df["wall_time"].sum())
            stores["qd"] = store

    life_store = out / f"{settings.label}-lifetime-f64"
    say(f"Lifetimes in f64, up to {settings.lifetime_t_max:g} time units ({settings.lifetime_t_max * kyr / 1e3:.1f} Myr) "
        f"-> {life_store}")
    life = _sweep(Sweep, out, ens, task="lifetime", store=life_store, chunk_size=settings.chunk_size,
                  threads=threads, t_max=settings.lifetime_t_max, interval=settings.lifetime_interval,
                  precision="f64", method=settings.method)
    write_settings(life_store, "lifetimes, f64 (Newtonian)", units)
    life.run(progress=progress)
    lifetimes = life.results(columns=["member", "ix", "iy", "x", "y", "status", "lifetime", "outcome"])

    # The same triples with the post-Newtonian terms on: at 1e6 solar masses and a parsec, c is
    # a few thousand N-body velocity units, and the near-collisions of zero-angular-momentum
    # free fall come within a few dozen Schwarzschild radii often enough to end in mergers.
    pn_store = out / f"{settings.label}-lifetime-pn-f64"
    say(f"Lifetimes with post-Newtonian terms (1PN, 2PN, 2.5PN; c = {sc.c:.0f} N-body units) -> {pn_store}")
    pn_life = _sweep(Sweep, out, ens, task="lifetime", store=pn_store, chunk_size=settings.chunk_size,
                     threads=threads, t_max=settings.lifetime_t_max, interval=settings.lifetime_interval,
                     precision="f64", method=settings.method, pn=PN_ORDERS, c=sc.decimal("c"))
    write_settings(pn_store, "lifetimes, f64 + PN (escape or merger)", units)
    pn_life.run(progress=progress)
    pn_lifetimes = pn_life.results(columns=["member", "ix", "iy", "x", "y", "status", "lifetime", "outcome"])

    # the irreversibility threshold of a representative member: the median round trip in dd
    rep_prec = "dd" if "dd" in tables else settings.precisions[-1]
    ref = tables[rep_prec]
    d = np.asarray(ref["delta"], dtype=float)
    ok = np.isfinite(d)
    member = int(np.asarray(ref["member"])[ok][np.argsort(d[ok])[ok.sum() // 2]]) if ok.any() else 0
    say(f"Irreversibility threshold of member {member} (the median {rep_prec} round trip)...")
    thr = irreversibility_threshold(ens.system(member, rep_prec), settings.t, scale=sc, method=settings.method,
                                    intervals=50)

    units_axes = plots.axis_units(sc)
    labels = {f"{p} ({_PRECISION_NAMES[p]})": tables[p] for p in settings.precisions}
    map_path = plots.save(plots.reversibility_map(labels, threshold=THRESHOLD, units=units_axes), out / "reversibility-map.png")
    hist_path = plots.save(plots.delta_histogram({**labels, **({"qd (quad-double)": tables["qd"]} if "qd" in tables else {})},
                                                 threshold=THRESHOLD), out / "delta-histogram.png")
    life_path = plots.save(plots.lifetime_map({"Newtonian, f64": lifetimes, "post-Newtonian, f64": pn_lifetimes},
                                              units=units_axes, title="Time to the first escape or merger"),
                           out / "lifetime-map.png")
    from .report import write_report

    x, y = ens.params["x"][member], ens.params["y"][member]
    # the threshold uses the largest amplification reached within the span (a perturbation that
    # reaches order unity at any time counts); the curve can fall again after a close encounter,
    # so its value at the end is given beside it
    logs = np.asarray(thr.growth.log_factor, dtype=float) / np.log(10)
    peak_t = float(np.asarray(thr.growth.times, dtype=float)[int(np.argmax(logs))])
    end_log = float(logs[-1])
    amp_text = (f"peak 10^{logs.max():.1f} = {thr.amplification:.3g} at t = {peak_t:.3g} "
                f"({peak_t * kyr:.0f} kyr); 10^{end_log:.1f} at the end of the span")
    threshold_rows = [
        ("member", f"{member} (body 2 released at x = {x:.4f} pc, y = {y:.4f} pc), {rep_prec}, method {settings.method}"),
        ("displacement amplified to order unity within t = "
         f"{settings.t:g} ({settings.t * kyr:.0f} kyr)", f"{thr.delta:.3g} pc = {thr.metres:.3g} m = "
                                                         f"{thr.planck_lengths:.3g} Planck lengths"),
        ("amplification (the threshold uses the peak)", amp_text),
        ("round-trip delta of that integration", f"{thr.roundtrip_delta:.2g}"),
        ("resolves perturbations that small", "yes" if thr.trustworthy else "no"),
    ]
    report_path = write_report([*stores.values(), life_store, pn_store], out / "report.html",
                               title="loschmidt demo: three black holes in free fall",
                               sections=[("Irreversibility threshold", threshold_rows)])

    # summary
    say("")
    say(f"{'precision':<20} {'members':>7} {'finished':>8} {'reversible':>14} {'median log10 delta':>18} "
        f"{'engine time':>11}")
    for prec, df in tables.items():
        delta = np.asarray(df["delta"], dtype=float)
        fin = np.isfinite(delta)
        rev = int(np.count_nonzero(delta <= THRESHOLD))
        med = float(np.median(np.log10(np.maximum(delta[fin], 1e-300)))) if fin.any() else float("nan")
        label = f"{prec} ({_PRECISION_NAMES[prec]})"
        share = f"{rev} ({rev / max(len(df), 1):.1%})"
        say(f"{label:<20} {len(df):>7} {int(fin.sum()):>8} {share:>14} {med:>18.1f} {engine_time[prec]:>9.1f} s")
    say(f"  reversible: back within delta <= {THRESHOLD:.0e} of the start (phase-space distance, N-body units)")
    lt = np.asarray(lifetimes["lifetime"], dtype=float)
    esc = np.isfinite(lt)
    if esc.any():
        med = float(np.median(lt[esc]))
        say(f"lifetimes (f64): {int(esc.sum())} of {len(lt)} triples broke up within {settings.lifetime_t_max:g} units; "
            f"median time to the first escape {med:g} units = {med * kyr:.0f} kyr")
    else:
        say(f"lifetimes (f64): no escape within {settings.lifetime_t_max:g} units")
    kinds = pn_lifetimes["outcome"].value_counts().to_dict()
    newton = lifetimes["outcome"].value_counts().to_dict()
    say(f"with relativity (1PN + 2PN + 2.5PN): {kinds.get('merger', 0)} mergers, {kinds.get('escape', 0)} escapes "
        f"of {len(pn_lifetimes)} (Newtonian: {newton.get('escape', 0)} escapes); a merger is a pair closer than "
        f"8 times its summed Schwarzschild radii")
    say(f"threshold of member {member} (body 2 released at x = {x:.4f} pc, y = {y:.4f} pc), {rep_prec}:")
    say(f"  a displacement of {thr.delta:.3g} pc = {thr.metres:.3g} m = {thr.planck_lengths:.3g} Planck lengths "
        f"grows to order unity within {settings.t * kyr:.0f} kyr;")
    say(f"  amplification {amp_text} (the threshold uses the peak: reaching order unity at any time counts);")
    verdict = "resolves" if thr.trustworthy else "does NOT resolve"
    say(f"  the {rep_prec} integration (round-trip delta {thr.roundtrip_delta:.2g}) {verdict} perturbations that small")
    say("")
    say(f"files in {out}:")
    for p in (map_path, hist_path, life_path, report_path):
        say(f"  {p}")
    from .report import map_kind, read_manifest

    for p in (*stores.values(), life_store, pn_store):
        kind = map_kind(read_manifest(p))
        say(f"  {p}/ (Parquet store; `loschmidt plot {p} --kind {kind} -o {kind}.png`)")
    say(f"done in {time.perf_counter() - started:.0f} s")
    return 0


def _selection(ens: Any, members: np.ndarray) -> Any:
    """Some members of an ensemble as an ensemble of their own, each remembering its number in the
    whole one (param ``grid_member``): a store numbers its members from 0, and the qd store's
    member 0 is then, say, grid member 7 of the f64 and dd stores."""
    from .ensemble import Ensemble

    sub = ens[members]
    return Ensemble(sub.masses, sub.positions, sub.velocities, params={**sub.params, "grid_member": members},
                    family=sub.family, radii=sub.radii, meta=sub.meta)


def _sweep(cls: Any, out: Path, *args: Any, **kwargs: Any) -> Any:
    """A Sweep of the demo; a store left by other settings (or another version) is explained."""
    try:
        return cls(*args, **kwargs)
    except ValueError as exc:
        if str(exc).startswith("store:"):
            raise ValueError(f"{exc}\n(the files in {out} come from another demo setting or loschmidt version: "
                             f"pass another --out, or delete {out})") from None
        raise


_SUMMARY_COLUMNS = ["member", "ix", "iy", "x", "y", "status", "delta", "energy_error", "evaluations", "wall_time"]
