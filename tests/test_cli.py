"""The command line end to end: each subcommand in a subprocess (demo in quick mode, sweep with a
SIGINT and --resume, plot, report, run, bench), configuration errors named by section and key.

Checks against something outside the CLI: the Pythagorean problem's outcome (Szebehely & Peters
1967, AJ 72, 876: the mass-3 body escapes, masses 4 and 5 stay bound), the PNG format (the IHDR chunk
gives width and height, ISO/IEC 15948), and the round-trip distances of a resumed sweep against
``loschmidt.roundtrip`` run here (the batch engine promises the same bits).
"""

from __future__ import annotations

import base64
import json
import os
import re
import signal
import struct
import subprocess
import sys
import time
from pathlib import Path

import pytest

pytest.importorskip("matplotlib")
pytest.importorskip("pyarrow")

import loschmidt
import loschmidt.demo
from loschmidt.cli import main

_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _cli(*args: str, cwd: Path | None = None, timeout: float = 240, **kw) -> subprocess.CompletedProcess:
    """``loschmidt ARGS`` in a fresh interpreter (the console script's entry point, ``main``)."""
    code = "import sys; from loschmidt.cli import main; sys.exit(main(sys.argv[1:]))"
    env = dict(os.environ, MPLBACKEND="Agg", PYTHONWARNINGS="error")
    return subprocess.run([sys.executable, "-c", code, *args], cwd=cwd, capture_output=True, text=True,
                          timeout=timeout, env=env, **kw)


def _png_size(path: Path) -> tuple[int, int]:
    data = Path(path).read_bytes()
    assert data[:8] == _PNG_SIGNATURE, f"{path} is not a PNG"
    assert data[12:16] == b"IHDR"  # the first chunk of every PNG (ISO/IEC 15948)
    return struct.unpack(">II", data[16:24])


def _sweep_toml(path: Path, store: str, *, nx: int, ny: int, t: float, precision: str, chunk_size: int,
                threads: int = 2, extra: str = "") -> Path:
    path.write_text(
        f"""
[ensemble]
family = "free-fall-grid"
nx = {nx}
ny = {ny}

[task]
name = "roundtrip"
t = {t}
precision = "{precision}"
method = "chain"
{extra}
[store]
path = "{store}"
chunk_size = {chunk_size}

[execution]
threads = {threads}

[units]
mass = 1e6
length = "pc"
"""
    )
    return path


# ---------------------------------------------------------------------------------------------------
# a small finished store shared by the plot and report tests


@pytest.fixture(scope="module")
def small_store(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("sweep")
    cfg = _sweep_toml(d / "small.toml", "small-store", nx=4, ny=7, t=3, precision="f64", chunk_size=8)
    r = _cli("sweep", str(cfg), "--no-progress", cwd=d)
    assert r.returncode == 0, r.stderr
    assert "reversible, delta <= 1e-10" in r.stdout
    return d / "small-store"  # relative paths are taken from the directory the command runs in


@pytest.fixture(scope="module")
def quick_demo(tmp_path_factory) -> tuple[Path, subprocess.CompletedProcess]:
    out = tmp_path_factory.mktemp("demo") / "out"
    r = _cli("demo", "--quick", "--out", str(out))
    return out, r


# ---------------------------------------------------------------------------------------------------
# demo


def test_demo_quick_writes_its_summary_map_and_stores(quick_demo):
    out, r = quick_demo
    assert r.returncode == 0, r.stderr
    text = r.stdout
    # the summary table: a row per precision with the fraction reversible
    rows = {m.group(1): m for m in re.finditer(r"^(f64|dd) \(.*?\)\s+(\d+)\s+(\d+)\s+(\d+) \(\s*([\d.]+)%\)",
                                               text, re.M)}
    assert set(rows) == {"f64", "dd"}, text
    members = int(rows["f64"].group(2))
    quick = loschmidt.demo.QUICK
    assert members == len(loschmidt.ics.free_fall_grid(quick.nx, quick.ny))
    # double-double resolves the round trips that double cannot: a higher reversible fraction
    assert int(rows["dd"].group(4)) > int(rows["f64"].group(4))
    m = re.search(r"= ([\d.e+-]+) m = ([\d.e+-]+) Planck lengths", text)
    assert m, text
    metres, planck = float(m.group(1)), float(m.group(2))
    assert planck == pytest.approx(metres / loschmidt.units.PLANCK_LENGTH, rel=1e-2)
    w, h = _png_size(out / "reversibility-map.png")
    assert w > 400 and h > 300
    html = (out / "report.html").read_text()
    assert html.count("data:image/png;base64,") >= 3
    for store in ("quick-roundtrip-f64", "quick-roundtrip-dd", "quick-lifetime-f64"):
        assert (out / store / "manifest.json").is_file()
        assert str(out / store) in text
    assert "100%" in r.stderr  # progress bars go to stderr


def test_plot_lifetime_map_of_the_demo_store(quick_demo, tmp_path):
    out, r = quick_demo
    assert r.returncode == 0, r.stderr
    png = tmp_path / "life.png"
    assert main(["plot", str(out / "quick-lifetime-f64"), "--kind", "lifetime", "-o", str(png),
                 "--size", "600x700"]) == 0
    assert _png_size(png) == (600, 700)
    hist = tmp_path / "life-hist.png"
    assert main(["plot", str(out / "quick-lifetime-f64"), "--kind", "lifetime-histogram", "-o", str(hist)]) == 0
    assert _png_size(hist)[0] > 0


# ---------------------------------------------------------------------------------------------------
# sweep: Ctrl-C keeps the finished chunks, --resume completes the store


def test_sweep_sigint_then_resume(tmp_path, capsys):
    cfg = _sweep_toml(tmp_path / "ff.toml", "ff-store", nx=4, ny=7, t=3, precision="dd", chunk_size=2, threads=1)
    store = tmp_path / "ff-store"
    members = len(loschmidt.ics.free_fall_grid(4, 7))
    code = "import sys; from loschmidt.cli import main; sys.exit(main(sys.argv[1:]))"
    proc = subprocess.Popen([sys.executable, "-c", code, "sweep", str(cfg), "--no-progress"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=dict(os.environ, PYTHONWARNINGS="error"))
    try:
        deadline = time.monotonic() + 120
        while not list((store / "chunks").glob("chunk-*.parquet")):
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "no chunk finished in time"
            time.sleep(0.05)
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 130, err
    assert "--resume" in err
    done = len(list((store / "chunks").glob("chunk-*.parquet")))
    assert 1 <= done < -(-members // 2)

    assert main(["sweep", str(cfg), "--no-progress"]) == 1  # refuses to add to a store without --resume
    assert "--resume" in capsys.readouterr().err

    r = _cli("sweep", str(cfg), "--resume", "--threads", "2", "--no-progress")
    assert r.returncode == 0, r.stderr
    assert f"{members} of {members}" in r.stdout
    from loschmidt.report import load_results

    df = load_results(store)
    assert sorted(df["member"]) == list(range(members))
    ens = loschmidt.ics.free_fall_grid(4, 7)
    for i in (0, members - 1):  # the resumed store holds the bits a plain round trip gives
        rt = loschmidt.roundtrip(ens.system(i, "dd"), 3, method="chain")
        assert float(df["delta"][i]) == rt.delta


# ---------------------------------------------------------------------------------------------------
# configuration errors are named by section and key


@pytest.mark.parametrize(
    "edit, words",
    [
        (("tol = 1e-20", "tolerance = 1e-20"), ["[task]", "'tolerance'"]),
        (('precision = "f64"', 'precision = "f32"'), ["[task] precision", "f32"]),
        (("nx = 4", "nx = 0"), ["[ensemble] nx"]),
        (("nx = 4", "nx = 4\nnz = 3"), ["[ensemble]", "'nz'", "free-fall-grid"]),
        (("[units]", "[unit]"), ["unknown section [unit]"]),
        (('length = "pc"', 'length = "furlong"'), ["[units] length"]),
        (("tol = 1e-20", "tol = 1e-40"), ["[task]", "tol"]),
    ],
)
def test_bad_sweep_config_names_the_key(tmp_path, capsys, edit, words):
    cfg = _sweep_toml(tmp_path / "c.toml", "s", nx=4, ny=7, t=1, precision="f64", chunk_size=4,
                      extra="tol = 1e-20\n" if "tol" in edit[0] else "")
    text = cfg.read_text()
    assert edit[0] in text
    cfg.write_text(text.replace(edit[0], edit[1], 1))
    assert main(["sweep", str(cfg), "--no-progress"]) == 2
    err = capsys.readouterr().err
    assert str(cfg) in err
    for w in words:
        assert w in err, err
    assert not (tmp_path / "s" / "chunks").exists() or not list((tmp_path / "s" / "chunks").iterdir())


def test_bad_config_in_a_subprocess(tmp_path):
    cfg = tmp_path / "run.toml"
    cfg.write_text('[system]\nfamily = "pythagorean"\n[run]\nt = 1\nmethod = "leapfrog"\n')
    r = _cli("run", str(cfg))
    assert r.returncode == 2
    assert "[run] method" in r.stderr and "leapfrog" in r.stderr
    cfg.write_text('[system]\nfamily = "pythagorean"\nmasses = [1, 2, 3]\n[run]\nt = 1\n')
    r = _cli("run", str(cfg))
    assert r.returncode == 2 and "[system] unknown key 'masses'" in r.stderr


# ---------------------------------------------------------------------------------------------------
# plot and report


def test_plot_map_is_a_png_of_the_asked_size(small_store, tmp_path):
    png = tmp_path / "map.png"
    r = _cli("plot", str(small_store), "--kind", "map", "-o", str(png), "--size", "800x600")
    assert r.returncode == 0, r.stderr
    assert _png_size(png) == (800, 600)


@pytest.mark.parametrize("kind", ["delta-histogram", "orbit", "amplification"])
def test_plot_other_kinds(small_store, tmp_path, kind):
    png = tmp_path / f"{kind}.png"
    assert main(["plot", str(small_store), "--kind", kind, "-o", str(png), "--member", "3", "--dpi", "100"]) == 0
    w, h = _png_size(png)
    assert w >= 400 and h >= 300


def test_plot_wrong_kind_for_the_store(small_store, tmp_path, capsys):
    assert main(["plot", str(small_store), "--kind", "lifetime", "-o", str(tmp_path / "x.png")]) == 1
    assert "lifetime" in capsys.readouterr().err


def test_report_is_self_contained_html(small_store, tmp_path):
    page = tmp_path / "report.html"
    r = _cli("report", str(small_store), "-o", str(page))
    assert r.returncode == 0, r.stderr
    html = page.read_text()
    assert html.startswith("<!DOCTYPE html>")
    images = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', html)
    assert len(images) >= 2
    for b64 in images:
        assert base64.b64decode(b64)[:8] == _PNG_SIGNATURE
    assert not re.search(r'(src|href)="(https?:|file:|/)', html)  # nothing outside the page
    # the settings that produced the store, from its manifest
    for words in ("roundtrip", "chain", "f64", "free_fall_grid", "21 members"):
        assert words in html


# ---------------------------------------------------------------------------------------------------
# run, bench, version


def test_run_pythagorean_roundtrip():
    r = _cli("run", "--family", "pythagorean", "--t", "70", "--precision", "dd", "--method", "chain",
             "--roundtrip", "--no-progress")
    assert r.returncode == 0, r.stderr
    # Szebehely & Peters 1967: the mass-3 body (body 0, counted from 0) escapes; bodies 1 and 2
    # (masses 4, 5) stay bound
    assert "outcome at t = 70: escape of body 0; binary of bodies 1 and 2" in r.stdout
    m = re.search(r"round trip delta ([\d.e+-]+)", r.stdout)
    assert m and float(m.group(1)) < 1e-10
    assert "reversible" in r.stdout


def test_run_config_with_orbit_plot(tmp_path, capsys):
    cfg = tmp_path / "eight.toml"
    cfg.write_text('[system]\nfamily = "figure-eight"\n[run]\nt = "6.32591398"\nprecision = "dd"\n'
                   'roundtrip = true\noutputs = 200\nplot = "eight.png"\n')
    assert main(["run", str(cfg), "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert "bound" in out
    assert _png_size(tmp_path / "eight.png")[0] > 0  # relative to the directory the command runs in (tmp_path)


def test_bench_outside_a_source_checkout():
    code = ("import sys, loschmidt.cli as c; c._find_benchmarks = lambda: None; "
            "sys.exit(c.main(['bench', '--quick']))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 2
    assert "python -m benchmarks" in r.stderr


def test_version_and_help(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == loschmidt.__version__
    assert main([]) == 2


def test_sweep_file_with_post_newtonian_terms(tmp_path):
    # The speed of light from the [units] section: 1e6 solar masses and a parsec (IAU/CODATA
    # constants in loschmidt.units).
    cfg = tmp_path / "pn.toml"
    cfg.write_text(
        """
[ensemble]
family = "free-fall-grid"
nx = 3
ny = 4

[task]
name = "lifetime"
t_max = 20
precision = "f64"
method = "chain"
pn = [1, 2, 2.5]
c = "units"

[store]
path = "pn-store"
chunk_size = 4

[units]
mass = 1e6
length = "pc"
"""
    )
    r = _cli("sweep", str(cfg), "--no-progress")
    assert r.returncode == 0, r.stderr
    df = loschmidt.read_store(tmp_path / "pn-store")
    assert set(df["outcome"]) <= {"merger", "escape", "bound", "undecided"}
    manifest = json.loads((tmp_path / "pn-store" / "manifest.json").read_text())
    c = float(manifest["definition"]["options"]["c"])
    assert abs(c / loschmidt.units.Scale(mass=1e6, length=loschmidt.units.PARSEC).c - 1) < 1e-15
    bad = cfg.read_text().replace("pn = [1, 2, 2.5]", "pn = [3]")
    cfg.write_text(bad)
    r = _cli("sweep", str(cfg), "--no-progress")
    assert r.returncode == 2 and "pn" in r.stderr
