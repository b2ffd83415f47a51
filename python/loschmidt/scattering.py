"""Binary-single scattering experiments: initial conditions from infinity, outcomes, cross sections.

G = 1. Bodies 0 and 1 form the binary (masses m1, m2, semimajor axis a, eccentricity e); body 2,
of mass m3, comes in from infinity with relative speed ``v_inf`` and impact parameter ``b`` with
respect to the binary's centre of mass. Speeds may be given in units of the critical speed
``v_c``, at which the total energy is zero (Hut & Bahcall 1983, ApJ 268, 319):

    (1/2) mu_3 v_c^2 = m1 m2 / (2 a),   mu_3 = m3 (m1 + m2) / (m1 + m2 + m3).

Initial conditions (:func:`binary_single`, :func:`binary_single_ensemble`)
    The incoming body is placed on its exact two-body hyperbola about the binary's centre of mass
    (gravitational parameter M = m1 + m2 + m3, semimajor axis -M / v_inf^2, eccentricity
    sqrt(1 + b^2 v_inf^4 / M^2)), brought in analytically from infinity to the *start distance*
    R_0 where the tidal acceleration of the binary by body 2 is a fraction ``tidal_tolerance`` of
    the binary's own: 2 m3 r^3 / ((m1 + m2) R^3) = tolerance at the binary's apocentre
    r = a (1 + e), so

        R_0 = max( a (1 + e) (2 m3 / ((m1 + m2) tolerance))^(1/3),  2 r_p ),

    r_p the pericentre of the hyperbola (the second term keeps the start on the incoming branch
    when a wide pass never comes within the tidal distance). Default tolerance 1e-5 (common
    practice: a relative perturbation of 1e-5 is far below the binary energy changes that a
    cross section counts, about 1e-3 and up; it starts the incomer of a circular equal-mass
    binary at about 46 a, and 1e-6 would put it twice as far for no change in the outcomes).
    The binary's orientation is isotropic (cos i uniform in [-1, 1], node and argument of
    periapsis uniform in [0, 2 pi)) and its phase uniform in mean anomaly; the hyperbola lies in
    the x-y plane with its pericentre on +x, the incoming body moving counter-clockwise. The centre of mass of all three is at rest at
    the origin. Impact parameters are drawn uniformly in area, b = b_max sqrt(u), with b_max from
    a chosen largest pericentre through gravitational focusing,

        b_max^2 = r_p,max^2 (1 + 2 M / (r_p,max v_inf^2)).

    A single configuration is computed in mpmath at the working precision plus 64 guard bits and
    rounded once (exact limbs in every precision, like ``ics.binary``); an ensemble's float64
    values are its members' initial conditions, computed the same way at 53 + 64 bits and rounded
    once to double, so a member is the same problem in every precision.

Encounters (:func:`scatter`, the sweep task ``"scattering"``)
    The end of an encounter is decided in the engine by its escape stop; the stopped state is
    classified exactly by :func:`loschmidt.outcome.outcome`, and a surviving binary is measured
    once the escaper has reached the binary's tidal distance again. Outcomes: preservation,
    exchange (which body left), ionization, merger (contact or post-Newtonian merger), unresolved
    (a budget ran out first; never guessed). The number of close approaches is the number of
    pericentre passages of the outer orbit in the engine's event log (:mod:`loschmidt.events`).

Cross sections (:func:`cross_sections`)
    sigma = pi b_max^2 x fraction per outcome and speed, with binomial Monte Carlo errors, and the
    mean relative change of the binding energy (Heggie 1975, MNRAS 173, 729).

Where the time goes (measured, f64, equal masses, 2-core machine shared with other jobs): about
90% of an encounter is the exact mpmath classification of the stopped states (three calls of
``outcome``/``pair_elements``, ~10-40 ms each), about 10% the integration itself.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import mpmath
import numpy as np

from .ensemble import Ensemble
from .orbits import GUARD_BITS, _check_precision, _mpf, _state_mp, working_bits

__all__ = [
    "DEFAULT_TIDAL_TOLERANCE",
    "critical_speed",
    "max_impact_parameter",
    "start_distance",
    "binary_single",
    "binary_single_ensemble",
    "ENCOUNTER_OUTCOMES",
    "Encounter",
    "scatter",
    "TASK_COLUMNS",
    "prepare_scattering",
    "run_scattering",
    "cross_sections",
]

#: Tidal perturbation of the binary, relative to its binding force, at the start (and at the end
#: of an encounter): common practice, see the module docstring.
DEFAULT_TIDAL_TOLERANCE = 1e-5


# ---------------------------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------------------------
def _positive(value: Any, name: str) -> mpmath.mpf:
    x = _mpf(value, name)
    if not x > 0:
        raise ValueError(f"{name} must be positive, got {value!r}")
    return x


def _eccentricity(value: Any, name: str = "eccentricity") -> mpmath.mpf:
    e = _mpf(value, name)
    if not (0 <= e < 1):
        raise ValueError(f"{name} must lie in [0, 1) (a bound binary), got {value!r}")
    return e


def _tolerance(value: Any) -> mpmath.mpf:
    d = _mpf(value, "tidal_tolerance")
    if not (0 < d < 1):
        raise ValueError(f"tidal_tolerance must lie in (0, 1), got {value!r}")
    return d


def _impact(value: Any) -> mpmath.mpf:
    b = _mpf(value, "impact_parameter")
    if b < 0:
        raise ValueError(f"impact_parameter must be >= 0, got {value!r}")
    return b


def _speed(v_inf: Any, v_over_vc: Any, vc: mpmath.mpf) -> mpmath.mpf:
    if (v_inf is None) == (v_over_vc is None):
        raise ValueError("give exactly one of v_inf and v_over_vc")
    if v_inf is not None:
        return _positive(v_inf, "v_inf")
    return _positive(v_over_vc, "v_over_vc") * vc


# ---------------------------------------------------------------------------------------------
# the formulas (mpmath, current precision)
# ---------------------------------------------------------------------------------------------
def _vc(m1, m2, m3, a):
    M12 = m1 + m2
    return mpmath.sqrt(m1 * m2 * (M12 + m3) / (m3 * M12 * a))


def _bmax(M, v, rp):
    return rp * mpmath.sqrt(1 + 2 * M / (rp * v * v))


def _tidal_distance(m12, m3, a, e, tol):
    return a * (1 + e) * mpmath.cbrt(2 * m3 / (m12 * tol))


def _hyperbola(M, v, b, R0):
    """Relative position, velocity (lists of 3 mpf) of the incomer at distance R0 on its way in,
    the hyperbola's pericentre and the time from R0 to it."""
    h = b * v  # specific angular momentum
    A = M / (v * v)  # |semimajor axis|
    eh = mpmath.sqrt(1 + (h * v / M) ** 2)
    rp = A * (eh - 1) if b > 0 else mpmath.mpf(0)
    p = h * h / M
    cosnu = (p / R0 - 1) / eh
    cosnu = max(mpmath.mpf(-1), min(mpmath.mpf(1), cosnu))
    nu = mpmath.acos(cosnu)
    sn = mpmath.sin(nu)
    pos = [R0 * cosnu, -R0 * sn, mpmath.mpf(0)]  # true anomaly -nu: before pericentre
    speed2 = v * v + 2 * M / R0
    vt = h / R0
    vr = -mpmath.sqrt(max(speed2 - vt * vt, mpmath.mpf(0)))
    rhat = [cosnu, -sn]
    that = [sn, cosnu]  # direction of increasing true anomaly (counter-clockwise)
    vel = [vr * rhat[0] + vt * that[0], vr * rhat[1] + vt * that[1], mpmath.mpf(0)]
    # time from R0 to pericentre: cosh H = (1 + R0 / A) / e_h, t = (e_h sinh H - H) / sqrt(M / A^3)
    H = mpmath.acosh((1 + R0 / A) / eh)
    t_peri = (eh * mpmath.sinh(H) - H) / mpmath.sqrt(M / A**3)
    return pos, vel, rp, t_peri


def _configuration(m1, m2, m3, a, e, v, b, angles, tol):
    """(masses, positions, velocities, info) in mpmath at the current precision."""
    inc, node, peri, mean = angles
    M12 = m1 + m2
    M = M12 + m3
    A = M / (v * v)
    eh = mpmath.sqrt(1 + (b * v * v / M) ** 2)
    rp = A * (eh - 1)
    R0 = max(_tidal_distance(M12, m3, a, e, tol), 2 * rp)
    r_out, v_out, rp, t_peri = _hyperbola(M, v, b, R0)
    r_in, v_in = _state_mp(M12, a, e, inc, node, peri, mean_anomaly=mean,
                           names=("m1 + m2", "semimajor_axis", "eccentricity", "mean_anomaly"))
    R = [-m3 / M * c for c in r_out]
    V = [-m3 / M * c for c in v_out]
    pos = [
        [R[k] - m2 / M12 * r_in[k] for k in range(3)],
        [R[k] + m1 / M12 * r_in[k] for k in range(3)],
        [M12 / M * r_out[k] for k in range(3)],
    ]
    vel = [
        [V[k] - m2 / M12 * v_in[k] for k in range(3)],
        [V[k] + m1 / M12 * v_in[k] for k in range(3)],
        [M12 / M * v_out[k] for k in range(3)],
    ]
    info = {"start_distance": R0, "pericentre": rp, "t_pericentre": t_peri, "v_inf": v,
            "v_c": _vc(m1, m2, m3, a), "binary_period": 2 * mpmath.pi * mpmath.sqrt(a**3 / M12)}
    return [m1, m2, m3], pos, vel, info


# ---------------------------------------------------------------------------------------------
# public helpers
# ---------------------------------------------------------------------------------------------
def critical_speed(m1: Any, m2: Any, m3: Any, semimajor_axis: Any) -> float:
    """The critical speed v_c: the relative speed at infinity at which the total energy is zero.

    v_c^2 = m1 m2 (m1 + m2 + m3) / (m3 (m1 + m2) a) (Hut & Bahcall 1983, ApJ 268, 319). Slower
    encounters (hard binaries) cannot ionize the binary.

    Parameters
    ----------
    m1, m2 : number
        Masses of the binary's bodies.
    m3 : number
        Mass of the incoming body.
    semimajor_axis : number
        The binary's semimajor axis (> 0).

    Returns
    -------
    float

    Examples
    --------
    >>> from loschmidt import scattering
    >>> round(scattering.critical_speed(1, 1, 1, 1), 12)    # sqrt(3/2)
    1.224744871392
    """
    with mpmath.workprec(53 + GUARD_BITS):
        return float(_vc(_positive(m1, "m1"), _positive(m2, "m2"), _positive(m3, "m3"),
                         _positive(semimajor_axis, "semimajor_axis")))


def max_impact_parameter(m1: Any, m2: Any, m3: Any, v_inf: Any, pericentre: Any) -> float:
    """Largest impact parameter whose hyperbola comes within ``pericentre`` of the binary's centre.

    Gravitational focusing: b_max^2 = r_p^2 (1 + 2 M / (r_p v_inf^2)), M = m1 + m2 + m3.

    Parameters
    ----------
    m1, m2, m3 : number
        The three masses.
    v_inf : number
        Relative speed at infinity (> 0).
    pericentre : number
        The largest pericentre r_p,max (> 0).

    Returns
    -------
    float

    Examples
    --------
    >>> from loschmidt import scattering
    >>> scattering.max_impact_parameter(1, 1, 1, 1, 1)    # sqrt(1 + 6)
    2.6457513110645907
    """
    with mpmath.workprec(53 + GUARD_BITS):
        M = _positive(m1, "m1") + _positive(m2, "m2") + _positive(m3, "m3")
        return float(_bmax(M, _positive(v_inf, "v_inf"), _positive(pericentre, "pericentre")))


def start_distance(m1: Any, m2: Any, m3: Any, semimajor_axis: Any, eccentricity: Any = 0,
                   tidal_tolerance: Any = DEFAULT_TIDAL_TOLERANCE) -> float:
    """Distance from the binary's centre at which the tidal perturbation falls to ``tidal_tolerance``.

    R = a (1 + e) (2 m3 / ((m1 + m2) tolerance))^(1/3): the tidal acceleration 2 m3 r / R^3 of the
    binary's relative orbit at its apocentre r = a (1 + e), over its own m12 / r^2.

    Parameters
    ----------
    m1, m2 : number
        Masses of the binary.
    m3 : number
        Mass of the perturber.
    semimajor_axis : number
        The binary's semimajor axis (> 0).
    eccentricity : number, optional
        The binary's eccentricity in [0, 1) (default 0).
    tidal_tolerance : number, optional
        In (0, 1); default ``DEFAULT_TIDAL_TOLERANCE``.

    Returns
    -------
    float

    Examples
    --------
    >>> from loschmidt import scattering
    >>> round(scattering.start_distance(1, 1, 1, 1), 3)     # (1e5)^(1/3)
    46.416
    """
    with mpmath.workprec(53 + GUARD_BITS):
        m12 = _positive(m1, "m1") + _positive(m2, "m2")
        return float(_tidal_distance(m12, _positive(m3, "m3"), _positive(semimajor_axis, "semimajor_axis"),
                                     _eccentricity(eccentricity), _tolerance(tidal_tolerance)))


# ---------------------------------------------------------------------------------------------
# initial conditions
# ---------------------------------------------------------------------------------------------
def binary_single(
    m1: Any,
    m2: Any,
    semimajor_axis: Any,
    eccentricity: Any,
    m3: Any,
    *,
    v_inf: Any = None,
    v_over_vc: Any = None,
    impact_parameter: Any = 0,
    inclination: Any = 0,
    longitude_of_node: Any = 0,
    argument_of_periapsis: Any = 0,
    mean_anomaly: Any = 0,
    tidal_tolerance: Any = DEFAULT_TIDAL_TOLERANCE,
    precision: str = "dd",
):
    """One binary-single encounter at its start: a System of bodies 0, 1 (binary) and 2 (incomer).

    See :mod:`loschmidt.scattering` for the construction. Computed in mpmath at the working
    precision plus 64 guard bits and rounded once.

    Parameters
    ----------
    m1, m2 : number
        Masses of the binary's bodies (> 0).
    semimajor_axis : number
        The binary's semimajor axis (> 0).
    eccentricity : number
        The binary's eccentricity, in [0, 1).
    m3 : number
        Mass of the incoming body (> 0).
    v_inf : number, optional
        Relative speed at infinity (> 0).
    v_over_vc : number, optional
        The speed in units of the critical speed (> 0); give exactly one of the two.
    impact_parameter : number, optional
        b >= 0 (default 0: head-on).
    inclination, longitude_of_node, argument_of_periapsis : number, optional
        The binary's orientation in radians against the plane of the hyperbola (default 0).
    mean_anomaly : number, optional
        The binary's phase at the start (default 0: pericentre).
    tidal_tolerance : number, optional
        In (0, 1); sets the start distance (default 1e-5).
    precision : {"f64", "f64c", "dd", "qd"}, optional
        Working precision (default ``"dd"``).

    Returns
    -------
    System

    Examples
    --------
    >>> from loschmidt import orbits, scattering
    >>> s = scattering.binary_single(1, 1, 1, 0.5, 1, v_over_vc=0.5, impact_parameter=2)
    >>> round(orbits.pair_elements(s, 0, 1).semimajor_axis, 15)
    1.0
    >>> out = orbits.pair_elements(s, (0, 1), 2)
    >>> round(out.semimajor_axis, 12), round(out.angular_momentum / out.reduced_mass, 12)  # -M/v^2, b v
    (-8.0, 1.224744871392)
    """
    from .ics import _system

    precision = _check_precision(precision)
    with mpmath.workprec(working_bits(precision) + GUARD_BITS):
        a1, a2, a3 = _positive(m1, "m1"), _positive(m2, "m2"), _positive(m3, "m3")
        a = _positive(semimajor_axis, "semimajor_axis")
        e = _eccentricity(eccentricity)
        tol = _tolerance(tidal_tolerance)
        b = _impact(impact_parameter)
        v = _speed(v_inf, v_over_vc, _vc(a1, a2, a3, a))
        angles = tuple(_mpf(x, n) for x, n in ((inclination, "inclination"), (longitude_of_node, "longitude_of_node"),
                                                (argument_of_periapsis, "argument_of_periapsis"),
                                                (mean_anomaly, "mean_anomaly")))
        masses, pos, vel, _info = _configuration(a1, a2, a3, a, e, v, b, angles, tol)
    return _system(masses, pos, vel, precision, "semimajor_axis")


def _speeds(values: Any, name: str) -> list:
    if values is None:
        return []
    if isinstance(values, (str, bytes)) or np.ndim(values) == 0:
        values = [values]
    out = list(values)
    if not out:
        raise ValueError(f"{name} must hold at least one speed")
    return out


def binary_single_ensemble(
    n: int,
    seed: int,
    masses: Sequence[Any] = (1, 1, 1),
    semimajor_axis: Any = 1,
    eccentricity: Any = 0,
    *,
    v_over_vc: Any = None,
    v_inf: Any = None,
    pericentre_max: Any = None,
    tidal_tolerance: Any = DEFAULT_TIDAL_TOLERANCE,
) -> Ensemble:
    """Binary-single encounters: ``n`` members per speed, seeded, ready for a scattering sweep.

    For each speed, impact parameters uniform in area up to b_max (gravitational focusing from
    ``pericentre_max``), isotropic binary orientations and uniform mean anomalies are drawn from
    ``numpy.random.default_rng(seed)`` (five uniforms per member, speed after speed; the same
    arguments and seed give the same bits). Members are ordered speed by speed.

    ``params``: ``speed_index``, ``v_over_vc``, ``v_inf``, ``b``, ``b_max``, ``inclination``,
    ``longitude_of_node``, ``argument_of_periapsis``, ``mean_anomaly``, ``start_distance``,
    ``t_pericentre`` (time from the start to the hyperbola's pericentre), ``binary_period``.
    ``meta``: ``m1``, ``m2``, ``m3``, ``a``, ``e``, ``seed``, ``pericentre_max``,
    ``tidal_tolerance``, ``v_c``. Bodies 0 and 1 are the binary, body 2 the incomer.

    Parameters
    ----------
    n : int
        Members per speed (>= 1).
    seed : int
        Seed of ``numpy.random.default_rng`` (>= 0).
    masses : sequence of 3 numbers, optional
        m1, m2 (the binary) and m3 (the incomer), each exactly a double (default 1, 1, 1).
    semimajor_axis : number, optional
        The binary's semimajor axis, exactly a double (default 1).
    eccentricity : number, optional
        The binary's eccentricity in [0, 1), exactly a double (default 0).
    v_over_vc : number or sequence of numbers, optional
        Speeds at infinity in units of the critical speed.
    v_inf : number or sequence of numbers, optional
        Speeds at infinity in N-body units; give exactly one of the two.
    pericentre_max : number, optional
        The largest pericentre of the incoming hyperbola (> 0); default 4 a (1 + e), wide enough
        that equal-mass exchanges and ionizations beyond it are rare (they need a pass within
        about 2 a).
    tidal_tolerance : number, optional
        In (0, 1); sets the start distance (default 1e-5).

    Returns
    -------
    Ensemble

    Examples
    --------
    >>> from loschmidt import scattering
    >>> ens = scattering.binary_single_ensemble(3, seed=1, v_over_vc=[0.5, 2])
    >>> len(ens), ens.params["speed_index"].tolist()
    (6, [0, 0, 0, 1, 1, 1])
    >>> bool((ens.params["b"] <= ens.params["b_max"]).all())
    True
    """
    from .ics import _count, _exact_double, _masses, _seed

    n = _count(n, "n")
    seed = _seed(seed)
    ms = _masses(masses, "masses", 3)
    a_d = _exact_double(semimajor_axis, "semimajor_axis")
    e_d = _exact_double(eccentricity, "eccentricity")
    bits = 53 + GUARD_BITS
    with mpmath.workprec(bits):
        m1, m2, m3 = (mpmath.mpf(float(x)) for x in ms)
        a = _positive(a_d, "semimajor_axis")
        e = _eccentricity(e_d)
        tol = _tolerance(tidal_tolerance)
        vc = _vc(m1, m2, m3, a)
        given = _speeds(v_over_vc, "v_over_vc"), _speeds(v_inf, "v_inf")
        if bool(given[0]) == bool(given[1]):
            raise ValueError("give exactly one of v_inf and v_over_vc")
        if given[0]:
            speeds = [_positive(x, f"v_over_vc[{k}]") * vc for k, x in enumerate(given[0])]
        else:
            speeds = [_positive(x, f"v_inf[{k}]") for k, x in enumerate(given[1])]
        rpmax = _positive(pericentre_max, "pericentre_max") if pericentre_max is not None else 4 * a * (1 + e)
        if len(speeds) * n > 10**7:
            raise ValueError(f"n: {len(speeds) * n} members, more than 1e7 (memory)")
        M = m1 + m2 + m3
        rng = np.random.default_rng(seed)
        cols: dict = {k: [] for k in ("speed_index", "v_over_vc", "v_inf", "b", "b_max", "inclination",
                                      "longitude_of_node", "argument_of_periapsis", "mean_anomaly",
                                      "start_distance", "t_pericentre", "binary_period")}
        positions = np.empty((len(speeds) * n, 3, 3))
        velocities = np.empty_like(positions)
        row = 0
        twopi = 2 * mpmath.pi
        for s, v in enumerate(speeds):
            bmax = _bmax(M, v, rpmax)
            u = rng.random((n, 5))
            for k in range(n):
                b = bmax * mpmath.sqrt(mpmath.mpf(float(u[k, 0])))
                angles = (mpmath.acos(1 - 2 * mpmath.mpf(float(u[k, 1]))), twopi * float(u[k, 2]),
                          twopi * float(u[k, 3]), twopi * float(u[k, 4]))
                _m, pos, vel, info = _configuration(m1, m2, m3, a, e, v, b, angles, tol)
                positions[row] = [[float(c) for c in p] for p in pos]
                velocities[row] = [[float(c) for c in p] for p in vel]
                for key, value in (("speed_index", s), ("v_over_vc", float(v / vc)), ("v_inf", float(v)),
                                   ("b", float(b)), ("b_max", float(bmax)), ("inclination", float(angles[0])),
                                   ("longitude_of_node", float(angles[1])),
                                   ("argument_of_periapsis", float(angles[2])), ("mean_anomaly", float(angles[3])),
                                   ("start_distance", float(info["start_distance"])),
                                   ("t_pericentre", float(info["t_pericentre"])),
                                   ("binary_period", float(info["binary_period"]))):
                    cols[key].append(value)
                row += 1
        meta = {"m1": float(ms[0]), "m2": float(ms[1]), "m3": float(ms[2]), "a": a_d, "e": e_d, "seed": seed,
                "pericentre_max": float(rpmax), "tidal_tolerance": float(tol), "v_c": float(vc)}
    params = {k: np.asarray(v, dtype=np.int64 if k == "speed_index" else np.float64) for k, v in cols.items()}
    return Ensemble(ms, positions, velocities, params=params, family="binary_single", meta=meta)


# ---------------------------------------------------------------------------------------------
# one encounter, from start to resolution
# ---------------------------------------------------------------------------------------------
#: The outcomes of an encounter (see :func:`scatter`).
ENCOUNTER_OUTCOMES = ("preservation", "exchange", "ionization", "merger", "unresolved")

_MAX_RETRIES = 20  # engine stops that the exact test does not confirm before the run is called unresolved


@dataclass(frozen=True)
class Encounter:
    """What one binary-single encounter ended as (see :func:`scatter`).

    Attributes
    ----------
    outcome : str
        One of ``ENCOUNTER_OUTCOMES``.
    status : str
        The engine's status of the run that decided it (``stop_condition`` when the escape stop
        ended it; ``success`` when the budget ``t_max`` ran out first, which makes the encounter
        ``unresolved``; ``collision``/``merger`` for a contact or merger; anything else means the
        run did not finish).
    escaper : int
        The body that left (-1 for ionization, merger, unresolved).
    binary : (int, int)
        The final binary (-1, -1 when none).
    semimajor_axis, eccentricity : float
        The final binary's elements (NaN when none), measured where the escaper has reached the
        tidal distance of the final binary.
    energy_change : float
        (B_final - B_initial) / B_initial, B the binary's binding energy (minus its two-body
        energy): positive when the binary ends harder (more bound). NaN without a final binary.
    v_inf : float
        The escaper's speed at infinity relative to the final binary (NaN when none).
    time : float
        Time from the start at which the escape test held (the resolution), or the time of the
        contact or merger; NaN when unresolved.
    t_end : float
        Time reached at the end (after carrying the escaper to the tidal distance).
    close_approaches : int
        Pericentre passages of the outer orbit (the body outside the most bound pair about that
        pair's centre of mass; :mod:`loschmidt.events`) over the whole run: 1 for a flyby, more
        for a resonance (each temporary ejection and return adds one).
    energy_error : float
        ``|E_end - E_start| / |E_start|`` over the whole run.
    steps, evaluations : int
        Engine counters, summed over the pieces.
    wall_time : float
        Seconds in the engine.
    final : System
        The final state.
    """

    outcome: str
    status: str
    escaper: int
    binary: tuple
    semimajor_axis: float
    eccentricity: float
    energy_change: float
    v_inf: float
    time: float
    t_end: float
    close_approaches: int
    energy_error: float
    steps: int
    evaluations: int
    wall_time: float
    final: Any = field(repr=False, compare=False, default=None)

    def as_dict(self) -> dict:
        """A flat row for a results table.

        Returns
        -------
        dict
            Plain ints, floats and strings (``binary_i``, ``binary_j`` for the pair).
        """
        row = {f.name: getattr(self, f.name) for f in dataclasses.fields(self) if f.name not in ("final", "binary")}
        row["binary_i"], row["binary_j"] = (int(self.binary[0]), int(self.binary[1]))
        return row


def _escape_time(M: float, R: float, V: float, rdot: float, target: float) -> float:
    """Two-body time for a receding body at distance R (speed V, radial speed rdot) about mass M to
    reach ``target`` on its hyperbola; 0 when already there."""
    if not (target > R) or not (rdot > 0):
        return 0.0
    energy = V * V / 2 - M / R
    if not energy > 0:
        return 0.0
    A = M / (2 * energy)  # |semimajor axis|
    h2 = R * R * (V * V - rdot * rdot)
    e = math.sqrt(1 + 2 * energy * h2 / (M * M))

    def t_of(r: float) -> float:
        H = math.acosh(max(1.0, (1 + r / A) / e))
        return (e * math.sinh(H) - H) * math.sqrt(A**3 / M)

    return max(0.0, t_of(target) - t_of(R))


def _binding(m_i, m_j, a):
    return m_i * m_j / (2 * a)


def _check_pair(value: Any, name: str, n: int) -> tuple:
    try:
        i, j = (int(x) for x in value)
    except (TypeError, ValueError):
        raise TypeError(f"{name}: expected a pair of body indices") from None
    if not (0 <= i < n and 0 <= j < n and i != j):
        raise ValueError(f"{name}: expected two different body indices below {n}, got {value!r}")
    return (min(i, j), max(i, j))


def scatter(
    system: Any,
    t_max: Any,
    *,
    binary: Sequence[int] = (0, 1),
    tidal_tolerance: Any = DEFAULT_TIDAL_TOLERANCE,
    distance_factor: float = 10.0,
    method: str = "gbs",
    tol: float | None = None,
    max_steps: int | None = None,
    max_wall_time: float | None = None,
    check_every: int = 10,
) -> Encounter:
    """Follow one binary-single encounter until it is resolved, and say what it ended as.

    1. The engine integrates with its escape stop (``integrate(..., stop="escape")``, the
       practical test of :mod:`loschmidt.outcome` with k = ``distance_factor``) for at most
       ``t_max``; when the budget (``t_max``, ``max_steps``, ``max_wall_time``) runs out first the
       encounter is ``"unresolved``" (never guessed), and a run that fails (step underflow...)
       is unresolved too, with its status.
    2. The stopped state is classified exactly (``loschmidt.outcome``); a stop the exact test does
       not confirm is continued.
    3. When a binary remains, the escaper is carried on to the tidal distance of the final binary
       (``tidal_tolerance``, as at the start: the two-body time along its hyperbola, then
       integrated), where the final elements, the binary's energy change and the escaper's
       ``v_inf`` are measured.

    Outcomes: ``"preservation"`` (the original binary survives; a flyby), ``"exchange"`` (the
    incomer is in the final binary; ``escaper`` says which original member left),
    ``"ionization"`` (no bound pair; all three leave), ``"merger"`` (a contact of two bodies with
    radii in the chain method, or a post-Newtonian merger), ``"unresolved"``.

    Parameters
    ----------
    system : System
        Three bodies; by default the binary is bodies 0 and 1 (e.g. :func:`binary_single`).
    t_max : number or decimal string
        The time budget (> 0).
    binary : (int, int), optional
        The initial binary (default (0, 1)); the third body is the incomer.
    tidal_tolerance : number, optional
        In (0, 1) (default 1e-5).
    distance_factor : float, optional
        k of the escape test (default 10, common practice).
    method : {"gbs", "chain"}, optional
        Integration method (default "gbs").
    tol : float, optional
        Relative tolerance (default per precision).
    max_steps : int, optional
        Budget of steps per piece.
    max_wall_time : float, optional
        Budget of seconds per piece.
    check_every : int, optional
        Accepted steps between escape tests (default 10).

    Returns
    -------
    Encounter

    Examples
    --------
    >>> from loschmidt import scattering
    >>> s = scattering.binary_single(1, 1, 1, 0, 1, v_over_vc=0.5, impact_parameter=12, precision="f64")
    >>> enc = scattering.scatter(s, 2000)
    >>> enc.outcome, enc.binary, enc.escaper, abs(enc.energy_change) < 1e-3
    ('preservation', (0, 1), 2, True)
    """
    from .integrate import integrate
    from .orbits import pair_elements
    from .outcome import _check_factor, outcome
    from .precision import to_fraction
    from .system import System

    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    if system.n != 3:
        raise ValueError(f"system: a binary-single encounter has 3 bodies, got {system.n}")
    pair = _check_pair(binary, "binary", 3)
    with mpmath.workprec(53 + GUARD_BITS):
        delta = float(_tolerance(tidal_tolerance))
        budget = _positive(t_max, "t_max")
    k = _check_factor(distance_factor)
    opts = {"method": method, "tol": tol, "max_steps": max_steps, "max_wall_time": max_wall_time}
    m = np.asarray(system.masses, dtype=float)
    b0 = -pair_elements(system, *pair).energy  # the initial binding energy
    if not b0 > 0:
        raise ValueError(f"binary: bodies {pair} are not bound at the start")
    e_start = to_fraction(system.energy(limbs=True))
    t0 = to_fraction(system.limbs("time"))
    steps = evaluations = close = 0
    wall = 0.0
    state = system
    status = "success"
    found = None
    for _ in range(_MAX_RETRIES):
        left = float(budget - (to_fraction(state.limbs("time")) - t0))
        if not left > 0:
            status = "success"
            break
        res = integrate(state, repr(left), stop="escape", distance_factor=k, check_every=check_every, events=True,
                        **opts)
        close += len(res.events.outer["t"])
        steps += res.steps
        evaluations += res.evaluations
        wall += res.wall_time
        state = res.system
        status = res.status
        if status != "stop_condition":
            break
        found = outcome(state, k)
        if found.kind == "escape":
            break
        found = None
    t_res = float(to_fraction(state.limbs("time")) - t0)

    def done(kind, escaper=-1, bpair=(-1, -1), a=math.nan, e=math.nan, change=math.nan, vinf=math.nan,
             time=math.nan):
        e_end = to_fraction(state.energy(limbs=True))
        err = float(abs(e_end - e_start) / abs(e_start)) if e_start != 0 else float(abs(e_end - e_start))
        return Encounter(kind, status, int(escaper), tuple(int(x) for x in bpair), float(a), float(e), float(change),
                         float(vinf), float(time), float(to_fraction(state.limbs("time")) - t0), close, err, steps,
                         evaluations, wall, state)

    if status in ("collision", "merger"):
        return done("merger", time=t_res)
    if found is None:
        return done("unresolved")
    if not found.binary_bound:
        return done("ionization", time=t_res)
    # carry the escaper out to the tidal distance of the final binary, then measure
    i, j = found.binary
    esc = found.third
    a_f = found.semimajor_axis
    target = a_f * (1 + found.eccentricity) * (2 * m[esc] / ((m[i] + m[j]) * delta)) ** (1 / 3)
    mu = m[esc] * (m[i] + m[j]) / m.sum()
    V = math.sqrt(max(0.0, 2 * (found.outer_energy + m[esc] * (m[i] + m[j]) / found.distance) / mu))
    span = _escape_time(float(m.sum()), found.distance, V, found.radial_velocity, target)
    if span > 0:
        res = integrate(state, repr(span), events=True, **opts)
        close += len(res.events.outer["t"])
        steps += res.steps
        evaluations += res.evaluations
        wall += res.wall_time
        state = res.system
        if not res.success:
            status = res.status
            return done("unresolved")
        again = outcome(state, k)
        if again.kind == "escape" and again.binary == found.binary and again.binary_bound:
            found = again
    kind = "preservation" if tuple(found.binary) == pair else "exchange"
    change = (-found.binary_energy - b0) / b0
    return done(kind, found.third, found.binary, found.semimajor_axis, found.eccentricity, change, found.v_inf, t_res)


# ---------------------------------------------------------------------------------------------
# the sweep task "scattering"
# ---------------------------------------------------------------------------------------------
#: The integration options (loschmidt.options) the task "scattering" takes.
_INTEGRATION_KEYS = ("tol", "max_steps", "max_wall_time", "distance_factor", "check_every")
_TASK_KEYS = ("t_max", "budget_periods", "precision", "method", "tidal_tolerance") + _INTEGRATION_KEYS

#: Columns of the task "scattering", in order.
TASK_COLUMNS = ("outcome", "status", "escaper", "binary_i", "binary_j", "semimajor_axis", "eccentricity",
                "energy_change", "escaper_v_inf", "time", "t_end", "close_approaches", "energy_error", "steps",
                "evaluations", "wall_time")


def prepare_scattering(**options: Any) -> dict:
    """Validate the options of the sweep task ``"scattering"``.

    Each member (three bodies, the binary 0 and 1; e.g. from :func:`binary_single_ensemble`) is
    followed by :func:`scatter`. Its time budget is ``t_max`` when given, else
    2 ``t_pericentre`` + ``budget_periods`` x ``binary_period`` from the member's params (the way
    in and out, and that many periods of the initial binary for a resonance).

    Parameters
    ----------
    **options
        ``t_max`` (number), ``budget_periods`` (default 1000), ``precision`` (default "f64"),
        ``method`` (default "gbs"), ``tol``, ``max_steps``, ``max_wall_time`` (per piece),
        ``tidal_tolerance`` (default 1e-5), ``distance_factor`` (default 10), ``check_every``
        (default 10).

    Returns
    -------
    dict
        The options, validated and JSON-friendly (hashed into the store's manifest).
    """
    from . import options as _o
    from .precision import check_precision

    unknown = sorted(set(options) - set(_TASK_KEYS))
    if unknown:
        raise ValueError(f"options: unknown {unknown}; expected some of {list(_TASK_KEYS)}")
    prec = check_precision(options.get("precision", "f64"))
    method = _o.check_method(options.get("method", "gbs"))
    # the integration options go through their one declaration (loschmidt.options)
    given = {k: options.get(k) for k in _INTEGRATION_KEYS}
    if given["check_every"] is None:
        given["check_every"] = 10
    if given["distance_factor"] is None:
        given["distance_factor"] = _o.DEFAULT_DISTANCE_FACTOR
    settings = _o.resolve(given, method=method, precision=prec, entry="integrate")
    out: dict = {"precision": prec, "method": method, "tol": settings["tol"]}
    with mpmath.workprec(53 + GUARD_BITS):
        out["tidal_tolerance"] = float(_tolerance(options.get("tidal_tolerance", DEFAULT_TIDAL_TOLERANCE)))
        out["t_max"] = float(_positive(options["t_max"], "t_max")) if options.get("t_max") is not None else None
        out["budget_periods"] = float(_positive(options.get("budget_periods", 1000), "budget_periods"))
    out["distance_factor"] = settings["distance_factor"]
    out["max_steps"] = settings["max_steps"]
    out["max_wall_time"] = settings["max_wall_time"]
    out["check_every"] = int(settings["check_every"])
    return out


def _budget(chunk: Ensemble, i: int, options: Mapping[str, Any]) -> float:
    if options.get("t_max") is not None:
        return float(options["t_max"])
    p = chunk.params
    if "t_pericentre" not in p or "binary_period" not in p:
        raise ValueError("t_max: required for members without the params t_pericentre and binary_period "
                         "(binary_single_ensemble gives them)")
    return 2 * float(p["t_pericentre"][i]) + options["budget_periods"] * float(p["binary_period"][i])


def _one(chunk: Ensemble, i: int, options: Mapping[str, Any]) -> tuple:
    enc = scatter(chunk.system(i, options["precision"]), repr(_budget(chunk, i, options)),
                  tidal_tolerance=options["tidal_tolerance"], distance_factor=options["distance_factor"],
                  method=options["method"], tol=options["tol"], max_steps=options.get("max_steps"),
                  max_wall_time=options.get("max_wall_time"), check_every=options["check_every"])
    return (enc.outcome, enc.status, enc.escaper, enc.binary[0], enc.binary[1], enc.semimajor_axis,
            enc.eccentricity, enc.energy_change, enc.v_inf, enc.time, enc.t_end, enc.close_approaches,
            enc.energy_error, enc.steps, enc.evaluations, enc.wall_time)


def run_scattering(chunk: Ensemble, options: Mapping[str, Any]) -> dict:
    """The sweep task ``"scattering"`` on one chunk: every member by :func:`scatter`, on threads.

    Parameters
    ----------
    chunk : Ensemble
        Three-body members, the binary first.
    options : mapping
        The prepared options, plus ``threads`` and ``progress`` at run time.

    Returns
    -------
    dict of str to numpy.ndarray
        ``TASK_COLUMNS``, one row per member: the fields of :class:`Encounter` (``escaper_v_inf``
        is its ``v_inf``).
    """
    import concurrent.futures as cf
    import os

    from . import _core

    if chunk.n != 3:
        raise ValueError(f"ensemble: a binary-single encounter has 3 bodies, got {chunk.n}")
    threads = options.get("threads") or len(os.sched_getaffinity(0))
    progress = options.get("progress")
    rows: list = [None] * len(chunk)
    pool = cf.ThreadPoolExecutor(max_workers=max(1, min(int(threads), len(chunk))))
    try:
        futures = {pool.submit(_one, chunk, i, options): i for i in range(len(chunk))}
        done = 0
        for fut in cf.as_completed(futures):
            rows[futures[fut]] = fut.result()
            done += 1
            if progress is not None:
                progress(done)
    except BaseException:
        _core.request_stop(True)  # stop the members still running on the other threads
        pool.shutdown(wait=True, cancel_futures=True)
        _core.request_stop(False)
        raise
    pool.shutdown(wait=True)
    kinds = (object, object, np.int64, np.int64, np.int64) + (np.float64,) * 6 + (np.int64, np.float64, np.int64,
                                                                                    np.int64, np.float64)
    return {n: np.array([r[k] for r in rows], dtype=d) for k, (n, d) in enumerate(zip(TASK_COLUMNS, kinds))}


# ---------------------------------------------------------------------------------------------
# cross sections
# ---------------------------------------------------------------------------------------------
def cross_sections(table: Any, semimajor_axis: float = 1.0) -> Any:
    """Cross sections per outcome and speed from a table of encounters (a store's results).

    sigma = pi b_max^2 f, f the fraction of the speed's members with that outcome, and the Monte
    Carlo (binomial) error pi b_max^2 sqrt(f (1 - f) / N); also per speed the mean relative change
    of the binary's binding energy over all resolved members (ionization counting as -1, the
    binding energy gone; mergers left out) with its standard error: the cross-section weighted
    mean of Heggie (1975, MNRAS 173, 729) once multiplied by pi b_max^2.

    Parameters
    ----------
    table : pandas.DataFrame or mapping of columns
        Columns ``speed_index``, ``v_over_vc``, ``b_max`` (the ensemble's params) and ``outcome``,
        ``energy_change`` (the task's).
    semimajor_axis : float, optional
        The initial binary's semimajor axis, for ``sigma / (pi a^2)`` (default 1).

    Returns
    -------
    pandas.DataFrame
        One row per speed and outcome (``ENCOUNTER_OUTCOMES``): ``speed_index``, ``v_over_vc``,
        ``members``, ``b_max``, ``outcome``, ``count``, ``fraction``, ``sigma``, ``sigma_error``,
        ``sigma_pi_a2``, ``sigma_pi_a2_error``, ``mean_energy_change``, ``mean_energy_change_error``.

    Examples
    --------
    >>> from loschmidt import scattering
    >>> t = {"speed_index": [0, 0, 0, 0], "v_over_vc": [0.5] * 4, "b_max": [2.0] * 4,
    ...      "outcome": ["preservation", "exchange", "preservation", "preservation"],
    ...      "energy_change": [0.1, 0.2, 0.0, 0.1]}
    >>> cs = scattering.cross_sections(t)
    >>> row = cs[cs.outcome == "exchange"].iloc[0]
    >>> round(float(row.sigma_pi_a2), 6), round(float(row.sigma_pi_a2_error), 6)   # 4 x 1/4, 4 sqrt(3/64)
    (1.0, 0.866025)
    """
    import pandas as pd

    df = pd.DataFrame({k: np.asarray(table[k]) for k in ("speed_index", "v_over_vc", "b_max", "outcome",
                                                           "energy_change")})
    if not (isinstance(semimajor_axis, (int, float)) and semimajor_axis > 0 and math.isfinite(semimajor_axis)):
        raise ValueError(f"semimajor_axis: expected a positive number, got {semimajor_axis!r}")
    rows = []
    for s, g in df.groupby("speed_index", sort=True):
        n = len(g)
        bmax = float(g["b_max"].iloc[0])
        area = math.pi * bmax * bmax
        change = np.where(g["outcome"] == "ionization", -1.0, g["energy_change"].to_numpy(dtype=float))
        keep = g["outcome"].isin(("preservation", "exchange", "ionization")).to_numpy() & np.isfinite(change)
        mean = float(change[keep].mean()) if keep.any() else math.nan
        err = float(change[keep].std(ddof=1) / math.sqrt(keep.sum())) if keep.sum() > 1 else math.nan
        for kind in ENCOUNTER_OUTCOMES:
            count = int((g["outcome"] == kind).sum())
            f = count / n
            sigma = area * f
            error = area * math.sqrt(f * (1 - f) / n)
            rows.append({"speed_index": int(s), "v_over_vc": float(g["v_over_vc"].iloc[0]), "members": n,
                         "b_max": bmax, "outcome": kind, "count": count, "fraction": f, "sigma": sigma,
                         "sigma_error": error, "sigma_pi_a2": sigma / (math.pi * semimajor_axis**2),
                         "sigma_pi_a2_error": error / (math.pi * semimajor_axis**2),
                         "mean_energy_change": mean, "mean_energy_change_error": err})
    return pd.DataFrame(rows)
