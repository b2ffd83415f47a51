"""Peer engine: mpmath.odefun, mpmath's arbitrary-precision Taylor-series ODE solver, at a chosen
number of decimal digits. Only for short problems: every operation is a Python-level multiprecision
operation.

The right-hand side is the planar or spatial N-body force written with mpmath numbers; ``evaluations``
counts its calls. The solver object is created anew for each run (it caches its series).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import mpmath

__all__ = ["MpResult", "integrate"]


@dataclass
class MpResult:
    positions: list  # N x 3 mpf
    velocities: list
    dps: int
    evaluations: int
    wall_time: float
    energy_error: float
    status: str = "success"

    @property
    def success(self) -> bool:
        return self.status == "success"


def _energy(m, x, v):
    n = len(m)
    kin = sum(m[i] * sum(c * c for c in v[i]) for i in range(n)) / 2
    pot = 0
    for i in range(n):
        for j in range(i + 1, n):
            pot -= m[i] * m[j] / mpmath.sqrt(sum((x[j][c] - x[i][c]) ** 2 for c in range(3)))
    return kin + pot


def integrate(masses, positions, velocities, t, dps: int = 30) -> MpResult:
    """Integrate over t (> 0) at ``dps`` decimal digits. Inputs may be mpf, Fraction-like or exact
    decimal strings; they are converted at the working precision."""
    with mpmath.workdps(dps):
        m = [mpmath.mpf(q) for q in masses]
        n = len(m)
        x0 = [[mpmath.mpf(c) for c in row] for row in positions]
        v0 = [[mpmath.mpf(c) for c in row] for row in velocities]
        y0 = [c for row in x0 for c in row] + [c for row in v0 for c in row]
        calls = [0]

        def rhs(_t, y):
            calls[0] += 1
            a = [mpmath.mpf(0)] * (3 * n)
            for i in range(n):
                for j in range(i + 1, n):
                    d = [y[3 * j + c] - y[3 * i + c] for c in range(3)]
                    r2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2]
                    q = 1 / (r2 * mpmath.sqrt(r2))
                    for c in range(3):
                        a[3 * i + c] += m[j] * q * d[c]
                        a[3 * j + c] -= m[i] * q * d[c]
            return list(y[3 * n:]) + a

        start = time.perf_counter()
        solver = mpmath.odefun(rhs, 0, y0)
        y = solver(mpmath.mpf(t))
        wall = time.perf_counter() - start
        x = [[y[3 * i + c] for c in range(3)] for i in range(n)]
        v = [[y[3 * n + 3 * i + c] for c in range(3)] for i in range(n)]
        e0, e1 = _energy(m, x0, v0), _energy(m, x, v)
        err = float(abs(e1 - e0) / abs(e0))
    return MpResult(x, v, dps, calls[0], wall, err)
