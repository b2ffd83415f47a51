"""Peer engine: the GBS integrator of peer_numpy_gbs.py compiled with numba (float64), when numba is
importable. numba is an optional, benchmark-only extra: nothing else needs it.

Same method, sequence, constants and order/step control as peer_numpy_gbs.py (see its docstring),
rewritten as explicit loops over flat arrays so that numba compiles the whole driver, force loop
and tableau included, to machine code: what a user gets by taking the numpy engine one step
further. Compiled without fastmath (numba's default), so no reassociation or contraction. The
first call compiles (a few seconds); ``compile()`` does that up front and reports the time.
"""

from __future__ import annotations

import math
import time

import numpy as np

from .peer_numpy_gbs import DEFAULT_COLUMNS, ERROR_TARGET, FAC_MAX, FAC_MIN, ORDER_DOWN, ORDER_UP, SAFETY, PeerResult

try:  # optional
    import numba
except ImportError:  # pragma: no cover - depends on the environment
    numba = None

__all__ = ["available", "compile", "integrate", "roundtrip"]

_STATUS = {0: "success", 1: "max_steps", 2: "step_too_small"}
_kernels: dict = {}


def available() -> bool:
    return numba is not None


def _build() -> dict:
    njit = numba.njit(cache=False)

    @njit
    def accel(m, x, a, n):
        for k in range(3 * n):
            a[k] = 0.0
        for i in range(n):
            for j in range(i + 1, n):
                dx = x[3 * j] - x[3 * i]
                dy = x[3 * j + 1] - x[3 * i + 1]
                dz = x[3 * j + 2] - x[3 * i + 2]
                r2 = dx * dx + dy * dy + dz * dz
                q = 1.0 / (r2 * math.sqrt(r2))
                qj = m[j] * q
                qi = m[i] * q
                a[3 * i] += qj * dx
                a[3 * i + 1] += qj * dy
                a[3 * i + 2] += qj * dz
                a[3 * j] -= qi * dx
                a[3 * j + 1] -= qi * dy
                a[3 * j + 2] -= qi * dz

    @njit
    def energy(m, y, n):
        kin = 0.0
        for i in range(n):
            for c in range(3):
                w = y[3 * n + 3 * i + c]
                kin += 0.5 * m[i] * w * w
        pot = 0.0
        for i in range(n):
            for j in range(i + 1, n):
                r2 = 0.0
                for c in range(3):
                    d = y[3 * j + c] - y[3 * i + c]
                    r2 += d * d
                pot -= m[i] * m[j] / math.sqrt(r2)
        return kin + pot

    @njit
    def stormer(m, y, a0, H, nsub, n, out, xt, a):
        # out = (dx, dv) increments of nsub kick-drift-kick substeps over H
        k = 3 * n
        h = H / nsub
        for i in range(k):
            out[k + i] = 0.5 * h * a0[i]
            out[i] = h * (y[k + i] + out[k + i])
        for _ in range(nsub - 1):
            for i in range(k):
                xt[i] = y[i] + out[i]
            accel(m, xt, a, n)
            for i in range(k):
                out[k + i] += h * a[i]
                out[i] += h * (y[k + i] + out[k + i])
        for i in range(k):
            xt[i] = y[i] + out[i]
        accel(m, xt, a, n)
        for i in range(k):
            out[k + i] += 0.5 * h * a[i]

    @njit
    def initial_step(m, y, a0, rtol, atol, span, n):
        k = 3 * n
        d0 = 0.0
        d1 = 0.0
        for i in range(2 * k):
            sc = atol + rtol * abs(y[i])
            f = y[k + i] if i < k else a0[i - k]
            d0 += (y[i] / sc) ** 2
            d1 += (f / sc) ** 2
        d0 = math.sqrt(d0 / (2 * k))
        d1 = math.sqrt(d1 / (2 * k))
        h0 = 1e-6 * span if (d0 < 1e-5 or d1 < 1e-5) else 0.01 * d0 / d1
        h0 = min(h0, span)
        xt = np.empty(k)
        a1 = np.empty(k)
        for i in range(k):
            xt[i] = y[i] + h0 * y[k + i]
        accel(m, xt, a1, n)
        d2 = 0.0
        for i in range(2 * k):
            sc = atol + rtol * abs(y[i])
            if i < k:
                df = h0 * a0[i]
            else:
                df = a1[i - k] - a0[i - k]
            d2 += (df / sc) ** 2
        d2 = math.sqrt(d2 / (2 * k)) / h0
        dmax = max(d1, d2)
        if dmax <= 1e-15:
            h1 = max(1e-6 * span, 1e-3 * h0)
        else:
            h1 = (0.01 / dmax) ** (1.0 / 10)
        return min(100 * h0, h1, span)

    @njit
    def run(m, y0, t, rtol, atol, kmax, max_steps):
        n = m.shape[0]
        k3 = 3 * n
        dim = 2 * k3
        y = y0.copy()
        seq = np.empty(kmax + 1, np.int64)
        for j in range(kmax + 1):
            seq[j] = 2 * (j + 1)
        work = np.empty(kmax + 1)
        work[0] = seq[0] + 1.0
        for j in range(1, kmax + 1):
            work[j] = work[j - 1] + seq[j]
        coef = np.zeros((kmax, kmax))
        for j in range(kmax):
            for col in range(1, j + 1):
                r = seq[j] / seq[j - col]
                coef[j, col] = 1.0 / (r * r - 1.0)
        prev = np.zeros((kmax, dim))
        cur = np.zeros((kmax, dim))
        inc = np.zeros(dim)
        errs = np.zeros(kmax + 1)
        hk = np.zeros(kmax + 1)
        wk = np.zeros(kmax + 1)
        xt = np.empty(k3)
        a = np.empty(k3)
        a0 = np.empty(k3)
        y0abs = np.empty(dim)
        span = abs(t)
        direction = 1.0 if t >= 0 else -1.0
        done = 0.0
        accel(m, y, a0, n)
        evals = 2
        H = initial_step(m, y, a0, rtol, atol, span, n)
        k = int(round(0.6 * -math.log10(rtol) + 1.5))
        k = min(max(3, k), kmax)
        steps = 0
        rejected = 0
        last_rejected = False
        status = 0
        while done < span:
            if steps + rejected >= max_steps:
                status = 1
                break
            last = span - done <= H * (1 + 1e-12)
            Hs = span - done if last else H
            Hd = direction * Hs
            for i in range(dim):
                y0abs[i] = abs(y[i])
            for j in range(k):
                stormer(m, y, a0, Hd, seq[j], n, inc, xt, a)
                evals += seq[j]
                # Aitken-Neville: cur[c] is column c of row j, prev[c] column c of row j - 1
                for i in range(dim):
                    cur[0, i] = inc[i]
                for col in range(1, j + 1):
                    w = coef[j, col]
                    for i in range(dim):
                        cur[col, i] = cur[col - 1, i] + (cur[col - 1, i] - prev[col - 1, i]) * w
                if j > 0:
                    s = 0.0
                    for i in range(dim):
                        sc = atol + rtol * max(y0abs[i], abs(y[i] + cur[j, i]))
                        d = (cur[j, i] - cur[j - 1, i]) / sc
                        s += d * d
                    err = math.sqrt(s / dim)
                    errs[j + 1] = err if math.isfinite(err) else np.inf
                for col in range(j + 1):
                    for i in range(dim):
                        prev[col, i] = cur[col, i]
            for c in range(2, k + 1):
                err = errs[c]
                if err == np.inf:
                    fac = FAC_MIN
                elif err == 0.0:
                    fac = FAC_MAX
                else:
                    fac = SAFETY * (ERROR_TARGET / err) ** (1.0 / (2 * c - 1))
                    fac = min(FAC_MAX, max(FAC_MIN, fac))
                hk[c] = Hs * fac
                wk[c] = work[c - 1] / hk[c]
            if errs[k] <= 1.0:
                for i in range(dim):
                    y[i] += prev[k - 1, i]
                done = span if last else done + Hs
                steps += 1
                accel(m, y, a0, n)
                evals += 1
                knew = k
                if k > 2 and wk[k - 1] < ORDER_DOWN * wk[k]:
                    knew = k - 1
                elif k < kmax and (k == 2 or wk[k] < ORDER_UP * wk[k - 1]) and not last_rejected:
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
                status = 2
                break
        return y, status, steps, rejected, evals, direction * done

    return {"run": run, "energy": energy}


def compile() -> float:
    """Compile the kernels (first use); returns the seconds spent (0 when already compiled)."""
    if not available():
        raise RuntimeError("numba is not importable")
    if _kernels:
        return 0.0
    start = time.perf_counter()
    _kernels.update(_build())
    m = np.array([1.0, 1.0])
    y = np.array([-0.5, 0, 0, 0.5, 0, 0, 0, -0.5, 0, 0, 0.5, 0.0])
    _kernels["run"](m, y, 0.1, 1e-10, 1e-10, DEFAULT_COLUMNS, 1000)
    _kernels["energy"](m, y, 2)
    return time.perf_counter() - start


def integrate(masses, positions, velocities, t: float, rtol: float = 1e-13, atol: float | None = None,
              max_columns: int = DEFAULT_COLUMNS, max_steps: int = 10**7) -> PeerResult:
    """Same interface and result as peer_numpy_gbs.integrate (wall_time excludes compilation)."""
    compile()
    m = np.ascontiguousarray(masses, dtype=np.float64)
    n = len(m)
    x0 = np.asarray(positions, dtype=np.float64).ravel()
    y0 = np.concatenate([x0, np.asarray(velocities, dtype=np.float64).ravel()])
    e0 = _kernels["energy"](m, y0, n)
    start = time.perf_counter()
    a_tol = float(rtol if atol is None else atol)
    y, code, steps, rej, evals, t_done = _kernels["run"](m, y0, float(t), float(rtol), a_tol, int(max_columns),
                                                         int(max_steps))
    wall = time.perf_counter() - start
    e1 = _kernels["energy"](m, y, n)
    return PeerResult(y[: 3 * n].reshape(n, 3), y[3 * n:].reshape(n, 3), t_done, _STATUS[int(code)], int(steps),
                      int(rej), int(evals), wall, abs(e1 - e0) / abs(e0))


def roundtrip(masses, positions, velocities, t: float, **options):
    """(delta, forward, backward) as peer_numpy_gbs.roundtrip."""
    x0 = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    v0 = np.asarray(velocities, dtype=np.float64).reshape(-1, 3)
    fwd = integrate(masses, x0, v0, t, **options)
    back = integrate(masses, fwd.positions, -fwd.velocities, t, **options)
    delta = math.sqrt(float(np.sum((back.positions - x0) ** 2) + np.sum((-back.velocities - v0) ** 2)))
    return delta, fwd, back
