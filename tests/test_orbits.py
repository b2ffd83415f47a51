"""Two-body orbital elements: round trips, Kepler's equation and Kepler's third law against mpmath."""

from __future__ import annotations

from fractions import Fraction

import mpmath
import numpy as np
import pytest

from loschmidt import orbits
from loschmidt.orbits import eccentric_anomaly, orbital_elements, pair_elements, relative_state

# significand bits per precision (design METHODS.md section 1)
BITS = {"f64": 53, "f64c": 53, "dd": 106, "qd": 212}
PRECISIONS = ("f64", "dd", "qd")
REF_BITS = 400  # reference computations


def mp_of_limbs(limbs) -> mpmath.mpf:
    """Exact value of a float64 limb vector (k,), independent of loschmidt.precision."""
    q = sum((Fraction(float(x)) for x in np.asarray(limbs, dtype=np.float64).ravel()), Fraction(0))
    return mpmath.mp.make_mpf(mpmath.libmp.from_rational(q.numerator, q.denominator, REF_BITS, "n"))


def state_mp(P, V):
    return [mp_of_limbs(P[c]) for c in range(3)], [mp_of_limbs(V[c]) for c in range(3)]


def angle_diff(a, b) -> mpmath.mpf:
    """|a - b| modulo 2 pi."""
    d = (mpmath.mpf(a) - mpmath.mpf(b)) % (2 * mpmath.pi)
    return min(d, 2 * mpmath.pi - d)


def tol(precision: str, factor: float = 2.0**14) -> mpmath.mpf:
    return mpmath.mpf(factor) * mpmath.mpf(2) ** -BITS[precision]


GENERIC = [
    # m1, m2, a, e, inclination, node, periapsis, mean anomaly
    ("1", "1", "1", "0.1", "0.3", "1.1", "2.2", "0.7"),
    ("1", "0.001", "2.5", "0.5", "2.0", "4.0", "0.5", "3.5"),
    ("3", "0.25", "0.01", "0.9", "1.2", "0.1", "5.9", "6.1"),
    ("0.5", "0.5", "7", "0.99", "0.05", "3.0", "3.0", "0.01"),
]


# --------------------------------------------------------------------------------------------
# elements -> state -> elements
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("precision", PRECISIONS)
@pytest.mark.parametrize("case", GENERIC)
def test_elements_round_trip(precision, case):
    m1, m2, a, e, inc, node, peri, M = case
    P, V = relative_state(m1, m2, a, e, inc, node, peri, mean_anomaly=M, precision=precision)
    assert P.shape == V.shape == (3, {"f64": 1, "dd": 2, "qd": 4}[precision])
    with mpmath.workprec(REF_BITS):
        r, v = state_mp(P, V)
        el = orbital_elements(m1, m2, r, v, precision=precision).to_mpmath()
        # conditioning of the elements in e grows like 1/(1 - e) for a near-parabolic orbit
        t = tol(precision) / (1 - mpmath.mpf(e))
        assert abs(el["semimajor_axis"] / mpmath.mpf(a) - 1) < t
        assert abs(el["eccentricity"] - mpmath.mpf(e)) < t
        assert abs(el["inclination"] - mpmath.mpf(inc)) < t
        assert angle_diff(el["longitude_of_node"], node) < t
        assert angle_diff(el["argument_of_periapsis"], peri) < t
        assert angle_diff(el["mean_anomaly"], M) < t


@pytest.mark.parametrize("precision", PRECISIONS)
def test_state_round_trip(precision):
    m1, m2 = "1.5", "0.75"
    r0 = ["0.3", "-1.2", "0.4"]
    v0 = ["0.9", "0.1", "-0.35"]
    el = orbital_elements(m1, m2, r0, v0, precision=precision)
    d = el.to_mpmath()
    P, V = relative_state(
        m1, m2, d["semimajor_axis"], d["eccentricity"], d["inclination"], d["longitude_of_node"],
        d["argument_of_periapsis"], true_anomaly=d["true_anomaly"], precision=precision,
    )
    with mpmath.workprec(REF_BITS):
        r, v = state_mp(P, V)
        for k in range(3):
            assert abs(r[k] - mpmath.mpf(r0[k])) < tol(precision)
            assert abs(v[k] - mpmath.mpf(v0[k])) < tol(precision)


def test_float_attributes_and_limbs_agree():
    el = orbital_elements(1, 1, [1, 0.1, 0.2], [0.1, 0.8, 0.1], precision="qd")
    for name in el.FIELDS:
        limbs = el.limbs(name)
        assert limbs.shape == (4,)
        assert limbs[0] == getattr(el, name)
    assert el.bound and el.precision == "qd"
    assert set(el.as_dict()) == set(el.FIELDS)


# --------------------------------------------------------------------------------------------
# degenerate orientations: conventions, and the state must still come back
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("precision", ("f64", "dd"))
@pytest.mark.parametrize(
    "e, inc",
    [("0", "0.7"), ("0.3", "0"), ("0", "0"), ("0.3", mpmath.pi), ("0", mpmath.pi)],
)
def test_degenerate_orbits(precision, e, inc):
    with mpmath.workprec(REF_BITS):
        inc = mpmath.mpf(inc)
    P, V = relative_state(1, "0.5", 2, e, inc, "1.0", "2.0", true_anomaly="0.5", precision=precision)
    with mpmath.workprec(REF_BITS):
        r, v = state_mp(P, V)
    el = orbital_elements(1, "0.5", r, v, precision=precision)
    d = el.to_mpmath()
    if mpmath.mpf(e) == 0:
        assert d["argument_of_periapsis"] == 0  # convention: anomaly measured from the node
    if mpmath.sin(inc) == 0 or abs(mpmath.sin(inc)) < 1e-30:
        assert d["longitude_of_node"] == 0  # convention: angles measured from the x axis
    P2, V2 = relative_state(
        1, "0.5", d["semimajor_axis"], max(d["eccentricity"], 0), d["inclination"], d["longitude_of_node"],
        d["argument_of_periapsis"], true_anomaly=d["true_anomaly"], precision=precision,
    )
    with mpmath.workprec(REF_BITS):
        r2, v2 = state_mp(P2, V2)
        for k in range(3):
            assert abs(r2[k] - r[k]) < tol(precision)
            assert abs(v2[k] - v[k]) < tol(precision)


def test_radial_orbit_has_no_angles():
    el = orbital_elements(1, 1, [1, 0, 0], [0.5, 0, 0], precision="dd")
    assert el.eccentricity == 1.0 and el.angular_momentum == 0.0
    assert np.isnan(el.inclination) and np.isnan(el.mean_anomaly)
    # energy = mu (v^2/2 - M/r) = 0.5 (0.125 - 2)
    assert el.energy == pytest.approx(0.5 * (0.125 - 2.0), rel=1e-15)


# --------------------------------------------------------------------------------------------
# Kepler's equation against mpmath.findroot
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("precision", PRECISIONS)
@pytest.mark.parametrize("M, e", [("0.5", "0.1"), ("3", "0.7"), ("0.001", "0.999"), ("6.2", "0.95"), ("100", "0.3")])
def test_kepler_equation_elliptic(precision, M, e):
    E = mp_of_limbs(eccentric_anomaly(M, e, precision=precision))
    with mpmath.workprec(REF_BITS):
        Mm, em = mpmath.mpf(M), mpmath.mpf(e)
        Mred = Mm % (2 * mpmath.pi)
        ref = mpmath.findroot(lambda x: x - em * mpmath.sin(x) - Mred, mpmath.pi)
        assert abs(E - ref) < tol(precision, 16)


@pytest.mark.parametrize("precision", PRECISIONS)
@pytest.mark.parametrize("M, e", [("0.5", "1.5"), ("-20", "3"), ("1e-6", "1.0001"), ("1000", "1.2")])
def test_kepler_equation_hyperbolic(precision, M, e):
    H = mp_of_limbs(eccentric_anomaly(M, e, precision=precision))
    with mpmath.workprec(REF_BITS):
        Mm, em = mpmath.mpf(M), mpmath.mpf(e)
        lo, hi = sorted([mpmath.asinh(Mm / em), mpmath.asinh(Mm / (em - 1))])
        ref = mpmath.findroot(lambda x: em * mpmath.sinh(x) - x - Mm, (lo, hi), solver="illinois")
        assert abs(em * mpmath.sinh(ref) - ref - Mm) < mpmath.mpf(10) ** -100
        assert abs(H - ref) < tol(precision, 16) * max(1, abs(ref))


# --------------------------------------------------------------------------------------------
# Kepler's third law
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("precision", PRECISIONS)
def test_third_law_period(precision):
    m1, m2, a = "2", "0.5", "3.7"
    P, V = relative_state(m1, m2, a, "0.6", "0.2", "0.3", "0.4", mean_anomaly="1", precision=precision)
    el = orbital_elements(m1, m2, *state_mp(P, V), precision=precision)
    with mpmath.workprec(REF_BITS):
        ref = 2 * mpmath.pi * mpmath.sqrt(mpmath.mpf(a) ** 3 / (mpmath.mpf(m1) + mpmath.mpf(m2)))
        assert abs(el.to_mpmath()["period"] / ref - 1) < tol(precision)


def test_third_law_mean_motion_matches_velocity():
    """dr/dt = n dr/dM with n^2 a^3 = G M: the velocity assigned at mean anomaly M must equal the
    derivative of the position along the mean anomaly times the mean motion (qd precision)."""
    m1, m2, a, e = "1", "0.3", "1.8", "0.7"
    args = (m1, m2, a, e, "0.9", "2.1", "0.4")
    with mpmath.workprec(REF_BITS):
        h = mpmath.mpf("1e-20")
        M0 = mpmath.mpf("2.3")
        P, V = relative_state(*args, mean_anomaly=M0, precision="qd")
        Pp, _ = relative_state(*args, mean_anomaly=M0 + h, precision="qd")
        Pm, _ = relative_state(*args, mean_anomaly=M0 - h, precision="qd")
        n = mpmath.sqrt((mpmath.mpf(m1) + mpmath.mpf(m2)) / mpmath.mpf(a) ** 3)
        for k in range(3):
            deriv = (mp_of_limbs(Pp[k]) - mp_of_limbs(Pm[k])) / (2 * h)
            assert abs(n * deriv - mp_of_limbs(V[k])) < mpmath.mpf("1e-36")


def test_circular_orbit_speed():
    """Circular orbit: v^2 = G M / a, so the period is 2 pi a / v (Kepler's third law)."""
    with mpmath.workprec(REF_BITS):
        a = mpmath.mpf(3)
        v = mpmath.sqrt(mpmath.mpf("1.25") / a)
        el = orbital_elements(1, "0.25", [a, 0, 0], [0, v, 0], precision="qd").to_mpmath()
        assert el["eccentricity"] < mpmath.mpf(10) ** -60
        assert abs(el["period"] - 2 * mpmath.pi * a / v) < mpmath.mpf(10) ** -60


# --------------------------------------------------------------------------------------------
# unbound orbits
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("precision", PRECISIONS)
def test_hyperbolic_energy_eccentricity_axis(precision):
    m1, m2 = "1", "2"
    r0, v0 = ["1", "0.5", "0"], ["0.2", "2.5", "0.3"]
    el = orbital_elements(m1, m2, r0, v0, precision=precision)
    with mpmath.workprec(REF_BITS):
        gm = mpmath.mpf(3)
        r = [mpmath.mpf(c) for c in r0]
        v = [mpmath.mpf(c) for c in v0]
        rn = mpmath.sqrt(sum(c * c for c in r))
        eps = sum(c * c for c in v) / 2 - gm / rn
        hv = [r[1] * v[2] - r[2] * v[1], r[2] * v[0] - r[0] * v[2], r[0] * v[1] - r[1] * v[0]]
        h2 = sum(c * c for c in hv)
        mu = mpmath.mpf(2) / 3
        d = el.to_mpmath()
        assert eps > 0 and not el.bound
        assert abs(d["energy"] - mu * eps) < tol(precision)
        assert abs(d["semimajor_axis"] + gm / (2 * eps)) < tol(precision)
        assert abs(d["eccentricity"] - mpmath.sqrt(1 + 2 * eps * h2 / gm**2)) < tol(precision)
        assert abs(d["angular_momentum"] - mu * mpmath.sqrt(h2)) < tol(precision)
        assert el.period == float("inf")
        assert el.limbs("period")[0] == float("inf")


@pytest.mark.parametrize("anomaly", [{"true_anomaly": "-1.2"}, {"mean_anomaly": "4.5"}])
def test_hyperbolic_round_trip(anomaly):
    P, V = relative_state(1, 1, -2, "1.7", "0.4", "1", "2", precision="dd", **anomaly)
    with mpmath.workprec(REF_BITS):
        el = orbital_elements(1, 1, *state_mp(P, V), precision="dd").to_mpmath()
        assert abs(el["semimajor_axis"] + 2) < tol("dd")
        assert abs(el["eccentricity"] - mpmath.mpf("1.7")) < tol("dd")
        key = next(iter(anomaly))
        assert abs(el[key] - mpmath.mpf(anomaly[key])) < tol("dd")


# --------------------------------------------------------------------------------------------
# with a System
# --------------------------------------------------------------------------------------------
def test_pair_elements_of_a_system():
    import loschmidt

    s = loschmidt.System([1, "0.5", "1e-3"], [[0, 0, 0], ["1.1", "0.2", 0], [10, 0, 0]],
                         [[0, 0, 0], ["-0.1", "1.05", "0.1"], [0, "0.3", 0]], precision="dd")
    el = pair_elements(s, 0, 1)
    ref = orbital_elements(1, "0.5", ["1.1", "0.2", 0], ["-0.1", "1.05", "0.1"], precision="dd")
    for name in ("semimajor_axis", "eccentricity", "inclination", "mean_anomaly"):
        assert abs(el.to_mpmath()[name] - ref.to_mpmath()[name]) < tol("dd", 4)
    outer = pair_elements(s, [0, 1], 2)
    assert outer.mass == pytest.approx(1.501, rel=1e-15)
    with pytest.raises(ValueError, match="i and j"):
        pair_elements(s, 0, [0, 2])
    with pytest.raises(ValueError, match="j"):
        pair_elements(s, 0, 5)


# --------------------------------------------------------------------------------------------
# validation
# --------------------------------------------------------------------------------------------
def test_bad_input():
    with pytest.raises(ValueError, match="eccentricity"):
        relative_state(1, 1, 1, "-0.1")
    with pytest.raises(ValueError, match="eccentricity"):
        relative_state(1, 1, 1, 1)
    with pytest.raises(ValueError, match="semimajor_axis"):
        relative_state(1, 1, -1, "0.5")
    with pytest.raises(ValueError, match="semimajor_axis"):
        relative_state(1, 1, 1, "1.5")
    with pytest.raises(ValueError, match="true_anomaly"):
        relative_state(1, 1, -1, "1.5", true_anomaly=3)  # beyond the asymptote
    with pytest.raises(ValueError, match="true_anomaly or mean_anomaly"):
        relative_state(1, 1, 1, "0.5", true_anomaly=0, mean_anomaly=0)
    with pytest.raises(ValueError, match="precision"):
        relative_state(1, 1, 1, "0.5", precision="f128")
    with pytest.raises(ValueError, match="m2"):
        orbital_elements(1, 0, [1, 0, 0], [0, 1, 0])
    with pytest.raises(ValueError, match="position"):
        orbital_elements(1, 1, [0, 0, 0], [0, 1, 0])
    with pytest.raises(ValueError, match="velocity"):
        orbital_elements(1, 1, [1, 0, 0], [0, 1, 0, 0])
    with pytest.raises(ValueError, match="inclination"):
        relative_state(1, 1, 1, "0.5", inclination="nan")
    with pytest.raises(TypeError, match="m1"):
        orbital_elements(True, 1, [1, 0, 0], [0, 1, 0])
    with pytest.raises(ValueError, match="eccentricity"):
        eccentric_anomaly(1, 1)
    assert orbits.working_bits("dd") == 106
