"""The chain-regularized method against exact solutions, conservation laws and the gbs method."""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

import loschmidt
from loschmidt import ics
from kepler import kepler_state


def radial_separation(r0, mass, t, dps=60):
    """Head-on (rectilinear) Kepler orbit from rest at separation r0, bouncing at collision:
    r = r0/2 (1 + cos eta), t = sqrt(r0^3 / (8 M)) (eta + sin eta) (exact solution of the radial
    two-body problem; regularized motion reflects at r = 0, Mikkola & Tanikawa 2013)."""
    with mpmath.workdps(dps):
        r0, mass, t = mpmath.mpf(r0), mpmath.mpf(mass), mpmath.mpf(t)
        k = mpmath.sqrt(r0**3 / (8 * mass))
        eta = mpmath.findroot(lambda e: k * (e + mpmath.sin(e)) - t, t / k)
        r = r0 / 2 * (1 + mpmath.cos(eta))
        rdot = -r0 / 2 * mpmath.sin(eta) / (k * (1 + mpmath.cos(eta)))
        return r, rdot, k


def test_head_on_collision_orbit_bounces_with_energy_conserved() -> None:
    # masses 1 and 2 from rest at separation 1 (total mass 3)
    s = loschmidt.System([1, 2], [[0, 0], [1, 0]], [[0, 0], [0, 0]], precision="dd")
    _, _, k = radial_separation(1, 3, 0)
    with mpmath.workdps(60):
        t_c = mpmath.pi * k  # collision time
        times = [t_c / 2, t_c * 3 / 2, 2 * t_c]
    r = loschmidt.integrate(s, times[-1], method="chain", times=times)
    assert r.success, r.message
    assert r.energy_error < 1e-24
    for i, t in enumerate(times):
        st = r.trajectory[i].to_mpmath()
        with mpmath.workdps(60):
            sep = st["positions"][1][0] - st["positions"][0][0]
            ref, _, _ = radial_separation(1, 3, t)
            assert sep > 0  # it bounced rather than passing through
            assert abs(sep - ref) < 1e-24, (i, float(sep - ref))
    # after a full bounce the pair is back at rest at its start
    assert loschmidt.phase_distance(r.system, s) < 1e-20
    # gbs cannot pass the collision at all
    g = loschmidt.integrate(s, times[-1], method="gbs", max_steps=20000)
    assert not g.success


def test_very_eccentric_binary_over_1000_periods() -> None:
    # e = 0.999 equal-mass binary started at periapsis and stopped at apocentre after 1000.5
    # periods: energy conserved and the orbital phase against Kepler's equation (exact solution).
    # Energy is compared at apocentre, where T - U is well conditioned (at pericentre it is
    # (1 + e)/(1 - e) times worse).
    e = 0.999
    s = ics.binary(0.5, 0.5, 1, e, precision="dd")
    with mpmath.workdps(60):
        t = 2 * mpmath.pi * mpmath.mpf("1000.5")
    r = loschmidt.integrate(s, t, method="chain")
    assert r.success
    assert r.energy_error <= 1e-24
    st = r.system.to_mpmath()
    with mpmath.workdps(60):
        rel = [st["positions"][1][k] - st["positions"][0][k] for k in range(2)]
        x, y, _, _ = kepler_state(e, t)
        assert abs(rel[0] - x) < 1e-19 and abs(rel[1] - y) < 1e-19


def test_chain_and_gbs_agree_on_pythagorean_t10() -> None:
    # Szebehely & Peters 1967 set-up; two independent methods in dd agree to >= 20 digits.
    s = ics.pythagorean(precision="dd")
    a = loschmidt.integrate(s, 10, method="chain", tol=1e-30)
    b = loschmidt.integrate(s, 10, method="gbs", tol=1e-30)
    assert loschmidt.chaos.agreement_digits(a.system, b.system) >= 20


def test_pythagorean_round_trip_cheaper_than_gbs() -> None:
    # Acceptance check of the chain issue: back within 1e-15 with fewer force evaluations than gbs
    # needs for the same delta.
    s = ics.pythagorean(precision="dd")
    c = loschmidt.roundtrip(s, 70, method="chain", tol=1e-27)
    assert c.delta <= 1e-15
    g = loschmidt.roundtrip(s, 70, method="gbs", tol=1e-30)
    assert g.delta <= 1e-15
    ce = c.forward.evaluations + c.backward.evaluations
    ge = g.forward.evaluations + g.backward.evaluations
    assert ce < ge
    assert c.forward.rechains > 0


def test_hierarchical_triple_conserves_energy_and_angular_momentum() -> None:
    s = ics.hierarchical(
        inner=dict(m1=1, m2=1, a=1, e=0.9),
        outer=dict(m3=1, a=10, e=0.2, inclination=0.5),
        precision="dd",
    )
    inner_period = 2 * np.pi / np.sqrt(2.0)
    r = loschmidt.integrate(s, 1000 * inner_period, method="chain")
    assert r.success
    assert r.energy_error < 1e-24
    dl = np.abs(r.system.angular_momentum() - s.angular_momentum()).max()
    assert dl < 1e-24 * np.abs(s.angular_momentum()).max() * 100


def test_rechaining_keeps_energy_continuous() -> None:
    # Four bodies whose nearest neighbours change repeatedly; output every 0.1 time units.
    s = loschmidt.System(
        [1, 1, 1, 1],
        [[0, 0], [1, 0.1], [2.2, -0.1], [0.9, 1.6]],
        [[0.3, 0.2], [-0.2, 0.1], [-0.1, 0.3], [0.05, -0.5]],
        precision="dd",
    )
    r = loschmidt.integrate(s, 8, method="chain", times=[0.1 * k for k in range(1, 81)])
    assert r.success and r.rechains > 0
    e0 = s.energy(limbs=True)
    errs = [abs(float(loschmidt.precision.to_float(loschmidt.precision.sub(r.trajectory[i].energy(limbs=True), e0, "dd"))))
            for i in range(len(r.trajectory))]
    assert max(errs) / abs(float(e0[0])) < 1e-25


def test_radii_end_the_run_with_collision() -> None:
    s = loschmidt.System([1, 1, 1], [[0, 0], [1, 0], [5, 5]], [[0, 0]] * 3, precision="dd", radii=[0.1, 0.1, 0.1])
    r = loschmidt.integrate(s, 10, method="chain")
    assert r.status == "collision" and r.success
    assert r.collision == (0, 1)
    x = r.system.positions
    assert abs(np.linalg.norm(x[1] - x[0]) - 0.2) < 1e-25


def test_unknown_regularization_named() -> None:
    with pytest.raises(ValueError, match="regularization"):
        loschmidt.integrate(ics.pythagorean(), 1, method="chain", regularization="none")


def test_time_transformed_leapfrog_agrees() -> None:
    s = ics.pythagorean(precision="dd")
    a = loschmidt.integrate(s, 5, method="chain", regularization="time_transformed", tol=1e-28)
    b = loschmidt.integrate(s, 5, method="chain", tol=1e-28)
    assert a.success and loschmidt.chaos.agreement_digits(a.system, b.system) >= 18


@pytest.mark.parametrize("prec", ["f64", "dd"])
def test_span_out_of_reach_ends_with_step_underflow(prec: str) -> None:
    # A head-on pair released from rest 1e-15 apart bounces on its regularized collision orbit with
    # a period of about 2 pi sqrt(r^3 / (2 G m)) ~ 1e-22 (Kepler's third law for the radial orbit of
    # semimajor axis r/2): reaching t = 0.5 would take some 1e21 bounces. The run must say so at
    # once (step_underflow after the floor's 1000 steps) instead of spinning until a budget. Runs
    # long in orbits that do finish keep going (test_very_eccentric_binary_over_1000_periods).
    s = loschmidt.System([1, 1, 1], [[0, 0], [1e-15, 0], [1, 0]], [[0, 0]] * 3, prec)
    r = loschmidt.integrate(s, 0.5, method="chain")
    assert r.status == "step_underflow"
    assert r.steps == 1000
    assert 0 < r.t < 1e-18

