"""A minimal built-in example (placeholder for the full demo): Burrau's problem there and back."""

from __future__ import annotations

from typing import Callable


def run_quick_demo(out: Callable[[str], None]) -> int:
    from . import System, integrate, phase_distance

    out("Burrau's three-body problem (masses 3, 4, 5 at rest), integrated to t = 20 and back")
    out(f"{'precision':>9}  {'round-trip delta':>16}  {'energy error':>12}  {'evaluations':>11}")
    for prec in ("f64", "dd"):
        s = System([3, 4, 5], [[1, 3], [-2, -1], [1, -1]], [[0, 0]] * 3, precision=prec)
        fwd = integrate(s, 20)
        back = integrate(fwd.system.reversed(), 20)
        delta = phase_distance(back.system.reversed(), s)
        out(f"{prec:>9}  {delta:16.3e}  {fwd.energy_error:12.3e}  {fwd.evaluations + back.evaluations:11d}")
    return 0
