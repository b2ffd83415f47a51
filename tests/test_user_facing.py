"""What a user sees must be true (issue 20): re-run members, defaults, labels, numbering, exit codes.

Pictures are checked through their matplotlib objects (plotted data, labels, text extents after a
draw), never through file sizes. Physical facts come from outside the program: the figure-eight is a
bound non-hierarchical choreography (Chenciner & Montgomery 2000), the Lagrange triangle a
homographic solution with no distinguished pair (Lagrange 1772), two bodies are one Kepler pair.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest

import loschmidt
from loschmidt import cli, ics, plots
from loschmidt.cli import main


def _draw(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return canvas.get_renderer()


def _tick_labels(axis):
    """The tick labels an axis draws: those of ticks inside its view interval."""
    lo, hi = sorted(axis.get_view_interval())
    span = hi - lo
    return [t for loc, t in zip(axis.get_majorticklocs(), axis.get_majorticklabels())
            if lo - 1e-9 * span <= loc <= hi + 1e-9 * span and t.get_visible() and t.get_text().strip()]


def _texts(fig):
    """Every drawn, non-empty text of the figure (titles, labels, tick labels, legends)."""
    from matplotlib.text import Text

    ticks = set()
    drawn = []
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            ticks.update(id(t) for t in axis.get_majorticklabels() + axis.get_minorticklabels())
            drawn += _tick_labels(axis)
    return drawn + [t for t in fig.findobj(Text) if id(t) not in ticks and t.get_visible() and t.get_text().strip()]


def _assert_readable(fig) -> None:
    """No text leaves the figure and no two tick labels of one axis overlap."""
    renderer = _draw(fig)
    width, height = fig.bbox.width, fig.bbox.height
    for t in _texts(fig):
        box = t.get_window_extent(renderer)
        assert box.x0 >= -1 and box.y0 >= -1 and box.x1 <= width + 1 and box.y1 <= height + 1, (
            f"text {t.get_text()!r} leaves the figure: {box} in {width} x {height}")
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            labels = _tick_labels(axis)
            boxes = [t.get_window_extent(renderer) for t in labels]
            for k in range(len(boxes)):
                for j in range(k + 1, len(boxes)):
                    assert not boxes[k].overlaps(boxes[j]), (
                        f"tick labels {labels[k].get_text()!r} and {labels[j].get_text()!r} run together")


def _grid_table(nx: int = 10, ny: int = 17, seed: int = 0) -> dict:
    ens = ics.free_fall_grid(nx, ny)
    rng = np.random.default_rng(seed)
    p = ens.params
    return {"x": p["x"], "y": p["y"], "ix": p["ix"], "iy": p["iy"],
            "delta": 10.0 ** rng.uniform(-25, -2, len(ens)), "status": np.array(["success"] * len(ens), dtype=object)}


# ---------------------------------------------------------------------------------------------------
# item 1: a member drawn again runs with every one of its store's settings


def test_rerun_options_carry_every_recorded_option():
    manifest = {"definition": {"task": "roundtrip", "precision": "f64", "options": {
        "t": "2", "precision": "f64", "method": "chain", "tol": 1e-12, "atol": 1e-14, "max_steps": 5000,
        "max_wall_time": 30.0, "max_order": 8, "initial_step": 1e-3, "regularization": "time_transformed",
        "pn": [1, 2.5], "c": "15", "merger_factor": 4.0, "radii": [0.01, 0.02, 0.03]}}}
    o = loschmidt.report.rerun_options(manifest)
    assert o.integrate == {"method": "chain", "tol": 1e-12, "atol": 1e-14, "max_steps": 5000, "max_wall_time": 30.0,
                           "max_order": 8, "initial_step": 1e-3, "regularization": "time_transformed",
                           "pn": (1, 2.5), "c": "15", "merger_factor": 4.0}
    assert o.radii == [0.01, 0.02, 0.03] and o.precision == "f64" and o.t == "2"
    manifest["definition"]["options"]["softening"] = 0.1  # an option a rerun would not know
    with pytest.raises(ValueError, match="softening"):
        loschmidt.report.rerun_options(manifest)


def test_orbit_plot_of_a_member_follows_the_store(tmp_path, monkeypatch):
    # post-Newtonian free fall with a small c: merger distance 8 * 2 G (m_i + m_j) / c^2 = 0.14, which
    # most close encounters of free fall from rest reach within t = 2
    sweep = loschmidt.Sweep(ics.free_fall_grid(2, 3), task="integrate", store=tmp_path / "pn", chunk_size=4,
                            t=2, precision="f64", method="chain", pn=(1, 2, 2.5), c=15, threads=1)
    sweep.run(progress=False)
    df = sweep.results(columns=["member", "status", "t"])
    merged = np.flatnonzero(np.asarray(df["status"]) == "merger")
    assert merged.size, "the test needs a member that merges"
    member = int(np.asarray(df["member"])[merged[0]])
    final = sweep.systems(member)["final"]
    assert final.time < 2
    figures = []
    monkeypatch.setattr(plots, "save", lambda fig, path, **kw: figures.append(fig) or Path(path))
    assert main(["plot", str(tmp_path / "pn"), "--kind", "orbit", "--member", str(member), "-o",
                 str(tmp_path / "o.png")]) == 0
    (fig,) = figures
    ax = fig.axes[0]
    assert "merger" in ax.get_title()
    paths = [line for line in ax.get_lines() if len(line.get_xdata()) > 2]
    assert len(paths) == 3
    for body, line in enumerate(paths):
        end = np.array([line.get_xdata()[-1], line.get_ydata()[-1]])
        # the rerun lands on output times, so it ends at the same merger to the tolerance, not bit for bit
        np.testing.assert_allclose(end, np.asarray(final.positions, dtype=float)[body, :2], atol=1e-6)


# ---------------------------------------------------------------------------------------------------
# item 2: the defaults work on free-fall triples, and a round trip says whether it came back


def test_default_method_finishes_free_fall_round_trips():
    ens = ics.free_fall_grid(3, 5)
    batch = loschmidt.roundtrip_batch(ens, 10, precision="f64", threads=2)
    assert batch.method == "chain"
    assert batch.success.all(), list(batch.status)
    rev = batch.reversible()
    assert rev.dtype == bool and rev.shape == (len(ens),)
    np.testing.assert_array_equal(rev, np.asarray(batch.delta) <= loschmidt.chaos.REVERSIBLE_THRESHOLD)
    assert "reversible=" in repr(batch)
    assert loschmidt.integrate(ics.plummer(12, seed=1, precision="f64"), 0.01).method == "gbs"  # many bodies


def test_resolve_method_rules():
    from loschmidt.options import CHAIN_MAX_BODIES, resolve_method

    assert resolve_method(None, 3) == "chain"
    assert resolve_method(None, CHAIN_MAX_BODIES + 1) == "gbs"
    assert resolve_method(None, 50, {"pn": [1], "c": 100}) == "chain"  # an option only chain takes
    assert resolve_method(None, 50, carries_radii=True) == "chain"       # radii only chain uses
    assert resolve_method(None, None) is None                            # bodies not known yet
    with pytest.raises(ValueError, match="method"):
        resolve_method("leapfrog", 3)
    # an escape stop works in both methods: the automatic choice keeps the chain for a triple
    r = loschmidt.integrate(ics.pythagorean("f64"), 5, stop="escape")
    assert r.method == "chain"


# ---------------------------------------------------------------------------------------------------
# item 3: the benchmark command says what it needs


def test_bench_names_the_missing_module(monkeypatch, capsys):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "scipy" else real(name, *a))
    assert main(["bench", "--quick"]) == 2
    err = capsys.readouterr().err
    assert "error:" in err and "scipy" in err and "ModuleNotFoundError" not in err


# ---------------------------------------------------------------------------------------------------
# items 4 and 5: the pictures at their default size


def test_single_map_at_default_size_keeps_title_and_labels():
    fig = plots.reversibility_map({"dd (double-double)": _grid_table()}, units=plots.axis_units(
        loschmidt.units.Scale(mass=1e6, length=loschmidt.units.PARSEC)))
    _assert_readable(fig)
    ax = fig.axes[0]
    assert ax.get_ylabel() == "y of body 2 at release [pc]"
    assert "Reversibility" in fig._suptitle.get_text()


def test_irreversible_cells_are_singled_out_with_a_legend():
    table = _grid_table()
    fig = plots.reversibility_map({"dd": table})
    ax = fig.axes[0]
    irreversible = int(np.count_nonzero(table["delta"] > loschmidt.chaos.REVERSIBLE_THRESHOLD))
    from matplotlib.collections import PatchCollection

    outlines = [c for c in ax.collections if isinstance(c, PatchCollection)]
    assert len(outlines) == 1 and len(outlines[0].get_paths()) == irreversible
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert legend == ["irreversible (delta > 1e-10)"]


def test_lifetime_histogram_counts_mergers_as_mergers():
    rng = np.random.default_rng(3)
    n = 120
    outcome = np.array(["merger"] * 63 + ["escape"] * 55 + ["bound"] * 2, dtype=object)
    lifetime = np.concatenate([10.0 ** rng.uniform(-1, 3.3, 118), [np.nan, np.nan]])
    table = {"lifetime": lifetime, "outcome": outcome, "status": np.array(["success"] * n, dtype=object)}
    fig = plots.lifetime_histogram({"PN": table}, units=plots.axis_units(
        loschmidt.units.Scale(mass=1e6, length=loschmidt.units.PARSEC)))
    ax = fig.axes[0]
    (text,) = [t.get_text() for t in ax.get_legend().get_texts()]
    assert text == "PN: 55 escaped, 63 merged, 2 still bound at the end"
    assert ax.get_xlabel() == "time to the first escape or merger [kyr]"
    _assert_readable(fig)


def test_lifetime_map_colour_bar_ticks_do_not_run_together():
    table = _grid_table()
    rng = np.random.default_rng(5)
    table["lifetime"] = 10.0 ** rng.uniform(-1.5, 3.5, len(table["x"]))
    fig = plots.lifetime_map({"Newtonian": table, "post-Newtonian": table})
    _assert_readable(fig)


def test_map_kind_suggested_for_each_store(tmp_path):
    from loschmidt.report import map_kind

    assert map_kind({"definition": {"task": "lifetime"}}) == "lifetime"
    assert map_kind({"definition": {"task": "roundtrip"}}) == "map"
    import loschmidt.demo

    src = Path(loschmidt.demo.__file__).read_text()
    assert "--kind map -o map.png`)" not in src  # the demo no longer suggests --kind map for every store


# ---------------------------------------------------------------------------------------------------
# item 6: outcome wording


@pytest.mark.parametrize("system, hierarchical", [
    (ics.figure_eight("f64"), False),  # Chenciner & Montgomery 2000: a choreography, no distinguished pair
    # a quarter period on: no longer the collinear start with body 2 at the others' centre of mass
    (loschmidt.integrate(ics.figure_eight("f64"), 0.5).system, False),
    (ics.lagrange(precision="f64"), False),  # Lagrange 1772: an equilateral triangle, no distinguished pair
    (ics.hierarchical(dict(m1=1, m2=1, a=1, e=0), dict(m3=1, a=30, e=0.1), precision="f64"), True),
])
def test_bound_triples_are_called_what_they_are(system, hierarchical):
    o = loschmidt.outcome(system)
    assert o.kind == "bound"
    assert o.hierarchical is hierarchical
    assert ("hierarchical triple" in o.reason and "non-hierarchical" not in o.reason) is hierarchical
    assert "hierarchically bound subsystem" not in o.reason


def test_two_bodies_are_a_pair(capsys):
    o = loschmidt.outcome(ics.binary(1, 1, 1, 0.5, precision="f64"))
    assert o.kind == "bound" and o.reason == "a bound pair (a two-body orbit)" and not o.hierarchical


def test_cli_does_not_call_the_figure_eight_a_binary(capsys):
    assert main(["run", "--family", "figure-eight", "--t", "1", "--precision", "f64", "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert "binary of bodies" not in out and "non-hierarchical" in out


# ---------------------------------------------------------------------------------------------------
# item 7: bodies counted from 0 everywhere


def test_bodies_are_counted_from_zero_in_plots_and_cli(capsys):
    s = ics.figure_eight("f64")
    r = loschmidt.integrate(s, 1, times=[0.5, 1])
    fig = plots.orbit_plot(r.trajectory, masses=s.masses)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert [lab.split(" (")[0] for lab in labels] == ["body 0", "body 1", "body 2"]
    fig = plots.reversibility_map(_grid_table(3, 5))
    texts = [t.get_text() for t in _texts(fig)]
    assert "body 1" in texts and "body 2" not in texts  # body 1 sits at (1/2, 0) (ics.free_fall_grid)
    # the CLI names the escaper as the API does
    assert main(["run", "--family", "pythagorean", "--t", "70", "--precision", "f64", "--method", "chain",
                 "--no-progress"]) == 0
    out = capsys.readouterr().out
    fwd = loschmidt.integrate(ics.pythagorean("f64"), 70, method="chain")
    o = loschmidt.outcome(fwd.system)
    assert o.kind == "escape" and f"escape of body {o.escaper}" in out


# ---------------------------------------------------------------------------------------------------
# item 8: drawing does not change the reported run


def test_run_with_plot_reports_the_same_run(tmp_path, capsys):
    base = ["run", "--family", "pythagorean", "--t", "20", "--precision", "f64", "--method", "chain", "--roundtrip",
            "--no-progress"]
    assert main(base) == 0
    plain = capsys.readouterr().out
    assert main(base + ["--plot", str(tmp_path / "o.png")]) == 0
    drawn = capsys.readouterr().out
    table = lambda text: [ln for ln in text.splitlines() if ln.startswith(("forward", "backward", "round trip"))]  # noqa: E731
    strip = lambda ln: re.sub(r"\s\d+\.\d{3}s\s", " ", ln)  # noqa: E731 - wall time differs
    assert [strip(x) for x in table(plain)] == [strip(x) for x in table(drawn)]
    assert "second run" in drawn and "output times" in drawn


# ---------------------------------------------------------------------------------------------------
# item 9: exit codes and the inputs the API accepts


def test_missing_store_is_bad_usage(tmp_path, capsys):
    assert main(["plot", str(tmp_path / "nowhere"), "--kind", "map", "-o", str(tmp_path / "m.png")]) == 2
    assert "error:" in capsys.readouterr().err
    assert main(["report", str(tmp_path / "nowhere"), "-o", str(tmp_path / "r.html")]) == 2
    assert "error:" in capsys.readouterr().err
    assert not (tmp_path / "m.png").exists() and not (tmp_path / "r.html").exists()


def test_negative_t_integrates_backward(capsys):
    assert main(["run", "--family", "figure-eight", "--t", "-0.5", "--precision", "f64", "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"^forward\s+success\s+-0\.5\s", out, flags=re.M), out
    assert main(["run", "--family", "figure-eight", "--t", "0", "--no-progress"]) == 2


def test_free_fall_run_file_takes_decimal_strings(tmp_path, capsys):
    cfg = tmp_path / "ff.toml"
    cfg.write_text('[system]\nfamily = "free-fall"\nx = "0.025"\ny = "0.3821"\n[run]\nt = 1\nprecision = "dd"\n')
    assert main(["run", str(cfg), "--no-progress"]) == 0
    assert "free-fall" in capsys.readouterr().out


# ---------------------------------------------------------------------------------------------------
# item 10: the sweep's bar counts members kept


def _energies_one_by_one(chunk, options):
    """A sweep task that reports each member as it finishes, as the engine's batches do."""
    progress = options.get("progress")
    for k in range(1, len(chunk) + 1):
        if progress is not None:
            progress(k)
    return {"energy": chunk.energy()}


def test_sweep_bar_counts_members_kept(tmp_path, monkeypatch):
    import tqdm as tqdm_module

    seen: list[int] = []

    class Recording(tqdm_module.tqdm):
        def update(self, n=1):
            out = super().update(n)
            seen.append(self.n)
            return out

    monkeypatch.setattr(tqdm_module, "tqdm", Recording)
    loschmidt.register_task("issue20_energies", _energies_one_by_one, replace=True)
    ens = ics.free_fall_grid(3, 5)
    loschmidt.Sweep(ens, task="issue20_energies", store=tmp_path / "s", chunk_size=4).run(progress=True)
    assert seen and seen[-1] == len(ens)
    assert all(n % 4 == 0 or n == len(ens) for n in seen), seen  # whole chunks only: members kept


# ---------------------------------------------------------------------------------------------------
# item 11: example files write where the command runs


def test_example_files_write_where_the_command_runs(tmp_path, monkeypatch):
    examples = Path(__file__).resolve().parents[1] / "examples"
    monkeypatch.chdir(tmp_path)
    run = cli.run_config(examples / "run_pythagorean.toml")
    assert Path(run["run"]["plot"]).parent == tmp_path
    for name in ("sweep_free_fall.toml", "sweep_relativistic_triples.toml"):
        cfg = cli.sweep_config(examples / name)
        assert Path(cfg["store"]["path"]).parent == tmp_path.resolve()


# ---------------------------------------------------------------------------------------------------
# item 12: the report


def test_report_names_sections_apart_and_prints_numbers_short(tmp_path):
    from loschmidt.demo import write_settings

    stores = []
    for task, opts in (("roundtrip", {"t": 1}), ("lifetime", {"t_max": 2})):
        path = tmp_path / task
        loschmidt.Sweep(ics.free_fall_grid(1, 2), task=task, store=path, chunk_size=4, precision="f64",
                        threads=1, **opts).run(progress=False)
        write_settings(path, "f64 (double)", None)
        stores.append(path)
    out = loschmidt.report.write_report(stores, tmp_path / "r.html",
                                        sections=[("Irreversibility threshold", [("member", "0")])])
    page = out.read_text()
    heads = re.findall(r"<h2>(.*?)</h2>", page)
    assert len(heads) == len(set(heads)), heads
    assert "Irreversibility threshold" in heads
    assert "1.0e+0" not in page.split("<details>")[0]  # t = 1 shown as 1, the exact text stays in the manifest
    from loschmidt.report import _number_text

    assert _number_text("4.5713045779727362969424575567245483398437e+3") == "4571.30457797"
    assert _number_text("1.0e+1") == "10"


def test_every_panel_explains_its_flat_colours():
    table = _grid_table()
    life = dict(table)
    life["lifetime"] = np.where(np.arange(len(table["x"])) % 7 == 0, np.nan, 5.0 + np.arange(len(table["x"])))
    fig = plots.lifetime_map({"Newtonian": life, "post-Newtonian": life})
    for ax in fig.axes[:2]:
        assert [t.get_text() for t in ax.get_legend().get_texts()] == ["still bound at the end"]
    fig = plots.reversibility_map({"f64": table, "dd": table})
    for ax in fig.axes[:2]:
        assert ax.get_legend() is not None


def test_a_selection_of_members_remembers_their_numbers(tmp_path):
    from loschmidt.demo import _selection

    ens = ics.free_fall_grid(3, 5)
    picked = np.array([7, 2])
    sub = _selection(ens, picked)
    np.testing.assert_array_equal(sub.params["grid_member"], picked)
    np.testing.assert_array_equal(sub.positions, ens.positions[picked])
    sweep = loschmidt.Sweep(sub, task="integrate", store=tmp_path / "qd", t=0.1, precision="f64", threads=1)
    df = sweep.run(progress=False).results(columns=["member", "grid_member"])
    assert list(df["member"]) == [0, 1] and list(df["grid_member"]) == [7, 2]
