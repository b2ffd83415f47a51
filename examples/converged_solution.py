"""A converged solution: how many digits of the Pythagorean problem's state at time t are true?

``loschmidt.converge`` integrates the same start again and again with a tighter tolerance, moving
up from double to double-double to quad-double when the tolerance ladder of a precision is used
up, until two successive runs agree to the number of significant digits asked for in every
coordinate (the converged-solution approach of Boekholt & Portegies Zwart 2015, Comp. Astrophys.
Cosmol. 2:2). It reports the agreement it actually observed and never claims more.

The problem is Burrau's (masses 3, 4, 5 at rest on a 3-4-5 triangle; Szebehely & Peters 1967,
AJ 72, 876), integrated with the regularized chain method.

Usage::

    python examples/converged_solution.py [--quick] [--out DIR]

``--quick``: t = 10, 16 digits (under a second of integration). Full: t = 70, 24 digits, which
needs quad-double (about 10 s). The converged state is saved exactly as ``converged-state.json`` in
``--out`` (default: a new temporary directory, printed; ``loschmidt.System.load`` reads it).

Expected output (measured on the development machine): the ladder of runs with the digits each
agrees with the one before, then ``converged: True``:

- quick: the four f64 rungs agree to 5, 7 and 10 digits, then dd at tol 1e-16, 1e-19 and 1e-22
  reach 11, 13 and 16 digits; converged after 7 runs, in dd.
- full: f64 and the loose dd rungs agree to fewer than 3 digits (the close encounters amplify
  every error), dd at tol 1e-28 and 1e-30 reach 14 and 17 digits (dd's limit), and quad-double at
  tol 1e-40 and 1e-46 reaches about 23 and 30 digits; converged after 13 runs, in qd.

Then the converged positions and velocities, to the digits agreed.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path

import loschmidt
from loschmidt import ics, precision


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="t = 10 and 16 digits instead of t = 70 and 24")
    parser.add_argument("--out", type=Path, default=None, help="directory for the converged state (default: a new temporary directory)")
    args = parser.parse_args(argv)
    if args.out is None:  # never into the checkout: a fresh temporary directory
        import tempfile

        args.out = Path(tempfile.mkdtemp(prefix="loschmidt-example-"))
        print(f"output directory: {args.out}")
    t, digits = (10, 16) if args.quick else (70, 24)
    args.out.mkdir(parents=True, exist_ok=True)

    print(f"Pythagorean problem to t = {t}, method 'chain': asking for {digits} significant digits")
    c = loschmidt.converge(ics.pythagorean("f64"), t, digits=digits, method="chain", budget=300)
    print()
    print(f"{'run':>3} {'precision':<9} {'tol':>7} {'status':>8} {'evaluations':>11} {'time':>7}  digits agreed with the run before")
    for k, r in enumerate(c.runs, 1):
        agreed = "-" if r.digits is None else f"{r.digits:.1f}"
        print(f"{k:>3} {r.precision:<9} {r.tol:>7.0e} {r.status:>8} {r.evaluations:>11} {r.wall_time:>6.2f}s  {agreed}")
    print()
    print(f"converged: {c.converged} ({c.reason}); digits agreed: {c.digits:.1f} of {c.requested:g} asked for")
    if c.system is None:
        return 1
    shown = max(1, min(int(math.floor(c.digits)), precision.digits(c.system.precision)))
    print(f"converged state at t = {c.system.time:g} ({c.system.precision}), {shown} significant digits:")
    x = c.system.limbs("positions")
    v = c.system.limbs("velocities")
    for i, m in enumerate(c.system.masses):
        px = ", ".join(precision.to_string(x[i, j], shown) for j in range(2))
        vx = ", ".join(precision.to_string(v[i, j], shown) for j in range(2))
        print(f"  body {i} (m = {m:g}): x = ({px})")
        print(f"  {'':>12} v = ({vx})")
    path = args.out / "converged-state.json"
    c.system.save(path)
    print(f"saved exactly to {path}")
    return 0 if c.converged else 1


if __name__ == "__main__":
    sys.exit(main())
