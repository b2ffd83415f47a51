"""Exact save and load: every limb comes back bit for bit, and a reloaded state continues identically."""

from __future__ import annotations

import json

import numpy as np
import pytest

import loschmidt
from loschmidt import ics


@pytest.mark.parametrize("prec", loschmidt.PRECISIONS)
def test_system_round_trip_is_exact(tmp_path, prec: str) -> None:
    s = ics.figure_eight(precision=prec).with_radii([1e-3, 2e-3, 3e-3])
    path = tmp_path / "s.json"
    s.save(path)
    back = loschmidt.System.load(path)
    assert back == s
    assert np.array_equal(back.radii, s.radii)
    data = json.loads(path.read_text())
    assert data["precision"] == prec and data["loschmidt"] == loschmidt.__version__
    assert abs(float(data["decimal"]["positions"][0][0]) - 0.97000436) < 1e-15


@pytest.mark.parametrize("prec", ["f64", "dd", "qd"])
def test_reloaded_mid_run_state_continues_bit_for_bit(tmp_path, prec: str) -> None:
    # integrate to t = 2, save, reload, continue to t = 5: identical to continuing in memory
    s = ics.pythagorean(precision=prec)
    mid = loschmidt.integrate(s, 2, times=[1, 2])
    mid.save(tmp_path / "mid.json")
    again = loschmidt.Result.load(tmp_path / "mid.json")
    assert again.system == mid.system and again.energy_error == mid.energy_error
    assert again.status == mid.status and again.trajectory is not None
    assert np.array_equal(again.trajectory.limbs("positions"), mid.trajectory.limbs("positions"))
    a = loschmidt.integrate(mid.system, 3)
    b = loschmidt.integrate(again.system, 3)
    assert a.system == b.system
    assert a.system.time == 5.0


def test_load_rejects_other_files(tmp_path) -> None:
    p = tmp_path / "x.json"
    p.write_text('{"format": "something else"}')
    with pytest.raises(ValueError, match="path"):
        loschmidt.System.load(p)
    p.write_text("not json")
    with pytest.raises(ValueError, match="path"):
        loschmidt.Result.load(p)
    good = ics.pythagorean().to_dict()
    good["masses"][0][0] = "zz"
    with pytest.raises(ValueError, match="masses"):
        loschmidt.System.from_dict(good)
