"""Batches of systems on the C++ thread pool: bit-for-bit agreement with single-system runs and across
thread counts, exact solutions, validation, stopping."""

from __future__ import annotations

import os
import signal
import threading

import mpmath
import numpy as np
import pytest

import loschmidt
from loschmidt import _core
from loschmidt import precision as P
from loschmidt.batch import BatchResult, integrate_batch, roundtrip_batch
from kepler import kepler_state

# Free-fall triples (Agekyan & Anosova 1967 region): small, chaotic, cheap over short spans.
FREE_FALL = loschmidt.ics.free_fall_grid(4, 4)  # 12 members


def _same_fields(a: BatchResult, b: BatchResult) -> None:
    assert a.fields.keys() == b.fields.keys()
    for name in a.fields:
        if name == "wall_time":
            continue
        x, y = np.asarray(a.fields[name]), np.asarray(b.fields[name])
        if x.dtype.kind == "f":
            assert np.array_equal(x, y, equal_nan=True), name
        else:
            assert np.array_equal(x, y), name


@pytest.mark.parametrize("precision", ["f64", "f64c", "dd"])
def test_thread_count_does_not_change_a_bit(precision: str) -> None:
    t = 1 if precision == "dd" else 5
    one = roundtrip_batch(FREE_FALL, t, precision=precision, threads=1)
    two = roundtrip_batch(FREE_FALL, t, precision=precision, threads=2)
    _same_fields(one, two)
    if precision != "dd":  # more threads than cores
        _same_fields(one, roundtrip_batch(FREE_FALL, t, precision=precision, threads=5))
    assert one.success.sum() >= len(FREE_FALL) - 2  # f64 can hit the step floor in a close encounter


@pytest.mark.parametrize("method, precision", [("gbs", "f64c"), ("gbs", "dd"), ("chain", "dd")])
def test_roundtrip_equals_single_system_runs_bit_for_bit(method: str, precision: str) -> None:
    t = "1.25"
    batch = roundtrip_batch(FREE_FALL, t, method=method, precision=precision, threads=2)
    for i in range(len(FREE_FALL)):
        start = FREE_FALL.system(i, precision)
        fwd = loschmidt.integrate(start, t, method=method)
        back = loschmidt.integrate(fwd.system.reversed(), t, method=method)
        returned = back.system.reversed()
        states = batch.systems(i)
        assert states["start"] == start
        assert batch.forward_status[i] == fwd.status
        assert np.array_equal(states["forward"].limbs("positions"), fwd.system.limbs("positions"))
        assert np.array_equal(states["forward"].limbs("velocities"), fwd.system.limbs("velocities"))
        assert batch.forward_energy_error[i] == fwd.energy_error
        if fwd.status != "success":  # the return leg runs only after a successful forward leg
            assert batch.status[i] == fwd.status and states["returned"] is None and np.isnan(batch.delta[i])
            continue
        back = loschmidt.integrate(fwd.system.reversed(), t, method=method)
        returned = back.system.reversed()
        assert batch.status[i] == back.status
        assert np.array_equal(batch.returned_positions[i], returned.limbs("positions"))
        assert np.array_equal(batch.returned_velocities[i], returned.limbs("velocities"))
        dist = loschmidt.phase_distances(returned, start)
        assert batch.delta[i] == dist["delta"]
        assert batch.delta_position[i] == dist["delta_position"]
        assert batch.delta_velocity[i] == dist["delta_velocity"]
        assert batch.steps[i] == fwd.steps + back.steps
        assert batch.evaluations[i] == fwd.evaluations + back.evaluations
        # Energy error of the whole round trip, |E1 - E0| / |E0| in the working precision.
        e0, e1 = start.energy(limbs=True), returned.energy(limbs=True)
        rel = P.absolute(P.div(P.sub(e1, e0, precision), e0, precision), precision)
        assert batch.energy_error[i] == P.to_float(rel)
    assert np.count_nonzero(batch.success) >= len(FREE_FALL) - 2


def test_integrate_batch_equals_integrate_and_accepts_planar_arrays() -> None:
    ens = FREE_FALL
    planar = integrate_batch(ens.masses, ens.positions[:, :, :2], ens.velocities[:, :, :2], 3, precision="f64", threads=2)
    full = integrate_batch(ens, 3, precision="f64", threads=1)
    _same_fields(planar, full)
    for i in range(len(ens)):
        r = loschmidt.integrate(ens.system(i, "f64"), 3)
        assert full.systems(i)["final"] == r.system
        assert full.energy_error[i] == r.energy_error
        assert full.status[i] == r.status


def test_kepler_orbits_against_the_exact_solution() -> None:
    # Exact solution: Kepler's equation (tests/kepler.py); equal-mass binaries, a = 1, M = 1.
    es = [0.0, 0.3, 0.6, 0.9]
    t = mpmath.mpf(5)
    pos, vel = [], []
    for e in es:
        x, y, vx, vy = kepler_state(e, 0)
        with mpmath.workdps(80):
            pos.append([[-x / 2, -y / 2], [x / 2, y / 2]])
            vel.append([[-vx / 2, -vy / 2], [vx / 2, vy / 2]])
    res = integrate_batch([mpmath.mpf(1) / 2] * 2, pos, vel, t, precision="dd", tol=1e-26, threads=2)
    assert res.success.all()
    for i, e in enumerate(es):
        ref = kepler_state(e, t)
        p, v = res.systems(i)["final"].to_mpmath()["positions"], res.systems(i)["final"].to_mpmath()["velocities"]
        with mpmath.workdps(80):
            rel = [p[1][0] - p[0][0], p[1][1] - p[0][1], v[1][0] - v[0][0], v[1][1] - v[0][1]]
            err = max(abs(g - r) for g, r in zip(rel, ref))
        assert err < 1e-23, (e, err)  # tol 1e-26 over five time units


def test_inputs_are_validated_before_any_work() -> None:
    ens = FREE_FALL
    with pytest.raises(ValueError, match="method"):
        roundtrip_batch(ens, 1, method="leapfrog")
    with pytest.raises(ValueError, match="tol"):
        roundtrip_batch(ens, 1, precision="f64", tol=1e-20)
    with pytest.raises(ValueError, match="precision"):
        roundtrip_batch(ens, 1, precision="half")
    with pytest.raises(TypeError, match="t"):
        roundtrip_batch(ens)
    with pytest.raises(ValueError, match="threads"):
        roundtrip_batch(ens, 1, threads=0)
    with pytest.raises(ValueError, match="masses"):
        integrate_batch(np.ones((3, 2)), np.zeros((2, 3, 3)), np.zeros((2, 3, 3)), 1)
    with pytest.raises(ValueError, match="positive"):
        integrate_batch([1, -1, 1], ens.positions[:2], ens.velocities[:2], 1)
    with pytest.raises(ValueError, match="same position"):
        x = np.array(ens.positions[:2])
        x[1, 2] = x[1, 0]
        integrate_batch(ens.masses[:2], x, ens.velocities[:2], 1)
    with pytest.raises(ValueError, match="positions"):
        integrate_batch(ens.masses, ens.positions[:, :, :1], ens.velocities, 1)


def test_request_stop_reports_interrupted_systems() -> None:
    _core.request_stop(True)
    try:
        res = roundtrip_batch(FREE_FALL, 1000, precision="dd", threads=2)
    finally:
        _core.request_stop(False)
    assert set(res.status) == {"interrupted"}
    assert not res.success.any()
    assert np.isnan(res.delta).all()


def test_progress_callback_and_its_errors() -> None:
    seen: list[int] = []
    roundtrip_batch(FREE_FALL, 1, precision="dd", threads=1, progress=seen.append)
    assert seen == sorted(seen) and all(0 <= s <= len(FREE_FALL) for s in seen)

    def fail(done: int) -> None:
        raise RuntimeError("from progress")

    with pytest.raises(RuntimeError, match="from progress"):
        roundtrip_batch(FREE_FALL, 1000, precision="dd", threads=2, progress=fail)


@pytest.mark.skipif(threading.current_thread() is not threading.main_thread(), reason="signals need the main thread")
def test_ctrl_c_raises_keyboard_interrupt_promptly() -> None:
    timer = threading.Timer(0.3, os.kill, (os.getpid(), signal.SIGINT))
    timer.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            roundtrip_batch(FREE_FALL, 10**4, precision="dd", threads=2)
    finally:
        timer.cancel()


def test_to_table_and_systems() -> None:
    res = roundtrip_batch(FREE_FALL[:3], 1, precision="dd", threads=1)
    table = res.to_table()
    assert all(len(v) == 3 for v in table.values())
    assert table["returned_positions"].shape == (3, 3, 3, 2)
    assert table["returned_t"].shape == (3, 2)
    assert list(table["status"]) == ["success"] * 3
    s = res.systems(-1)
    assert set(s) == {"start", "forward", "returned"}
    assert P.to_float(s["forward"].limbs("time")) == 1.0
    with pytest.raises(IndexError):
        res.systems(3)
