"""How small a nudge matters? The irreversibility threshold of a black-hole triple, in Planck lengths.

An invented scenario: three black holes of 2, 3 and 4 million solar masses meet in the nucleus of a
made-up galaxy, about a parsec apart, moving at some 10-30 km/s (the mass unit is 10^6 solar
masses and the length unit one parsec, so the time unit is 14.9 kyr and the velocity unit
65.6 km/s). Their motion is chaotic: a tiny displacement of one hole grows exponentially until it
is as large as the system. ``loschmidt.irreversibility_threshold`` measures that growth (twin
trajectories, renormalised; Benettin et al. 1980) and gives the smallest initial displacement that
the dynamics amplifies to order unity within ``t``, in parsecs, metres and Planck lengths
(``loschmidt.units``: IAU 2015 nominal constants, CODATA 2018 Planck length). A round trip at the
same precision says whether the integration itself is accurate enough to resolve a perturbation
that small: the threshold is only meaningful when it is.

Usage::

    python examples/planck_threshold.py [--quick] [--out DIR]

``--quick``: 10 time units (149 kyr), 20 renormalisation intervals (about 2 s). Full: 30 time
units (447 kyr), 60 intervals (about 6 s). Writes ``planck_threshold.png`` (the growth of the
perturbation against time) in ``--out`` (default: a new temporary directory, printed).

Expected output (measured on the development machine)::

    quick (t = 149 kyr): threshold 4.1e-14 pc = 1.3e3 m = 7.8e37 Planck lengths (amplification 2.4e13)
    full  (t = 447 kyr): threshold 4.5e-16 pc = 14 m    = 8.6e35 Planck lengths (amplification 2.2e15)

in both precisions (f64 and dd agree to a few percent); but only the double-double result is
trustworthy: the f64 round trip misses the start by order unity (delta 3.5 and 3.0), the dd one
by 1.3e-14 (quick) and 9e-13 (full). So a displacement of about ten metres of one black hole --
some 10^36 Planck lengths -- decides the state of this parsec-sized system half a million years
later. The growth is fastest in the first 90 kyr, while the three interact closely; then the
lightest hole is ejected and the spikes of the curve are the pericentre passages of the binary
left behind. Post-Newtonian terms are negligible here: (v/c)^2 is about 1e-8.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import loschmidt
from loschmidt import plots, units

# The invented triple (N-body units: 10^6 solar masses, 1 pc, G = 1), as exact decimal strings.
MASSES = [2, 3, 4]
POSITIONS = [["-0.5", "0.1"], ["0.5", "0"], ["0.05", "0.55"]]
VELOCITIES = [["0.1", "-0.3"], ["-0.2", "0.4"], ["0.1", "-0.15"]]  # total momentum exactly zero


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10 time units instead of 30")
    parser.add_argument("--out", type=Path, default=None, help="directory for the PNG (default: a new temporary directory)")
    args = parser.parse_args(argv)
    if args.out is None:  # never into the checkout: a fresh temporary directory
        import tempfile

        args.out = Path(tempfile.mkdtemp(prefix="loschmidt-example-"))
        print(f"output directory: {args.out}")
    t, intervals = (10, 20) if args.quick else (30, 60)
    args.out.mkdir(parents=True, exist_ok=True)

    scale = units.Scale(mass=1e6, length=units.PARSEC)
    kyr = scale.to_years(1) / 1e3
    print("three black holes of 2, 3 and 4 million solar masses, about a parsec apart")
    print(f"units: mass 1e6 M_sun, length 1 pc, time {kyr:.2f} kyr, velocity {scale.velocity / 1e3:.1f} km/s; "
          f"c = {scale.c:.0f}, Planck length = {scale.planck_length:.3e} (N-body units)")
    s = loschmidt.System(MASSES, POSITIONS, VELOCITIES, precision="dd")
    v2 = max(float(v @ v) for v in s.velocities)
    print(f"energy {s.energy():.6f}, largest (v/c)^2 at the start {v2 / scale.c**2:.1e} (Newtonian gravity suffices)")
    print(f"threshold over t = {t} units = {t * kyr:.0f} kyr, {intervals} renormalisation intervals, method 'chain'")
    print()

    curves = {}
    for prec in ("f64", "dd"):
        system = loschmidt.System(MASSES, POSITIONS, VELOCITIES, precision=prec)
        th = loschmidt.irreversibility_threshold(system, t, scale=scale, method="chain", intervals=intervals)
        curves[prec] = th.growth
        verdict = "trustworthy" if th.trustworthy else "NOT trustworthy"
        print(f"{prec}: amplification {th.amplification:.2e} (e-folding time {1 / th.exponent * kyr:.1f} kyr)")
        print(f"  threshold {th.delta:.2e} pc = {th.metres:.2e} m = {th.planck_lengths:.2e} Planck lengths")
        print(f"  round-trip distance {th.roundtrip_delta:.1e}, as an initial error {th.numerical_floor:.1e}: {verdict}")

    fig = plots.amplification_plot(curves, units=plots.axis_units(scale),
                                   title="Growth of a small displacement in the black-hole triple")
    png = plots.save(fig, args.out / "planck_threshold.png")
    print()
    print(f"growth curves written to {png}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
