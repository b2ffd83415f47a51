"""The engine's escape stop condition (integrate(..., stop="escape")) against published outcomes, the
exact hyperbolic Kepler orbit and the Python classification (loschmidt.outcome); and the fixed-step
mode's inputs (its order test is tests/test_gbs.py::test_observed_order_grows_with_columns)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import loschmidt
from loschmidt import ics


def test_pythagorean_stops_when_body_0_escapes() -> None:
    # Szebehely & Peters 1967 (AJ 72, 876): the bodies of mass 4 and 5 form a binary and the mass-3
    # body (index 0) escapes after the last close triple encounter near t = 60 [memory].
    s = ics.pythagorean("dd")
    r = loschmidt.integrate(s, 200, method="gbs", stop="escape")
    assert r.status == "stop_condition" and r.success
    assert r.lifetime is not None and 40 < r.lifetime < 100, r.lifetime  # measured 61.3
    assert r.t == r.lifetime
    o = loschmidt.outcome(r.system)
    assert o.kind == "escape" and o.escaper == 0 and set(o.binary) == {1, 2}
    assert o.distance > loschmidt.DEFAULT_DISTANCE_FACTOR * o.semimajor_axis


def test_bound_hierarchical_triple_runs_to_the_end() -> None:
    # A wide (outer a / inner a = 10), mildly eccentric triple: the outer body is bound to the inner
    # pair, so the escape test (positive energy relative to the pair) never passes.
    s = ics.hierarchical(dict(m1=1, m2=1, a=1, e="0.1"), dict(m3="0.5", a=10, e="0.2"), precision="dd")
    r = loschmidt.integrate(s, 200, method="gbs", stop="escape", check_every=1)
    assert r.status == "success" and r.lifetime is None and r.t == 200
    assert loschmidt.outcome(r.system).kind == "bound"


def test_agrees_with_integrate_until_escape() -> None:
    # integrate_until_escape (outcome.py) looks at chunk ends (interval 1): its lifetime is the
    # first chunk end after the test holds, the engine's the first check after it holds, so they
    # differ by at most about one interval.
    s = ics.pythagorean("dd")
    _result, found, lifetime = loschmidt.integrate_until_escape(s, 200, interval=1)
    assert found.kind == "escape" and found.escaper == 0
    every = loschmidt.integrate(s, 200, method="gbs", stop="escape", check_every=1)
    coarse = loschmidt.integrate(s, 200, method="gbs", stop="escape", check_every=10)
    assert -0.2 < lifetime - every.lifetime <= 1.0 + 1e-9, (lifetime, every.lifetime)  # measured 0.11
    # checking every 10 steps stops a few check intervals later at most
    assert 0 <= coarse.lifetime - every.lifetime < 1.0, (coarse.lifetime, every.lifetime)  # measured 0.45
    assert loschmidt.outcome(every.system).kind == "escape"


def test_hyperbolic_pair_stops_at_ten_semimajor_axes() -> None:
    # Exact hyperbolic Kepler orbit (e = 2, a = -1, M = 1.5, from periapsis): r = |a| (e cosh F - 1),
    # t = sqrt(|a|^3 / M) (e sinh F - F). The test r > 10 |a| first holds at cosh F = 11 / e.
    s = ics.binary(1, "0.5", -1, 2, precision="dd")
    r = loschmidt.integrate(s, 50, method="gbs", stop="escape", check_every=1)
    F = math.acosh(11 / 2)
    t_star = math.sqrt(1 / 1.5) * (2 * math.sinh(F) - F)
    assert r.status == "stop_condition"
    assert t_star <= r.lifetime < t_star + 0.5, (r.lifetime, t_star)  # measured +0.064 (one step)
    o = loschmidt.outcome(r.system)
    assert o.kind == "escape" and o.escaper == 1  # the lighter body, as outcome() reports it


def test_four_bodies_escape_confirmed_and_bound_quadruple_not_stopped() -> None:
    tri = ics.hierarchical(dict(m1=1, m2=1, a=1, e="0.1"), dict(m3="0.5", a=10, e="0.2"), precision="dd")
    pos = np.vstack([tri.positions, [[0, -6, 0]]])
    vel = np.vstack([tri.velocities, [[0, -2, 0]]])
    leaving = loschmidt.System([1, 1, "0.5", "0.1"], pos, vel, precision="dd")
    r = loschmidt.integrate(leaving, 300, method="gbs", stop="escape", check_every=1)
    assert r.status == "stop_condition"
    o = loschmidt.outcome(r.system)
    assert o.kind == "escape" and o.escaper == 3, o  # the trigger does not fire before outcome() agrees

    pair = ics.binary(1, 1, 1, "0.2", precision="dd")
    v = 0.5 * math.sqrt(4 / 20)  # the two binaries on a circular orbit about each other
    pos = np.vstack([pair.positions + [-10, 0, 0], pair.positions + [10, 0, 0]])
    vel = np.vstack([pair.velocities + [0, -v, 0], pair.velocities + [0, v, 0]])
    bound = loschmidt.System([1, 1, 1, 1], pos, vel, precision="dd")
    r = loschmidt.integrate(bound, 200, method="gbs", stop="escape", check_every=1)
    assert r.status == "success" and r.lifetime is None


def test_distance_factor_moves_the_stop() -> None:
    s = ics.pythagorean("dd")
    lifetimes = []
    for k in (0, 3, 10, 30):
        r = loschmidt.integrate(s, 300, method="gbs", stop="escape", check_every=1, distance_factor=k)
        assert r.status == "stop_condition"
        o = loschmidt.outcome(r.system, distance_factor=k)
        assert o.kind == "escape" and o.escaper == 0
        lifetimes.append(r.lifetime)
    assert lifetimes == sorted(lifetimes) and lifetimes[0] < lifetimes[-1]


def test_no_stop_by_default_and_bits_unchanged() -> None:
    s = ics.pythagorean("dd")
    plain = loschmidt.integrate(s, 70, method="gbs")  # the steps these checks measured are gbs's
    checked = loschmidt.integrate(s, 50, method="gbs", stop="escape")  # before the escape: runs to the end
    again = loschmidt.integrate(s, 50, method="gbs")
    assert plain.lifetime is None and checked.status == "success" and checked.lifetime is None
    for name in ("positions", "velocities"):
        assert np.array_equal(checked.system.limbs(name), again.system.limbs(name))


def test_lifetime_survives_save_and_load(tmp_path) -> None:
    r = loschmidt.integrate(ics.pythagorean("dd"), 200, method="gbs", stop="escape")
    r.save(tmp_path / "r.json")
    back = loschmidt.Result.load(tmp_path / "r.json")
    assert back.lifetime == r.lifetime and back.status == "stop_condition"


def test_bad_stop_input_is_named() -> None:
    s = ics.pythagorean("dd")
    with pytest.raises(ValueError, match="stop"):
        loschmidt.integrate(s, 1, stop="collision")
    with pytest.raises(ValueError, match="check_every"):
        loschmidt.integrate(s, 1, stop="escape", check_every=0)
    with pytest.raises(TypeError, match="check_every"):
        loschmidt.integrate(s, 1, stop="escape", check_every=2.5)
    with pytest.raises(ValueError, match="distance_factor"):
        loschmidt.integrate(s, 1, stop="escape", distance_factor=-1)
    with pytest.raises(TypeError, match="distance_factor"):
        loschmidt.integrate(s, 1, stop="escape", distance_factor="10")


# ---------------------------------------------------------------------------------------------------
# Fixed-step mode (Options::fixed_step)


def test_fixed_step_lands_on_output_times() -> None:
    s = ics.pythagorean("dd")
    r = loschmidt.integrate(s, 1, method="gbs", fixed_step=0.125, times=["0.3", "0.5"], max_order=4)
    # 0.3 is no multiple of the step: the step before it is shortened, then the grid restarts there
    assert r.success and r.steps == 9 and r.rejected == 0
    assert np.array_equal(r.trajectory.limbs("t")[0], loschmidt.precision.to_limbs("0.3", "dd"))
    # agrees with an adaptive run to the accuracy of order 8 with this step
    ref = loschmidt.integrate(s, 1)
    assert loschmidt.phase_distance(r.system, ref.system) < 1e-6


def test_bad_fixed_step_input_is_named() -> None:
    s = ics.pythagorean("dd")
    with pytest.raises(ValueError, match="fixed_step"):
        loschmidt.integrate(s, 1, fixed_step=-0.1)
    with pytest.raises(ValueError, match="initial_step"):
        loschmidt.integrate(s, 1, fixed_step=0.1, initial_step=0.1)
    with pytest.raises(ValueError, match="max_order"):
        loschmidt.integrate(s, 1, max_order=2)  # below 3 only in fixed-step mode
    assert loschmidt.integrate(s, 1, fixed_step=0.1, max_order=1).success


def test_post_newtonian_triple_stops_on_escape_with_the_chain_method() -> None:
    """Issue 16: stop="escape" in the chain method, with post-Newtonian terms. Burrau's problem with
    weak 1PN + 2PN + 2.5PN terms (c = 1e4) still breaks up: the engine stops, and the final state,
    classified independently by loschmidt.outcome (exact arithmetic), is an escape. Without the PN
    terms the escaper is the mass-3 body (index 0; Szebehely & Peters 1967, AJ 72, 876)."""
    s = ics.pythagorean("f64")
    r = loschmidt.integrate(s, 200, method="chain", pn=(1, 2, 2.5), c=1e4, stop="escape")
    assert r.status == "stop_condition" and r.success
    assert r.lifetime is not None and 0 < r.lifetime < 200
    assert loschmidt.outcome(r.system).kind == "escape"
    newton = loschmidt.integrate(s, 200, method="chain", stop="escape")
    assert newton.status == "stop_condition"
    found = loschmidt.outcome(newton.system)
    assert found.kind == "escape" and found.escaper == 0
