"""The worked examples in examples/ run in their --quick mode and print what their docstrings promise.

Each runs in a subprocess in a temporary directory (its files go to --out there, never into the
source tree). The checks are on the printed results: round trips at higher precision come back
closer (the round-trip distance falls with the precision's unit roundoff), converge reports the
convergence it observed, sweeps on local threads and on a Dask cluster give the same bits.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def run_example(name: str, tmp_path: Path, *extra: str) -> str:
    out = tmp_path / "out"
    env = dict(os.environ, MPLBACKEND="Agg")
    proc = subprocess.run(
        [sys.executable, str(EXAMPLES / f"{name}.py"), "--quick", "--out", str(out), *extra],
        cwd=tmp_path, env=env, capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, f"{name} failed ({proc.returncode}):\n{proc.stdout}\n{proc.stderr}"
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc.stdout


def test_forward_backward(tmp_path: Path) -> None:
    text = run_example("forward_backward", tmp_path)
    deltas = {m.group(1): float(m.group(2)) for m in re.finditer(r"^(f64|dd|qd) .*delta = (\S+)", text, flags=re.M)}
    assert set(deltas) == {"f64", "dd", "qd"}, text
    # each precision returns closer; dd and qd to within a few thousand units of their roundoff
    # (2**-106 ~ 1.2e-32 and 2**-212 ~ 1.5e-64) times the growth over t = 10
    assert deltas["qd"] < 1e-45 < deltas["dd"] < 1e-20 < deltas["f64"] < 1e-6, deltas
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["forward-dd.json", "forward-f64.json",
                                                                    "forward-qd.json"]


def test_converged_solution(tmp_path: Path) -> None:
    text = run_example("converged_solution", tmp_path)
    m = re.search(r"^converged: True \(converged\); digits agreed: (\S+) of 16", text, flags=re.M)
    assert m and float(m.group(1)) >= 16, text
    assert "body 2 (m = 5): x = (" in text  # bodies counted from 0
    import loschmidt

    state = loschmidt.System.load(tmp_path / "out" / "converged-state.json")
    assert state.precision == "dd" and state.time == 10


def test_free_fall_map(tmp_path: Path) -> None:
    text = run_example("free_fall_map", tmp_path)
    rows = {m.group(1): (int(m.group(2)), int(m.group(3)), int(m.group(4)))
            for m in re.finditer(r"^(f64|dd) \(\S+\)\s+(\d+)\s+(\d+)\s+(\d+)", text, flags=re.M)}
    assert rows.keys() == {"f64", "dd"}, text
    assert rows["dd"] == (11, 11, 11), rows
    assert rows["f64"][0] == 11 and rows["f64"][2] < 11, rows
    png = tmp_path / "out" / "free_fall_map.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (tmp_path / "out" / "free-fall-quick-dd" / "manifest.json").exists()


def test_planck_threshold(tmp_path: Path) -> None:
    text = run_example("planck_threshold", tmp_path)
    verdicts = re.findall(r"as an initial error \S+: (NOT trustworthy|trustworthy)", text)
    assert verdicts == ["NOT trustworthy", "trustworthy"], text  # f64, then dd
    planck = [float(x) for x in re.findall(r"= (\S+) Planck lengths", text)]
    metres = [float(x) for x in re.findall(r"= (\S+) m = ", text)]
    assert len(planck) == 2 and len(metres) == 2
    for p, m in zip(planck, metres):
        assert p == pytest.approx(m / 1.616255e-35, rel=1e-2)  # CODATA 2018 Planck length; 3 digits printed
    assert (tmp_path / "out" / "planck_threshold.png").exists()


def test_dask_sweep(tmp_path: Path) -> None:
    pytest.importorskip("distributed")
    text = run_example("dask_sweep", tmp_path)
    assert re.search(r"^dask cluster at tcp://127\.0\.0\.1:\d+: 2 workers, 2 threads", text, flags=re.M), text
    assert "tables equal: True" in text


def test_binary_single_scattering(tmp_path: Path) -> None:
    text = run_example("binary_single_scattering", tmp_path)
    lines = {float(m.group(1)): m.group(0) for m in re.finditer(r"^v/v_c = (\S+): .*$", text, flags=re.M)}
    assert set(lines) == {0.3, 3.0}, text
    assert "ionization" not in lines[0.3]  # energy conservation: no ionization below v_c
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["cross_sections.csv", "cross_sections.png", "store"]
