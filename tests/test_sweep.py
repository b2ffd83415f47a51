"""Sweeps: resumable Parquet stores, identical bits on every executor, refusal of foreign stores."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pyarrow as pa
import pytest

import loschmidt
from loschmidt import sweep as sweep_mod
from loschmidt.store import limbs, read_store
from loschmidt.sweep import Sweep, available_tasks, register_task

# Free-fall triples (Agekyan & Anosova 1967 region) on a 6 x 6 grid, less member 5 (near a binary
# collision, 50x dearer than the rest): 24 members of similar cost.
_GRID = loschmidt.ics.free_fall_grid(6, 6)
ENS = _GRID[np.arange(len(_GRID)) != 5]
DD = dict(precision="dd", t="0.5")  # ~1 s for the 24 round trips on one core
F64 = dict(precision="f64", t=1)  # ~0.1 s


def table(sweep: Sweep):
    """The stored rows without the one column that may differ between runs (wall_time)."""
    return sweep.results(format="arrow").drop_columns(["wall_time"])


def same_bits(a, b) -> bool:
    """Same schema and the same bits in every cell (NaN included, unlike Table.equals)."""
    if a.schema != b.schema or len(a) != len(b):
        return False
    for name in a.column_names:
        x, y = a.column(name).combine_chunks(), b.column(name).combine_chunks()
        if pa.types.is_fixed_size_list(x.type):  # full-precision limb columns
            x, y = x.flatten(), y.flatten()
        xs, ys = x.to_numpy(zero_copy_only=False), y.to_numpy(zero_copy_only=False)
        if xs.dtype.kind == "f":
            xs, ys = xs.view(np.uint64), ys.view(np.uint64)
        if not np.array_equal(xs, ys):
            return False
    return True


@pytest.fixture(scope="module")
def reference_dd(tmp_path_factory: pytest.TempPathFactory):
    s = Sweep(ENS, task="roundtrip", store=tmp_path_factory.mktemp("ref") / "dd", chunk_size=2, threads=2, **DD)
    return table(s.run(progress=False))


@pytest.fixture(scope="module")
def reference_f64(tmp_path_factory: pytest.TempPathFactory):
    s = Sweep(ENS, task="roundtrip", store=tmp_path_factory.mktemp("ref") / "f64", chunk_size=5, threads=1, **F64)
    return table(s.run(progress=False))


CHILD = textwrap.dedent(
    """
    import sys
    import numpy as np
    import loschmidt
    from loschmidt.sweep import Sweep
    grid = loschmidt.ics.free_fall_grid(6, 6)
    ens = grid[np.arange(len(grid)) != 5]
    Sweep(ens, task="roundtrip", store=sys.argv[1], chunk_size=2, threads=1, precision="dd", t="0.5").run(
        progress=False)
    """
)


def _start_child(tmp_path: Path, store: Path) -> subprocess.Popen:
    script = tmp_path / "child.py"
    script.write_text(CHILD)
    return subprocess.Popen([sys.executable, str(script), str(store)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_for_chunks(proc: subprocess.Popen, store: Path, count: int) -> None:
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and proc.poll() is None:
        files = list((store / "chunks").glob("chunk-*.parquet")) if (store / "chunks").is_dir() else []
        if len(files) >= count:
            return
        time.sleep(0.005)


def _check_complete(t, n: int) -> None:
    members = t.column("member").to_numpy()
    assert np.array_equal(members, np.arange(n))  # every member once, in order


def test_killed_sweep_resumes_to_the_uninterrupted_table(tmp_path: Path, reference_dd) -> None:
    store = tmp_path / "killed"
    proc = _start_child(tmp_path, store)
    _wait_for_chunks(proc, store, 2)
    proc.send_signal(signal.SIGKILL)
    proc.communicate()
    assert proc.returncode == -signal.SIGKILL
    finished = sorted((store / "chunks").glob("chunk-*.parquet"))
    assert 2 <= len(finished) < 12, "the sweep must be killed part way"
    # A temporary file of the dead run, as a kill during a write would leave it.
    stale = store / "chunks" / f".chunk-000011.parquet.{proc.pid}.0123abcd.tmp"
    stale.write_bytes(b"partial")

    resumed = Sweep(ENS, task="roundtrip", store=store, chunk_size=2, threads=2, **DD)
    assert resumed.status()["chunks_finished"] == len(finished)
    resumed.run(progress=False)
    assert not stale.exists()
    got = table(resumed)
    _check_complete(got, len(ENS))
    assert same_bits(got, reference_dd)  # same rows, same bits, no duplicates
    assert resumed.status() == {"chunks_finished": 12, "chunks": 12, "members_finished": 24, "members": 24}


def test_ctrl_c_finishes_running_chunks_and_keeps_them(tmp_path: Path, reference_dd) -> None:
    store = tmp_path / "interrupted"
    proc = _start_child(tmp_path, store)
    _wait_for_chunks(proc, store, 2)
    proc.send_signal(signal.SIGINT)
    _out, err = proc.communicate(timeout=60)
    assert proc.returncode != 0 and "KeyboardInterrupt" in err
    partial = read_store(store, format="arrow")
    n = len(partial)
    assert 4 <= n < len(ENS) and n % 2 == 0  # whole chunks only
    assert same_bits(partial.drop_columns(["wall_time"]), reference_dd.slice(0, n))
    resumed = Sweep(ENS, task="roundtrip", store=store, chunk_size=2, **DD).run(progress=False)
    assert same_bits(table(resumed), reference_dd)


def test_dask_local_cluster_matches_local_threads(tmp_path: Path, reference_f64) -> None:
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=":0") as cluster, Client(cluster) as client:
        s = Sweep(ENS, task="roundtrip", store=tmp_path / "dask", chunk_size=5, executor=client, **F64)
        s.run(progress=False)
    assert same_bits(table(s), reference_f64)


def test_thread_counts_and_executors_give_the_same_bits(tmp_path: Path, reference_f64) -> None:
    two = Sweep(ENS, task="roundtrip", store=tmp_path / "two", chunk_size=5, threads=2, **F64).run(progress=False)
    assert same_bits(table(two), reference_f64)
    with ThreadPoolExecutor(2) as ex:
        pooled = Sweep(ENS, task="roundtrip", store=tmp_path / "pool", chunk_size=5, executor=ex, **F64)
        pooled.run(progress=False)
    assert same_bits(table(pooled), reference_f64)


def test_stream_of_pieces_gives_the_rows_of_the_ensemble(tmp_path: Path, reference_f64) -> None:
    pieces = (ENS[a:b] for a, b in [(0, 3), (3, 4), (4, 13), (13, 24)])  # cut unlike the chunks
    s = Sweep(pieces, task="roundtrip", store=tmp_path / "stream", chunk_size=5, **F64).run(progress=False)
    assert same_bits(table(s), reference_f64)
    files = sorted(p.name for p in (tmp_path / "stream" / "chunks").iterdir())
    assert files == [f"chunk-{i:06d}.parquet" for i in range(5)]


def test_store_contents(tmp_path: Path) -> None:
    s = Sweep(ENS[:4], task="integrate", store=tmp_path / "s", chunk_size=3, **F64).run(progress=False)
    manifest = json.loads((tmp_path / "s" / "manifest.json").read_text())
    d = manifest["definition"]
    assert d["task"] == "integrate" and d["precision"] == "f64" and d["chunk_size"] == 3
    assert d["ensemble"]["family"] == "free_fall_grid" and d["ensemble"]["members"] == 4
    assert d["loschmidt_version"] == loschmidt.__version__ and len(manifest["definition_hash"]) == 64
    df = s.results()
    assert list(df["member"]) == [0, 1, 2, 3] and list(df["x"]) == list(ENS.params["x"][:4])
    # Full precision survives the store exactly: compare with a direct batch.
    direct = loschmidt.batch.integrate_batch(ENS[:4], 1, precision="f64")
    assert np.array_equal(s.limbs("positions"), direct.positions)
    assert np.array_equal(limbs(s.results(format="arrow"), "start_positions"), ENS.positions[:4])


def test_a_different_definition_is_refused(tmp_path: Path) -> None:
    store = tmp_path / "s"
    Sweep(ENS[:6], task="roundtrip", store=store, chunk_size=3, **F64).run(progress=False)
    with pytest.raises(ValueError, match="different sweep definition.*options.t"):
        Sweep(ENS[:6], task="roundtrip", store=store, chunk_size=3, precision="f64", t=2)
    with pytest.raises(ValueError, match="different sweep definition.*chunk_size"):
        Sweep(ENS[:6], task="roundtrip", store=store, chunk_size=2, **F64)
    with pytest.raises(ValueError, match="different sweep definition.*ensemble"):
        Sweep(ENS[1:7], task="roundtrip", store=store, chunk_size=3, **F64)
    with pytest.raises(ValueError, match="different sweep definition.*task"):
        Sweep(ENS[:6], task="integrate", store=store, chunk_size=3, **F64)
    # The same definition resumes (nothing left to do).
    assert Sweep(ENS[:6], task="roundtrip", store=store, chunk_size=3, **F64).status()["chunks_finished"] == 2
    # A stream with other initial conditions is caught chunk by chunk.
    sstore = tmp_path / "stream"
    Sweep(iter([ENS[:6]]), task="roundtrip", store=sstore, chunk_size=3, **F64).run(progress=False)
    with pytest.raises(ValueError, match="different initial conditions"):
        Sweep(iter([ENS[1:7]]), task="roundtrip", store=sstore, chunk_size=3, **F64).run(progress=False)
    # A directory that is not a store is left alone.
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine")
    with pytest.raises(ValueError, match="not empty"):
        Sweep(ENS[:6], task="roundtrip", store=other, **F64)


def test_unwritable_store_fails_before_any_work(tmp_path: Path) -> None:
    calls = []

    def counting(chunk, options):
        calls.append(len(chunk))
        return {"n": np.full(len(chunk), chunk.n)}

    register_task("counting_for_test", counting, replace=True)
    try:
        blocker = tmp_path / "a_file"
        blocker.write_text("")
        with pytest.raises(ValueError, match="store"):
            Sweep(ENS, task="counting_for_test", store=blocker / "store").run(progress=False)
        with pytest.raises(ValueError, match="not a directory"):
            Sweep(ENS, task="counting_for_test", store=blocker).run(progress=False)
        assert calls == []
        s = Sweep(ENS, task="counting_for_test", store=tmp_path / "ok", chunk_size=10).run(progress=False)
        assert calls == [10, 10, 4] and list(s.results()["n"]) == [3] * 24
    finally:
        del sweep_mod._TASKS["counting_for_test"]


def test_tasks_and_arguments_are_validated() -> None:
    assert {"roundtrip", "integrate"} <= set(available_tasks())
    with pytest.raises(ValueError, match="available tasks: .*integrate.*roundtrip"):
        Sweep(ENS, task="no-such-task", store="unused", t=1)
    with pytest.raises(ValueError, match="t: the time span is required"):
        Sweep(ENS, task="roundtrip", store="unused")
    with pytest.raises(ValueError, match="unknown"):
        Sweep(ENS, task="roundtrip", store="unused", t=1, tolerance=1e-10)
    with pytest.raises(ValueError, match="tol"):
        Sweep(ENS, task="roundtrip", store="unused", t=1, precision="f64", tol=1e-30)
    with pytest.raises(TypeError, match="executor"):
        Sweep(ENS, task="roundtrip", store="unused", t=1, executor=object())
    with pytest.raises(ValueError, match="chunk_size"):
        Sweep(ENS, task="roundtrip", store="unused", t=1, chunk_size=0)
    with pytest.raises(ValueError, match="store"):
        Sweep(ENS, task="roundtrip", t=1)
    assert not os.path.exists("unused")
