"""Outcomes of few-body states (escape, bound, collision, undecided) and the escape-until helper.

Checked against published outcomes (Szebehely & Peters 1967 for the Pythagorean problem; Anosova 1986
for free-fall break-up, loosely), exact two-body orbits built from elements, the exact energy
decomposition of a triple, the Gascheau-Routh stability criterion and its linear growth rate.
"""

from __future__ import annotations

import dataclasses
import math
import time

import mpmath
import numpy as np
import pytest

import loschmidt
from loschmidt import ics
from loschmidt import precision as P
from loschmidt.orbits import pair_elements
from loschmidt.outcome import DEFAULT_DISTANCE_FACTOR, OUTCOME_KINDS, Outcome, integrate_until_escape, outcome

REF_BITS = 300


def exact(limbs) -> mpmath.mpf:
    """Exact value of a limb vector (k,) as an mpf at REF_BITS (the limbs are dyadic: exact)."""
    with mpmath.workprec(REF_BITS):
        return +P.to_mpmath(np.asarray(limbs))


# --------------------------------------------------------------------------------------------
# Pythagorean problem (Burrau 1913; Szebehely & Peters 1967, AJ 72, 876)
# --------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def pythagorean_t100():
    t0 = time.perf_counter()
    r = loschmidt.integrate(ics.pythagorean("dd"), 100)  # about 0.5 s in dd (measured)
    assert r.success
    assert time.perf_counter() - t0 < 20
    return r


def test_pythagorean_start_is_bound():
    o = outcome(ics.pythagorean("dd"))
    # at rest every pair is bound: one hierarchically bound subsystem
    assert o.kind == "bound" and o.escapers == () and o.escaper is None
    assert o.binary == (1, 2) and o.binary_bound  # the closest pair, at rest: a radial orbit, e = 1
    assert o.eccentricity == pytest.approx(1, abs=1e-15) and o.semimajor_axis == pytest.approx(1.5)
    assert math.isnan(o.v_inf)
    assert o.energy == pytest.approx(-769 / 60, rel=1e-15)  # E = -769/60 (METHODS.md section 5)


def test_pythagorean_mass_3_escapes_from_the_4_5_binary(pythagorean_t100):
    r = pythagorean_t100
    o = outcome(r.system)
    # Szebehely & Peters 1967: the bodies of mass 4 and 5 form a binary, the mass-3 body escapes
    assert o.kind == "escape"
    assert o.escaper == 0 and o.third == 0 and o.escapers == ((0,),)
    assert o.binary == (1, 2) and o.binary_bound
    assert o.subsystems == (0, (1, 2)) and o.structure == "0 + (1,2)"
    # the binary elements are those of loschmidt.orbits for the same pair
    el = pair_elements(r.system, 1, 2)
    assert (o.semimajor_axis, o.eccentricity, o.period, o.binary_energy) == (
        el.semimajor_axis, el.eccentricity, el.period, el.energy)
    assert 0 < o.eccentricity < 1 and o.period > 0
    # far and receding, as the test requires
    assert o.distance > DEFAULT_DISTANCE_FACTOR * o.semimajor_axis and o.radial_velocity > 0
    # v_inf = sqrt(2 E_rel / mu), mu = 3 * 9 / 12 for the escaper against the binary
    assert o.outer_energy > 0
    assert o.v_inf == pytest.approx(math.sqrt(2 * o.outer_energy / (27 / 12)), rel=1e-14)
    # E_rel > 0 and E_total < 0: the binary carries more than all the binding energy
    assert o.binary_energy < o.energy < 0


def test_pythagorean_energy_decomposition_is_exact(pythagorean_t100):
    """E = T_cm + E_binary + E_rel + E_tidal holds identically for three bodies; every term is
    computed separately, so it holds to the precision of the state's own energy."""
    r = pythagorean_t100
    o = outcome(r.system)
    x = o.to_mpmath()
    with mpmath.workprec(REF_BITS):
        total = x["cm_kinetic_energy"] + x["binary_energy"] + x["outer_energy"] + x["tidal_energy"]
        engine = exact(r.system.energy(limbs=True))  # the C++ dd energy (compensated sums)
        assert abs(total - engine) / abs(engine) < 1e-29
        # against the exact starting energy -769/60: what is left is the integration's energy error
        # (measured 4e-24 at the default dd tolerance, 1e-24 to 1e-23 over tolerances 1e-28..1e-30)
        start = mpmath.mpf(-769) / 60
        assert abs(total - start) / abs(start) < 1e-22
        assert abs(total - start) / abs(start) == pytest.approx(r.energy_error, rel=1e-6)
        # the centre of mass stays at rest (momentum conserved to round-off)
        assert x["cm_kinetic_energy"] < 1e-40
        # the tidal term is needed at this precision, and is the quadrupole of the binary seen from
        # R: |E_tidal| <= m_k mu_b r_b^2 / R^3 (1 + O(r_b / R)) (multipole expansion, |P2| <= 1)
        tidal = x["tidal_energy"]
        assert abs(tidal) > 1e-8 * abs(start)
        rb = mpmath.mpf(float(np.linalg.norm(r.system.positions[2] - r.system.positions[1])))
        mu_b = mpmath.mpf(20) / 9
        assert abs(tidal) < mpmath.mpf("1.05") * 3 * mu_b * rb**2 / x["distance"] ** 3
    # limbs of the exact values round to the float fields
    assert P.to_float(o.limbs("outer_energy")) == o.outer_energy
    assert o.limbs("binary_energy").shape == (2,)


def test_pythagorean_escape_predicts_the_future(pythagorean_t100):
    """Once the test says escape, the outer orbit is a fixed hyperbola: integrating on (in f64, cheap)
    keeps the two-body energies (up to the tidal term) and the escaper keeps receding."""
    o1 = outcome(pythagorean_t100.system)
    r2 = loschmidt.integrate(pythagorean_t100.system.with_precision("f64"), 100)
    assert r2.success
    o2 = outcome(r2.system)
    assert o2.kind == "escape" and o2.escaper == 0 and o2.binary == (1, 2)
    assert o2.outer_energy == pytest.approx(o1.outer_energy, rel=1e-5)
    assert o2.semimajor_axis == pytest.approx(o1.semimajor_axis, rel=1e-5)
    assert o2.v_inf == pytest.approx(o1.v_inf, rel=1e-5)
    # on the hyperbola the speed falls from v(R1) towards v_inf: 100 v_inf < R2 - R1 < 100 v(R1)
    assert 100 * o1.v_inf < o2.distance - o1.distance < 100 * o1.radial_velocity


def test_pythagorean_escape_time():
    res, o, lifetime = integrate_until_escape(ics.pythagorean("dd"), 100, interval=5)
    assert res.success and o.kind == "escape" and o.escaper == 0 and o.binary == (1, 2)
    # the last close triple encounter is near t = 60 (Szebehely & Peters 1967) [memory]; the test is
    # met at the first chunk end after the escaper is 10 binary semimajor axes out
    assert 60 < lifetime <= 75
    assert res.t == pytest.approx(lifetime)
    assert res.energy_error < 1e-22  # accumulated over the chunks, against the start (measured 6e-24)
    assert res.steps > 0 and res.wall_time > 0


def test_outcome_is_the_same_in_every_precision(pythagorean_t100):
    s = pythagorean_t100.system
    ref = outcome(s)
    for prec in ("f64", "qd"):
        o = outcome(s.with_precision(prec))
        assert o.precision == prec
        assert (o.kind, o.escaper, o.binary) == (ref.kind, ref.escaper, ref.binary)
        for name in ("semimajor_axis", "eccentricity", "outer_energy", "v_inf", "distance"):
            assert getattr(o, name) == pytest.approx(getattr(ref, name), rel=1e-13), name


def test_relabelling_the_bodies_relabels_the_outcome(pythagorean_t100):
    s = pythagorean_t100.system
    perm = [2, 0, 1]  # new body k is old body perm[k]
    t = loschmidt.System.from_limbs(
        s.limbs("masses")[perm], s.limbs("positions")[perm], s.limbs("velocities")[perm], "dd",
        time=s.limbs("time"))
    o, ref = outcome(t), outcome(s)
    new = {old: k for k, old in enumerate(perm)}
    assert o.escaper == new[ref.escaper]
    assert set(o.binary) == {new[b] for b in ref.binary}
    assert o.outer_energy == pytest.approx(ref.outer_energy, rel=1e-15)
    assert o.semimajor_axis == pytest.approx(ref.semimajor_axis, rel=1e-15)


# --------------------------------------------------------------------------------------------
# hand-built triples from orbital elements (exact two-body orbits)
# --------------------------------------------------------------------------------------------
INNER = dict(m1=1, m2="0.5", a=1, e="0.3", mean_anomaly="1.0")


def hyperbolic(true_anomaly, precision="dd"):
    # body 2 on the hyperbola a = -10, e = 1.5 about the binary's centre of mass: p = a (1 - e^2) = 12.5
    return ics.hierarchical(INNER, dict(m3="0.2", a=-10, e="1.5", true_anomaly=true_anomaly), precision=precision)


def test_hyperbolic_escape_is_found_with_its_elements():
    o = outcome(hyperbolic("2.2"))
    assert o.kind == "escape" and o.escaper == 2 and o.binary == (0, 1) and o.binary_bound
    x = o.to_mpmath()
    with mpmath.workprec(REF_BITS):
        tol = mpmath.mpf(2) ** -96  # dd, a few hundred units of round-off
        assert abs(x["semimajor_axis"] - 1) < tol
        assert abs(x["eccentricity"] - mpmath.mpf("0.3")) < tol
        M = mpmath.mpf("1.7")
        # two-body energy on the hyperbola: -mu M / (2 a), so v_inf = sqrt(M / |a|)
        assert abs(x["v_inf"] - mpmath.sqrt(M / 10)) < tol
        nu = mpmath.mpf("2.2")
        r = mpmath.mpf("12.5") / (1 + mpmath.mpf("1.5") * mpmath.cos(nu))  # conic r = p / (1 + e cos nu)
        assert abs(x["distance"] - r) / r < tol
        # energy decomposition (centre of mass at rest: T_cm = 0 to round-off)
        total = x["cm_kinetic_energy"] + x["binary_energy"] + x["outer_energy"] + x["tidal_energy"]
        assert abs(total - x["energy"]) < tol * abs(x["energy"])
    assert o.radial_velocity > 0 and o.distance > 100


def test_hyperbolic_approach_and_near_passage_are_undecided():
    before = outcome(hyperbolic("-2.2"))  # same distance, approaching
    assert before.kind == "undecided" and before.escaper is None and before.escapers == ()
    assert before.radial_velocity < 0 and before.outer_energy > 0 and "approaching" in before.reason
    near = outcome(hyperbolic("0.3"))  # receding at r = 12.5 / (1 + 1.5 cos 0.3) = 5.1 < 10 a_binary
    assert near.kind == "undecided" and "not yet far" in near.reason
    assert near.distance == pytest.approx(12.5 / (1 + 1.5 * math.cos(0.3)), rel=1e-14)
    # the distance factor k is honoured: 0 drops the distance condition, a large k defers the verdict
    assert outcome(hyperbolic("0.3"), distance_factor=0).kind == "escape"
    assert outcome(hyperbolic("2.2"), distance_factor=200).kind == "undecided"


def test_centre_of_mass_motion_enters_the_energy_balance():
    s = hyperbolic("2.2")
    boost = ["0.3", "-0.2", "0.1"]
    vb = np.stack([P.to_limbs(c, "dd") for c in boost])
    v = P.add(s.limbs("velocities"), np.broadcast_to(vb, (3, 3, 2)), "dd")
    moving = loschmidt.System.from_limbs(s.limbs("masses"), s.limbs("positions"), v, "dd")
    o, ref = outcome(moving), outcome(s)
    assert (o.kind, o.escaper, o.binary) == ("escape", 2, (0, 1))
    assert o.v_inf == pytest.approx(ref.v_inf, rel=1e-15)  # Galilean invariance
    x = o.to_mpmath()
    with mpmath.workprec(REF_BITS):
        # T_cm = M |v_b|^2 / 2 with M = 1.7, |v_b|^2 = 0.14
        assert abs(x["cm_kinetic_energy"] - mpmath.mpf("1.7") * mpmath.mpf("0.14") / 2) < mpmath.mpf(2) ** -100
        total = x["cm_kinetic_energy"] + x["binary_energy"] + x["outer_energy"] + x["tidal_energy"]
        engine = exact(moving.energy(limbs=True))
        assert abs(total - engine) / abs(engine) < 1e-29


def test_bound_hierarchical_triple():
    s = ics.hierarchical(dict(m1=1, m2=1, a=1, e="0.1"), dict(m3="0.5", a=10, e="0.2", true_anomaly="1"))
    o = outcome(s)
    assert o.kind == "bound" and o.escaper is None and o.escapers == ()
    assert o.binary == (0, 1) and o.third == 2 and o.subsystems == (((0, 1), 2),)
    assert o.structure == "((0,1),2)"
    assert o.semimajor_axis == pytest.approx(1, rel=1e-14) and o.eccentricity == pytest.approx(0.1, rel=1e-13)
    # the outer two-body energy -m12 m3 / (2 a_out) = -2 * 0.5 / 20 (the orbit it was built on)
    assert o.outer_energy == pytest.approx(-0.05, rel=1e-14)
    assert math.isnan(o.v_inf)
    # the inner and outer orbits are the two bound pairs, innermost first
    assert [(bp.i, bp.j) for bp in o.bound_pairs] == [((0,), (1,)), ((0, 1), (2,))]
    assert o.bound_pairs[1].semimajor_axis == pytest.approx(10, rel=1e-14)


def test_collision_when_radii_overlap():
    s = ics.pythagorean("dd")  # separations 3 (bodies 1, 2), 4 (0, 2), 5 (0, 1)
    o = outcome(s, radii=[1, 1.6, 1.5])
    assert o.kind == "collision" and o.collision == (1, 2)
    assert outcome(s.with_radii([1, 1.6, 1.5])).kind == "collision"  # radii carried by the System
    assert outcome(s, radii=[1, 1.4, 1.5]).kind == "bound"  # 1.4 + 1.5 < 3
    d = o.as_dict()
    assert (d["collision_i"], d["collision_j"]) == (1, 2)


# --------------------------------------------------------------------------------------------
# two and four bodies: the hierarchical decomposition
# --------------------------------------------------------------------------------------------
def test_two_bodies():
    assert outcome(ics.binary(1, "0.5", 1, "0.4", true_anomaly=2)).kind == "bound"
    # hyperbola a = -1, e = 2 near its asymptote (nu < acos(-1/2)): r = 3 / (1 + 2 cos nu) > 10 |a|
    o = outcome(ics.binary(1, "0.5", -1, 2, true_anomaly="2.05"))
    assert o.kind == "escape" and o.escaper == 1  # the lighter body leaves the heavier
    assert o.v_inf == pytest.approx(math.sqrt(1.5), rel=1e-14)  # sqrt(M / |a|)
    assert outcome(ics.binary(1, "0.5", -1, 2, true_anomaly="1")).kind == "undecided"


def quadruple(outer_a, outer_e, outer_nu):
    """Binary (0, 1) and binary (2, 3) whose centres of mass move on a two-body orbit (f64 values)."""
    A = ics.binary(1, 1, "0.5", "0.2", true_anomaly=1, precision="f64")
    B = ics.binary("0.8", "0.6", "0.3", "0.5", true_anomaly=2, precision="f64")
    mA, mB = 2.0, 1.4
    rel = ics.binary(mA, mB, outer_a, outer_e, true_anomaly=outer_nu, precision="f64")
    pos = np.concatenate([A.positions + rel.positions[0], B.positions + rel.positions[1]])
    vel = np.concatenate([A.velocities + rel.velocities[0], B.velocities + rel.velocities[1]])
    return loschmidt.System([1, 1, 0.8, 0.6], pos, vel, precision="dd")


def test_binary_binary_escape():
    s = quadruple(-5, "1.2", "2.2")  # r = 2.2 / (1 + 1.2 cos 2.2) = 7.5 > 10 * 0.5
    o = outcome(s)
    assert o.kind == "escape" and o.subsystems == ((0, 1), (2, 3))
    assert o.escapers == ((2, 3),) and o.escaper is None  # the lighter binary leaves the heavier
    assert o.binary == (0, 1) and o.semimajor_axis == pytest.approx(0.5, rel=1e-12)
    assert o.v_inf == pytest.approx(math.sqrt(3.4 / 5), rel=1e-12)  # sqrt(M / |a_outer|)
    assert [(bp.i, bp.j) for bp in o.bound_pairs] == [((0,), (1,)), ((2,), (3,))]  # most bound first
    assert o.as_dict()["n_escapers"] == 1 and o.as_dict()["structure"] == "(0,1) + (2,3)"


def test_bound_quadruple_and_two_escaping_singles():
    o = outcome(quadruple(8, "0.1", 1))
    assert o.kind == "bound" and o.subsystems == (((0, 1), (2, 3)),)
    assert o.bound_pairs[-1].semimajor_axis == pytest.approx(8, rel=1e-12)
    # a circular binary with two light bodies flying off on opposite sides (v > v_escape = 0.47)
    pos = [[-0.25, 0, 0], [0.25, 0, 0], [20, 0, 0], [-15, 3, 0]]
    vel = [[0, -1, 0], [0, 1, 0], [1, 0.1, 0], [-1.2, 0, 0]]
    o = outcome(loschmidt.System([1, 1, 0.1, 0.1], pos, vel, precision="f64"))
    assert o.kind == "escape" and o.escapers == ((2,), (3,)) and o.binary == (0, 1)
    assert o.escaper is None and o.subsystems == ((0, 1), 2, 3)


# --------------------------------------------------------------------------------------------
# Lagrange's equilateral solution: Gascheau 1843; Routh 1875
# --------------------------------------------------------------------------------------------
def _separations(masses, periods):
    s = ics.lagrange(masses, precision="dd")
    x = s.limbs("positions")
    x[0, 0] = P.add(x[0, 0], P.to_limbs("1e-12", "dd"), "dd")
    s2 = loschmidt.System.from_limbs(s.limbs("masses"), x, s.limbs("velocities"), "dd")
    period = 2 * math.pi / math.sqrt(float(sum(masses)))  # unit side: omega^2 = M / s^3
    times = [period * k for k in range(1, periods + 1)]
    r1 = loschmidt.integrate(s, times[-1], times=times)
    r2 = loschmidt.integrate(s2, times[-1], times=times)
    assert r1.success and r2.success
    return [loschmidt.phase_distance(a, b) for a, b in zip(r1.trajectory, r2.trajectory)]


def test_lagrange_equal_masses_are_unstable():
    # 27 (m1 m2 + m2 m3 + m3 m1) = 81 > M^2 = 9: linearly unstable (Gascheau 1843; Routh 1875)
    assert not ics.lagrange_stable((1, 1, 1))
    d = _separations((1, 1, 1), 6)
    assert d[5] / d[0] > 1e6  # a 1e-12 displacement grows by orders of magnitude within 6 periods
    # linear theory: lambda^4 + omega^2 lambda^2 + (27/4) beta omega^4 = 0, beta = sum m_i m_j / M^2
    # (Routh 1875 [memory]; its discriminant 1 - 27 beta is the criterion); for beta = 1/3,
    # Re(lambda) = omega / sqrt(2): growth per period exp(pi sqrt(2)) = 85.0
    per_period = (d[4] / d[1]) ** (1 / 3)
    assert per_period == pytest.approx(math.exp(math.pi * math.sqrt(2)), rel=0.01)  # measured 85.0005


def test_lagrange_dominant_mass_is_stable():
    # 27 (2e-3 + 1e-6) = 0.054 < M^2 = 1.004: linearly stable (Gascheau 1843; Routh 1875)
    masses = (1, 1e-3, 1e-3)
    assert ics.lagrange_stable(masses)
    d = _separations(masses, 20)
    assert d[-1] < 1e-8 and d[-1] / d[0] < 100  # bounded growth (linear drift at most)


# --------------------------------------------------------------------------------------------
# free fall (Agekyan & Anosova 1967): a loose statistical check
# --------------------------------------------------------------------------------------------
def test_free_fall_grid_mostly_breaks_up():
    """Loose: about 95% of negative-energy triples break up, with mean lifetime about 100 crossing
    times for equal masses (Anosova 1986, Astrophys. Space Sci.); the crossing time here is about
    1.4 (M^(5/2) / (2|E|)^(3/2), common practice), so within 300 time units most of a small grid
    should have broken up. In f64 (measured: 9 of 12 escape, 1 still bound, 2 end in step underflow
    at a near-collision, which plain GBS cannot pass; chain regularization will)."""
    ens = ics.free_fall_grid(4, 4)
    assert len(ens) == 12
    escapes = 0
    for i in range(len(ens)):
        res, o, lifetime = integrate_until_escape(ens.system(i, "f64"), 300, interval=10, max_wall_time=5)
        assert o.kind in OUTCOME_KINDS
        if lifetime is not None:
            escapes += 1
            assert o.kind == "escape" and o.binary_bound and o.outer_energy > 0 and o.v_inf > 0
            assert o.binary_energy < o.energy < 0  # the binary holds all the binding energy
            assert o.distance > 10 * o.semimajor_axis
            assert 0 < lifetime <= 300
    assert escapes >= len(ens) // 2


# --------------------------------------------------------------------------------------------
# the Outcome object and bad input
# --------------------------------------------------------------------------------------------
def test_outcome_object_is_frozen_flat_and_readable():
    o = outcome(hyperbolic("2.2"))
    assert isinstance(o, Outcome)
    with pytest.raises(dataclasses.FrozenInstanceError):
        o.kind = "bound"  # type: ignore[misc]
    d = o.as_dict()
    assert d["kind"] == "escape" and (d["escaper"], d["binary_i"], d["binary_j"]) == (2, 0, 1)
    assert d["a"] == o.semimajor_axis and d["e"] == o.eccentricity and d["v_inf"] == o.v_inf
    assert all(isinstance(v, (int, float, bool, str)) for v in d.values())
    b = outcome(ics.hierarchical(dict(m1=1, m2=1, a=1, e="0.1"), dict(m3="0.5", a=10, e="0.2"))).as_dict()
    assert b.keys() == d.keys() and b["escaper"] == -1 and math.isnan(b["v_inf"])
    text = repr(o)
    assert text.startswith("Outcome(kind='escape'") and "escaper=2" in text and "binary=(0, 1)" in text
    with pytest.raises(ValueError, match="name"):
        o.limbs("nope")


@pytest.mark.parametrize(
    "kwargs, exc, name",
    [
        (dict(distance_factor=-1), ValueError, "distance_factor"),
        (dict(distance_factor=float("nan")), ValueError, "distance_factor"),
        (dict(distance_factor=math.inf), ValueError, "distance_factor"),
        (dict(distance_factor=True), TypeError, "distance_factor"),
        (dict(distance_factor="10"), TypeError, "distance_factor"),
        (dict(radii=[1, 2]), ValueError, "radii"),
        (dict(radii=[1, -1, 1]), ValueError, "radii"),
        (dict(radii="abc"), TypeError, "radii"),
    ],
)
def test_outcome_bad_input(kwargs, exc, name):
    with pytest.raises(exc, match=name):
        outcome(ics.pythagorean("f64"), **kwargs)


def test_bad_system():
    with pytest.raises(TypeError, match="system"):
        outcome("pythagorean")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match="system"):
        integrate_until_escape([1, 2, 3], 10)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    "kwargs, exc, name",
    [
        (dict(t_max=0), ValueError, "t_max"),
        (dict(t_max="abc"), ValueError, "t_max"),
        (dict(t_max=10, interval=-1), ValueError, "interval"),
        (dict(t_max=10, interval=True), TypeError, "interval"),
        (dict(t_max=10, times=[1, 2]), ValueError, "times"),
        (dict(t_max=10, distance_factor=-2), ValueError, "distance_factor"),
        (dict(t_max=10, tol=2.0), ValueError, "tol"),
    ],
)
def test_integrate_until_escape_bad_input(kwargs, exc, name):
    with pytest.raises(exc, match=name):
        integrate_until_escape(ics.pythagorean("f64"), **kwargs)


def test_integrate_until_escape_without_escape():
    s = ics.hierarchical(dict(m1=1, m2=1, a=1, e="0.1"), dict(m3="0.5", a=10, e="0.2"), precision="f64")
    res, o, lifetime = integrate_until_escape(s, "25", interval=10)  # chunks 10, 10, 5
    assert lifetime is None and o.kind == "bound" and res.success
    assert res.t == pytest.approx(25, abs=1e-12)
    assert res.energy_error < 1e-10
