"""The chain method's options through batches and sweeps, and the sweep tasks "amplification" and
"lifetime".

The references are the single-system entry points (``integrate``, ``amplification``), which the
rest of the suite checks against exact solutions and published values: a batch must give their bits.
Post-Newtonian checks: radiation reaction (2.5PN) is odd in the velocities, so a round trip with
it does not come back (Peters 1964, Phys. Rev. 136, B1224: the orbit keeps losing energy).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import loschmidt
from loschmidt import Ensemble, Sweep, ics


def _ensemble(systems, radii=None) -> Ensemble:
    return Ensemble(
        np.array([s.masses for s in systems]),
        np.array([s.positions for s in systems]),
        np.array([s.velocities for s in systems]),
        radii=radii,
    )


def _pn_triples(count: int, precision: str = "f64"):
    """Hierarchical black-hole triples (our own): an eccentric inner binary and a third body on a
    wider orbit, the outer inclination varied."""
    out = []
    for k in range(count):
        s = ics.hierarchical(
            inner=dict(m1=0.5, m2=0.4, a=1, e=0.5),
            outer=dict(m3=0.3, a=6, e=0.1, inclination=0.3 + 0.2 * k), precision="f64",
        )
        out.append(s)
    return out


def _same(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and np.array_equal(a, b, equal_nan=True)


def test_chain_batch_with_radii_gives_the_bits_of_integrate() -> None:
    ens = ics.free_fall_grid(3, 4)
    radii = [0.02, 0.02, 0.02]
    res = loschmidt.integrate_batch(ens, 4, method="chain", precision="f64", radii=radii, threads=2)
    seen = set()
    for i in range(len(ens)):
        s = ens.system(i, "f64").with_radii(radii)
        r = loschmidt.integrate(s, 4, method="chain")
        seen.add(r.status)
        assert res.status[i] == r.status
        assert _same(res.positions[i], r.system.limbs("positions"))
        assert _same(res.velocities[i], r.system.limbs("velocities"))
        pair = r.collision if r.collision is not None else (-1, -1)
        assert (res.pair_i[i], res.pair_j[i]) == pair
        assert res.rechains[i] == r.rechains
        assert res.evaluations[i] == r.evaluations
    assert "collision" in seen  # the radii matter on this grid


def test_ensemble_radii_used_by_the_chain_batch() -> None:
    ens = ics.free_fall_grid(2, 3)
    with_radii = Ensemble(ens.masses, ens.positions, ens.velocities, radii=[0.05, 0.05, 0.05])
    a = loschmidt.integrate_batch(with_radii, 4, method="chain", precision="f64")
    b = loschmidt.integrate_batch(ens, 4, method="chain", precision="f64", radii=[0.05, 0.05, 0.05])
    assert list(a.status) == list(b.status)
    assert _same(a.positions, b.positions)
    with pytest.raises(ValueError, match="radii"):
        loschmidt.integrate_batch(with_radii, 4, method="chain", precision="f64", radii=[0.05] * 3)


def test_pn_batch_gives_the_bits_of_integrate() -> None:
    systems = _pn_triples(3)
    ens = _ensemble(systems)
    kw = dict(method="chain", pn=(1, 2, 2.5), c=15.0, tol=1e-24)
    res = loschmidt.integrate_batch(ens, 3, precision="dd", threads=2, **kw)
    for i, s in enumerate(systems):
        r = loschmidt.integrate(s.with_precision("dd"), 3, **kw)
        assert res.status[i] == r.status == "success"
        assert _same(res.positions[i], r.system.limbs("positions"))
        assert _same(res.velocities[i], r.system.limbs("velocities"))
        # with pn the energy error is the bookkeeping error, as integrate reports it
        assert res.energy_error[i] == r.energy_error


def test_bad_chain_options_in_a_batch_are_named() -> None:
    ens = ics.free_fall_grid(2, 2)
    with pytest.raises(ValueError, match="pn"):
        loschmidt.integrate_batch(ens, 1, method="gbs", pn=(1,), c=10.0)
    with pytest.raises(ValueError, match="c:"):
        loschmidt.integrate_batch(ens, 1, method="chain", pn=(1,))
    with pytest.raises(ValueError, match="radii"):
        loschmidt.integrate_batch(ens, 1, method="gbs", radii=[0.1, 0.1, 0.1])
    with pytest.raises(ValueError, match="radii"):
        loschmidt.integrate_batch(ens, 1, method="chain", radii=[0.1, -1, 0.1])
    with pytest.raises(ValueError, match="radii"):
        loschmidt.integrate_batch(ens, 1, method="chain", radii=[0.1, 0.1])
    with pytest.raises(ValueError, match="regularization"):
        loschmidt.integrate_batch(ens, 1, method="chain", regularization="none")


def test_pn_triple_round_trips_through_the_sweep_engine(tmp_path) -> None:
    ens = _ensemble(_pn_triples(4))
    common = dict(t=20, method="chain", precision="dd", tol=1e-24, chunk_size=2)
    conservative = Sweep(ens, task="roundtrip", store=tmp_path / "c", pn=(1, 2), c=15.0, **common).run(progress=False)
    radiative = Sweep(ens, task="roundtrip", store=tmp_path / "r", pn=(1, 2, 2.5), c=15.0, **common).run(progress=False)
    dc = conservative.results()["delta"].to_numpy()
    dr = radiative.results()["delta"].to_numpy()
    assert np.all(np.isfinite(dc)) and np.all(np.isfinite(dr))
    # 1PN + 2PN terms are even in the velocities: the round trip comes back to round-off; with
    # radiation reaction it cannot (measured in dd: 1e-22 to 8e-22 against 1.7e-2 to 1.9e-2).
    assert np.all(dc < 1e-16), dc
    assert np.all(dr > 1e6 * dc), (dc, dr)
    manifest = json.loads((tmp_path / "r" / "manifest.json").read_text())
    text = json.dumps(manifest)
    assert '"pn": [1, 2, 2.5]' in text and '"c": "1.5e+1"' in text
    # The same definition resumes; another speed of light is a different sweep.
    Sweep(ens, task="roundtrip", store=tmp_path / "r", pn=(1, 2, 2.5), c=15.0, **common).run(progress=False)
    with pytest.raises(ValueError):
        Sweep(ens, task="roundtrip", store=tmp_path / "r", pn=(1, 2, 2.5), c=16.0, **common)


def test_amplification_task_matches_amplification(tmp_path) -> None:
    ens = ics.free_fall_grid(2, 3)
    t, pert = 3, 1e-9
    sw = Sweep(ens, task="amplification", store=tmp_path / "a", t=t, perturbation=pert, body=2, axis=1,
               method="chain", precision="dd", chunk_size=4).run(progress=False)
    df = sw.results()
    assert len(df) == len(ens)
    for i in range(len(ens)):
        ref = loschmidt.amplification(ens.system(i, "dd"), t, perturbation=pert, body=2, axis=1, times=[t],
                                      method="chain")
        assert df["status"][i] == "success"
        assert math.isclose(df["delta0"][i], ref.delta0, rel_tol=1e-12)
        assert math.isclose(df["amplification"][i], ref.final, rel_tol=1e-8), (i, df["amplification"][i])
        assert math.isclose(df["exponent"][i], math.log(ref.final) / t, rel_tol=1e-6)
    assert np.all(df["amplification"] > 1)  # free fall is chaotic: small displacements grow


def test_amplification_task_options_are_checked(tmp_path) -> None:
    ens = ics.free_fall_grid(2, 2)
    with pytest.raises(ValueError, match="t:"):
        Sweep(ens, task="amplification", store=tmp_path / "x")
    with pytest.raises(ValueError, match="axis"):
        Sweep(ens, task="amplification", store=tmp_path / "x", t=1, axis=3)
    with pytest.raises(ValueError, match="perturbation"):
        Sweep(ens, task="amplification", store=tmp_path / "x", t=1, perturbation=0)
    with pytest.raises(ValueError, match="options"):
        Sweep(ens, task="amplification", store=tmp_path / "x", t=1, bogus=1)


def test_lifetime_task_ends_at_a_post_newtonian_merger(tmp_path) -> None:
    # A tight binary (bodies 1 and 2) with a distant third body spirals in and merges (Peters'
    # time for a = 0.2, e = 0.3, c = 20 is about 250 time units; see test_pn.py).
    s = ics.hierarchical(inner=dict(m1=0.5, m2=0.5, a=0.2, e=0.3), outer=dict(m3=0.2, a=5, e=0), precision="f64")
    order = [2, 0, 1]
    s = loschmidt.System(s.masses[order], s.positions[order], s.velocities[order], precision="f64")
    ens = _ensemble([s])
    sw = Sweep(ens, task="lifetime", store=tmp_path / "life", t_max=1000, interval=100, pn=(1, 2, 2.5), c=20.0)
    df = sw.run(progress=False).results()
    assert df["status"][0] == "merger" and df["outcome"][0] == "merger"
    assert (df["pair_i"][0], df["pair_j"][0]) == (1, 2)
    single = loschmidt.integrate(s, 1000, method="chain", pn=(1, 2, 2.5), c=20.0)
    assert single.status == "merger"
    # chunk ends every 100 units change the steps, not the physics: the same merger time
    assert abs(df["lifetime"][0] - single.t) < 1e-3 * single.t, (df["lifetime"][0], single.t)


def test_sweep_rows_become_systems_exactly(tmp_path) -> None:
    ens = ics.free_fall_grid(3, 3)
    t = "1.5"
    rt = Sweep(ens, task="roundtrip", store=tmp_path / "rt", t=t, method="chain", precision="dd",
               chunk_size=2).run(progress=False)
    it = Sweep(ens[:3], task="integrate", store=tmp_path / "it", t="0.25", precision="qd", method="chain",
               chunk_size=2).run(progress=False)
    for i in range(len(ens)):
        got = rt.systems(i)
        start = ens.system(i, "dd")
        assert _same(got["start"].limbs("positions"), start.limbs("positions"))
        assert _same(got["start"].limbs("masses"), start.limbs("masses"))
        forward = loschmidt.integrate(start, t, method="chain")
        assert _same(got["forward"].limbs("positions"), forward.system.limbs("positions"))
        assert _same(got["forward"].limbs("velocities"), forward.system.limbs("velocities"))
        assert _same(got["forward"].limbs("time"), forward.system.limbs("time"))
        back = loschmidt.integrate(forward.system.reversed(), t, method="chain").system.reversed()
        assert _same(got["returned"].limbs("positions"), back.limbs("positions"))
    for i in range(3):  # qd final states equal a fresh qd run
        final = it.systems(i)["final"]
        fresh = loschmidt.integrate(ens.system(i, "qd"), "0.25", method="chain")
        assert final.precision == "qd"
        assert _same(final.limbs("velocities"), fresh.system.limbs("velocities"))
    with pytest.raises(ValueError, match="member"):
        rt.systems(len(ens))
    with pytest.raises(TypeError, match="member"):
        rt.systems("0")


@pytest.mark.slow
def test_lifetime_through_the_engine_matches_the_python_loop(tmp_path) -> None:
    """Issue 16: task "lifetime" runs in one C++ batch with the escape stop condition; its results
    agree with the former path, integrate_until_escape (a Python loop over spans of ``interval``
    with loschmidt.outcome at each span end), member by member: the same outcome, the same escaper,
    the same lifetime (the end of the first span at which the escape test holds). The Pythagorean
    problem's member (masses 3, 4, 5) must see the mass-3 body (index 0) escape (Szebehely & Peters
    1967, AJ 72, 876)."""
    members = [ics.pythagorean("f64"),
               loschmidt.System([3, 4, 5], [[1, 3], [-2, -1], [1.01, -1]], [[0, 0]] * 3, precision="f64"),
               loschmidt.System([1, 1, 1], [[0, 0], [1, 0], [0.5, 0.8]], [[0, 0]] * 3, precision="f64")]
    ens = _ensemble(members)
    df = Sweep(ens, task="lifetime", store=tmp_path / "life", t_max=200, interval=5).run(progress=False).results()
    assert df["outcome"][0] == "escape" and df["escaper"][0] == 0
    for i, s in enumerate(members):
        res, found, lifetime = loschmidt.integrate_until_escape(s, 200, interval=5, method="chain")
        assert df["outcome"][i] == ("merger" if res.status == "merger" else found.kind), i
        esc = found.escaper if found.kind == "escape" and found.escaper is not None else -1
        assert df["escaper"][i] == esc, i
        if lifetime is None:
            assert np.isnan(df["lifetime"][i]), i
        else:
            assert df["lifetime"][i] == lifetime, (i, df["lifetime"][i], lifetime)
            # the engine stopped within the last span: the exact time it saw the escape
            assert lifetime - 5 < df["t_reached"][i] <= lifetime, (i, df["t_reached"][i])
