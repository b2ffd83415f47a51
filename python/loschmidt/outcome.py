"""What has become of a few-body system: escape, collision, or still bound, from one state.

``outcome(system)`` classifies a state; ``integrate_until_escape`` integrates in chunks and stops at
the first chunk end where the state is an escape (a stand-in until the engine has a stop condition).

Hierarchical decomposition (common practice). Every body starts as a particle; the pair of
particles with the most negative two-body energy ``E_pq = mu_pq |v_pq|^2 / 2 - m_p m_q / r_pq`` (each
particle a point of its total mass at its centre of mass, mu_pq = m_p m_q / (m_p + m_q)) is replaced
by a composite particle, and so on until no pair of particles is bound. What remains are the
*subsystems*: mutually unbound pairwise, each a single body or a hierarchy of bound pairs
(``bound_pairs``, innermost first). A hierarchical triple is one subsystem ``((0, 1), 2)``; the
Pythagorean problem after the breakup is two, ``(1, 2)`` and ``0``.

Escape test (practical; common practice). A subsystem p escapes when

1. its two-body energy relative to the centre of mass of all the other bodies is positive,
   ``E_rel = mu |V|^2 / 2 - m_p M_rest / R > 0`` (mu = m_p M_rest / (m_p + M_rest), R and V the
   separation and relative velocity of the two centres of mass);
2. it recedes from that centre of mass, R . V > 0;
3. it is far from every other subsystem q: r_pq > k L_pq, with k = ``distance_factor`` (default 10)
   and L_pq the larger semimajor axis of the outermost orbits of p and q (a single body has none);
   when both are single bodies, ``L_pq = |a_pq|``, the semimajor axis of their own hyperbolic orbit.

For three bodies this is the usual test: the escaper has positive energy relative to the centre of
mass of the binary, recedes from it, and is farther than k binary semimajor axes. It is a practical
test, not a proof: rigorous sufficient conditions for escape are those of Standish 1971
(Celest. Mech. 4, 44) and Valtonen & Karttunen 2006 (The Three-Body Problem, ch. 8). The tidal energy
left out of condition 1 is, relative to the binary's binding energy, of order 2 (m_p / M_b) (a / R)^3,
below 2e-3 (m_p / M_b) once R > 10 a.

Kinds (``Outcome.kind``), decided in this order:

- ``"collision"``: radii are known (from the System or the ``radii`` argument) and some pair is
  closer than r_i + r_j (the deepest overlap, relative to r_i + r_j, is reported).
- ``"bound"``: the whole system is one hierarchically bound subsystem. This is a statement about the
  instant, not a stability criterion: a bound democratic triple may still break up later.
- ``"escape"``: at least one subsystem passes the test. When every subsystem passes (a complete
  breakup) the one with the most bodies (then the most mass, then the lowest index) is the remnant
  and the others are the escapers.
- ``"undecided"``: the system splits into several mutually unbound subsystems but none passes the
  test yet (approaching, or not yet far): integrate further.

Precision: every energy, distance and element is computed in mpmath at the significand bits of the
system's precision plus 64 guard bits (as ``loschmidt.orbits`` does), from the exact values of the
limbs, and rounded once to float for the ``Outcome`` fields; the exact values are kept
(``Outcome.to_mpmath()``, ``Outcome.limbs(name)``). For three bodies the energy splits exactly as

    E = T_cm + E_binary + E_rel + E_tidal,

T_cm the kinetic energy of the overall centre-of-mass motion, E_binary the binary's two-body energy,
E_rel the third body's two-body energy relative to the binary's centre of mass, and
E_tidal = m_k (m_i + m_j) / R - m_k m_i / r_ki - m_k m_j / r_kj the interaction left over (of order
m_k mu_b a^2 / R^3 when R >> a); each term is computed on its own, so the sum is a check.

Meant for few bodies: the decomposition costs O(N^3) two-body energies in mpmath.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any

import mpmath
import numpy as np

from . import options as _options
from . import precision as _p
from .orbits import GUARD_BITS, OrbitalElements, _elements_mp, working_bits
from .system import System

__all__ = [
    "Outcome",
    "BoundPair",
    "OUTCOME_KINDS",
    "DEFAULT_DISTANCE_FACTOR",
    "outcome",
    "integrate_until_escape",
]

#: The kinds of outcome, in the order they are decided (see the module docstring).
OUTCOME_KINDS = ("collision", "escape", "bound", "undecided")

#: k in the escape test R > k a_binary (declared with the option in loschmidt.options).
DEFAULT_DISTANCE_FACTOR = _options.DEFAULT_DISTANCE_FACTOR

_NAN = float("nan")

# exact quantities kept by an Outcome (names for limbs() / to_mpmath())
_EXACT_NAMES = (
    "energy",
    "cm_kinetic_energy",
    "binary_energy",
    "outer_energy",
    "tidal_energy",
    "semimajor_axis",
    "eccentricity",
    "period",
    "v_inf",
    "distance",
    "radial_velocity",
)


# ---------------------------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BoundPair:
    """One bound pair of the hierarchy: group ``j`` about group ``i``.

    Attributes
    ----------
    i, j : tuple of int
        The two groups, as body indices (a composite counts as one body of its total mass at its
        centre of mass).
    semimajor_axis, eccentricity, period, energy : float
        Elements and two-body energy of the pair (``loschmidt.orbits`` conventions).
    elements : OrbitalElements
        All the elements, in full precision.
    """

    i: tuple
    j: tuple
    semimajor_axis: float
    eccentricity: float
    period: float
    energy: float
    elements: OrbitalElements = field(repr=False, compare=False)


@dataclass(frozen=True, repr=False)
class Outcome:
    """The classification of one state (see :mod:`loschmidt.outcome` for the criteria).

    Attributes
    ----------
    kind : str
        ``"escape"``, ``"bound"``, ``"undecided"`` or ``"collision"``.
    n : int
        Number of bodies.
    time : float
        Epoch of the state.
    precision : str
        Its working precision.
    distance_factor : float
        k of the escape test.
    escaper : int or None
        The escaping body (three bodies: the body outside the binary, when it escapes; more bodies:
        the escaper when exactly one single body escapes).
    binary : (int, int) or None
        Three bodies: the most bound pair (when no pair is bound, the pair of lowest two-body energy,
        and ``binary_bound`` is False). Other N: the most bound pair of single bodies, if any.
    binary_bound : bool
        Whether ``binary`` has negative two-body energy.
    semimajor_axis, eccentricity, period, binary_energy : float
        Elements of ``binary`` (``loschmidt.orbits`` conventions; NaN without a binary).
    binary_elements : OrbitalElements or None
        All the elements of ``binary``.
    third : int or None
        Three bodies: the body outside ``binary``.
    outer_energy : float
        Two-body energy of the escaper (three bodies: of ``third``) relative to the centre of mass of
        all the other bodies; NaN when there is no such body.
    v_inf : float
        Relative speed at infinity of that body and the centre of mass of the others,
        sqrt(2 outer_energy / mu); NaN unless ``outer_energy`` > 0.
    distance, radial_velocity : float
        Separation R of that body from the centre of mass of the others and R . V / R.
    tidal_energy : float
        Three bodies: E - T_cm - binary_energy - outer_energy, computed directly (see above).
    energy, cm_kinetic_energy : float
        Total energy and the kinetic energy of the centre-of-mass motion.
    escapers : tuple of tuples
        Every escaping subsystem, as sorted tuples of body indices.
    subsystems : tuple
        The mutually unbound subsystems as nested tuples of body indices (the hierarchy).
    bound_pairs : tuple of BoundPair
        Every merge of the decomposition, innermost first.
    collision : (int, int) or None
        The overlapping pair (kind ``"collision"``).
    reason : str
        One line on why this kind was chosen.
    """

    kind: str
    n: int
    time: float
    precision: str
    distance_factor: float
    escaper: int | None
    binary: tuple | None
    binary_bound: bool
    semimajor_axis: float
    eccentricity: float
    period: float
    binary_energy: float
    third: int | None
    outer_energy: float
    v_inf: float
    distance: float
    radial_velocity: float
    tidal_energy: float
    energy: float
    cm_kinetic_energy: float
    escapers: tuple
    subsystems: tuple
    bound_pairs: tuple
    collision: tuple | None
    reason: str
    binary_elements: OrbitalElements | None = field(default=None, compare=False)
    _exact: dict = field(default_factory=dict, compare=False, hash=False)

    @property
    def hierarchical(self) -> bool:
        """Three bodies with a bound binary and the third farther from its centre of mass than
        ``distance_factor`` binary semimajor axes: only then is ``binary`` a binary set apart from the
        third body (the figure-eight or the Lagrange triangle have none)."""
        a = self.semimajor_axis
        return bool(self.n == 3 and self.binary_bound and a > 0 and self.distance > max(self.distance_factor, 1) * a)

    @property
    def structure(self) -> str:
        """The subsystems as text: ``"(1,2) + 0"`` for a binary and a single, ``"((0,1),2)"`` for a
        bound hierarchical triple."""
        return " + ".join(_tree_text(t) for t in self.subsystems)

    def to_mpmath(self) -> dict:
        """The exact energies, elements and distances.

        Returns
        -------
        dict
            Name -> mpmath value carrying the guard bits; NaN where the float field is NaN.
        """
        return dict(self._exact)

    def limbs(self, name: str) -> np.ndarray:
        """One of the exact quantities in full precision.

        Parameters
        ----------
        name : str
            ``"energy"``, ``"binary_energy"``, ``"outer_energy"``, ``"semimajor_axis"``,
            ``"eccentricity"``, ``"period"``, ``"v_inf"``, ``"distance"`` ...

        Returns
        -------
        numpy.ndarray, shape (k,)
            float64 limbs of the working precision.
        """
        if name not in _EXACT_NAMES:
            raise ValueError(f"name: expected one of {_EXACT_NAMES}, got {name!r}")
        value = self._exact[name]
        k = _p.limb_count(self.precision)
        if not mpmath.isfinite(value) or abs(value) > mpmath.mpf(np.finfo(np.float64).max):
            out = np.zeros(k)
            out[0] = float(value)  # NaN, or +-inf as the float field gives for a value beyond double range
            return out
        return np.asarray(_p.to_limbs(value, self.precision), dtype=np.float64).reshape(k)

    def as_dict(self) -> dict:
        """A flat row for a results table.

        Returns
        -------
        dict
            Plain ints, floats, bools and strings; -1 for a missing index, NaN for a missing number.
        """

        def idx(v: int | None) -> int:
            return -1 if v is None else int(v)

        b = self.binary or (None, None)
        c = self.collision or (None, None)
        return {
            "kind": self.kind,
            "n": self.n,
            "time": self.time,
            "precision": self.precision,
            "distance_factor": self.distance_factor,
            "escaper": idx(self.escaper),
            "binary_i": idx(b[0]),
            "binary_j": idx(b[1]),
            "binary_bound": bool(self.binary_bound),
            "a": self.semimajor_axis,
            "e": self.eccentricity,
            "period": self.period,
            "binary_energy": self.binary_energy,
            "third": idx(self.third),
            "outer_energy": self.outer_energy,
            "v_inf": self.v_inf,
            "distance": self.distance,
            "radial_velocity": self.radial_velocity,
            "tidal_energy": self.tidal_energy,
            "energy": self.energy,
            "cm_kinetic_energy": self.cm_kinetic_energy,
            "n_escapers": len(self.escapers),
            "n_subsystems": len(self.subsystems),
            "structure": self.structure,
            "collision_i": idx(c[0]),
            "collision_j": idx(c[1]),
            "reason": self.reason,
        }

    def __repr__(self) -> str:
        parts = [f"kind={self.kind!r}", f"time={self.time:.6g}", f"structure={self.structure!r}"]
        if self.escaper is not None:
            parts.append(f"escaper={self.escaper}")
        elif self.escapers:
            parts.append(f"escapers={self.escapers}")
        if self.binary is not None:
            tag = "bound" if self.binary_bound else "unbound"
            parts.append(
                f"binary={self.binary} ({tag}, a={self.semimajor_axis:.6g}, e={self.eccentricity:.6g})"
            )
        if math.isfinite(self.distance):
            parts.append(f"distance={self.distance:.6g}")
        if math.isfinite(self.v_inf):
            parts.append(f"v_inf={self.v_inf:.6g}")
        if self.collision is not None:
            parts.append(f"collision={self.collision}")
        parts.append(f"reason={self.reason!r}")
        return "Outcome(" + ", ".join(parts) + ")"


def _tree_text(tree: Any) -> str:
    if isinstance(tree, int):
        return str(tree)
    return "(" + ",".join(_tree_text(t) for t in tree) + ")"


# ---------------------------------------------------------------------------------------------
# mechanics in mpmath (current working precision)
# ---------------------------------------------------------------------------------------------
class _Particle:
    """A body or a bound composite: total mass at the centre of mass of its members."""

    __slots__ = ("members", "tree", "m", "r", "v", "size", "first")

    def __init__(self, members, tree, m, r, v, size):
        self.members = tuple(sorted(members))
        self.tree = tree
        self.m = m
        self.r = r
        self.v = v
        self.size = size  # semimajor axis of the outermost orbit (0 for a single body)
        self.first = self.members[0]


def _sub(a, b):
    return [a[0] - b[0], a[1] - b[1], a[2] - b[2]]


def _dot(a, b):
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _centre(masses, pos, vel, group):
    m = mpmath.fsum(masses[k] for k in group)
    r = [mpmath.fsum(masses[k] * pos[k][c] for k in group) / m for c in range(3)]
    v = [mpmath.fsum(masses[k] * vel[k][c] for k in group) / m for c in range(3)]
    return m, r, v


def _two_body(m1, r1, v1, m2, r2, v2):
    """(energy, separation, radial velocity R.V/R, reduced mass, relative r, relative v)."""
    dr = _sub(r2, r1)
    dv = _sub(v2, v1)
    mu = m1 * m2 / (m1 + m2)
    r = mpmath.sqrt(_dot(dr, dr))
    if r == 0:
        return mpmath.mpf("-inf"), r, mpmath.mpf(0), mu, dr, dv
    energy = mu * _dot(dv, dv) / 2 - m1 * m2 / r
    return energy, r, _dot(dr, dv) / r, mu, dr, dv


def _elements(p: _Particle, q: _Particle, bits: int) -> dict | None:
    dr, dv = _sub(q.r, p.r), _sub(q.v, p.v)
    if all(c == 0 for c in dr):
        return None
    return _elements_mp(p.m, q.m, dr, dv, bits)


def _decompose(masses, pos, vel, bits):
    """Greedy hierarchical pairing: returns (top-level particles, merges [(p, q, elements dict)])."""
    parts = [_Particle((k,), k, masses[k], pos[k], vel[k], mpmath.mpf(0)) for k in range(len(masses))]
    merges = []
    while len(parts) > 1:
        best = None
        for a in range(len(parts)):
            for b in range(a + 1, len(parts)):
                p, q = parts[a], parts[b]
                e = _two_body(p.m, p.r, p.v, q.m, q.r, q.v)[0]
                if best is None or e < best[0]:
                    best = (e, a, b)
        e, a, b = best
        if not e < 0:
            break
        p, q = parts[a], parts[b]
        el = _elements(p, q, bits)
        m = p.m + q.m
        r = [(p.m * p.r[c] + q.m * q.r[c]) / m for c in range(3)]
        v = [(p.m * p.v[c] + q.m * q.v[c]) / m for c in range(3)]
        size = el["semimajor_axis"] if el is not None else mpmath.mpf(0)
        first, second = (p, q) if p.first < q.first else (q, p)
        merged = _Particle(p.members + q.members, (first.tree, second.tree), m, r, v, size)
        merges.append((first, second, el))
        parts = [x for k, x in enumerate(parts) if k not in (a, b)] + [merged]
    parts.sort(key=lambda x: x.first)
    return parts, merges


def _escape_test(p, parts, masses, pos, vel, k):
    """(passes, reason) of the escape test of subsystem p (module docstring, conditions 1-3)."""
    rest = [i for i in range(len(masses)) if i not in p.members]
    M, R, V = _centre(masses, pos, vel, rest)
    energy, _dist, rdot = _two_body(M, R, V, p.m, p.r, p.v)[:3]
    if not energy > 0:
        return False, "outer energy not positive"
    if not rdot > 0:
        return False, "unbound but approaching"
    for q in parts:
        if q is p or k == 0:
            continue
        e_pq, r_pq = _two_body(p.m, p.r, p.v, q.m, q.r, q.v)[:2]
        scale = max(p.size, q.size)
        if scale == 0:  # two single bodies: their own hyperbola's |a| = m_p m_q / (2 E_pq)
            scale = p.m * q.m / (2 * e_pq) if e_pq > 0 else mpmath.mpf("inf")
        if not r_pq > k * scale:
            return False, f"receding, not yet far (r / L = {float(r_pq / scale):.3g} < k = {float(k):g})"
    return True, "positive energy, receding, far"


# ---------------------------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------------------------
def _check_factor(value: Any) -> float:
    return _options.check_distance_factor(value)


def _check_radii(radii: Any, system: System) -> np.ndarray | None:
    if radii is None:
        return system.radii
    from .system import _radii_array

    return _radii_array(radii, system.n)


# ---------------------------------------------------------------------------------------------
# public API
# ---------------------------------------------------------------------------------------------
def outcome(system: System, distance_factor: float = DEFAULT_DISTANCE_FACTOR, radii: Any = None) -> Outcome:
    """Classify the state of ``system``: escape, collision, bound or undecided.

    Parameters
    ----------
    system : System
        The state to classify.
    distance_factor : float, optional
        k of the escape test: an escaper must be farther than k semimajor axes of the binary
        (default 10, common practice); 0 drops the distance condition.
    radii : sequence of N numbers, optional
        Body radii for the collision check; default the system's own (none: no collision check).

    Returns
    -------
    Outcome
        See :mod:`loschmidt.outcome` for the decomposition, the escape test (Standish 1971,
        Celest. Mech. 4, 44; Valtonen & Karttunen 2006, ch. 8, for rigorous conditions) and the kinds.

    Examples
    --------
    >>> from loschmidt import ics, outcome
    >>> outcome(ics.binary(1, 1, 1, 0.5)).kind
    'bound'
    >>> o = outcome(ics.hierarchical(dict(m1=1, m2=1, a=1, e=0), dict(m3=1, a=-2, e=1.5, true_anomaly=2.2)))
    >>> o.kind, o.escaper, o.binary, round(o.semimajor_axis, 12)
    ('escape', 2, (0, 1), 1.0)
    """
    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    k_factor = _check_factor(distance_factor)
    rad = _check_radii(radii, system)
    prec = system.precision
    bits = working_bits(prec)
    n = system.n
    nan = mpmath.mpf("nan")
    with mpmath.workprec(bits + GUARD_BITS):
        d = system.to_mpmath()
        masses = [+mpmath.mpf(m) for m in d["masses"]]
        pos = [[+mpmath.mpf(c) for c in row] for row in d["positions"]]
        vel = [[+mpmath.mpf(c) for c in row] for row in d["velocities"]]
        k = mpmath.mpf(k_factor)

        # total energy and the centre-of-mass motion
        mtot = mpmath.fsum(masses)
        kinetic = mpmath.fsum(masses[i] * _dot(vel[i], vel[i]) for i in range(n)) / 2
        potential = -mpmath.fsum(
            masses[i] * masses[j] / mpmath.sqrt(_dot(_sub(pos[i], pos[j]), _sub(pos[i], pos[j])))
            for i in range(n) for j in range(i + 1, n)
        )
        p_tot = [mpmath.fsum(masses[i] * vel[i][c] for i in range(n)) for c in range(3)]
        cm_kinetic = _dot(p_tot, p_tot) / (2 * mtot)

        # collisions
        collision = None
        if rad is not None:
            worst = None
            for i in range(n):
                for j in range(i + 1, n):
                    reach = Fraction(float(rad[i])) + Fraction(float(rad[j]))
                    if reach == 0:
                        continue
                    dr = _sub(pos[i], pos[j])
                    sep = mpmath.sqrt(_dot(dr, dr))
                    ratio = sep / mpmath.mpf(reach.numerator) * reach.denominator
                    if ratio < 1 and (worst is None or ratio < worst[0]):
                        worst = (ratio, i, j)
            if worst is not None:
                collision = (worst[1], worst[2])

        parts, merges = _decompose(masses, pos, vel, bits)
        bound_pairs = tuple(
            BoundPair(
                p.members, q.members,
                _f(el, "semimajor_axis"), _f(el, "eccentricity"), _f(el, "period"), _f(el, "energy"),
                OrbitalElements(el, prec) if el is not None else None,
            )
            for p, q, el in merges
        )

        # escape tests of every subsystem
        tests = {}
        if len(parts) > 1:
            for p in parts:
                tests[p.first] = _escape_test(p, parts, masses, pos, vel, k)
        passing = [p for p in parts if tests.get(p.first, (False,))[0]]
        if passing and len(passing) == len(parts):
            remnant = max(parts, key=lambda x: (len(x.members), x.m, -x.first))
            passing = [p for p in passing if p is not remnant]
        escapers = tuple(p.members for p in passing)

        # the binary and the body outside it
        binary = third = None
        binary_el = None
        single_pairs = [(p, q, el) for p, q, el in merges if len(p.members) == 1 and len(q.members) == 1]
        if single_pairs:
            p, q, binary_el = single_pairs[0]
            binary = (p.first, q.first)
        elif n == 3:  # nothing bound: the pair of lowest two-body energy
            best = None
            for i in range(3):
                for j in range(i + 1, 3):
                    e = _two_body(masses[i], pos[i], vel[i], masses[j], pos[j], vel[j])[0]
                    if best is None or e < best[0]:
                        best = (e, i, j)
            binary = (best[1], best[2])
            pi = _Particle((binary[0],), binary[0], masses[binary[0]], pos[binary[0]], vel[binary[0]], 0)
            pj = _Particle((binary[1],), binary[1], masses[binary[1]], pos[binary[1]], vel[binary[1]], 0)
            binary_el = _elements(pi, pj, bits)
        if n == 3 and binary is not None:
            third = ({0, 1, 2} - set(binary)).pop()

        # the body (or subsystem) whose outer orbit is reported
        escaper = None
        outer_group = None
        if n == 3:
            outer_group = (third,)
            if (third,) in escapers:
                escaper = third
        elif len(escapers) == 1:
            outer_group = escapers[0]
            if len(outer_group) == 1:
                escaper = outer_group[0]
        outer_energy = distance = rdot = v_inf = tidal = nan
        if outer_group is not None:
            rest = [i for i in range(n) if i not in outer_group]
            mp_, rp, vp = _centre(masses, pos, vel, outer_group)
            M, R, V = _centre(masses, pos, vel, rest)
            outer_energy, distance, rdot, mu, _dr, _dv = _two_body(M, R, V, mp_, rp, vp)
            if outer_energy > 0:
                v_inf = mpmath.sqrt(2 * outer_energy / mu)
            if n == 3 and distance != 0:  # R = 0 (the figure-eight's start): no tidal split
                i, j = binary
                tidal = masses[third] * (masses[i] + masses[j]) / distance - mpmath.fsum(
                    masses[third] * masses[b] / mpmath.sqrt(_dot(_sub(pos[third], pos[b]), _sub(pos[third], pos[b])))
                    for b in (i, j)
                )

        # the kind
        if collision is not None:
            kind, reason = "collision", f"bodies {collision[0]} and {collision[1]} overlap"
        elif len(parts) == 1:
            kind, reason = "bound", _bound_reason(n, binary, third, binary_el, distance, k_factor)
        elif escapers:
            kind, reason = "escape", "positive energy, receding, far"
        else:
            kind = "undecided"
            if n == 3 and third is not None and third in tests:
                reason = tests[third][1]
            else:
                reason = "; ".join(f"{_tree_text(p.tree)}: {tests[p.first][1]}" for p in parts)

        be = binary_el if binary_el is not None else {}
        exact = {
            "energy": kinetic + potential,
            "cm_kinetic_energy": cm_kinetic,
            "binary_energy": be.get("energy", nan),
            "outer_energy": outer_energy,
            "tidal_energy": tidal,
            "semimajor_axis": be.get("semimajor_axis", nan),
            "eccentricity": be.get("eccentricity", nan),
            "period": be.get("period", nan),
            "v_inf": v_inf,
            "distance": distance,
            "radial_velocity": rdot,
        }
        binary_bound = bool(binary_el is not None and binary_el["energy"] < 0)
        return Outcome(
            kind=kind,
            n=n,
            time=system.time,
            precision=prec,
            distance_factor=k_factor,
            escaper=escaper,
            binary=binary,
            binary_bound=binary_bound,
            semimajor_axis=float(exact["semimajor_axis"]),
            eccentricity=float(exact["eccentricity"]),
            period=float(exact["period"]),
            binary_energy=float(exact["binary_energy"]),
            third=third,
            outer_energy=float(outer_energy),
            v_inf=float(v_inf),
            distance=float(distance),
            radial_velocity=float(rdot),
            tidal_energy=float(tidal),
            energy=float(exact["energy"]),
            cm_kinetic_energy=float(cm_kinetic),
            escapers=escapers,
            subsystems=tuple(p.tree for p in parts),
            bound_pairs=bound_pairs,
            collision=collision,
            reason=reason,
            binary_elements=OrbitalElements(binary_el, prec) if binary_el is not None else None,
            _exact=exact,
        )


def _is_hierarchical(n: int, binary_el: dict | None, distance: Any, k_factor: float) -> bool:
    """A bound triple is hierarchical when the third body is farther from the binary's centre of mass
    than ``k_factor`` binary semimajor axes (the same distance as condition 3 of the escape test;
    common practice). Two bodies are one pair, not a hierarchy."""
    if n != 3 or binary_el is None or not binary_el["energy"] < 0:
        return False
    a = binary_el["semimajor_axis"]
    return bool(distance == distance and a > 0 and distance > max(k_factor, 1) * a)


def _bound_reason(n: int, binary: Any, third: Any, binary_el: dict | None, distance: Any, k_factor: float) -> str:
    """Why a state is one bound subsystem, in words that fit its shape."""
    if n == 1:
        return "a single body"
    if n == 2:
        return "a bound pair (a two-body orbit)"
    if n == 3 and binary is not None:
        i, j = binary
        if _is_hierarchical(n, binary_el, distance, k_factor):
            return (f"a hierarchical triple: bodies {i} and {j} form a binary and body {third} orbits it at "
                    f"more than {max(k_factor, 1):g} binary semimajor axes")
        return (f"a bound, non-hierarchical triple: no pair is set apart from the third body (body {third} "
                f"is within {max(k_factor, 1):g} semimajor axes of the closest pair)")
    return "one bound subsystem of all the bodies"


def _f(el: dict | None, name: str) -> float:
    return _NAN if el is None else float(el[name])


# ---------------------------------------------------------------------------------------------
# integrate in chunks until an escape (stand-in for an engine stop condition)
# ---------------------------------------------------------------------------------------------
#: Most chunks ``integrate_until_escape`` accepts (t_max / interval): beyond it, hours of work.
MAX_CHUNKS = 10**6


def _positive_time(value: Any, name: str) -> Fraction:
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name}: expected a number, got bool")
    q = _p.exact_fraction(value, name)
    if q <= 0:
        raise ValueError(f"{name}: must be positive, got {value!r}")
    return q


def integrate_until_escape(
    system: System,
    t_max: Any,
    interval: Any = 10,
    distance_factor: float = DEFAULT_DISTANCE_FACTOR,
    radii: Any = None,
    **integrate_options: Any,
):
    """Integrate ``system`` forward in chunks of ``interval`` and stop at the first chunk end where
    :func:`outcome` says ``"escape"`` (or ``"collision"``), or at ``t_max``; a run that the engine
    ends at a contact or a post-Newtonian merger (status ``collision`` or ``merger``) stops there,
    with the lifetime the exact time of the event.

    A plain-Python stand-in for an engine stop condition: the state is looked at only at chunk
    ends, so the lifetime found is the first chunk end after the escape test is met (resolution
    ``interval``), and the test itself is met some time after the physical breakup.

    Parameters
    ----------
    system : System
        The start.
    t_max : number or decimal string
        Longest span to integrate (> 0).
    interval : number or decimal string, optional
        Chunk length (> 0, default 10 N-body time units); chunk ends are exact multiples of it.
    distance_factor : float, optional
        Passed to :func:`outcome`.
    radii : sequence of N numbers, optional
        Passed to :func:`outcome`.
    **integrate_options
        Passed to :func:`loschmidt.integrate` (``method``, ``tol``, ``max_steps`` per chunk ...);
        ``times`` is not accepted.

    Returns
    -------
    (Result, Outcome, lifetime)
        The last chunk's ``Result`` with step counts, wall time and energy error (against the start)
        accumulated over every chunk; the ``Outcome`` of the final state; ``lifetime``, the time
        from the start to the chunk end of the escape (or collision), or None when neither happened
        (also when a chunk did not finish: see ``Result.status``).

    Examples
    --------
    Burrau's problem breaks up, the lightest body leaving (Szebehely & Peters 1967):

    >>> import loschmidt
    >>> res, found, lifetime = loschmidt.integrate_until_escape(
    ...     loschmidt.ics.pythagorean("f64"), 200, interval=10, method="chain")
    >>> found.kind, found.escaper, lifetime
    ('escape', 0, 70.0)
    """
    from .integrate import integrate

    if not isinstance(system, System):
        raise TypeError(f"system: expected a loschmidt.System, got {type(system).__name__}")
    total = _positive_time(t_max, "t_max")
    step = _positive_time(interval, "interval")
    if total / step > MAX_CHUNKS:  # each chunk costs an integration and an mpmath classification
        raise ValueError(f"interval: t_max / interval = {_p._magnitude(total / step)} chunks, more than "
                         f"{MAX_CHUNKS}; use a longer interval")
    _check_factor(distance_factor)
    _check_radii(radii, system)
    if "times" in integrate_options:
        raise ValueError("times: not accepted by integrate_until_escape (it integrates in chunks)")
    e0 = _p.to_fraction(system.energy(limbs=True))
    elapsed = Fraction(0)
    state = system
    steps = rejected = evaluations = 0
    wall = 0.0
    bookkeeping = 0.0
    result = None
    found = None
    while elapsed < total:
        span = min(step, total - elapsed)
        result = integrate(state, span, **integrate_options)
        steps += result.steps
        rejected += result.rejected
        evaluations += result.evaluations
        wall += result.wall_time
        bookkeeping = max(bookkeeping, result.energy_error)
        if result.status in ("collision", "merger"):
            # The engine stopped at the event itself (chain method with radii, or a post-Newtonian
            # merger): the lifetime is the exact time reached, not the chunk end.
            elapsed += _p.to_fraction(result.system.limbs("time")) - _p.to_fraction(state.limbs("time"))
            state = result.system
            found = outcome(state, distance_factor, radii)
            break
        elapsed += span
        state = result.system
        found = outcome(state, distance_factor, radii)
        if not result.success or found.kind in ("escape", "collision"):
            break
    e1 = _p.to_fraction(state.energy(limbs=True))
    err = abs(e1 - e0) / abs(e0) if e0 != 0 else abs(e1 - e0)
    if integrate_options.get("pn"):
        # The Newtonian energy is not conserved with post-Newtonian terms: the largest error of the
        # energy bookkeeping over the chunks (each |E - E_start - W| / |E_start|), as integrate reports.
        err = bookkeeping
    result = dataclasses.replace(
        result, steps=steps, rejected=rejected, evaluations=evaluations, wall_time=wall, energy_error=float(err)
    )
    event = result.status in ("collision", "merger") or found.kind in ("escape", "collision")
    lifetime = float(elapsed) if result.success and event else None
    return result, found, lifetime
