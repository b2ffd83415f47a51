"""Binary-single scattering: initial conditions from infinity, encounter outcomes, cross sections.

Checks against outside sources: two-body Kepler/hyperbola relations recomputed in mpmath, energy
conservation (no ionization below the critical speed), Heggie (1975, MNRAS 173, 729) on average
hardening of hard binaries and softening of soft ones, the symmetry of equal-mass resonances, and
time reversal.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

import loschmidt
from loschmidt import ics, orbits, scattering
from loschmidt.precision import to_mpmath


# ---------------------------------------------------------------------------------------------
# initial conditions
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("prec", ["f64", "dd", "qd"])
def test_binary_single_is_the_exact_hyperbola(prec: str) -> None:
    # two-body relations (Kepler): the binary's elements, the outer orbit's semimajor axis -M / v^2
    # and specific angular momentum b v, recomputed from the limbs in mpmath
    m1, m2, m3, a, e, b = 1, "0.5", "0.75", 2, "0.3", "3.5"
    vc = scattering.critical_speed(m1, m2, m3, a)
    s = scattering.binary_single(m1, m2, a, e, m3, v_over_vc="0.7", impact_parameter=b, inclination=1.1,
                                 longitude_of_node=2.0, argument_of_periapsis=0.4, mean_anomaly=5.0, precision=prec)
    eps = loschmidt.precision.epsilon(prec)
    inner = orbits.pair_elements(s, 0, 1)
    assert inner.semimajor_axis == pytest.approx(2, rel=64 * eps, abs=0)
    assert inner.eccentricity == pytest.approx(0.3, rel=64 * eps, abs=0)
    with mpmath.workprec(300):
        M = mpmath.mpf(1) + mpmath.mpf("0.5") + mpmath.mpf("0.75")
        v = mpmath.mpf("0.7") * mpmath.sqrt(mpmath.mpf("0.5") * M / (mpmath.mpf("0.75") * mpmath.mpf("1.5") * 2))
        assert float(v) == pytest.approx(0.7 * vc, rel=1e-15)
        outer = orbits.pair_elements(s, (0, 1), 2)
        lim = outer.limbs("semimajor_axis")
        assert abs(to_mpmath(lim) / (-M / v**2) - 1) < 64 * eps
        h = outer.angular_momentum / outer.reduced_mass
        assert h == pytest.approx(float(mpmath.mpf("3.5") * v), rel=64 * max(eps, 1e-16))
        # the centre of mass at rest at the origin
        d = s.to_mpmath()
        ms = [mpmath.mpf(x) for x in d["masses"]]
        for c in range(3):
            assert abs(mpmath.fsum(ms[k] * d["positions"][k][c] for k in range(3))) < 1e3 * eps
            assert abs(mpmath.fsum(ms[k] * d["velocities"][k][c] for k in range(3))) < 10 * eps
    # the start: incoming, at the tidal distance (the tidal ratio 2 m3 r^3 / (m12 R^3) = 1e-5 there)
    assert outer.true_anomaly < 0
    R = float(np.linalg.norm(s.positions[2] - (s.positions[0] + 0.5 * s.positions[1]) / 1.5))
    assert 2 * 0.75 * (2 * 1.3) ** 3 / (1.5 * R**3) == pytest.approx(1e-5, rel=1e-12)


def test_wide_pass_starts_before_its_pericentre() -> None:
    # a pericentre beyond the tidal distance: the start is at twice the pericentre, still incoming
    s = scattering.binary_single(1, 1, 1, 0, 1, v_inf=1, impact_parameter=500, precision="f64")
    outer = orbits.pair_elements(s, (0, 1), 2)
    rp = outer.semimajor_axis * (1 - outer.eccentricity)
    assert outer.true_anomaly < 0
    assert np.linalg.norm(s.positions[2] - s.positions[:2].mean(axis=0)) == pytest.approx(2 * rp, rel=1e-12)


def test_head_on_is_radial() -> None:
    s = scattering.binary_single(1, 1, 1, 0, 1, v_inf=0.5, precision="dd")
    x, v = s.positions[2], s.velocities[2]
    assert abs(np.cross(x, v)).max() == 0.0 and x[0] < 0 < v[0]


@pytest.mark.parametrize(
    "kwargs, name",
    [
        (dict(v_inf=0), "v_inf"),
        (dict(v_inf=-1), "v_inf"),
        (dict(v_over_vc=0), "v_over_vc"),
        (dict(v_inf=1, impact_parameter=-0.1), "impact_parameter"),
        (dict(v_inf=1, tidal_tolerance=0), "tidal_tolerance"),
        (dict(v_inf=1, tidal_tolerance=1), "tidal_tolerance"),
        (dict(v_inf=1, v_over_vc=1), "v_inf and v_over_vc"),
        (dict(), "v_inf and v_over_vc"),
    ],
)
def test_bad_input_names_the_argument(kwargs: dict, name: str) -> None:
    with pytest.raises(ValueError, match=name):
        scattering.binary_single(1, 1, 1, 0, 1, **kwargs)


@pytest.mark.parametrize("e", [1, -0.1, 1.5])
def test_bad_eccentricity(e: float) -> None:
    with pytest.raises(ValueError, match="eccentricity"):
        scattering.binary_single(1, 1, 1, e, 1, v_inf=1)
    with pytest.raises(ValueError, match="eccentricity"):
        scattering.binary_single_ensemble(2, 0, eccentricity=e, v_inf=1)


def test_ensemble_bad_input() -> None:
    with pytest.raises(ValueError, match="v_inf"):
        scattering.binary_single_ensemble(2, 0, v_inf=[1, 0])
    with pytest.raises(ValueError, match="tidal_tolerance"):
        scattering.binary_single_ensemble(2, 0, v_inf=1, tidal_tolerance=2)
    with pytest.raises(ValueError, match="pericentre_max"):
        scattering.binary_single_ensemble(2, 0, v_inf=1, pericentre_max=0)


def test_ensemble_draws() -> None:
    from scipy import stats

    ens = ics.binary_single_ensemble(150, 7, v_over_vc=[0.3, 3])
    again = ics.binary_single_ensemble(150, 7, v_over_vc=[0.3, 3])
    assert np.array_equal(ens.positions, again.positions) and np.array_equal(ens.velocities, again.velocities)
    p = ens.params
    for s in (0, 1):
        sel = p["speed_index"] == s
        bmax = p["b_max"][sel][0]
        # gravitational focusing: b_max^2 = r_p^2 (1 + 2 M / (r_p v^2)), r_p = 4 a by default
        v = p["v_inf"][sel][0]
        assert bmax**2 == pytest.approx(16 * (1 + 2 * 3 / (4 * v * v)), rel=1e-14)
        # uniform in area, isotropic, uniform phase (Kolmogorov-Smirnov, scipy)
        assert stats.kstest((p["b"][sel] / bmax) ** 2, "uniform").pvalue > 1e-3
        assert stats.kstest((1 - np.cos(p["inclination"][sel])) / 2, "uniform").pvalue > 1e-3
        assert stats.kstest(p["mean_anomaly"][sel] / (2 * np.pi), "uniform").pvalue > 1e-3
    # the largest impact parameter reaches exactly r_p,max (two-body hyperbola, pair_elements)
    s = scattering.binary_single(1, 1, 1, 0, 1, v_inf=p["v_inf"][0], impact_parameter=p["b_max"][0])
    out = orbits.pair_elements(s, (0, 1), 2)
    assert out.semimajor_axis * (1 - out.eccentricity) == pytest.approx(4.0, rel=1e-13)
    # a member is the same problem in every precision: the doubles are the initial conditions
    assert np.array_equal(ens.system(5, "dd").positions, ens.positions[5])
