"""The ``loschmidt`` command line.

    loschmidt demo [--out DIR] [--quick]            the built-in scenario (about 2 CPU-minutes; --quick less)
    loschmidt run CONFIG.toml | --family NAME ...     one system: integrate or round trip, a table
    loschmidt sweep CONFIG.toml [--resume] [--scheduler ADDRESS] [--threads N]
    loschmidt plot STORE [STORE ...] --kind KIND -o FILE.png
    loschmidt report STORE [STORE ...] -o report.html
    loschmidt scatter STORE --speeds 0.3,1,3 [--members N] binary-single cross sections (resumable)
    loschmidt bench [--quick]                       the benchmarks of a source checkout

Configuration files are TOML (``tomllib``, or ``tomli`` before Python 3.11); every key is checked,
and an unknown or invalid one is reported with its section and a non-zero exit. Relative paths in a
configuration file (outputs: the store, the orbit picture) are taken from the directory the command
runs in, so running an example file never writes beside it. Exit codes: 0 done, 1 failed, 2 bad
usage or configuration, 130 interrupted by Ctrl-C (finished work is kept).
"""

from __future__ import annotations

import argparse
import math
import numbers
import sys
from pathlib import Path
from typing import Any, Callable, Mapping

__all__ = ["main", "ConfigError", "load_config"]

EXIT_OK, EXIT_FAILED, EXIT_USAGE, EXIT_INTERRUPTED = 0, 1, 2, 130


class ConfigError(ValueError):
    """A configuration file that cannot be used; the message names the file, section and key."""


class _Failed(Exception):
    """A command failed for a reason worth one line (exit code 1)."""


# ---------------------------------------------------------------------------------------------------
# TOML and validation


def _toml():
    if sys.version_info >= (3, 11):
        import tomllib

        return tomllib
    try:
        import tomli  # the same parser, for Python 3.10
    except ImportError:  # pragma: no cover - a dependency on 3.10
        raise _Failed("reading TOML on Python 3.10 needs the 'tomli' package (pip install tomli)") from None
    return tomli


def _is_number(v: Any) -> bool:
    return isinstance(v, numbers.Real) and not isinstance(v, bool)


def _check_int(v: Any, where: str, minimum: int = 1) -> int:
    if isinstance(v, bool) or not isinstance(v, int):
        raise ConfigError(f"{where}: expected an integer, got {v!r}")
    if v < minimum:
        raise ConfigError(f"{where}: must be at least {minimum}, got {v}")
    return v


def _check_number(v: Any, where: str, positive: bool = False, allow_string: bool = False) -> Any:
    """A real number (or, with ``allow_string``, a decimal string kept exact)."""
    if allow_string and isinstance(v, str):
        from decimal import Decimal, InvalidOperation

        try:
            d = Decimal(v.strip())
        except InvalidOperation:
            raise ConfigError(f"{where}: {v!r} is not a decimal number") from None
        if not d.is_finite() or (positive and d <= 0):
            raise ConfigError(f"{where}: must be a {'positive ' if positive else ''}finite number, got {v!r}")
        return v
    if not _is_number(v):
        kind = "a number or a decimal string" if allow_string else "a number"
        raise ConfigError(f"{where}: expected {kind}, got {v!r}")
    if not math.isfinite(float(v)) or (positive and v <= 0):
        raise ConfigError(f"{where}: must be a {'positive ' if positive else ''}finite number, got {v!r}")
    return v


def _check_str(v: Any, where: str, choices: tuple[str, ...] | None = None) -> str:
    if not isinstance(v, str):
        raise ConfigError(f"{where}: expected a string, got {v!r}")
    if choices is not None and v not in choices:
        raise ConfigError(f"{where}: expected one of {', '.join(choices)}; got {v!r}")
    return v


def _check_bool(v: Any, where: str) -> bool:
    if not isinstance(v, bool):
        raise ConfigError(f"{where}: expected true or false, got {v!r}")
    return v


def _check_numbers(v: Any, where: str, length: int | None = None) -> list:
    if not isinstance(v, list) or not all(_is_number(x) or isinstance(x, str) for x in v):
        raise ConfigError(f"{where}: expected a list of numbers, got {v!r}")
    if length is not None and len(v) != length:
        raise ConfigError(f"{where}: expected {length} numbers, got {len(v)}")
    for k, x in enumerate(v):
        _check_number(x, f"{where}[{k}]", allow_string=True)
    return v


def _check_vectors(v: Any, where: str) -> list:
    if not isinstance(v, list) or not v or not all(isinstance(r, list) and len(r) in (2, 3) for r in v):
        raise ConfigError(f"{where}: expected a list of [x, y] or [x, y, z] rows, got {v!r}")
    for k, row in enumerate(v):
        _check_numbers(row, f"{where}[{k}]")
    return v


def _precision(v: Any, where: str) -> str:
    from .precision import PRECISIONS

    return _check_str(v, where, PRECISIONS)


def _method(v: Any, where: str) -> str:
    from .integrate import METHODS

    return _check_str(v, where, METHODS)


def _length(v: Any, where: str) -> Any:
    if isinstance(v, str):
        return _check_str(v.lower(), where, ("pc", "au"))
    return _check_number(v, where, positive=True)


_pos_int = _check_int
_pos_num = lambda v, w: _check_number(v, w, positive=True)  # noqa: E731
_span = lambda v, w: _check_number(v, w, positive=True, allow_string=True)  # noqa: E731
_coordinate = lambda v, w: _check_number(v, w, positive=True, allow_string=True)  # noqa: E731


def _signed_span(v: Any, where: str) -> Any:
    """A time span of one run: negative integrates backward (as ``integrate`` does), zero is refused."""
    v = _check_number(v, where, allow_string=True)
    from decimal import Decimal

    if Decimal(str(v).strip()) == 0:
        raise ConfigError(f"{where}: must be non-zero (negative integrates backward), got {v!r}")
    return v


_real = lambda v, w: _check_number(v, w)  # noqa: E731
_seed = lambda v, w: _check_int(v, w, minimum=0)  # noqa: E731
_masses3 = lambda v, w: _check_numbers(v, w, 3)  # noqa: E731
_any_str = lambda v, w: _check_str(v, w)  # noqa: E731
_path = _any_str


def _integer(v: Any, where: str) -> int:
    """Any integer: its range is the option's to check (loschmidt.options), with the same message."""
    return _check_int(v, where, minimum=-(2**63))


#: How a TOML value of each kind of option (``Option.toml``) is read; the option's own check
#: (loschmidt.options) then runs where the option is used, with the message every entry point gives.
_TOML_KINDS: dict[str, Callable] = {
    "number": lambda v, w: _check_number(v, w),
    "integer": _integer,
    "string": lambda v, w: _check_str(v, w),
    "span": lambda v, w: _check_number(v, w, allow_string=True),
    "numbers": lambda v, w: _check_numbers(v, w),
    "orders": lambda v, w: _pn_orders(v, w),
    "boolean": _check_bool,
    "integers": lambda v, w: _check_integers(v, w),
}


def _check_integers(v: Any, where: str) -> list:
    if not isinstance(v, list):
        raise ConfigError(f"{where}: expected a list of integers, got {v!r}")
    return [_integer(x, f"{where}[{k}]") for k, x in enumerate(v)]


def _option_checks(names: tuple) -> dict[str, Callable]:
    """TOML checks of integration options, mechanically from their declarations."""
    from .options import OPTIONS

    return {name: (_light_speed if name == "c" else _TOML_KINDS[OPTIONS[name].toml]) for name in names}


def _integration(entry: str) -> dict[str, Callable]:
    """Keys of a [run] or [task] section that are integration options: precision, method and every
    option of the entry point (``loschmidt.options.names_for``)."""
    from .options import names_for

    return {"precision": _precision, "method": _method, **_option_checks(names_for(entry))}


#: Ensemble families of a sweep file: name -> (builder arguments and their checks).
_ENSEMBLES: dict[str, dict[str, Callable]] = {
    "free-fall-grid": {"nx": _pos_int, "ny": _pos_int, "masses": _masses3},
    "free-fall-random": {"n": _pos_int, "seed": _seed, "masses": _masses3},
    "virial-triples": {"n": _pos_int, "seed": _seed, "masses": _masses3, "energy": _real,
                       "angular_momentum": _real, "planar": _check_bool},
}
_ENSEMBLE_REQUIRED = {"free-fall-grid": ("nx", "ny"), "free-fall-random": ("n", "seed"), "virial-triples": ("n", "seed")}


def _pn_orders(v: Any, where: str) -> list:
    from .options import PN_ORDERS

    if not isinstance(v, list) or not v or not all(_is_number(x) for x in v):
        orders = ", ".join(f"{o:g}" for o in PN_ORDERS)
        raise ConfigError(f"{where}: expected a list of post-Newtonian orders among {orders}, got {v!r}")
    return v


def _light_speed(v: Any, where: str) -> Any:
    if v == "units":  # the speed of light in the [units] section's units (resolved with them)
        return v
    return _check_number(v, where, positive=True, allow_string=True)


def _lifetime_checks() -> dict[str, Callable]:
    from .tasks import LIFETIME_OPTIONS

    return {"t_max": _span, "interval": _span, "precision": _precision, "method": _method,
            **_option_checks(LIFETIME_OPTIONS)}


#: Tasks of a sweep file: name -> (option checks, required options).
_TASKS: dict[str, tuple[dict[str, Callable], tuple[str, ...]]] = {
    "roundtrip": ({"t": _span, **_integration("batch")}, ("t",)),
    "integrate": ({"t": _span, **_integration("batch")}, ("t",)),
    "amplification": ({"t": _span, "perturbation": _span, "body": lambda v, w: _check_int(v, w, minimum=0),
                       "axis": lambda v, w: _check_int(v, w, minimum=0), **_integration("batch")}, ("t",)),
    "lifetime": (_lifetime_checks(), ("t_max",)),
}

#: Single systems of a run file (and ``run --family``): name -> argument checks.
_SYSTEMS: dict[str, dict[str, Callable]] = {
    "pythagorean": {},
    "figure-eight": {},
    "lagrange": {"masses": _masses3, "side": _pos_num, "eccentricity": _real},
    "free-fall": {"x": _coordinate, "y": _coordinate, "masses": _masses3},
    "custom": {"masses": _check_numbers, "positions": _check_vectors, "velocities": _check_vectors,
               "radii": _check_numbers},
}
_SYSTEM_REQUIRED = {"free-fall": ("x", "y"), "custom": ("masses", "positions", "velocities")}

_UNITS = {"mass": _pos_num, "length": _length}

_SWEEP_SECTIONS = {
    "ensemble": None,  # checked by family
    "task": None,  # checked by task name
    "store": {"path": _path, "chunk_size": _pos_int},
    "execution": {"threads": _pos_int, "scheduler": _any_str, "max_pending": _pos_int},
    "units": _UNITS,
}
_RUN_SECTIONS = {
    "system": None,
    "run": {"t": _signed_span, "roundtrip": _check_bool, "outputs": _pos_int, "plot": _path, **_integration("integrate")},
    "units": _UNITS,
}


def _family(name: Any, where: str, known: Mapping[str, Any]) -> str:
    if not isinstance(name, str):
        raise ConfigError(f"{where}: expected a string, got {name!r}")
    canon = name.replace("_", "-").lower()
    if canon not in known:
        raise ConfigError(f"{where}: unknown {name!r}; expected one of {', '.join(known)}")
    return canon


def _check_table(table: Any, section: str, checks: Mapping[str, Callable], where: str, extra: str = "",
                 required: tuple[str, ...] = (), skip: tuple[str, ...] = ()) -> dict:
    if not isinstance(table, dict):
        raise ConfigError(f"{where}: [{section}] must be a table")
    out = {}
    for key, value in table.items():
        if key in skip:
            continue
        if key not in checks:
            known = ", ".join(sorted(set(checks) | set(skip)))
            raise ConfigError(f"{where}: [{section}] unknown key {key!r}{extra} (known keys: {known})")
        out[key] = checks[key](value, f"{where}: [{section}] {key}")
    for key in required:
        if key not in table:
            raise ConfigError(f"{where}: [{section}] {key} is required{extra}")
    return out


def _sections(data: dict, sections: Mapping[str, Any], where: str, required: tuple[str, ...]) -> None:
    for name, value in data.items():
        if name not in sections:
            raise ConfigError(f"{where}: unknown section [{name}] (known sections: {', '.join(sections)})")
        if not isinstance(value, dict):
            raise ConfigError(f"{where}: {name!r} must be a section ([{name}]), got {value!r}")
    for name in required:
        if name not in data:
            raise ConfigError(f"{where}: section [{name}] is required")


def load_config(path: Any) -> tuple[dict, str]:
    """Parse a TOML file; returns (data, text). ``ConfigError`` for unreadable or invalid TOML."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read ({exc.strerror or exc})") from None
    except UnicodeDecodeError as exc:  # TOML files are UTF-8
        raise ConfigError(f"{p}: not valid TOML (not UTF-8 text: {exc.reason} at byte {exc.start})") from None
    try:
        data = _toml().loads(text)
    except ValueError as exc:  # tomllib.TOMLDecodeError is a ValueError
        raise ConfigError(f"{p}: not valid TOML ({exc})") from None
    return data, text


def sweep_config(path: Any) -> dict:
    """Read and check a sweep file: {"ensemble": (family, args), "task": (name, options), "store": {...},
    "execution": {...}, "units": {...}, "text": str, "base": Path}."""
    data, text = load_config(path)
    where = str(path)
    _sections(data, _SWEEP_SECTIONS, where, ("ensemble", "task", "store"))
    ens = data["ensemble"]
    if "family" not in ens:
        raise ConfigError(f"{where}: [ensemble] family is required (one of {', '.join(_ENSEMBLES)})")
    family = _family(ens["family"], f"{where}: [ensemble] family", _ENSEMBLES)
    ens_args = _check_table(ens, "ensemble", _ENSEMBLES[family], where, f" for family {family!r}",
                            _ENSEMBLE_REQUIRED.get(family, ()), skip=("family",))
    task = data["task"]
    _register_tasks()
    from .sweep import available_tasks

    name = task.get("name", "roundtrip")
    if not isinstance(name, str) or name not in available_tasks():
        raise ConfigError(f"{where}: [task] name: unknown task {name!r}; expected one of {', '.join(available_tasks())}")
    if name in _TASKS:
        checks, required = _TASKS[name]
        options = _check_table(task, "task", checks, where, f" for task {name!r}", required, skip=("name",))
    else:  # a task registered by a plug-in: its own prepare() checks the options
        options = {k: v for k, v in task.items() if k != "name"}
    store = _check_table(data["store"], "store", _SWEEP_SECTIONS["store"], where, required=("path",))
    execution = _check_table(data.get("execution", {}), "execution", _SWEEP_SECTIONS["execution"], where)
    units = _check_table(data.get("units", {}), "units", _UNITS, where)
    if options.get("c") == "units":
        if not units:
            raise ConfigError(f"{where}: [task] c = \"units\" needs a [units] section (mass, length)")
        options["c"] = _scale(units, where).decimal("c")
    base = Path.cwd()  # outputs go where the command runs (a user-chosen folder), never beside the file
    store["path"] = str((base / store["path"]).resolve()) if not Path(store["path"]).is_absolute() else store["path"]
    return {"ensemble": (family, ens_args), "task": (name, options), "store": store, "execution": execution,
            "units": units, "text": text, "base": base}


def run_config(path: Any) -> dict:
    """Read and check a run file: {"system": (family, args), "run": {...}, "units": {...}, "base": Path}."""
    data, _text = load_config(path)
    where = str(path)
    _sections(data, _RUN_SECTIONS, where, ("system",))
    sysd = data["system"]
    if "family" not in sysd:
        raise ConfigError(f"{where}: [system] family is required (one of {', '.join(_SYSTEMS)})")
    family = _family(sysd["family"], f"{where}: [system] family", _SYSTEMS)
    args = _check_table(sysd, "system", _SYSTEMS[family], where, f" for family {family!r}",
                        _SYSTEM_REQUIRED.get(family, ()), skip=("family",))
    run = _check_table(data.get("run", {}), "run", _RUN_SECTIONS["run"], where)
    units = _check_table(data.get("units", {}), "units", _UNITS, where)
    base = Path.cwd()  # as for sweep files: outputs go where the command runs
    if "plot" in run and not Path(run["plot"]).is_absolute():
        run["plot"] = str(base / run["plot"])
    return {"system": (family, args), "run": run, "units": units, "base": base}


def _register_tasks() -> None:
    from .demo import register_lifetime_task

    register_lifetime_task()


# ---------------------------------------------------------------------------------------------------
# building things from checked settings


def _build_ensemble(family: str, args: dict, where: str) -> Any:
    from . import ics

    fn = {"free-fall-grid": ics.free_fall_grid, "free-fall-random": ics.free_fall_random,
          "virial-triples": ics.virial_triples}[family]
    try:
        return fn(**args)
    except (ValueError, TypeError) as exc:
        raise ConfigError(f"{where}: [ensemble] {exc}") from None


def _build_system(family: str, args: dict, precision: str, where: str) -> Any:
    from . import System, ics

    try:
        if family == "pythagorean":
            return ics.pythagorean(precision)
        if family == "figure-eight":
            return ics.figure_eight(precision)
        if family == "lagrange":
            return ics.lagrange(precision=precision, **args)
        if family == "free-fall":
            masses = args.get("masses", [1, 1, 1])
            x, y = args["x"], args["y"]
            return System(masses, [[-0.5, 0], [0.5, 0], [x, y]], [[0, 0]] * 3, precision=precision)
        return System(args["masses"], args["positions"], args["velocities"], precision=precision,
                      radii=args.get("radii"))
    except (ValueError, TypeError) as exc:
        raise ConfigError(f"{where}: [system] {exc}") from None


def _scale(units: Mapping[str, Any], where: str = "") -> Any:
    if not units:
        return None
    from .report import make_scale

    try:
        return make_scale(units.get("mass", 1.0), units.get("length", "pc"))
    except (ValueError, TypeError) as exc:  # e.g. a unit of time beyond the double range
        if not where:
            raise
        raise ConfigError(f"{where}: [units] {exc}") from None


def _units_note(units: Mapping[str, Any]) -> dict | None:
    return {"mass": units.get("mass", 1.0), "length": units.get("length", "pc")} if units else None


# ---------------------------------------------------------------------------------------------------
# commands


def _cmd_demo(args: argparse.Namespace) -> int:
    from . import demo

    if args.qd < 0:
        raise _Usage("--qd: expected a number of members >= 0")
    try:
        return demo.run_demo(args.out, quick=args.quick, qd_members=args.qd, progress=not args.no_progress,
                             threads=args.threads)
    except KeyboardInterrupt:
        print(f"\ninterrupted: the finished chunks are kept in {args.out}; run the same command again to "
              "continue where it stopped", file=sys.stderr)
        return EXIT_INTERRUPTED


def _cmd_run(args: argparse.Namespace) -> int:
    import numpy as np

    from . import integrate, outcome

    if args.config is not None and args.family is not None:
        raise _Usage("run: give a CONFIG.toml or --family, not both")
    if args.config is None and args.family is None:
        raise _Usage("run: give a CONFIG.toml or --family NAME")
    if args.config is not None:
        cfg = run_config(args.config)
        where = str(args.config)
    else:
        family = _family(args.family, "--family", _SYSTEMS)
        if family in _SYSTEM_REQUIRED:
            raise _Usage(f"--family {family}: needs a configuration file ([system] keys "
                         f"{', '.join(_SYSTEM_REQUIRED[family])})")
        cfg = {"system": (family, {}), "run": {}, "units": {}}
        where = "command line"
    run = dict(cfg["run"])
    for key in ("t", "precision", "method", "tol", "max_wall_time", "outputs", "plot"):
        value = getattr(args, key, None)
        if value is not None:
            run[key] = value
    if args.roundtrip:
        run["roundtrip"] = True
    if "t" not in run:
        raise _Usage("run: the time span is needed (--t T, or t in [run])")
    if args.t is not None:
        try:
            _signed_span(args.t, "--t")
        except ConfigError as exc:
            raise _Usage(str(exc)) from None
    from .options import names_for

    opts = {k: run[k] for k in ("method",) + names_for("integrate") if k in run}
    precision = run.get("precision", "dd")
    family, sys_args = cfg["system"]
    system = _build_system(family, sys_args, precision, where)
    t = run["t"]
    scale = _scale(cfg["units"], where)
    if opts.get("c") == "units":  # the speed of light in the [units] section's units
        if scale is None:
            raise ConfigError(f"{where}: [run] c = \"units\" needs a [units] section (mass, length)")
        opts["c"] = scale.decimal("c")
    from tqdm.auto import tqdm

    legs = 2 if run.get("roundtrip") else 1
    outputs = run.get("outputs", 500 if run.get("plot") else 0)
    times = None
    if outputs:
        from fractions import Fraction

        from .precision import exact_fraction

        total = exact_fraction(t, "t")
        times = [total * Fraction(k, outputs) for k in range(1, outputs + 1)]
    bar = tqdm(total=legs, desc=f"{family} {precision}", unit="leg", file=sys.stderr, disable=args.no_progress)
    try:
        # the reported run has no output times: landing on them changes the steps, hence the
        # evaluations and (in a chaotic system) the end state; the picture is drawn from its own run
        fwd = integrate(system, t, **opts)
        bar.update(1)
        back = None
        if run.get("roundtrip") and fwd.success:
            back = integrate(fwd.system.reversed(), t, **opts)
            bar.update(1)
    except (ValueError, TypeError) as exc:
        raise ConfigError(f"{where}: [run] {exc}") from None
    finally:
        bar.close()

    method = fwd.method
    print(f"system     {family}, {system.n} bodies, precision {precision}, method {method}, tol {fwd.tol:.0e}")
    if scale is not None:
        print(f"units      mass {scale.mass:g} M_sun, length {scale.length:.6g} m; t = {float(t):g} = "
              f"{scale.to_years(float(t)):.4g} yr")
    print(f"{'leg':<10} {'status':<14} {'span':>12} {'steps':>8} {'rejected':>8} {'evaluations':>11} "
          f"{'wall time':>9} {'energy error':>12}")
    for name, r, t0 in (("forward", fwd, system.time), ("backward", back, fwd.t)):
        if r is None:
            continue
        print(f"{name:<10} {r.status:<14} {r.t - t0:>12.6g} {r.steps:>8} {r.rejected:>8} {r.evaluations:>11} "
              f"{r.wall_time:>8.3f}s {r.energy_error:>12.2e}")
    code = EXIT_OK if fwd.success and (back is None or back.success) else EXIT_FAILED
    if not fwd.success:
        print(f"forward leg did not finish: {fwd.message}")
    if back is not None:
        from . import phase_distances

        ret = back.system.reversed()
        d = phase_distances(ret, system)
        verdict = "reversible" if d["delta"] <= args.threshold else "NOT reversible"
        print(f"round trip delta {d['delta']:.3e} (position {d['delta_position']:.2e}, velocity "
              f"{d['delta_velocity']:.2e}): {verdict} at {args.threshold:.0e}")
        if not back.success:
            print(f"backward leg did not finish: {back.message}")
    if fwd.success:
        o = outcome(fwd.system)
        detail = ""
        if o.kind == "escape" and o.escaper is not None:
            detail = f" of body {o.escaper}"
        if o.binary is not None and o.binary_bound and (o.n == 2 or o.hierarchical or o.kind != "bound"):
            i, j = o.binary
            detail += (f"; {'pair' if o.n == 2 else 'binary'} of bodies {i} and {j}: semimajor axis "
                       f"{o.semimajor_axis:.4g}, eccentricity {o.eccentricity:.4g}")
        print(f"outcome at t = {fwd.t:g}: {o.kind}{detail} ({o.reason})")
    if run.get("plot") and times is not None:
        from . import plots

        try:
            drawn = integrate(system, t, times=times, **opts)
        except (ValueError, TypeError) as exc:
            raise ConfigError(f"{where}: [run] {exc}") from None
        if drawn.trajectory is None:
            raise _Failed(f"orbit plot: the run for the picture stopped before its first output ({drawn.status})")
        print(f"orbit plot: drawn from a second run that lands on {len(times)} output times ({drawn.status}, "
              f"{drawn.evaluations} evaluations, energy error {drawn.energy_error:.2e}); the table above is the "
              "run without output times")
        pos = np.concatenate([system.positions[None], drawn.trajectory.positions, drawn.system.positions[None]])
        fig = plots.orbit_plot(pos, masses=[float(m) for m in system.masses], units=plots.axis_units(scale),
                               title=f"{family}: orbits to t = {float(t):g} ({precision}, {method})")
        print(f"orbit plot: {plots.save(fig, run['plot'])}")
    return code


def _finished_members(store: Path) -> int:
    from .store import SweepStore

    s = SweepStore(store)
    return sum(s.chunk_info(i)["rows"] for i in s.finished())


def _cmd_sweep(args: argparse.Namespace) -> int:
    from .demo import write_settings
    from .report import read_manifest, statistics
    from .store import SweepStore
    from .sweep import Sweep

    cfg = sweep_config(args.config)
    where = str(args.config)
    family, ens_args = cfg["ensemble"]
    task, options = cfg["task"]
    store = Path(cfg["store"]["path"])
    execution = dict(cfg["execution"])
    if args.threads is not None:
        execution["threads"] = args.threads
    if args.scheduler is not None:
        execution["scheduler"] = args.scheduler
    ens = _build_ensemble(family, ens_args, where)
    had_chunks = SweepStore(store).read_manifest() is not None and bool(SweepStore(store).finished())
    client = None
    executor = None
    if execution.get("scheduler"):
        try:
            from distributed import Client
        except ImportError:
            raise _Failed("--scheduler needs dask.distributed (pip install 'dask[distributed]')") from None
        try:
            client = Client(execution["scheduler"], timeout=args.connect_timeout)
        except (OSError, TimeoutError) as exc:
            raise _Failed(f"cannot reach the Dask scheduler at {execution['scheduler']} ({exc})") from None
        executor = client
    try:
        try:
            sweep = Sweep(ens, task=task, store=store, chunk_size=cfg["store"].get("chunk_size", 256),
                          executor=executor, threads=execution.get("threads"),
                          max_pending=execution.get("max_pending"), **options)
        except (ValueError, TypeError) as exc:
            msg = str(exc)
            head = msg.split(":", 1)[0]
            if head == "store":
                raise _Failed(msg) from None
            section = {"chunk_size": "store", "threads": "execution", "max_pending": "execution"}.get(head, "task")
            raise ConfigError(f"{where}: [{section}] {msg}") from None
        if had_chunks and not args.resume:
            raise _Failed(f"store {store} already holds {_finished_members(store)} finished members; pass --resume "
                          "to continue it (or set another [store] path)")
        write_settings(store, f"{store.name} ({options.get('precision', 'dd' if task != 'lifetime' else 'f64')})",
                       _units_note(cfg["units"]), cfg["text"])
        print(f"sweep: task {task!r} over {len(ens)} members of {family} -> {store}", flush=True)
        try:
            sweep.run(progress=not args.no_progress)
        except KeyboardInterrupt:
            done = _finished_members(store)
            print(f"\ninterrupted: {done} of {len(ens)} members finished and kept in {store}; "
                  f"`loschmidt sweep {args.config} --resume` continues", file=sys.stderr)
            return EXIT_INTERRUPTED
    finally:
        if client is not None:
            client.close()
    from .report import load_results

    df = load_results(store)
    for name, value in statistics(df, read_manifest(store)):
        print(f"  {name:<44} {value}")
    print(f"store: {store}")
    return EXIT_OK


_PLOT_KINDS = ("map", "lifetime", "delta-histogram", "lifetime-histogram", "amplification", "orbit",
               "cross-section")


def _speed_list(text: str) -> tuple:
    try:
        values = tuple(float(x) for x in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected comma-separated numbers, got {text!r}") from None
    if not values or not all(math.isfinite(v) and v > 0 for v in values):
        raise argparse.ArgumentTypeError(f"expected positive numbers, got {text!r}")
    return values


def _cmd_scatter(args: argparse.Namespace) -> int:
    from . import Sweep, scattering

    if len(args.masses) != 3:
        raise ConfigError(f"--masses: expected three masses m1,m2,m3, got {len(args.masses)}")
    try:
        ens = scattering.binary_single_ensemble(args.members, args.seed, masses=args.masses,
                                                eccentricity=args.eccentricity, v_over_vc=args.speeds,
                                                pericentre_max=args.pericentre_max)
        sweep = Sweep(ens, task="scattering", store=args.store, chunk_size=100, threads=args.threads,
                      budget_periods=args.budget_periods)
    except ValueError as exc:
        raise ConfigError(str(exc)) from None
    df = sweep.run(progress=sys.stderr.isatty()).results()
    cs = scattering.cross_sections(df)
    print(f"{len(df)} encounters in {args.store}; cross sections / (pi a^2) +- Monte Carlo error:")
    kinds = scattering.ENCOUNTER_OUTCOMES
    print("v/v_c   " + "".join(f"{k:>24}" for k in kinds) + "   mean (B_f - B_i)/B_i")
    for v, g in cs.groupby("v_over_vc", sort=True):
        cells = "".join(f"{r.sigma_pi_a2:>14.4g} +- {r.sigma_pi_a2_error:<7.2g}"
                        for k in kinds for r in [g[g.outcome == k].iloc[0]])
        r0 = g.iloc[0]
        print(f"{v:<8g}{cells}   {r0.mean_energy_change:+.4f} +- {r0.mean_energy_change_error:.2g}")
    return EXIT_OK


def _store_label(store: Path) -> str:
    from .report import _label, read_manifest, read_settings

    return _label(store, read_manifest(store), read_settings(store))


def _stores(names: Any) -> list:
    """The store directories named on the command line; one that is missing or holds no store is bad
    usage (exit 2), reported before any work."""
    from .report import read_manifest

    stores = [Path(s) for s in names]
    for s in stores:
        try:
            read_manifest(s)
        except ValueError as exc:
            raise _Usage(str(exc)) from None
    return stores


def _cmd_plot(args: argparse.Namespace) -> int:
    from . import plots
    from .report import load_results, read_manifest, read_settings, store_scale

    stores = _stores(args.stores)
    pixels = plots.parse_size(args.size) if args.size else None
    scale = next((store_scale(read_settings(s)) for s in stores if store_scale(read_settings(s)) is not None), None)
    u = plots.axis_units(scale)
    kind = args.kind
    if kind in ("map", "delta-histogram"):
        frames = {_store_label(s): load_results(s) for s in stores}
        for label, df in frames.items():
            if "delta" not in df.columns:
                raise _Failed(f"{label}: the store holds no round-trip distances (delta); --kind {kind} needs a "
                              "roundtrip sweep")
            if kind == "map" and not {"x", "y"} <= set(df.columns):
                raise _Failed(f"{label}: the ensemble has no x, y parameters to map (a free-fall family has)")
        fig = (plots.reversibility_map(frames, threshold=args.threshold, units=u, title=args.title) if kind == "map"
               else plots.delta_histogram(frames, threshold=args.threshold, title=args.title))
    elif kind in ("lifetime", "lifetime-histogram"):
        frames = {_store_label(s): load_results(s) for s in stores}
        for label, df in frames.items():
            if "lifetime" not in df.columns:
                raise _Failed(f"{label}: the store holds no lifetimes; --kind {kind} needs a sweep with task "
                              "'lifetime'")
            if kind == "lifetime" and not {"x", "y"} <= set(df.columns):
                raise _Failed(f"{label}: the ensemble has no x, y parameters to map")
        fig = (plots.lifetime_map(frames, units=u, title=args.title) if kind == "lifetime"
               else plots.lifetime_histogram(frames, units=u, title=args.title))
    elif kind == "cross-section":
        df = load_results(stores[0])
        if "energy_change" not in df.columns:
            raise _Failed(f"{_store_label(stores[0])}: --kind cross-section needs a sweep with task 'scattering'")
        fig = plots.cross_section_plot(df, title=args.title)
    else:
        fig = _member_plot(stores[0], kind, args, u)
    path = plots.save(fig, args.output, dpi=args.dpi, pixels=pixels)
    print(f"wrote {path}")
    return EXIT_OK


def _member_plot(store: Path, kind: str, args: argparse.Namespace, u: Any) -> Any:
    """Orbit or amplification of one member of a store, integrated again with every one of the
    store's settings (``report.rerun_options``: an option it does not know is an error, never dropped)."""
    import numpy as np

    from . import System, amplification, growth, integrate, plots
    from .report import load_results, read_manifest, rerun_options
    from .store import limbs, read_store

    manifest = read_manifest(store)
    try:
        ro = rerun_options(manifest)
    except ValueError as exc:
        raise _Failed(f"{store}: {exc}") from None
    df = load_results(store, ["member", "delta", "x", "y", "status", "t_reached", "lifetime", "outcome"])
    if len(df) == 0:
        raise _Failed(f"{store}: no finished members yet")
    members = np.asarray(df["member"])
    if args.member is None:
        if "delta" in df.columns and np.isfinite(np.asarray(df["delta"], dtype=float)).any():
            dl = np.asarray(df["delta"], dtype=float)
            ok = np.flatnonzero(np.isfinite(dl))
            row = int(ok[np.argsort(dl[ok])[len(ok) // 2]])  # the median round trip
        else:
            row = 0
    else:
        hit = np.flatnonzero(members == args.member)
        if not hit.size:
            raise _Usage(f"--member: {args.member} is not among the finished members of {store} "
                         f"(members are numbered from 0: 0 .. {int(members.max())})")
        row = int(hit[0])
    member = int(members[row])
    cols = ["start_masses", "start_positions", "start_velocities"]
    from .report import store_columns

    has_radii = "start_radii" in store_columns(store)
    table = read_store(store, format="arrow", columns=cols + (["start_radii"] if has_radii else []))
    m = limbs(table, "start_masses")[row]
    x = limbs(table, "start_positions")[row]
    v = limbs(table, "start_velocities")[row]
    radii = ro.radii
    if radii is None and has_radii:
        radii = [float(r) for r in np.asarray(limbs(table, "start_radii")[row]).reshape(-1)]
    system = System(m, x, v, precision=ro.precision, radii=radii)
    kw = dict(ro.integrate)
    t: Any = ro.t
    stored = str(df["status"].iloc[row]) if "status" in df.columns else None
    if ro.task == "lifetime" and "t_reached" in df.columns and stored not in ("merger", "collision"):
        # the lifetime task follows a member in spans until its escape test holds; the picture runs
        # one integration over the same span (to the time the member's run ended, not beyond: an
        # escaper would fly off the picture). A merger or a contact ends the rerun by itself.
        t = repr(float(df["t_reached"].iloc[row]))
    where = f"member {member}" + (f" (x = {df['x'].iloc[row]:.4g}, y = {df['y'].iloc[row]:.4g})"
                                  if "x" in df.columns else "")
    from .report import _number_text

    shown = ", ".join(f"{k} {_number_text(v)}" for k, v in kw.items())
    print(f"{kind}: {where} of {store}, t = {float(t):g}, {ro.precision}, {shown}"
          + (f", radii {radii}" if radii is not None else ""), flush=True)
    if kind == "orbit":
        from fractions import Fraction

        from .precision import exact_fraction

        total = exact_fraction(t, "t")
        times = [total * Fraction(k, 1000) for k in range(1, 1001)]
        r = integrate(system, t, times=times, **kw)
        if r.trajectory is None:
            raise _Failed(f"{where}: the integration stopped before the first output ({r.status})")
        path = r.trajectory.positions
        if not r.success and len(path) < 100:
            # stopped early (a merger, a contact): draw the span it covered, at 1000 output times
            from .precision import to_fraction

            span = to_fraction(r.system.limbs("time")) - to_fraction(system.limbs("time"))
            if span != 0:
                again = integrate(system, span, times=[span * Fraction(k, 1000) for k in range(1, 1000)], **kw)
                if again.trajectory is not None and len(again.trajectory) > len(path):
                    path = again.trajectory.positions
        pos = np.concatenate([system.positions[None], path, r.system.positions[None]])
        ended = f"ended {r.status} at t = {r.t:.4g}"
        print(f"  the rerun {ended}" + (f"; the store records status {stored}" if stored else ""))
        return plots.orbit_plot(pos, units=u, title=args.title or f"Orbits of {where}, {ro.precision} ({ended})")
    if ro.task == "amplification":
        opts = {k: ro.task_options[k] for k in ("perturbation", "body", "axis") if k in ro.task_options}
        a = amplification(system, t, **opts, **kw)
        return plots.amplification_plot(a, units=u, title=args.title or f"Amplification of a displacement, {where}")
    g = growth(system, t, intervals=100, **kw)
    return plots.amplification_plot(g, units=u, title=args.title or f"Growth of a small perturbation, {where}")


def _cmd_report(args: argparse.Namespace) -> int:
    from .report import write_report

    path = write_report(_stores(args.stores), args.output, title=args.title, threshold=args.threshold)
    print(f"wrote {path}")
    return EXIT_OK


#: Modules the benchmark suite needs beyond the package's own dependencies (its peers).
BENCH_NEEDS = ("scipy",)


def _cmd_bench(args: argparse.Namespace) -> int:
    import importlib.util

    missing = [m for m in BENCH_NEEDS if importlib.util.find_spec(m) is None]
    if missing:
        raise _Usage(f"the benchmarks need {', '.join(missing)} (their peers): pip install "
                     f"{' '.join(missing)}, or from the checkout pip install \".[bench]\"")
    bench = _find_benchmarks()
    if bench is None:
        print("loschmidt bench: the benchmarks are not installed with the package; they run from a source "
              "checkout: cd into it and run `python -m benchmarks` (or `loschmidt bench` there)", file=sys.stderr)
        return EXIT_USAGE
    bench.run(quick=args.quick, out=print)
    return EXIT_OK


def _find_benchmarks() -> Any:
    """The source tree's ``benchmarks`` package: importable from the working directory, or beside the
    ``python/`` directory of an editable install."""
    import importlib

    candidates = [Path.cwd(), Path(__file__).resolve().parents[2]]
    for root in candidates:
        if (root / "benchmarks" / "__init__.py").is_file() and (root / "pyproject.toml").is_file():
            if str(root) not in sys.path:
                sys.path.insert(0, str(root))
            try:
                mod = importlib.import_module("benchmarks")
            except ImportError:
                continue
            if hasattr(mod, "run"):
                return mod
    return None


# ---------------------------------------------------------------------------------------------------
# the parser


class _Usage(Exception):
    """Bad command-line usage (exit code 2)."""


def _positive_float(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise argparse.ArgumentTypeError(f"must be a positive number, got {text!r}")
    return v


def _positive_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected an integer, got {text!r}") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1, got {text!r}")
    return v


def _parser() -> argparse.ArgumentParser:
    from .chaos import REVERSIBLE_THRESHOLD

    p = argparse.ArgumentParser(prog="loschmidt", description="High-precision few-body gravitational dynamics: "
                                "integrate, reverse, and tell true solutions from round-off noise.")
    p.add_argument("--version", action="store_true", help="print the version and exit")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    d = sub.add_parser("demo", help="the built-in scenario: three black holes in free fall, there and back",
                       description="Three black holes of 1e6 solar masses released from rest over the free-fall "
                       "region, round trips in f64 and dd, lifetimes, a map and a report.")
    d.add_argument("--out", default="loschmidt-demo", help="directory for the stores, pictures and report "
                   "(default ./loschmidt-demo)")
    d.add_argument("--quick", action="store_true", help="a coarser grid: 32 triples instead of 120 (about 35 "
                   "CPU-seconds instead of 2 CPU-minutes)")
    d.add_argument("--qd", type=int, default=0, metavar="N",
                   help="also run quad-double round trips for up to N members dd left irreversible "
                   "(slow: 15-40 s each)")
    d.add_argument("--threads", type=_positive_int, default=None, help="C++ threads (default: all cores)")
    d.add_argument("--no-progress", action="store_true", help="no progress bars")
    d.set_defaults(func=_cmd_demo)

    r = sub.add_parser("run", help="one system: integrate (and back with --roundtrip), a results table",
                       description="Integrate one system from a TOML file ([system], [run], [units]) or a named "
                       "family; command-line options override the file.")
    r.add_argument("config", nargs="?", default=None, help="CONFIG.toml")
    r.add_argument("--family", help=f"one of {', '.join(k for k in _SYSTEMS if k not in _SYSTEM_REQUIRED)}")
    r.add_argument("--t", default=None, help="time span (N-body units; a decimal, converted exactly)")
    r.add_argument("--precision", choices=("f64", "f64c", "dd", "qd"))
    r.add_argument("--method", choices=("gbs", "chain"))
    r.add_argument("--tol", type=_positive_float, default=None, help="relative tolerance (default per precision)")
    r.add_argument("--max-wall-time", dest="max_wall_time", type=_positive_float, default=None, help="budget in seconds")
    r.add_argument("--roundtrip", action="store_true", help="integrate back with reversed velocities")
    r.add_argument("--threshold", type=_positive_float, default=REVERSIBLE_THRESHOLD,
                   help=f"reversible when delta <= this ({REVERSIBLE_THRESHOLD:.0e})")
    r.add_argument("--outputs", type=_positive_int, default=None, help="output times for the orbit plot (500; each costs a landing)")
    r.add_argument("--plot", default=None, metavar="FILE.png", help="draw the orbits")
    r.add_argument("--no-progress", action="store_true")
    r.set_defaults(func=_cmd_run)

    s = sub.add_parser("sweep", help="a task over an ensemble into a resumable Parquet store",
                       description="Run the sweep a TOML file describes ([ensemble], [task], [store], "
                       "[execution], [units]).")
    s.add_argument("config", help="CONFIG.toml")
    s.add_argument("--resume", action="store_true", help="continue a store that already holds finished chunks")
    s.add_argument("--scheduler", default=None, metavar="ADDRESS", help="run the chunks on a Dask cluster")
    s.add_argument("--threads", type=_positive_int, default=None, help="C++ threads per chunk")
    s.add_argument("--connect-timeout", dest="connect_timeout", type=float, default=10.0, help=argparse.SUPPRESS)
    s.add_argument("--no-progress", action="store_true")
    s.set_defaults(func=_cmd_sweep)

    pl = sub.add_parser("plot", help="a picture of one or more stores",
                        description="map, lifetime: the free-fall region coloured by log10 delta or lifetime; "
                        "delta-histogram, lifetime-histogram; amplification, orbit: one member integrated again.")
    pl.add_argument("stores", nargs="+", metavar="STORE")
    pl.add_argument("--kind", required=True, choices=_PLOT_KINDS)
    pl.add_argument("-o", "--output", required=True, metavar="FILE.png")
    pl.add_argument("--member", type=int, default=None, help="member for amplification/orbit (default: the "
                    "median round trip)")
    pl.add_argument("--threshold", type=_positive_float, default=REVERSIBLE_THRESHOLD,
                    help=f"reversible when delta <= this ({REVERSIBLE_THRESHOLD:.0e})")
    pl.add_argument("--size", default=None, metavar="WxH", help="image size in pixels, e.g. 1200x900")
    pl.add_argument("--dpi", type=_positive_float, default=150)
    pl.add_argument("--title", default=None)
    pl.set_defaults(func=_cmd_plot)

    rp = sub.add_parser("report", help="one self-contained HTML page on one or more stores")
    rp.add_argument("stores", nargs="+", metavar="STORE")
    rp.add_argument("-o", "--output", required=True, metavar="report.html")
    rp.add_argument("--title", default=None)
    rp.add_argument("--threshold", type=_positive_float, default=REVERSIBLE_THRESHOLD)
    rp.set_defaults(func=_cmd_report)

    sc = sub.add_parser("scatter", help="binary-single encounters into a resumable store, and their cross sections")
    sc.add_argument("store", help="the store directory (run again to resume)")
    sc.add_argument("--speeds", required=True, type=_speed_list, help="v_inf / v_c, comma-separated (e.g. 0.3,1,3)")
    sc.add_argument("--members", type=_positive_int, default=200, help="encounters per speed (200)")
    sc.add_argument("--masses", type=_speed_list, default=(1.0, 1.0, 1.0), help="m1,m2,m3 (1,1,1)")
    sc.add_argument("--eccentricity", type=float, default=0.0, help="of the binary (0)")
    sc.add_argument("--pericentre-max", type=float, default=None, help="largest pericentre (4 a (1 + e))")
    sc.add_argument("--budget-periods", type=float, default=1000.0, help="resonance budget in binary periods (1000)")
    sc.add_argument("--seed", type=int, default=0, help="seed of the draws (0)")
    sc.add_argument("--threads", type=_positive_int, default=None, help="threads (all cores)")
    sc.set_defaults(func=_cmd_scatter)
    b = sub.add_parser("bench", help="the benchmark suite (from a source checkout)")
    b.add_argument("--quick", action="store_true")
    b.set_defaults(func=_cmd_bench)
    return p


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if args.version:
        from . import __version__

        print(__version__)
        return EXIT_OK
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_USAGE
    try:
        return int(args.func(args) or 0)
    except KeyboardInterrupt:
        print("\ninterrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:  # output piped into a command that stopped reading (| head)
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_FAILED
    except (ConfigError, _Usage) as exc:
        print(f"loschmidt {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except _Failed as exc:
        print(f"loschmidt {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except ValueError as exc:  # the library's checks name the argument at fault
        print(f"loschmidt {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_FAILED


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
