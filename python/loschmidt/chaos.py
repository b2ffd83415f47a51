"""Reversibility, perturbation growth and converged solutions.

- ``roundtrip``: integrate to t, negate the velocities, integrate t again, negate again, and measure
  the phase-space distance to the start (a Loschmidt test; METHODS.md section 4).
- ``amplification``: how much a tiny displacement of one coordinate grows, A(t) = delta(t) / delta(0).
- ``growth``: the same with renormalisation (Benettin et al. 1980), so the accumulated growth of the
  most unstable direction can be followed far beyond where two trajectories would separate.
- ``lyapunov``: the finite-time maximal Lyapunov exponent from the variational (tangent) equations,
  integrated beside the orbit in C++ in the working precision.
- ``converge``: runs with decreasing tolerance and rising precision until two successive runs agree
  to the asked number of digits (the converged-solution approach: Boekholt & Portegies Zwart 2015,
  Comp. Astrophys. Cosmol. 2:2).
- ``irreversibility_threshold``: the smallest initial perturbation that the dynamics amplifies to order
  unity within t, in N-body units and, with a ``units.Scale``, in metres and Planck lengths.
"""

from __future__ import annotations

import math
import numbers
import time as _time
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from . import options as _options
from . import precision as _p
from .integrate import DEFAULT_TOLERANCE, Result, integrate, phase_distances
from .system import System

__all__ = [
    "REVERSIBLE_THRESHOLD",
    "RoundTrip",
    "roundtrip",
    "Amplification",
    "amplification",
    "Growth",
    "growth",
    "Lyapunov",
    "lyapunov",
    "ConvergenceRun",
    "Convergence",
    "converge",
    "Threshold",
    "irreversibility_threshold",
    "displaced",
]


# ---------------------------------------------------------------------------------------------------
# round trips

#: Round-trip distance (phase-space distance of the returned state to the start, N-body units) at or
#: below which a round trip counts as reversible: it "came back". Read by ``RoundTrip.reversible``,
#: ``BatchResult.reversible``, the plots, the report, the demo and the command line. 1e-10 is ten
#: orders of magnitude below the size of the system (order 1 in N-body units) and six above f64's
#: round-off, so a double-precision integration of a regular orbit passes and one swamped by
#: amplified round-off does not (common practice: a fixed absolute threshold on the Loschmidt test).
REVERSIBLE_THRESHOLD = 1e-10


@dataclass(frozen=True)
class RoundTrip:
    """Outcome of ``roundtrip``.

    Attributes
    ----------
    delta : float
        ``sqrt(sum |dr|^2 + |dv|^2)`` between the returned state and the start, computed in the
        working precision (N-body units); NaN when the forward leg did not finish (then
        ``backward`` and ``returned`` are None).
    delta_position, delta_velocity : float
        The position and velocity parts of ``delta``.
    forward, backward : Result
        The two legs (``backward`` integrates the reversed end state of ``forward``).
    returned : System or None
        The end of the return leg with its velocities reversed again, at the start's epoch.
    start : System
        The state the round trip began from.
    """

    delta: float
    delta_position: float
    delta_velocity: float
    forward: Result
    backward: Result | None
    returned: System | None
    start: System = field(repr=False)

    @property
    def status(self) -> str:
        """The first unsuccessful leg's status, else ``success``."""
        if not self.forward.success:
            return self.forward.status
        assert self.backward is not None
        return self.backward.status if not self.backward.success else "success"

    @property
    def success(self) -> bool:
        """Both legs finished."""
        return self.forward.success and self.backward is not None and self.backward.success

    def reversible(self, threshold: float = REVERSIBLE_THRESHOLD) -> bool:
        """Whether the start was recovered.

        Parameters
        ----------
        threshold : float, optional
            Largest ``delta`` that counts (default ``REVERSIBLE_THRESHOLD``, 1e-10).

        Returns
        -------
        bool
            True when both legs finished and ``delta <= threshold``.
        """
        limit = _positive(threshold, "threshold")
        return self.success and self.delta <= limit


def _positive(value: Any, name: str) -> float:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name}: expected a number, got {type(value).__name__}")
    v = _p._real(value)
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{name}: must be a positive finite number, got {value}")
    return v


def _check_system(system: Any) -> System:
    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    return system


def roundtrip(system: System, t: Any, **options: Any) -> RoundTrip:
    """Integrate ``system`` to ``t``, reverse, integrate ``t`` more, reverse; compare with the start.

    A Loschmidt test: a true solution comes back to where it started; the distance it misses by
    measures the integration's error amplified by the dynamics.

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span of each leg.
    **options
        Options of ``loschmidt.integrate`` (``method``, ``tol``, budgets ...).
        Used for both legs; ``times`` is not accepted.

    Returns
    -------
    RoundTrip

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.pythagorean("dd")
    >>> rt = loschmidt.roundtrip(s, 10, method="chain")
    >>> rt.success, rt.delta < 1e-20, rt.reversible()
    (True, True, True)
    >>> loschmidt.roundtrip(s.with_precision("f64"), 10, method="chain").delta > 1e-14
    True
    """
    s = _check_system(system)
    if "times" in options:
        raise ValueError("times: not supported by roundtrip (use integrate on each leg)")
    fwd = integrate(s, t, **options)
    if not fwd.success:
        nan = float("nan")
        return RoundTrip(nan, nan, nan, fwd, None, None, s)
    back = integrate(fwd.system.reversed(), t, **options)
    ret = back.system.reversed()
    ret = System.from_limbs(
        ret.limbs("masses"), ret.limbs("positions"), ret.limbs("velocities"), s.precision,
        radii=s.radii, time=s.limbs("time"), check=False,
    )
    d = phase_distances(ret, s)
    return RoundTrip(d["delta"], d["delta_position"], d["delta_velocity"], fwd, back, ret, s)


# ---------------------------------------------------------------------------------------------------
# perturbation growth


def displaced(system: System, perturbation: Any, body: int = 0, axis: int = 0, kind: str = "positions") -> System:
    """A copy of ``system`` with one coordinate moved by ``perturbation``.

    Parameters
    ----------
    system : System
        The state.
    perturbation : number or decimal string
        Nonzero; added in the working precision.
    body : int, optional
        Index of the body (default 0).
    axis : {0, 1, 2}, optional
        Coordinate (default 0, x).
    kind : {"positions", "velocities"}, optional
        Which coordinate (default a position).

    Returns
    -------
    System

    Raises
    ------
    ValueError
        When the precision cannot resolve the change at that coordinate.

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.pythagorean("dd")
    >>> loschmidt.chaos.displaced(s, "1e-25", body=2, axis=1).limbs("positions")[2, 1]
    array([-1.e+00,  1.e-25])
    """
    s = _check_system(system)
    if kind not in ("positions", "velocities"):
        raise ValueError(f"kind: expected 'positions' or 'velocities', got {kind!r}")
    if not isinstance(body, numbers.Integral) or isinstance(body, bool) or not 0 <= body < s.n:
        raise ValueError(f"body: expected an index in [0, {s.n}), got {body!r}")
    if not isinstance(axis, numbers.Integral) or isinstance(axis, bool) or not 0 <= axis < 3:
        raise ValueError(f"axis: expected 0, 1 or 2, got {axis!r}")
    prec = s.precision
    dp = _p.to_limbs(perturbation, prec, name="perturbation")
    if dp.ndim != 1 or dp[0] == 0:
        raise ValueError("perturbation: expected one nonzero number")
    arr = s.limbs(kind)
    new = _p.add(arr[body, axis], dp, prec)
    if np.array_equal(new, arr[body, axis]):
        raise ValueError(
            f"perturbation: {float(dp[0]):g} is below the resolution of precision {prec!r} at this "
            "coordinate; use a higher precision or a larger perturbation"
        )
    arr[body, axis] = new
    x = arr if kind == "positions" else s.limbs("positions")
    v = arr if kind == "velocities" else s.limbs("velocities")
    return System.from_limbs(s.limbs("masses"), x, v, prec, radii=s.radii, time=s.limbs("time"))


@dataclass(frozen=True)
class Amplification:
    """Growth of a displacement: ``factor[i] = delta[i] / delta0`` at ``times[i]``.

    Attributes
    ----------
    times : numpy.ndarray
        Output times, offsets from the start.
    delta : numpy.ndarray
        Phase-space distance of the two runs at ``times``.
    delta0 : float
        Their distance at the start.
    reference, perturbed : Result
        The two runs.
    """

    times: np.ndarray
    delta: np.ndarray
    delta0: float
    reference: Result
    perturbed: Result

    @property
    def factor(self) -> np.ndarray:
        """A(t) = delta / delta0 at ``times``."""
        return self.delta / self.delta0

    @property
    def final(self) -> float:
        """A at the last output time (NaN when no output time was reached)."""
        return float(self.factor[-1]) if len(self.delta) else float("nan")


def _default_times(t: Any, count: int, prec: str) -> list:
    from fractions import Fraction

    tf = _p.to_fraction(_p.to_limbs(t, prec, name="t"))
    return [tf * Fraction(i, count) for i in range(1, count + 1)]


def amplification(
    system: System,
    t: Any,
    perturbation: Any = 1e-20,
    body: int = 0,
    axis: int = 0,
    times: Sequence[Any] | None = None,
    **options: Any,
) -> Amplification:
    """Integrate ``system`` and a displaced copy; report A(t) = delta(t) / delta(0).

    Both runs use the same ``options``. The displacement is exact in the working precision; choose
    it well above the integration error (tol) and well below one.

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span.
    perturbation : number or decimal string, optional
        Displacement of the coordinate (default 1e-20).
    body : int, optional
        Body displaced (default 0).
    axis : {0, 1, 2}, optional
        Coordinate displaced (default 0).
    times : sequence of numbers, optional
        Output times (default: 64 even steps to ``t``).
    **options
        Options of ``loschmidt.integrate`` (``method``, ``tol``, budgets ...).

    Returns
    -------
    Amplification

    Examples
    --------
    >>> import loschmidt
    >>> a = loschmidt.amplification(loschmidt.ics.pythagorean("dd"), 10, method="chain")
    >>> len(a.times), 10 < a.final < 30
    (64, True)
    """
    s = _check_system(system)
    pert = displaced(s, perturbation, body, axis)
    delta0 = phase_distances(pert, s)["delta"]
    outs = list(times) if times is not None else _default_times(t, 64, s.precision)
    ref = integrate(s, t, times=outs, **options)
    per = integrate(pert, t, times=outs, **options)
    if ref.trajectory is None or per.trajectory is None:
        raise ValueError("times: at least one output time is needed")
    count = min(len(ref.trajectory), len(per.trajectory))
    deltas = np.array([phase_distances(ref.trajectory[i], per.trajectory[i])["delta"] for i in range(count)])
    return Amplification(ref.trajectory.times[:count] - s.time, deltas, delta0, ref, per)


@dataclass(frozen=True)
class Growth:
    """Accumulated growth of the most unstable direction, from renormalised twin trajectories.

    Attributes
    ----------
    times : numpy.ndarray
        Ends of the intervals, offsets from the start.
    log_factor : numpy.ndarray
        ln A accumulated at ``times``.
    delta0 : float
        The distance the twin is pulled back to after each interval.
    result : Result
        The reference run's last interval.
    """

    times: np.ndarray
    log_factor: np.ndarray
    delta0: float
    result: Result

    @property
    def factor(self) -> np.ndarray:
        """A at ``times``, ``exp(log_factor)``."""
        return np.exp(self.log_factor)

    @property
    def exponent(self) -> float:
        """Finite-time Lyapunov exponent ln A(t) / t at the last time."""
        if not len(self.times) or self.times[-1] == 0:  # no interval completed
            return float("nan")
        return float(self.log_factor[-1] / self.times[-1])

    @property
    def efolding_time(self) -> float:
        """1 / exponent (inf when the exponent is not positive)."""
        lam = self.exponent
        return float("inf") if lam <= 0 else 1.0 / lam


def growth(
    system: System,
    t: Any,
    perturbation: float | None = None,
    intervals: int = 100,
    **options: Any,
) -> Growth:
    """Maximal growth of perturbations by the two-trajectory method with renormalisation
    (Benettin, Galgani & Strelcyn 1976; Benettin et al. 1980): the twin is pulled back to distance
    ``perturbation`` after each of ``intervals`` equal intervals and the log growth is summed.

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span (nonzero).
    perturbation : float, optional
        Distance of the twin after each renormalisation; default sqrt(tol) scaled into the working
        precision's useful range (at most 1e-6).
    intervals : int, optional
        Number of equal intervals (default 100).
    **options
        Options of ``loschmidt.integrate`` (``method``, ``tol``, budgets ...).

    Returns
    -------
    Growth

    Examples
    --------
    >>> import loschmidt
    >>> g = loschmidt.growth(loschmidt.ics.pythagorean("dd"), 10, intervals=10, method="chain")
    >>> round(g.exponent, 2), round(g.efolding_time, 1)
    (0.28, 3.5)
    """
    s = _check_system(system)
    if not isinstance(intervals, numbers.Integral) or isinstance(intervals, bool) or intervals < 1:
        raise ValueError(f"intervals: expected a positive integer, got {intervals!r}")
    if intervals > MAX_INTERVALS:  # each interval costs two integrations
        raise ValueError(f"intervals: at most {MAX_INTERVALS}, got {intervals}")
    prec = s.precision
    from .integrate import check_tolerance

    tol = check_tolerance(options.get("tol"), prec, "tol")
    d0 = _positive(perturbation, "perturbation") if perturbation is not None else max(math.sqrt(tol), 1e-30) * 1e3
    d0 = min(d0, 1e-6)
    tf = _p.to_fraction(_p.to_limbs(t, prec, name="t"))
    if tf == 0:
        raise ValueError("t: must be nonzero")
    # first displacement: along all coordinates of body 0's position, normalised afterwards
    twin = displaced(s, d0, 0, 0)
    ref = s
    logs, ts = [], []
    acc = 0.0
    last = None
    step = tf / intervals
    for i in range(intervals):
        span = step
        r1 = integrate(ref, span, **options)
        r2 = integrate(twin, span, **options)
        last = r1
        if not (r1.success and r2.success):
            break
        d = phase_distances(r1.system, r2.system)["delta"]
        if not (d > 0 and math.isfinite(d)):
            break
        dstart = phase_distances(ref, twin)["delta"]
        acc += math.log(d / dstart)
        logs.append(acc)
        ts.append(float(step * (i + 1)))
        ref = r1.system
        twin = _rescaled(r1.system, r2.system, d0 / d)
    assert last is not None
    return Growth(np.array(ts), np.array(logs), d0, last)


#: Most intervals ``growth`` accepts (two integrations each: beyond it, hours of work).
MAX_INTERVALS = 10**6


def _rescaled(ref: System, twin: System, factor: float) -> System:
    """ref + factor * (twin - ref), in the working precision."""
    prec = ref.precision
    out = []
    for name in ("positions", "velocities"):
        a = ref.limbs(name)
        d = _p.sub(twin.limbs(name), a, prec)
        f = np.broadcast_to(_p.to_limbs(factor, prec), d.shape)
        out.append(_p.add(a, _p.mul(d, f, prec), prec))
    return System.from_limbs(ref.limbs("masses"), out[0], out[1], prec, radii=ref.radii, time=ref.limbs("time"), check=False)


# ---------------------------------------------------------------------------------------------------
# Lyapunov exponents from the variational equations


@dataclass(frozen=True)
class Lyapunov:
    """Outcome of ``lyapunov``: growth of the tangent vector along the orbit.

    Attributes
    ----------
    times : ndarray
        Output times (float64 offsets from the start) that were reached.
    log_growth : ndarray
        ``ln(|w(t)| / |w(0)|)`` at ``times``, w = (dx, dv) the tangent vector in the phase-space norm
        ``sqrt(sum_i |dx_i|^2 + |dv_i|^2)`` (N-body units, as ``phase_distance``).
    final_log_growth : float
        ln growth at the time reached, ``span``.
    span : float
        The time reached, as an offset from the start.
    tangent : ndarray
        The final tangent direction, unit norm, shape (2, N, 3): position part, velocity part.
    renormalizations : int
        Exact rescalings of the tangent by powers of two (they change no result).
    result : Result
        The orbit; bit for bit what ``integrate`` gives with the same options and ``times``.
    """

    times: np.ndarray
    log_growth: np.ndarray
    final_log_growth: float
    span: float
    tangent: np.ndarray
    renormalizations: int
    result: Result

    @property
    def exponent(self) -> float:
        """Finite-time maximal Lyapunov exponent ln growth / t at the time reached."""
        return self.final_log_growth / abs(self.span) if self.span != 0 else float("nan")

    @property
    def efolding_time(self) -> float:
        """1 / exponent (inf when the exponent is not positive)."""
        lam = self.exponent
        return float("inf") if not lam > 0 else 1.0 / lam

    @property
    def status(self) -> str:
        """The orbit's status."""
        return self.result.status

    @property
    def success(self) -> bool:
        """Whether the orbit's run finished (``Result.success``)."""
        return self.result.success


#: Largest allowed ``renormalize`` (2^300: the tangent's squared norm stays far from overflow).
MAX_RENORMALIZE = 2.0**300


def _splitmix64(seed: int, count: int) -> np.ndarray:
    """``count`` numbers uniform in [-1, 1) from the SplitMix64 generator (Steele, Lea & Flood 2014),
    written out here so the default tangent never depends on a library's random stream."""
    mask = (1 << 64) - 1
    state = seed & mask
    out = np.empty(count)
    for i in range(count):
        state = (state + 0x9E3779B97F4A7C15) & mask
        z = state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & mask
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & mask
        z ^= z >> 31
        out[i] = 2.0 * ((z >> 11) * 2.0**-53) - 1.0
    return out


def default_tangent(system: System, seed: int = 0) -> np.ndarray:
    """The default initial tangent of ``lyapunov``: 6N numbers uniform in [-1, 1) from SplitMix64
    with ``seed`` (positions body by body, then velocities), z parts set to zero when the system is
    planar (every z and z velocity exactly zero: the exponent of the planar problem), normalised to
    unit phase-space norm. Shape (2, N, 3)."""
    s = _check_system(system)
    w = _splitmix64(seed, 6 * s.n).reshape(2, s.n, 3)
    if _is_planar(s):
        w[:, :, 2] = 0.0
    return w / np.sqrt(np.sum(w * w))


def _is_planar(s: System) -> bool:
    return not np.any(s.limbs("positions")[:, 2]) and not np.any(s.limbs("velocities")[:, 2])


def _check_tangent(tangent: Any, n: int) -> np.ndarray:
    if isinstance(tangent, (str, bytes)):
        raise TypeError("tangent: expected an array of shape (2, N, 3) or (2, N, 2)")
    try:
        kind = np.asarray(tangent).dtype.kind
        if kind in "bcmMSUV":
            raise TypeError
        w = np.array(tangent, dtype=float)
    except (TypeError, ValueError):
        raise TypeError("tangent: expected an array of shape (2, N, 3) or (2, N, 2)") from None
    if w.ndim != 3 or w.shape[0] != 2 or w.shape[1] != n or w.shape[2] not in (2, 3):
        raise ValueError(f"tangent: expected shape (2, {n}, 3) or (2, {n}, 2), got {w.shape}")
    if w.shape[2] == 2:
        w = np.concatenate([w, np.zeros((2, n, 1))], axis=2)
    if not np.all(np.isfinite(w)):
        raise ValueError("tangent: must be finite")
    big = float(np.max(np.abs(w)))
    if not big > 0:
        raise ValueError("tangent: must be a nonzero vector")
    w = w / big  # the norm of a vector of huge or tiny components neither overflows nor underflows
    return w / math.sqrt(float(np.sum(w * w)))


def lyapunov(
    system: System,
    t: Any,
    times: Sequence[Any] | None = None,
    method: str = "gbs",
    renormalize: float = 1e16,
    tangent: Any = None,
    seed: int = 0,
    **options: Any,
) -> Lyapunov:
    """Finite-time maximal Lyapunov exponent from the variational equations.

    The tangent equations dx'' = J(x) dx (J the tidal tensor) are integrated beside the orbit in
    C++, in the working precision, by the same extrapolation (``method="gbs"`` only). The error
    control looks at the orbit alone, so the orbit is exactly that of ``integrate`` with the same
    options and ``times``, and the tangent, whose size is arbitrary, never sets the step; the
    tangent is extrapolated with the orbit's rows and is typically 10^2-10^3 times less accurate
    than the orbit (its local error is the derivative of the orbit's). The tangent equations are
    linear, so renormalising only rescales: whenever ``|w|`` leaves [1/renormalize, renormalize] it is
    multiplied by an exact power of two and the log of the factor accumulated (the result does
    not depend on ``renormalize``).

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span (nonzero; negative: backward; the exponent uses ``abs(t)``).
    times : sequence of numbers, optional
        Output times for the series, as for ``integrate``; default 100 evenly spaced in (0, t].
    method : {"gbs"}, optional
        The only method with variational equations.
    renormalize : float, optional
        Bound on the tangent norm, in [2, 2^300] (default 1e16).
    tangent : array (2, N, 3) or (2, N, 2), optional
        Initial tangent (position part, velocity part), normalised here. Default
        ``default_tangent(system, seed)``: a fixed pseudo-random direction, in the plane for a
        planar system (include z parts to follow out-of-plane perturbations too).
    seed : int, optional
        Seed of the default tangent (default 0).
    **options
        The integration options ``lyapunov`` takes (:mod:`loschmidt.options`), below.
    <options>

    Returns
    -------
    Lyapunov
        The growth series, the exponent and the orbit's ``Result``.

    Examples
    --------
    >>> import loschmidt
    >>> lam = loschmidt.lyapunov(loschmidt.ics.pythagorean("dd"), 10)
    >>> lam.success, round(lam.exponent, 2), len(lam.times)
    (True, 0.33, 100)
    """
    from . import engine as _engine
    from .integrate import _output_times, _time_limbs, _wrap

    s = _check_system(system)
    method = _options.check_method(method)
    if method != "gbs":
        raise ValueError(f"method: lyapunov supports gbs, got method={method!r}")
    prec = s.precision
    t_limbs = _time_limbs(t, prec, "t")
    if not np.any(t_limbs):
        raise ValueError("t: must be nonzero")
    settings = _options.resolve(options, method=method, precision=prec, entry="lyapunov", t_limbs=t_limbs)
    ren = _positive(renormalize, "renormalize")
    if not 2.0 <= ren <= MAX_RENORMALIZE:
        raise ValueError(f"renormalize: must lie in [2, 2^300], got {renormalize!r}")
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or seed < 0:
        raise ValueError(f"seed: expected a non-negative integer, got {seed!r}")
    w = default_tangent(s, int(seed)) if tangent is None else _check_tangent(tangent, s.n)
    outs = _output_times(_default_times(t, 100, prec) if times is None else times, t_limbs, prec)
    rtol = settings["tol"]

    raw = _engine.lyapunov(s.limbs("masses"), s.limbs("positions"), s.limbs("velocities"), _p.to_limbs(w[0], prec),
                           _p.to_limbs(w[1], prec), t_limbs, outs, settings, ren)
    result = _wrap(s, raw, "gbs", prec, rtol, False)
    wt = np.stack([_p.to_float(raw.tangent_positions), _p.to_float(raw.tangent_velocities)])
    wt = wt / np.sqrt(np.sum(wt * wt))
    return Lyapunov(
        times=np.asarray(_p.to_float(raw.output_t), dtype=float).reshape(-1),
        log_growth=np.asarray(raw.output_log_growth, dtype=float),
        final_log_growth=float(raw.log_growth),
        span=float(_p.to_float(raw.t)),
        tangent=wt,
        renormalizations=int(raw.renormalizations),
        result=result,
    )


lyapunov.__doc__ = _options.document(lyapunov.__doc__, "lyapunov")


# ---------------------------------------------------------------------------------------------------
# converged solutions

#: Tolerance ladder per precision used by ``converge`` (each rung about 10^3 to 10^4 tighter).
LADDER = {
    "f64": (1e-8, 1e-10, 1e-12, 1e-13),
    "f64c": (1e-8, 1e-10, 1e-12, 1e-14),
    "dd": (1e-16, 1e-19, 1e-22, 1e-25, 1e-28, 1e-30),
    "qd": (1e-34, 1e-40, 1e-46, 1e-52, 1e-56, 1e-60),
}
_ORDER = tuple(name for name, p in _p.TABLE.items() if not p.compensated)  # narrowest first


@dataclass(frozen=True)
class ConvergenceRun:
    """One run of ``converge``'s ladder.

    Attributes
    ----------
    precision : str
        Its working precision.
    tol : float
        Its tolerance.
    status : str
        How it ended.
    evaluations : int
        Force evaluations.
    wall_time : float
        Seconds in the engine.
    digits : float or None
        Agreement with the previous successful run (None for the first, or when it failed).
    """

    precision: str
    tol: float
    status: str
    evaluations: int
    wall_time: float
    digits: float | None  # agreement with the previous successful run


@dataclass(frozen=True)
class Convergence:
    """Outcome of ``converge``.

    Attributes
    ----------
    digits : float
        The agreement actually observed between the last two successful runs (0 when fewer than
        two finished).
    requested : float
        The digits asked for.
    converged : bool
        Whether ``digits`` reached ``requested``.
    runs : tuple of ConvergenceRun
        Every run, in order.
    system : System or None
        The state of the most accurate finished run.
    result : Result or None
        That run.
    reason : str
        Why the ladder stopped (``"converged"``, ``"budget spent"``, ``"ladder exhausted"``,
        ``"max_runs reached"``).
    """

    digits: float
    requested: float
    converged: bool
    runs: tuple[ConvergenceRun, ...]
    system: System | None
    result: Result | None
    reason: str


def agreement_digits(a: System, b: System) -> float:
    """Significant digits to which two states agree in every phase-space coordinate.

    Each coordinate's difference is taken relative to its own size, with a floor of 1e-3 times the
    size of the largest coordinate of its kind (positions or velocities), so a coordinate that is zero
    in one run and tiny noise in the other does not dominate. Computed exactly (Fraction) in the higher
    of the two precisions.
    """
    worst = 0.0
    for name in ("positions", "velocities"):
        fa = _p.to_fraction(a.limbs(name)).ravel()
        fb = _p.to_fraction(b.limbs(name)).ravel()
        big = max(abs(x) for x in fb)
        floor = big / 1000 if big else 1
        for x, y in zip(fa, fb):
            if x == y:
                continue
            rel = abs(x - y) / max(abs(y), floor)
            worst = max(worst, float(rel))
    if worst == 0.0:
        return math.inf
    return -math.log10(worst)


def converge(
    system: System,
    t: Any,
    digits: float = 10,
    budget: float = 600.0,
    precisions: Sequence[str] | None = None,
    max_runs: int = 24,
    **options: Any,
) -> Convergence:
    """Tighten the tolerance, and raise the precision when needed (f64 -> dd -> qd), until two
    successive runs agree to ``digits`` significant digits in every coordinate, or ``budget``
    seconds of engine time are spent. It never reports convergence it did not observe.

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span, as for ``integrate``.
    digits : float, optional
        Significant digits asked for (default 10).
    budget : float, optional
        Seconds of wall time for all runs together (default 600); each run is capped by what is
        left.
    precisions : sequence of str, optional
        Ladder of precisions to climb; default from the system's precision upward
        (f64 -> dd -> qd). Each climbs the tolerances of ``LADDER``.
    max_runs : int, optional
        Most runs in all (default 24).
    **options
        Other ``integrate`` options (``method``, ``max_steps`` ...); ``tol`` is set by the ladder.

    Returns
    -------
    Convergence

    Examples
    --------
    >>> import loschmidt
    >>> c = loschmidt.converge(loschmidt.ics.pythagorean("f64"), 10, digits=10, method="chain")
    >>> c.converged, c.digits >= 10, c.system.precision
    (True, True, 'dd')
    >>> [(r.precision, r.tol) for r in c.runs][:2]
    [('f64', 1e-08), ('f64', 1e-10)]
    """
    s = _check_system(system)
    req = _positive(digits, "digits")
    bud = _positive(budget, "budget")
    if isinstance(max_runs, (bool, np.bool_)) or not isinstance(max_runs, numbers.Integral) or max_runs < 1:
        raise ValueError(f"max_runs: expected a positive integer, got {max_runs!r}")
    if isinstance(precisions, (str, bytes)):
        raise TypeError(f"precisions: expected a sequence of precision names, got {precisions!r}")
    if "tol" in options:
        raise ValueError("tol: set by converge's tolerance ladder; do not pass it")
    if precisions is None:
        start = "f64" if s.precision in ("f64", "f64c") else s.precision
        precisions = _ORDER[_ORDER.index(start):]
    try:
        precisions = list(precisions)
    except TypeError:
        raise TypeError(f"precisions: expected a sequence of precision names, got {type(precisions).__name__}") from None
    for p in precisions:
        _p.check_precision(p, "precisions")
    t0 = _time.perf_counter()
    runs: list[ConvergenceRun] = []
    prev: Result | None = None
    best_digits = 0.0
    reason = "ladder exhausted"
    for prec in precisions:
        base = s.with_precision(prec)
        for tol in LADDER[prec]:
            left = bud - (_time.perf_counter() - t0)
            if left <= 0:
                reason = "budget spent"
                break
            if len(runs) >= max_runs:
                reason = "max_runs reached"
                break
            r = integrate(base, t, tol=tol, max_wall_time=left, **options)
            d = None
            if r.success:
                if prev is not None:
                    d = agreement_digits(prev.system, r.system)
                    best_digits = max(d, 0.0)
                prev = r
            runs.append(ConvergenceRun(prec, tol, r.status, r.evaluations, r.wall_time, d))
            if not r.success and r.status == "max_wall_time":
                reason = "budget spent"
                break
            if d is not None and d >= req:
                return Convergence(d, req, True, tuple(runs), prev.system, prev, "converged")
        else:
            continue
        break
    return Convergence(best_digits, req, False, tuple(runs), prev.system if prev else None, prev, reason)


# ---------------------------------------------------------------------------------------------------
# irreversibility threshold


@dataclass(frozen=True)
class Threshold:
    """Smallest initial perturbation that the dynamics amplifies to order unity within t.

    Attributes
    ----------
    delta : float
        The threshold 1 / A in N-body units.
    amplification : float
        The maximal growth factor A(t) (from renormalised twins).
    exponent : float
        The finite-time Lyapunov exponent ln A / t.
    metres, planck_lengths : float or None
        ``delta`` in metres and in Planck lengths, when a ``units.Scale`` was given.
    roundtrip_delta : float
        Distance of a round trip at the system's precision.
    numerical_floor : float
        The integration's own error expressed as an initial perturbation (round-trip distance / A;
        Portegies Zwart & Boekholt 2018 relate the two).
    trustworthy : bool
        Whether that floor lies below ``margin * delta`` (default margin 0.01), i.e. whether the
        integration at this precision resolves perturbations well below the threshold.
    precision : str
        The working precision.
    growth : Growth
        The growth computation behind ``amplification``.
    """

    delta: float
    amplification: float
    exponent: float
    metres: float | None
    planck_lengths: float | None
    roundtrip_delta: float
    numerical_floor: float
    trustworthy: bool
    precision: str
    growth: Growth = field(repr=False)


def irreversibility_threshold(
    system: System,
    t: Any,
    scale: Any = None,
    intervals: int = 100,
    margin: float = 0.01,
    **options: Any,
) -> Threshold:
    """The size of the smallest initial perturbation that grows to order unity within ``t``.

    The growth factor comes from ``growth`` (renormalised twin trajectories); the threshold is 1/A(t).
    With ``scale`` (a ``loschmidt.units.Scale``) it is also given in metres and in Planck lengths.
    A round trip at the system's precision tells whether the integration itself is accurate enough
    to resolve perturbations of that size.

    Parameters
    ----------
    system : System
        The start.
    t : number or decimal string
        Span.
    scale : loschmidt.units.Scale, optional
        Physical units, for the threshold in metres and Planck lengths.
    intervals : int, optional
        Renormalisation intervals of ``growth`` (default 100).
    margin : float, optional
        The integration is ``trustworthy`` when its floor is below ``margin`` times the threshold
        (default 0.01).
    **options
        Options of ``integrate`` for the growth runs and the round trip (``method``, ``tol`` ...).

    Returns
    -------
    Threshold

    Examples
    --------
    >>> import loschmidt
    >>> from loschmidt import units
    >>> scale = units.Scale(mass=1e6, length=units.PARSEC)
    >>> th = loschmidt.irreversibility_threshold(loschmidt.ics.pythagorean("dd"), 10, scale=scale,
    ...                                          method="chain", intervals=10)
    >>> th.trustworthy, 1e-3 < th.delta < 1, th.planck_lengths > 1e45
    (True, True, True)
    """
    s = _check_system(system)
    margin = _positive(margin, "margin")
    if scale is not None:
        from .units import Scale

        if not isinstance(scale, Scale):
            raise TypeError(f"scale: expected a loschmidt.units.Scale, got {type(scale).__name__}")
    g = growth(s, t, intervals=intervals, **options)
    if len(g.log_factor) == 0:
        raise ValueError("t: the integration did not complete a single interval; check the system")
    log_a = float(np.max(g.log_factor))
    amp = math.exp(min(log_a, 700.0))
    delta = math.exp(-log_a)
    rt = roundtrip(s, t, **options)
    floor = rt.delta / amp if math.isfinite(rt.delta) else float("inf")
    metres = planck = None
    if scale is not None:
        from .units import PLANCK_LENGTH

        metres = delta * scale.length
        planck = metres / PLANCK_LENGTH
    return Threshold(delta, amp, g.exponent, metres, planck, rt.delta, floor, bool(floor <= margin * delta), s.precision, g)
