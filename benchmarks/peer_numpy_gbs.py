"""Peer engine: a plain numpy Gragg-Bulirsch-Stoer integrator for x'' = a(x), float64.

This is the engine a user would write for themselves before reaching for loschmidt: written here
from the method's textbook description (Hairer, Norsett & Wanner, Solving ODEs I, 2nd ed., section
II.9; the Stormer form of the midpoint rule for second-order equations), not from loschmidt's C++.

- Substep: Stormer's form of Gragg's midpoint rule (kick-drift-kick leapfrog) with n_j substeps over
  a macro step H; symmetric, so its error expands in even powers of h = H / n_j.
- Sequence: harmonic, n_j = 2, 4, 6, ...; the start acceleration a(x0) is shared by all rows, so
  row j costs n_j force evaluations and A_1 = n_1 + 1, A_{j+1} = A_j + n_{j+1}.
- Aitken-Neville extrapolation in h^2 of the increments (x1 - x0, v1 - v0):
  T_{j,l+1} = T_{j,l} + (T_{j,l} - T_{j-1,l}) / ((n_j / n_{j-l})^2 - 1).
- Error estimate err_k = RMS of (T_{k,k} - T_{k,k-1}) / sc, sc_i = atol + rtol * max(|y0_i|, |y1_i|).
- Step proposal H_k = H * 0.94 * (0.65 / err_k)^(1 / (2k - 1)), the factor clamped to [1/50, 4].
- Order: minimise the work per unit step W_k = A_k / H_k with the usual 0.8 / 0.9 hysteresis
  ([memory] for those two numbers); never raise the order or the step right after a rejection.

It is deliberately simple (no convergence monitor inside a step, no predictive control, no planar
fast path, no compensated time): "simple order/step control" of a careful user. Everything is
vectorised with numpy over bodies, which for three bodies means Python overhead per operation
dominates; that is the point of the comparison.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

__all__ = ["PeerResult", "accelerations", "energy", "integrate", "roundtrip", "DEFAULT_COLUMNS"]

#: Highest extrapolation column for float64 (about 8-10 for f64; METHODS.md section 2, item 7).
DEFAULT_COLUMNS = 9
SAFETY = 0.94
ERROR_TARGET = 0.65
FAC_MIN, FAC_MAX = 1.0 / 50.0, 4.0
ORDER_DOWN, ORDER_UP = 0.8, 0.9


@dataclass
class PeerResult:
    """Final state and statistics of a peer run (the same fields the benchmark reads from loschmidt)."""

    positions: np.ndarray
    velocities: np.ndarray
    t: float
    status: str
    steps: int
    rejected: int
    evaluations: int
    wall_time: float
    energy_error: float

    @property
    def success(self) -> bool:
        return self.status == "success"


def accelerations(m: np.ndarray, x: np.ndarray) -> np.ndarray:
    """a_i = sum_j m_j (x_j - x_i) / |x_j - x_i|^3 for x of shape (N, 3), G = 1, numpy broadcasting.

    The diagonal distance is set to infinity so that the self term is an exact zero.
    """
    d = x[np.newaxis, :, :] - x[:, np.newaxis, :]  # d[i, j] = x_j - x_i
    r2 = (d * d).sum(axis=-1)
    r2[_diagonal(len(m))] = np.inf
    w = m / (r2 * np.sqrt(r2))
    return (w[:, :, np.newaxis] * d).sum(axis=1)


_DIAGONALS: dict = {}


def _diagonal(n: int):
    if n not in _DIAGONALS:
        _DIAGONALS[n] = np.diag_indices(n)
    return _DIAGONALS[n]


def energy(m: np.ndarray, x: np.ndarray, v: np.ndarray) -> float:
    """Kinetic plus potential energy in float64."""
    kinetic = 0.5 * float(np.sum(m * np.einsum("ik,ik->i", v, v)))
    i, j = np.triu_indices(len(m), 1)
    r = np.sqrt(np.einsum("pk,pk->p", x[j] - x[i], x[j] - x[i]))
    return kinetic - float(np.sum(m[i] * m[j] / r))


def _stormer(m, x0, v0, a0, H, n):
    """n kick-drift-kick substeps over H from (x0, v0) with a(x0) = a0: increments (dx, dv)."""
    h = H / n
    dv = (0.5 * h) * a0
    dx = h * (v0 + dv)
    for _ in range(n - 1):
        a = accelerations(m, x0 + dx)
        dv += h * a
        dx += h * (v0 + dv)
    a = accelerations(m, x0 + dx)
    dv += (0.5 * h) * a
    return dx, dv


def _initial_step(m, x, v, a, rtol, atol, span):
    """A first step from the sizes of y, y' and the change of y' over a trial step (HNW I, II.4)."""
    y = np.concatenate([x.ravel(), v.ravel()])
    f = np.concatenate([v.ravel(), a.ravel()])
    sc = atol + rtol * np.abs(y)
    d0 = math.sqrt(np.mean((y / sc) ** 2))
    d1 = math.sqrt(np.mean((f / sc) ** 2))
    h0 = 1e-6 * span if (d0 < 1e-5 or d1 < 1e-5) else 0.01 * d0 / d1
    h0 = min(h0, span)
    a1 = accelerations(m, x + h0 * v)
    f1 = np.concatenate([(v + h0 * a).ravel(), a1.ravel()])
    d2 = math.sqrt(np.mean(((f1 - f) / sc) ** 2)) / h0
    dmax = max(d1, d2)
    h1 = max(1e-6 * span, 1e-3 * h0) if dmax <= 1e-15 else (0.01 / dmax) ** (1.0 / 10)
    return min(100 * h0, h1, span)


def integrate(
    masses,
    positions,
    velocities,
    t: float,
    rtol: float = 1e-13,
    atol: float | None = None,
    max_columns: int = DEFAULT_COLUMNS,
    max_steps: int = 10**7,
    max_wall_time: float = math.inf,
) -> PeerResult:
    """Integrate over a span t (negative: backward) and return the final state and statistics."""
    start = time.perf_counter()
    m = np.asarray(masses, dtype=np.float64)
    x = np.array(positions, dtype=np.float64).reshape(len(m), 3)
    v = np.array(velocities, dtype=np.float64).reshape(len(m), 3)
    atol = rtol if atol is None else atol
    kmax = int(max_columns)
    seq = [2 * (j + 1) for j in range(kmax + 1)]  # rows 1..kmax+1 (kmax+1 only for work estimates)
    work = np.cumsum([seq[0] + 1] + seq[1:]).astype(float)  # work[j] = A_{j+1}
    coef = [[1.0 / ((seq[j] / seq[j - c]) ** 2 - 1.0) if c else 0.0 for c in range(j + 1)] for j in range(kmax)]
    e0 = energy(m, x, v)
    span = abs(float(t))
    direction = 1.0 if t >= 0 else -1.0
    done = 0.0
    a0 = accelerations(m, x)
    evals = 2
    H = _initial_step(m, x, v, a0, rtol, atol, span)
    k = min(max(3, int(round(0.6 * -math.log10(rtol) + 1.5))), kmax)  # target column count
    steps = rejected = 0
    last_rejected = False
    status = "success"
    while done < span:
        if steps + rejected >= max_steps:
            status = "max_steps"
            break
        if time.perf_counter() - start > max_wall_time:
            status = "max_wall_time"
            break
        last = span - done <= H * (1 + 1e-12)
        Hs = span - done if last else H
        Hd = direction * Hs
        # tableau: rows 1..k (index 0..k-1), each row a list of columns of (dx, dv)
        prev_row = None
        errs = {}
        y0abs = np.concatenate([np.abs(x).ravel(), np.abs(v).ravel()])
        for j in range(k):
            dx, dv = _stormer(m, x, v, a0, Hd, seq[j])
            evals += seq[j]
            row = [np.concatenate([dx.ravel(), dv.ravel()])]
            for col in range(1, j + 1):
                row.append(row[col - 1] + (row[col - 1] - prev_row[col - 1]) * coef[j][col])
            if j >= 1:
                y1abs = np.abs(np.concatenate([x.ravel(), v.ravel()]) + row[j])
                sc = atol + rtol * np.maximum(y0abs, y1abs)
                err = math.sqrt(np.mean(((row[j] - row[j - 1]) / sc) ** 2))
                errs[j + 1] = err if math.isfinite(err) else math.inf
            prev_row = row
        # step proposals and work per unit step for the columns that have an error estimate
        hk, wk = {}, {}
        for c, err in errs.items():
            if err == math.inf:
                fac = FAC_MIN
            elif err == 0.0:
                fac = FAC_MAX
            else:
                fac = SAFETY * (ERROR_TARGET / err) ** (1.0 / (2 * c - 1))
                fac = min(FAC_MAX, max(FAC_MIN, fac))
            hk[c] = Hs * fac
            wk[c] = work[c - 1] / hk[c]
        if errs[k] <= 1.0:
            inc = prev_row[k - 1]
            n3 = 3 * len(m)
            x = x + inc[:n3].reshape(x.shape)
            v = v + inc[n3:].reshape(v.shape)
            done = span if last else done + Hs
            steps += 1
            a0 = accelerations(m, x)
            evals += 1
            knew = k
            if k > 2 and wk[k - 1] < ORDER_DOWN * wk[k]:
                knew = k - 1
            elif k < kmax and wk[k] < ORDER_UP * wk.get(k - 1, math.inf) and not last_rejected:
                knew = k + 1
            if knew > k:
                Hn = hk[k] * work[knew - 1] / work[k - 1]
            else:
                Hn = hk[knew]
            if last_rejected:
                Hn = min(Hn, Hs)
            H = Hn
            k = knew
            last_rejected = False
        else:
            rejected += 1
            last_rejected = True
            if k > 2 and wk[k - 1] < ORDER_DOWN * wk[k]:
                k = k - 1
            H = min(hk[k], Hs * FAC_MAX)
        if not (H > 1e-14 * max(span, 1.0)):
            status = "step_too_small"
            break
    wall = time.perf_counter() - start
    e1 = energy(m, x, v)
    return PeerResult(x, v, direction * done, status, steps, rejected, evals, wall, abs(e1 - e0) / abs(e0))


def roundtrip(masses, positions, velocities, t: float, **options) -> tuple[float, PeerResult, PeerResult]:
    """Forward to t, negate velocities, forward t again, negate: (delta, forward, backward)."""
    x0 = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    v0 = np.asarray(velocities, dtype=np.float64).reshape(-1, 3)
    fwd = integrate(masses, x0, v0, t, **options)
    back = integrate(masses, fwd.positions, -fwd.velocities, t, **options)
    delta = math.sqrt(float(np.sum((back.positions - x0) ** 2) + np.sum((-back.velocities - v0) ** 2)))
    return delta, fwd, back
