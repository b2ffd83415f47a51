"""Post-Newtonian terms of the chain method against published general-relativity results.

Sources beside each check: the 1PN periastron advance (Einstein 1915; per orbit 6 pi G M /
(c^2 a (1 - e^2))), the quadrupole energy loss and merger time (Peters & Mathews 1963, Phys. Rev.
131, 435; Peters 1964, Phys. Rev. 136, B1224), and conservation laws: the 1PN N-body energy of the
Einstein-Infeld-Hoffmann Lagrangian and the two-body 2PN energy in harmonic coordinates.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import loschmidt
from loschmidt import ics


def relative(traj, i=0, j=1):
    x = traj.positions[:, j] - traj.positions[:, i]
    v = traj.velocities[:, j] - traj.velocities[:, i]
    return x, v


def test_periastron_advance_1pn() -> None:
    # a / r_s = 1000 (r_s = 2 G M / c^2), e = 0.5, 12 orbits, 240 outputs per orbit. The periapsis
    # direction is the Runge-Lenz vector A = v x L - M r/|r| at each periapsis passage (r.v = 0
    # going from - to +, interpolated between outputs). GR per orbit: 6 pi G M / (c^2 a (1 - e^2))
    # (Einstein 1915; e.g. Weinberg 1972, Gravitation and Cosmology, eq. 8.6.11 [memory]).
    m1, m2, a, e = 0.6, 0.4, 1.0, 0.5
    M = m1 + m2
    c = math.sqrt(2 * M * 1000 / a)
    s = ics.binary(m1, m2, a, e, precision="f64")
    period = 2 * math.pi * math.sqrt(a**3 / M)
    orbits, per = 12, 240
    times = [period * k / per for k in range(1, orbits * per + 1)]
    r = loschmidt.integrate(s, times[-1], method="chain", tol=1e-13, times=times, pn=(1,), c=c)
    assert r.status == "success", r.message
    x, v = relative(r.trajectory)
    rv = np.einsum("ij,ij->i", x, v)
    L = np.cross(x, v)
    A = np.cross(v, L) - M * x / np.linalg.norm(x, axis=1)[:, None]
    angles = []
    for k in range(len(rv) - 1):
        if rv[k] < 0 <= rv[k + 1]:
            f = -rv[k] / (rv[k + 1] - rv[k])
            Ak = (1 - f) * A[k] + f * A[k + 1]
            angles.append(math.atan2(Ak[1], Ak[0]))
    angles = np.unwrap(angles)
    assert len(angles) >= orbits - 1
    advance = np.polyfit(np.arange(len(angles)), angles, 1)[0]
    expected = 6 * math.pi * M / (c**2 * a * (1 - e**2))
    ratio = advance / expected
    # Measured 0.9962 (0.9996 at a / r_s = 1e4, independent of the sampling): an O(r_s / a)
    # difference between the Newtonian elements of the start and the 1PN orbit's.
    assert abs(ratio - 1) < 0.02, ratio


def test_circular_inspiral_time_matches_peters() -> None:
    # 2.5PN only; equal masses, a0 = 1, c = 9.57: T_Peters = (5/256) c^5 a^4 / (m1 m2 M) ~ 6.3e3
    # time units, about 1.6e3 orbits. The run stops at 8 summed Schwarzschild radii (the default
    # merger_factor), so the reference is T(a0) - T(r_merge) (Peters 1964, Phys. Rev. 136, B1224,
    # circular orbits: a(t)^4 = a0^4 - (256/5) m1 m2 M t / c^5).
    m1 = m2 = 0.5
    M, a0, c = m1 + m2, 1.0, 9.57
    s = ics.binary(m1, m2, a0, 0, precision="f64")
    r_merge = 8 * 2 * M / c**2
    T = 5 / 256 * c**5 * (a0**4 - r_merge**4) / (m1 * m2 * M)
    r = loschmidt.integrate(s, 2 * T, method="chain", tol=1e-12, pn=(2.5,), c=c)
    assert r.status == "merger" and r.success, r.message
    assert r.collision == (0, 1)
    sep = np.linalg.norm(r.system.positions[1] - r.system.positions[0])
    assert abs(sep / r_merge - 1) < 1e-9
    # Measured ratio 1.0000004 (a few per cent asked).
    assert abs(r.t / T - 1) < 1e-3, r.t / T
    # The energy bookkeeping (Newtonian energy minus the work of the PN forces) holds.
    assert r.energy_error < 1e-7


@pytest.mark.parametrize("e", [0.0, 0.5])
def test_orbit_averaged_energy_loss_matches_quadrupole_formula(e: float) -> None:
    # dE/dt = -(32/5) m1^2 m2^2 M / (c^5 a^5) f(e), f(e) = (1 + 73/24 e^2 + 37/96 e^4) / (1 - e^2)^(7/2)
    # (Peters & Mathews 1963, Phys. Rev. 131, 435), averaged over 10 whole orbits with 2.5PN only
    # (harmonic-gauge radiation reaction; its non-secular part is periodic and averages out).
    # Started and ended at apocentre: the loss is concentrated at pericentre, so ending there a
    # little off the starting phase (the period shrinks) would bias the average (by 2e-3 at e = 0.5).
    m1, m2, a, c = 0.7, 0.3, 1.0, 20.0
    M = m1 + m2
    s = ics.binary(m1, m2, a, e, true_anomaly=math.pi, precision="f64")
    t = 10 * 2 * math.pi * math.sqrt(a**3 / M)
    r = loschmidt.integrate(s, t, method="chain", tol=1e-13, pn=(2.5,), c=c)
    assert r.status == "success", r.message
    rate = (r.system.energy() - s.energy()) / t
    f = (1 + 73 / 24 * e**2 + 37 / 96 * e**4) / (1 - e**2) ** 3.5
    quadrupole = -32 / 5 * m1**2 * m2**2 * M / (c**5 * a**5) * f
    # Measured ratio 1.00013 (e = 0) and 1.00015 (e = 0.5): the orbit shrinks over the window.
    assert abs(rate / quadrupole - 1) < 2e-3, rate / quadrupole


def eih_energy(m, x, v, c):
    """1PN N-body energy from the Einstein-Infeld-Hoffmann Lagrangian (Landau & Lifshitz, The
    Classical Theory of Fields, section 106 [memory]; its two-body form is the Damour-Deruelle 1PN
    energy): sum m v^2/2 - sum_{a<b} m_a m_b / r_ab + c^-2 [3/8 sum m v^4 + sum_{a<b} m_a m_b / (2 r_ab)
    (3 (v_a^2 + v_b^2) - 7 v_a.v_b - (n.v_a)(n.v_b)) + 1/2 sum_a sum_{b != a} sum_{c != a} m_a m_b m_c
    / (r_ab r_ac)]."""
    n = len(m)
    E0 = 0.5 * np.sum(m * np.sum(v * v, axis=1))
    E1 = 3 / 8 * np.sum(m * np.sum(v * v, axis=1) ** 2)
    r = np.linalg.norm(x[:, None, :] - x[None, :, :], axis=2)
    for a in range(n):
        for b in range(a + 1, n):
            nn = (x[a] - x[b]) / r[a, b]
            E0 -= m[a] * m[b] / r[a, b]
            E1 += m[a] * m[b] / (2 * r[a, b]) * (3 * (v[a] @ v[a] + v[b] @ v[b]) - 7 * v[a] @ v[b] - (nn @ v[a]) * (nn @ v[b]))
        for b in range(n):
            for cc in range(n):
                if b != a and cc != a:
                    E1 += 0.5 * m[a] * m[b] * m[cc] / (r[a, b] * r[a, cc])
    return E0 + E1 / c**2


def test_eih_three_body_energy_conserved_to_second_order() -> None:
    # With 1PN only, the EIH energy is conserved up to O(c^-4): doubling c cuts its drift 16-fold.
    # A wrong three-body coupling would leave an O(c^-2) drift (4-fold). The centre of mass moves
    # (EIH changes the Newtonian momentum; the chain integrates it).
    m = np.array([1.0, 0.7, 0.4])
    x = [[0, 0, 0], [1, 0, 0], [0, 4, 0.3]]
    v = [[0.1, -0.35, 0], [0.1, 0.65, 0], [-0.4, 0.05, 0.1]]
    s = loschmidt.System(m, x, v, precision="f64")
    times = np.linspace(0.1, 6, 60)
    drift = {}
    for c in (50.0, 100.0):
        r = loschmidt.integrate(s, times[-1], method="chain", tol=1e-14, times=times, pn=(1,), c=c)
        assert r.status == "success", r.message
        E = [eih_energy(m, r.trajectory.positions[k], r.trajectory.velocities[k], c) for k in range(len(times))]
        drift[c] = np.ptp(np.concatenate([[eih_energy(m, s.positions, s.velocities, c)], E]))
    ratio = drift[50.0] / drift[100.0]
    assert 12 < ratio < 21, (drift, ratio)  # measured 15.8


def energy_2pn(m1, m2, x, v, c):
    """Two-body energy in harmonic coordinates to 2PN, per Blanchet 2014 (Living Rev. Relativ. 17, 2,
    section 7 [memory]; the G^2 M^2 / r^2 term has 1/8, as the harmonic Schwarzschild geodesic
    gives for nu -> 0): E / mu = v^2/2 - M/r + c^-2 [...] + c^-4 [...]."""
    M = m1 + m2
    nu = m1 * m2 / M**2
    r = np.linalg.norm(x)
    rd = x @ v / r
    v2 = v @ v
    g = M / r
    e1 = 3 / 8 * (1 - 3 * nu) * v2**2 + g / 2 * ((3 + nu) * v2 + nu * rd**2) + g * g / 2
    e2 = (5 / 16 * (1 - 7 * nu + 13 * nu**2) * v2**3
          + g / 8 * ((21 - 23 * nu - 27 * nu**2) * v2**2 + 2 * nu * (1 - 15 * nu) * v2 * rd**2 - 3 * nu * (1 - 3 * nu) * rd**4)
          + g * g / 8 * ((14 - 55 * nu + 4 * nu**2) * v2 + (4 + 69 * nu + 12 * nu**2) * rd**2)
          - g**3 / 4 * (2 + 15 * nu))
    return M * nu * (v2 / 2 - g + e1 / c**2 + e2 / c**4)


def centre_of_mass_frame_1pn(s, c):
    """A binary's velocities shifted by the 1PN centre-of-mass offset delta = nu Delta d(P x)/dt,
    P = (v^2 - M/r) / (2 c^2), Delta = (m1 - m2)/M (the 1PN mass dipole at rest; Blanchet 2014,
    section 7 [memory]), at pericentre or apocentre, where dP/dt = 0: the frame in which the
    two-body 2PN relative motion holds."""
    m1, m2 = s.masses
    M = m1 + m2
    x = s.positions[0] - s.positions[1]
    v = s.velocities[0] - s.velocities[1]
    P = (v @ v - M / np.linalg.norm(x)) / (2 * c**2)
    delta = m1 * m2 / M**2 * (m1 - m2) / M * P * v
    return loschmidt.System(s.masses, s.positions, s.velocities + delta, precision=s.precision)


def test_2pn_binary_energy_conserved_to_third_order() -> None:
    # 1PN (EIH) + 2PN: the 2PN energy is conserved up to O(c^-6), 64-fold per doubling of c (a
    # wrong 2PN coefficient leaves O(c^-4), 16-fold; leaving out the pair term's EIH correction,
    # 55-fold). e = 0.5, mass ratio 3, two orbits, in the pair's 1PN centre-of-mass frame.
    m1, m2 = 0.75, 0.25
    times = np.linspace(0.1, 4 * math.pi, 80)
    drift = {}
    for c in (20.0, 40.0):
        s = centre_of_mass_frame_1pn(ics.binary(m1, m2, 1, 0.5, precision="dd"), c)
        r = loschmidt.integrate(s, times[-1], method="chain", tol=1e-22, times=times, pn=(1, 2), c=c)
        assert r.status == "success", r.message
        x, v = relative(r.trajectory)
        E = [energy_2pn(m1, m2, x[k], v[k], c) for k in range(len(times))]
        drift[c] = np.ptp(E)
    ratio = drift[20.0] / drift[40.0]
    assert 45 < ratio < 90, (drift, ratio)  # measured 64.5


def test_radiation_reaction_makes_round_trip_irreversible() -> None:
    # Conservative PN terms (1PN, 2PN) are even in the velocities: the round trip comes back as a
    # Newtonian one does (the substep stays time-symmetric). Radiation reaction (2.5PN) is odd: on
    # the way back the binary keeps losing energy, so the round trip misses its start by far more.
    s = ics.hierarchical(
        inner=dict(m1=0.5, m2=0.4, a=1, e=0.5), outer=dict(m3=0.3, a=6, e=0.1, inclination=0.4), precision="dd"
    )
    t, c = 30, 15.0
    newton = loschmidt.roundtrip(s, t, method="chain", tol=1e-26)
    conservative = loschmidt.roundtrip(s, t, method="chain", tol=1e-26, pn=(1, 2), c=c)
    radiative = loschmidt.roundtrip(s, t, method="chain", tol=1e-26, pn=(1, 2, 2.5), c=c)
    # Measured (dd): Newtonian 4.5e-24, 1PN + 2PN 9.0e-24, with 2.5PN 3.3e-2.
    assert newton.delta < 1e-18
    assert conservative.delta < 100 * max(newton.delta, 1e-22), (newton.delta, conservative.delta)
    assert radiative.delta > 1e8 * conservative.delta, (conservative.delta, radiative.delta)
    assert radiative.delta > 1e-6


def test_merger_in_a_triple_reports_the_pair() -> None:
    # A tight binary (bodies 1 and 2) with a distant third body: it spirals in and merges.
    # Peters' time for a = 0.2, e = 0.3, c = 20 is about 250 time units.
    s = ics.hierarchical(
        inner=dict(m1=0.5, m2=0.5, a=0.2, e=0.3), outer=dict(m3=0.2, a=5, e=0), precision="f64"
    )
    s = loschmidt.System(s.masses[[2, 0, 1]], s.positions[[2, 0, 1]], s.velocities[[2, 0, 1]], precision="f64")
    c = 20.0
    r = loschmidt.integrate(s, 1e4, method="chain", pn=(1, 2, 2.5), c=c)
    assert r.status == "merger", r.message
    assert r.collision == (1, 2)
    assert 100 < r.t < 400
    sep = np.linalg.norm(r.system.positions[2] - r.system.positions[1])
    assert abs(sep / (8 * 2 * 1.0 / c**2) - 1) < 1e-9


def test_without_pn_results_unchanged() -> None:
    # No pn, pn=None and pn=() run the Newtonian engine: the same bits. (Against the code before
    # the PN terms existed this was checked bit for bit on f64/f64c/dd/qd runs, both
    # regularizations, radii, output times and re-chaining.)
    s = ics.pythagorean(precision="dd")
    base = loschmidt.integrate(s, 2, method="chain", times=[0.5, 1])
    for kw in (dict(pn=None), dict(pn=())):
        r = loschmidt.integrate(s, 2, method="chain", times=[0.5, 1], **kw)
        assert np.array_equal(r.system.limbs("positions"), base.system.limbs("positions"))
        assert np.array_equal(r.system.limbs("velocities"), base.system.limbs("velocities"))
        assert np.array_equal(r.trajectory.limbs("positions"), base.trajectory.limbs("positions"))
        assert (r.steps, r.evaluations) == (base.steps, base.evaluations)
    # PN switched on does change the motion, by an amount of the PN order.
    p = loschmidt.integrate(s, 2, method="chain", pn=(1,), c="1e4")
    d = loschmidt.phase_distance(p.system, base.system)
    assert 1e-12 < d < 1e-3


def test_c_as_decimal_string_in_extended_precision() -> None:
    s = ics.binary(0.5, 0.5, 1, 0.3, precision="dd")
    a = loschmidt.integrate(s, 5, method="chain", pn=(1, 2.5), c="30.000000000000000000000000001")
    b = loschmidt.integrate(s, 5, method="chain", pn=(1, 2.5), c=30.0)
    assert a.success and b.success
    d = loschmidt.phase_distance(a.system, b.system)
    assert 0 < d < 1e-24  # the 1e-27 relative change of c is seen, and only that


@pytest.mark.parametrize(
    "kwargs, name, exc",
    [
        (dict(pn=(3,), c=10.0), "pn", ValueError),
        (dict(pn=(1, 1.5), c=10.0), "pn", ValueError),
        (dict(pn=("1",), c=10.0), "pn", TypeError),
        (dict(pn=(1,), c=0.0), "c", ValueError),
        (dict(pn=(1,), c=-3.0), "c", ValueError),
        (dict(pn=(1,), c=math.inf), "c", ValueError),
        (dict(pn=(1,)), "c", ValueError),
        (dict(c=10.0), "c", ValueError),
        (dict(pn=(1,), c=10.0, merger_factor=-1.0), "merger_factor", ValueError),
        (dict(pn=(1,), c=10.0, method="gbs"), "pn", ValueError),
    ],
)
def test_bad_pn_arguments_named(kwargs, name, exc) -> None:
    kw = dict(method="chain")
    kw.update(kwargs)
    with pytest.raises(exc, match=name):
        loschmidt.integrate(ics.binary(0.5, 0.5, 1, 0, precision="f64"), 1, **kw)


def test_merge_replaces_the_pair_and_goes_on() -> None:
    # The merging triple above, with merge=True: the binary becomes one body of mass 1 and the run
    # goes on to t with two bodies. Conservation of momentum and of the centre-of-mass motion at
    # the merger is exact up to rounding (the merged body carries the pair's momentum).
    s = ics.hierarchical(
        inner=dict(m1=0.5, m2=0.5, a=0.2, e=0.3), outer=dict(m3=0.2, a=5, e=0), precision="f64"
    )
    s = loschmidt.System(s.masses[[2, 0, 1]], s.positions[[2, 0, 1]], s.velocities[[2, 0, 1]], precision="f64")
    c = 20.0
    stop = loschmidt.integrate(s, 1e3, method="chain", pn=(1, 2, 2.5), c=c)
    assert stop.status == "merger"
    r = loschmidt.integrate(s, 1e3, method="chain", pn=(1, 2, 2.5), c=c, merge=True)
    assert r.status == "success" and r.system.n == 2
    assert len(r.mergers) == 1
    t_merge, i, j = r.mergers[0]
    assert (i, j) == (1, 2) and t_merge == stop.t
    assert r.t == 1e3 and r.collision is None
    assert list(r.system.masses) == [0.2, 1.0]
    m = loschmidt.merged(stop.system, 1, 2)
    p_before = stop.system.momentum()
    p_after = m.momentum()
    assert np.allclose(p_before, p_after, rtol=0, atol=1e-16)
    com = lambda q: np.sum(q.masses[:, None] * q.positions, axis=0) / np.sum(q.masses)  # noqa: E731
    assert np.allclose(com(stop.system), com(m), rtol=0, atol=1e-15)
    # The result saves and loads with its mergers.
    back = loschmidt.Result.from_dict(r.to_dict())
    assert back.mergers == r.mergers


def test_merge_arguments_checked() -> None:
    s = ics.binary(0.5, 0.5, 1, 0.3, precision="f64")
    with pytest.raises(ValueError, match="merge"):
        loschmidt.integrate(s, 1, method="chain", merge=True)
    with pytest.raises(TypeError, match="merge"):
        loschmidt.integrate(s, 1, method="chain", pn=(1,), c=10.0, merge="yes")
    with pytest.raises(ValueError, match="times"):
        loschmidt.integrate(s, 1, method="chain", pn=(1,), c=10.0, merge=True, times=[0.5])
    with pytest.raises(ValueError, match="i, j"):
        loschmidt.merged(s, 0, 0)
    with pytest.raises(ValueError, match="j"):
        loschmidt.merged(s, 0, 5)
