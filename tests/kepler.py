"""Exact two-body reference: Kepler's equation solved with mpmath (an exact solution, not project code)."""

from __future__ import annotations

import mpmath


def kepler_state(e, t, a=1, mass=1, m1=None, dps=80):
    """Relative position/velocity (x, y, vx, vy) of a Kepler orbit started at periapsis on the +x axis.

    G = 1, total mass ``mass``, semimajor axis ``a``, eccentricity ``e`` (0 <= e < 1), time ``t`` from
    periapsis. Solved by Newton's method on E - e sin E = M at ``dps`` digits.
    """
    with mpmath.workdps(dps):
        e = mpmath.mpf(e)
        a = mpmath.mpf(a)
        mu = mpmath.mpf(mass)
        n = mpmath.sqrt(mu / a**3)
        M = n * mpmath.mpf(t)
        E = M + e * mpmath.sin(M)
        for _ in range(200):
            dE = (E - e * mpmath.sin(E) - M) / (1 - e * mpmath.cos(E))
            E -= dE
            if abs(dE) < mpmath.mpf(10) ** (-dps + 5):
                break
        cosE, sinE = mpmath.cos(E), mpmath.sin(E)
        s = mpmath.sqrt(1 - e * e)
        x = a * (cosE - e)
        y = a * s * sinE
        denom = 1 - e * cosE
        vx = -a * n * sinE / denom
        vy = a * n * s * cosE / denom
        return x, y, vx, vy


def kepler_initial(e, a=1, mass=1):
    """Periapsis state (x, y, vx, vy) as exact-as-possible mpmath values."""
    return kepler_state(e, 0, a, mass)
