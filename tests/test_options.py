"""One options path: the same error for an option a method refuses, from every entry point.

The three drift cases of issue 16 (``max_order=2``; ``regularization`` with gbs; radii with gbs)
are pinned through ``integrate``, ``roundtrip_batch``, ``Sweep`` and the command line: each refuses
with the same message, before any work or store write. The expected messages are written out here
(the contract), not read from loschmidt.options.
"""

from __future__ import annotations

from pathlib import Path

import pytest

import loschmidt
from loschmidt import ics, options
from loschmidt.cli import main

#: The drift cases: (options, method, the message every entry point gives).
DRIFT = {
    "max_order=2": ({"max_order": 2}, "gbs", "max_order: must be at least 3, got 2"),
    "regularization with gbs": ({"regularization": "logarithmic"}, "gbs",
                                "regularization: not accepted by method 'gbs' (only by method 'chain')"),
    "radii with gbs": ({"radii": [0.01, 0.01, 0.01]}, "gbs",
                       "radii: not accepted by method 'gbs' (only by method 'chain')"),
}


def _integrate(opts: dict, method: str) -> None:
    s = ics.pythagorean("f64")
    opts = dict(opts)
    if "radii" in opts:  # a single System carries its radii
        s = s.with_radii(opts.pop("radii"))
    loschmidt.integrate(s, 1, method=method, **opts)


def _batch(opts: dict, method: str) -> None:
    s = ics.pythagorean("f64")
    loschmidt.roundtrip_batch([3, 4, 5], s.positions[None], s.velocities[None], 1, method=method, precision="f64",
                              threads=1, **opts)


def _sweep(opts: dict, method: str, store: Path) -> None:
    loschmidt.Sweep(ics.free_fall_grid(2, 2), task="roundtrip", store=store, t=1, precision="f64", method=method,
                    **opts)


def _toml_value(v) -> str:
    if isinstance(v, str):
        return f'"{v}"'
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return repr(v)


def _cli_sweep(opts: dict, method: str, tmp: Path, capsys) -> str:
    store = tmp / "cli-store"
    lines = "\n".join(f"{k} = {_toml_value(v)}" for k, v in opts.items())
    cfg = tmp / "sweep.toml"
    cfg.write_text(f"""
[ensemble]
family = "free-fall-grid"
nx = 2
ny = 2

[task]
name = "roundtrip"
t = 1
precision = "f64"
method = "{method}"
{lines}

[store]
path = "{store}"
""")
    code = main(["sweep", str(cfg), "--no-progress"])
    err = capsys.readouterr().err
    assert code != 0, err
    assert not store.exists(), "the store was written before the options were checked"
    return err


def _cli_run(opts: dict, method: str, tmp: Path, capsys) -> str:
    opts = dict(opts)
    radii = opts.pop("radii", None)
    system = ('family = "pythagorean"' if radii is None else
              'family = "custom"\nmasses = [3, 4, 5]\npositions = [[1, 3], [-2, -1], [1, -1]]\n'
              f'velocities = [[0, 0], [0, 0], [0, 0]]\nradii = {_toml_value(radii)}')
    lines = "\n".join(f"{k} = {_toml_value(v)}" for k, v in opts.items())
    cfg = tmp / "run.toml"
    cfg.write_text(f"""
[system]
{system}

[run]
t = 1
precision = "f64"
method = "{method}"
{lines}
""")
    code = main(["run", str(cfg), "--no-progress"])
    err = capsys.readouterr().err
    assert code != 0, err
    return err


@pytest.mark.parametrize("case", sorted(DRIFT))
def test_drift_cases_behave_identically_everywhere(case, tmp_path, capsys) -> None:
    opts, method, message = DRIFT[case]
    for call in (_integrate, _batch):
        with pytest.raises(ValueError) as info:
            call(opts, method)
        assert message in str(info.value), (call.__name__, str(info.value))
    store = tmp_path / "store"
    with pytest.raises(ValueError) as info:
        _sweep(opts, method, store)
    assert message in str(info.value)
    assert not store.exists(), "Sweep wrote its store before checking the options"
    assert message in _cli_sweep(opts, method, tmp_path, capsys)
    assert message in _cli_run(opts, method, tmp_path, capsys)


def test_radii_carried_by_an_ensemble_are_refused_with_gbs(tmp_path) -> None:
    ens = ics.free_fall_grid(2, 2)
    with_radii = loschmidt.Ensemble(ens.masses, ens.positions, ens.velocities, radii=[0.01] * 3)
    message = DRIFT["radii with gbs"][2]
    with pytest.raises(ValueError, match=message.replace("(", r"\(").replace(")", r"\)")):
        loschmidt.roundtrip_batch(with_radii, 1, method="gbs", precision="f64", threads=1)
    with pytest.raises(ValueError, match="radii: not accepted by method 'gbs'"):
        loschmidt.Sweep(with_radii, task="roundtrip", store=tmp_path / "s", t=1, precision="f64", method="gbs")
    assert not (tmp_path / "s").exists()


def test_the_chain_method_still_takes_them() -> None:
    s = ics.pythagorean("f64")
    r = loschmidt.integrate(s.with_radii([1e-3] * 3), 1, method="chain", regularization="time_transformed")
    assert r.success
    b = loschmidt.roundtrip_batch([3, 4, 5], s.positions[None], s.velocities[None], 1, method="chain",
                                  precision="f64", threads=1, radii=[1e-3] * 3, regularization="time_transformed")
    assert bool(b.success.all())


#: A valid value of each option that some method refuses.
PROBE = {"fixed_step": 0.1, "stop": "escape", "check_every": 5, "distance_factor": 5.0,
         "regularization": "logarithmic", "pn": (1,), "c": 100, "merger_factor": 4.0, "radii": [0.1, 0.1, 0.1]}


def test_every_refused_option_gets_the_same_message_from_each_entry() -> None:
    s = ics.pythagorean("f64")
    seen = 0
    for name, option in options.OPTIONS.items():
        for method in sorted(set(options.METHODS) - set(option.methods)):
            given = {name: PROBE[name]}
            expected = f"{name}: not accepted by method {method!r} (only by method {option.methods[0]!r})"
            calls = []
            if "integrate" in option.entries:
                calls.append(lambda: loschmidt.integrate(s, 1, method=method, **given))
            if "batch" in option.entries:
                calls.append(lambda: _batch(given, method))
            for call in calls:
                with pytest.raises(ValueError) as info:
                    call()
                assert str(info.value) == expected
                seen += 1
    assert seen >= 9  # radii (batch), regularization, pn, c, merger_factor (integrate and batch)


def test_lyapunov_takes_only_its_options() -> None:
    s = ics.pythagorean("f64")
    with pytest.raises(TypeError, match="regularization: not an option of lyapunov"):
        loschmidt.lyapunov(s, 1, regularization="logarithmic")
    with pytest.raises(ValueError, match="max_order: must be at least 3, got 2"):
        loschmidt.lyapunov(s, 1, max_order=2)


def test_manifest_form_of_a_plain_definition_is_unchanged() -> None:
    """Sweep manifests hash these options: definitions made before the options table must keep
    their form (regression value: the keys and values batch_options recorded at 5b74d8f)."""
    o = loschmidt.batch.batch_options("1", precision="f64", method="chain")
    assert o == {"t": "1e+0", "precision": "f64", "method": "chain", "tol": 1e-13, "atol": 1e-13, "max_steps": None,
                 "max_wall_time": None, "max_order": None, "initial_step": None}
    o = loschmidt.batch.batch_options("1", precision="dd", method="chain", pn=[2, 1], c=100, radii=[0.1, 0.2, 0.3],
                                      regularization="time_transformed", max_steps=7)
    assert o["pn"] == [1, 2] and float(o["c"]) == 100
    assert o["radii"] == [0.1, 0.2, 0.3] and o["regularization"] == "time_transformed" and o["max_steps"] == 7
    assert "merger_factor" not in o and "fixed_step" not in o


def test_python_and_engine_defaults_agree() -> None:
    """Unset options keep the engine's defaults; the Python constants that name them (used by
    loschmidt.outcome and the docs) must be the same numbers."""
    from loschmidt import _core

    assert _core.Options().distance_factor == options.DEFAULT_DISTANCE_FACTOR
    assert _core.Options().max_steps == options.DEFAULT_MAX_STEPS
    assert _core.ChainOptions().merger_factor == options.DEFAULT_MERGER_FACTOR
    assert str(_core.Options().check_every) == options.OPTIONS["check_every"].default
    assert _core.ChainOptions().regularization == options.REGULARIZATIONS.index("logarithmic")


def test_precision_table_comes_from_the_engine() -> None:
    """precision.TABLE is _core.precisions (scalar_traits). The unit roundoff of a p-bit significand
    is 2^-p (Higham 2002, Accuracy and Stability of Numerical Algorithms, sec. 2.1): 53, 106 and
    212 bits for double, double-double and quad-double (Hida, Li & Bailey 2001); the operation
    bounds 2^-103 (dd) and 2^-208 (qd) are those the C++ tests enforce (traits.hpp). Default
    tolerances: regression values of DEFAULT_TOLERANCE before the table moved to C++."""
    from loschmidt import _core, precision

    assert [row[0] for row in _core.precisions] == list(precision.PRECISIONS) == ["f64", "f64c", "dd", "qd"]
    want = {"f64": (1, 53, 2.0**-53, 1e-13), "f64c": (1, 53, 2.0**-53, 1e-14), "dd": (2, 106, 2.0**-103, 1e-28),
            "qd": (4, 212, 2.0**-208, 1e-56)}
    for name, (limbs, bits, op, tol) in want.items():
        p = precision.info(name)
        assert (p.limbs, p.bits, p.operation_error, p.default_tolerance) == (limbs, bits, op, tol)
        assert precision.epsilon(name) == p.unit_roundoff == 2.0**-bits
        assert loschmidt.DEFAULT_TOLERANCE[name] == tol
    assert precision.info("dd").order_limit == 18 and precision.info("qd").order_limit == 32


def test_core_stubs_match_the_extension() -> None:
    """_core.pyi (shipped with py.typed) names every public attribute of the compiled module, and
    nothing it lacks; the bound classes' fields are those of the stub."""
    import ast

    from loschmidt import _core

    stub = ast.parse((Path(loschmidt.__file__).parent / "_core.pyi").read_text(encoding="utf-8"))
    names, fields = set(), {}
    for node in stub.body:
        if isinstance(node, (ast.FunctionDef, ast.ClassDef)):
            names.add(node.name)
        elif isinstance(node, ast.AnnAssign):
            names.add(node.target.id)
        elif isinstance(node, ast.Assign):
            names.update(t.id for t in node.targets)
        if isinstance(node, ast.ClassDef):
            fields[node.name] = {n.target.id if isinstance(n, ast.AnnAssign) else n.name for n in node.body
                                 if isinstance(n, (ast.AnnAssign, ast.FunctionDef)) and getattr(n, "name", "") != "__init__"}
    public = {n for n in dir(_core) if not n.startswith("_")} | {"__version__"}
    assert public == names - {"Limbs"}, (public ^ (names - {"Limbs"}))
    for cls, want in fields.items():
        have = {n for n in dir(getattr(_core, cls)) if not n.startswith("_")}
        assert have == want, (cls, have ^ want)
