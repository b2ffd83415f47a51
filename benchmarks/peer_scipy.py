"""Peer engine: scipy's solve_ivp with the explicit Runge-Kutta method DOP853 (order 8 with an
embedded error estimate), float64, on x' = v, v' = a(x) as a first-order system of 6N equations.

Two right-hand sides, as a user would write them:
- ``python``: loops over pairs in plain Python floats (``y.tolist()`` first, the cheapest way to read
  a small numpy array from Python);
- ``numpy``: broadcasting over all pairs, the same expression as peer_numpy_gbs.accelerations.

Evaluations are solve_ivp's own ``nfev``; the wall time includes solve_ivp's per-step overhead,
which is part of what a user of this engine pays.
"""

from __future__ import annotations

import math
import time

import numpy as np

from .peer_numpy_gbs import PeerResult, accelerations, energy

__all__ = ["RHS_KINDS", "integrate", "roundtrip"]

RHS_KINDS = ("python", "numpy")


def _rhs_python(masses: np.ndarray):
    m = [float(q) for q in masses]
    n = len(m)

    def rhs(t, y):
        q = y.tolist()
        a = [0.0] * (3 * n)
        for i in range(n):
            xi, yi, zi = q[3 * i], q[3 * i + 1], q[3 * i + 2]
            for j in range(i + 1, n):
                dx = q[3 * j] - xi
                dy = q[3 * j + 1] - yi
                dz = q[3 * j + 2] - zi
                r2 = dx * dx + dy * dy + dz * dz
                inv = 1.0 / (r2 * math.sqrt(r2))
                fj = m[j] * inv
                fi = m[i] * inv
                a[3 * i] += fj * dx
                a[3 * i + 1] += fj * dy
                a[3 * i + 2] += fj * dz
                a[3 * j] -= fi * dx
                a[3 * j + 1] -= fi * dy
                a[3 * j + 2] -= fi * dz
        return q[3 * n:] + a

    return rhs


def _rhs_numpy(masses: np.ndarray):
    m = np.asarray(masses, dtype=np.float64)
    n = len(m)

    def rhs(t, y):
        x = y[: 3 * n].reshape(n, 3)
        return np.concatenate([y[3 * n:], accelerations(m, x).ravel()])

    return rhs


def integrate(masses, positions, velocities, t: float, rtol: float = 1e-12, atol: float | None = None,
              rhs: str = "python") -> PeerResult:
    """Integrate over a span t (negative: backward) with DOP853."""
    from scipy.integrate import solve_ivp

    if rhs not in RHS_KINDS:
        raise ValueError(f"rhs: expected one of {RHS_KINDS}, got {rhs!r}")
    m = np.asarray(masses, dtype=np.float64)
    n = len(m)
    x0 = np.asarray(positions, dtype=np.float64).reshape(n, 3)
    v0 = np.asarray(velocities, dtype=np.float64).reshape(n, 3)
    y0 = np.concatenate([x0.ravel(), v0.ravel()])
    fun = _rhs_python(m) if rhs == "python" else _rhs_numpy(m)
    start = time.perf_counter()
    sol = solve_ivp(fun, (0.0, float(t)), y0, method="DOP853", rtol=rtol, atol=rtol if atol is None else atol)
    wall = time.perf_counter() - start
    y = sol.y[:, -1]
    x, v = y[: 3 * n].reshape(n, 3), y[3 * n:].reshape(n, 3)
    e0, e1 = energy(m, x0, v0), energy(m, x, v)
    steps = max(len(sol.t) - 1, 0)
    return PeerResult(x, v, float(sol.t[-1]), "success" if sol.status == 0 else f"failed ({sol.message})",
                      steps, 0, int(sol.nfev), wall, abs(e1 - e0) / abs(e0))


def roundtrip(masses, positions, velocities, t: float, **options):
    """(delta, forward, backward): forward to t, negate velocities, forward t again, negate."""
    x0 = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    v0 = np.asarray(velocities, dtype=np.float64).reshape(-1, 3)
    fwd = integrate(masses, x0, v0, t, **options)
    back = integrate(masses, fwd.positions, -fwd.velocities, t, **options)
    delta = math.sqrt(float(np.sum((back.positions - x0) ** 2) + np.sum((-back.velocities - v0) ** 2)))
    return delta, fwd, back
