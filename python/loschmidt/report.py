"""A self-contained HTML page on one or more sweep stores: statistics, pictures, the settings.

``write_report(stores, path)`` reads each store's manifest (the sweep definition: task, options,
precision, chunk size, loschmidt version, ensemble) and its finished rows, and writes one HTML file
with the statistics of each ensemble, the plots of :mod:`loschmidt.plots` embedded as base64 PNG
(no other file is needed to view it), and the settings that produced the data. Stores made by the
command line may carry ``cli-settings.json`` beside the manifest (a label, physical units, the
configuration text); it is used when present.

The helpers ``read_settings``, ``store_scale``, ``load_results`` and ``statistics`` are shared with
the command line's ``plot`` and ``sweep`` commands.
"""

from __future__ import annotations

import base64
import datetime
import html
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

__all__ = ["write_report", "read_settings", "store_scale", "load_results", "statistics", "rerun_options",
           "RerunOptions", "map_kind", "THRESHOLDS", "scattering_section"]

#: Round-trip distances at which the reversible fraction is tabulated.
THRESHOLDS = (1e-4, 1e-6, 1e-8, 1e-10, 1e-12, 1e-14)

SETTINGS_FILE = "cli-settings.json"


# ---------------------------------------------------------------------------------------------------
# reading stores


def read_manifest(store: Any) -> dict:
    """The sweep definition of a store (``ValueError`` when the path holds no store)."""
    from .store import SweepStore

    path = Path(store)
    if not path.is_dir():
        raise ValueError(f"store: {path} is not a directory")
    manifest = SweepStore(path).read_manifest()
    if manifest is None:
        raise ValueError(f"store: {path} holds no manifest.json (not a sweep store)")
    return manifest


def read_settings(store: Any) -> dict:
    """The command line's notes beside a store.

    Parameters
    ----------
    store : str or os.PathLike
        A store directory.

    Returns
    -------
    dict
        ``label``, ``units``, ``config`` from ``cli-settings.json``, or {} when there is none.
    """
    p = Path(store) / SETTINGS_FILE
    if not p.exists():
        return {}
    try:
        data = json.loads(p.read_text())
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def store_scale(settings: dict) -> Any:
    """The physical units recorded beside a store.

    Parameters
    ----------
    settings : dict
        ``read_settings`` output: ``{"units": {"mass": ..., "length": ...}}``.

    Returns
    -------
    loschmidt.units.Scale or None
    """
    u = settings.get("units") if isinstance(settings, dict) else None
    if not u:
        return None
    return make_scale(u.get("mass", 1.0), u.get("length", "pc"))


def make_scale(mass: Any, length: Any) -> Any:
    """A ``Scale`` from a mass in solar masses and a length ``"pc"``, ``"au"`` or a number of metres.

    Parameters
    ----------
    mass : float
        Solar masses per mass unit.
    length : str or float
        ``"pc"``, ``"parsec"``, ``"au"`` or metres per length unit.

    Returns
    -------
    loschmidt.units.Scale
    """
    from .units import AU, PARSEC, Scale

    if isinstance(length, str):
        names = {"pc": PARSEC, "parsec": PARSEC, "au": AU}
        if length.lower() not in names:
            raise ValueError(f"length: expected 'pc', 'au' or a number of metres, got {length!r}")
        length = names[length.lower()]
    return Scale(mass=mass, length=length)


def store_columns(store: Any) -> dict[str, bool]:
    """Column name -> True for plain columns, False for full-precision (limb) columns."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    from .store import SweepStore

    files = list(SweepStore(store).finished().values())
    if not files:
        return {}
    schema = pq.read_schema(files[0])
    return {f.name: not (pa.types.is_fixed_size_list(f.type) or pa.types.is_list(f.type)) for f in schema}


def load_results(store: Any, columns: Iterable[str] | None = None):
    """The finished rows of a store.

    Parameters
    ----------
    store : str or os.PathLike
        A store directory.
    columns : iterable of str, optional
        The columns wanted (those the store lacks are left out); default every plain (not limb)
        column.

    Returns
    -------
    pandas.DataFrame
    """
    from .store import read_store

    read_manifest(store)
    available = store_columns(store)
    cols = [c for c, plain in available.items() if plain] if columns is None else [c for c in columns if c in available]
    if not cols:
        import pandas as pd

        return pd.DataFrame()
    return read_store(store, columns=cols)


# ---------------------------------------------------------------------------------------------------
# integrating one member again, with every setting of its store

#: Recorded sweep options passed unchanged to ``loschmidt.integrate`` when a member is run again.
_INTEGRATE_KEYS = ("method", "tol", "atol", "max_steps", "max_wall_time", "max_order", "initial_step",
                   "regularization", "pn", "c", "merger_factor")
#: Recorded options that are not keyword arguments of ``integrate`` and how a rerun uses them:
#: the span, the precision and radii go into the System; the rest describe the task around the
#: integrations (a lifetime's spans and escape test, an amplification's displacement).
_OTHER_KEYS = ("t", "t_max", "precision", "radii", "interval", "distance_factor", "perturbation", "body", "axis")


@dataclass(frozen=True)
class RerunOptions:
    """How to integrate one member of a store again exactly as the sweep did.

    Attributes
    ----------
    task : str
        The sweep's task.
    precision : str
        The working precision.
    t : str
        The span of one leg (``t``), or ``t_max`` for task ``"lifetime"`` (exact decimal string).
    integrate : dict
        Keyword arguments of ``loschmidt.integrate`` (every recorded option that is one).
    radii : list of float or None
        One radius per body shared by every member (the sweep's ``radii``), else None.
    task_options : dict
        The recorded options that shape the task rather than one integration (``interval``,
        ``distance_factor``, ``perturbation``, ``body``, ``axis``).
    """

    task: str
    precision: str
    t: str
    integrate: dict
    radii: list | None
    task_options: dict


def rerun_options(manifest: dict) -> RerunOptions:
    """Turn a store's recorded options into the arguments that integrate one member again.

    Every option in the manifest is accounted for: it is either a keyword argument of
    ``loschmidt.integrate`` or one of the task's own settings; an option this function does not
    know raises ``ValueError`` rather than being dropped, so a rerun can never silently differ
    from the sweep (a picture that contradicts the stored data).

    Parameters
    ----------
    manifest : dict
        The store's manifest (``read_manifest``).

    Returns
    -------
    RerunOptions

    Examples
    --------
    >>> from loschmidt.report import rerun_options
    >>> m = {"definition": {"task": "integrate", "precision": "f64",
    ...      "options": {"t": "2", "precision": "f64", "method": "chain", "tol": 1e-13, "pn": [1],
    ...                  "c": "15", "merger_factor": 8.0, "max_steps": None}}}
    >>> o = rerun_options(m)
    >>> sorted(o.integrate), o.t
    (['c', 'merger_factor', 'method', 'pn', 'tol'], '2')
    """
    if not isinstance(manifest, dict) or not isinstance(manifest.get("definition"), dict):
        raise ValueError("manifest: expected a store manifest with a 'definition'")
    d = manifest["definition"]
    task = str(d.get("task", ""))
    opts = dict(d.get("options") or {})
    unknown = sorted(set(opts) - set(_INTEGRATE_KEYS) - set(_OTHER_KEYS))
    if unknown:
        raise ValueError(f"manifest: option(s) {unknown} of task {task!r} are not known to a rerun; "
                         "refusing to draw a member with settings other than the sweep's")
    t = opts.get("t_max") if task == "lifetime" else opts.get("t")
    if t is None:
        raise ValueError(f"manifest: task {task!r} records no time span (t)")
    precision = d.get("precision") or opts.get("precision") or "dd"
    kw = {k: opts[k] for k in _INTEGRATE_KEYS if opts.get(k) is not None}
    if task == "lifetime":
        kw.setdefault("method", "chain")  # the lifetime task's default (loschmidt.tasks)
    if kw.get("pn") is not None:
        kw["pn"] = tuple(kw["pn"])
    radii = opts.get("radii")
    rest = {k: opts[k] for k in ("interval", "distance_factor", "perturbation", "body", "axis") if k in opts}
    return RerunOptions(task, str(precision), str(t), kw, None if radii is None else list(radii), rest)


def map_kind(manifest: dict) -> str:
    """The ``loschmidt plot --kind`` that maps a store over the free-fall region.

    Parameters
    ----------
    manifest : dict
        The store's manifest (``read_manifest``).

    Returns
    -------
    str
        ``"lifetime"`` for a store of task ``"lifetime"``, ``"map"`` (of the round-trip distance)
        otherwise.

    Examples
    --------
    >>> from loschmidt.report import map_kind
    >>> map_kind({"definition": {"task": "lifetime"}}), map_kind({"definition": {"task": "roundtrip"}})
    ('lifetime', 'map')
    """
    task = (manifest.get("definition") or {}).get("task") if isinstance(manifest, dict) else None
    return "lifetime" if task == "lifetime" else "map"


# ---------------------------------------------------------------------------------------------------
# statistics


def _success(df: Any) -> np.ndarray:
    from .status import SUCCESS_STATUSES

    if "status" not in df.columns:
        return np.ones(len(df), dtype=bool)
    return np.array([s in SUCCESS_STATUSES for s in df["status"]], dtype=bool)


def statistics(df: Any, manifest: dict) -> list[tuple[str, str]]:
    """Rows describing an ensemble's results, by task.

    Parameters
    ----------
    df : pandas.DataFrame
        The store's rows (``load_results``).
    manifest : dict
        The store's manifest (the sweep definition).

    Returns
    -------
    list of (str, str)
        (name, value) rows: members finished, reversible fractions, lifetimes ...
    """
    d = manifest.get("definition", {})
    members = d.get("ensemble", {}).get("members")
    rows: list[tuple[str, str]] = []
    n = len(df)
    rows.append(("members finished", f"{n}" + (f" of {members}" if members is not None else "")))
    ok = _success(df)
    if "status" in df.columns:
        counts = df["status"].value_counts()
        rows.append(("statuses", ", ".join(f"{k}: {v}" for k, v in counts.items())))
    task = d.get("task")
    if "delta" in df.columns:
        delta = np.asarray(df["delta"], dtype=float)
        fin = ok & np.isfinite(delta)
        for thr in THRESHOLDS:
            k = int(np.count_nonzero(fin & (delta <= thr)))
            rows.append((f"reversible, delta <= {thr:.0e}", f"{k} ({k / max(n, 1):.1%})"))
        if fin.any():
            lg = np.log10(np.maximum(delta[fin], 1e-300))
            q = np.percentile(lg, [0, 10, 50, 90, 100])
            rows.append(("log10 delta: min, 10%, median, 90%, max", ", ".join(f"{v:.1f}" for v in q)))
    if "lifetime" in df.columns:
        lt = np.asarray(df["lifetime"], dtype=float)
        esc = ok & np.isfinite(lt)
        opts = d.get("options", {})
        tmax = opts.get("t_max")
        within = f" within t = {float(tmax):g}" if tmax is not None else ""
        if "outcome" in df.columns:
            kind = np.asarray(df["outcome"], dtype=object)
            for label, name in (("escaped", "escape"), ("merged", "merger"), ("collided", "collision")):
                k = int(np.count_nonzero(esc & (kind == name)))
                if k or name == "escape":
                    rows.append((label, f"{k} ({k / max(n, 1):.1%}){within}"))
        else:
            rows.append(("escaped", f"{int(esc.sum())} ({esc.sum() / max(n, 1):.1%}){within}"))
        if esc.any():
            q = np.percentile(lt[esc], [10, 50, 90])
            rows.append(("lifetime: 10%, median, 90% (N-body units)", ", ".join(f"{v:.3g}" for v in q)))
        if "outcome" in df.columns:
            rows.append(("outcomes at the end", ", ".join(f"{k}: {v}" for k, v in df["outcome"].value_counts().items())))
    if "energy_error" in df.columns and ok.any():
        e = np.asarray(df["energy_error"], dtype=float)[ok]
        e = e[np.isfinite(e)]
        if e.size:
            rows.append(("relative energy error: median, max", f"{np.median(e):.2e}, {e.max():.2e}"))
    if "evaluations" in df.columns:
        rows.append(("force evaluations", f"{int(np.sum(df['evaluations'])):,}"))
    if "wall_time" in df.columns:
        rows.append(("engine time (all threads)", f"{float(np.sum(df['wall_time'])):.1f} s"))
    if task and not any(r[0].startswith("reversible") for r in rows) and task == "roundtrip":
        rows.append(("note", "no delta column"))
    return rows


# ---------------------------------------------------------------------------------------------------
# the page


_CSS = """
body { font-family: system-ui, -apple-system, Segoe UI, Helvetica, Arial, sans-serif; max-width: 70em;
       margin: 2em auto; padding: 0 1em; color: #222; line-height: 1.4; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; border-bottom: 1px solid #ccc; margin-top: 2em; }
table { border-collapse: collapse; margin: 0.5em 0 1em 0; }
td, th { border: 1px solid #ddd; padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
th { background: #f4f4f4; }
img { max-width: 100%; height: auto; border: 1px solid #eee; margin: 0.5em 0; }
pre { background: #f7f7f7; padding: 0.6em; overflow-x: auto; font-size: 0.85em; }
.muted { color: #777; font-size: 0.9em; }
"""


def _img(fig: Any, alt: str) -> str:
    from .plots import to_png_bytes

    data = base64.b64encode(to_png_bytes(fig)).decode("ascii")
    return f'<img alt="{html.escape(alt)}" src="data:image/png;base64,{data}">'


def _table(rows: Sequence[tuple[str, str]], head: tuple[str, str] | None = None) -> str:
    out = ["<table>"]
    if head:
        out.append(f"<tr><th>{html.escape(head[0])}</th><th>{html.escape(head[1])}</th></tr>")
    for k, v in rows:
        out.append(f"<tr><th>{html.escape(str(k))}</th><td>{html.escape(str(v))}</td></tr>")
    out.append("</table>")
    return "\n".join(out)


def _number_text(value: Any) -> str:
    """A recorded option for reading: exact decimal strings (``"4.57130457797273629...e+3"``,
    ``"1.0e+1"``) shortened to 12 significant digits; the exact values stay in the manifest."""
    from decimal import Decimal, InvalidOperation

    if isinstance(value, str):
        try:
            d = Decimal(value)
        except InvalidOperation:
            return value
        if d.is_finite():
            return f"{float(d):.12g}"
        return value
    if isinstance(value, float):
        return f"{value:.12g}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_number_text(v) for v in value) + "]"
    return str(value)


def _settings_rows(manifest: dict) -> list[tuple[str, str]]:
    d = manifest.get("definition", {})
    rows = [("task", d.get("task", "?"))]
    for k, v in (d.get("options") or {}).items():
        if v is not None:
            rows.append((f"option {k}", _number_text(v)))
    ens = d.get("ensemble") or {}
    rows.append(("ensemble", f"{ens.get('family', '?')}, {ens.get('members', '?')} members of "
                             f"{ens.get('bodies', '?')} bodies"))
    if ens.get("params"):
        rows.append(("ensemble parameters", ", ".join(ens["params"])))
    if ens.get("hash"):
        rows.append(("ensemble content hash", ens["hash"]))
    rows.append(("chunk size", d.get("chunk_size", "?")))
    rows.append(("loschmidt version", d.get("loschmidt_version", "?")))
    rows.append(("definition hash", manifest.get("definition_hash", "?")))
    return rows


def _label(store: Path, manifest: dict, settings: dict) -> str:
    if settings.get("label"):
        return str(settings["label"])
    d = manifest.get("definition", {})
    return f"{store.name} ({d.get('precision') or d.get('task')})"


def write_report(stores: Any, path: Any, title: str | None = None, threshold: float | None = None,
                 sections: Sequence[tuple[str, Sequence[tuple[str, str]]]] = ()) -> Path:
    """Write one self-contained HTML report on one or more sweep stores.

    Parameters
    ----------
    stores : path or sequence of paths
        Store directories.
    path : str or os.PathLike
        The HTML file to write.
    title : str, optional
        Page title.
    threshold : float, optional
        Round-trip distance counted as reversible in the maps (default
        ``loschmidt.chaos.REVERSIBLE_THRESHOLD``, 1e-10).
    sections : sequence of (str, rows), optional
        Extra sections after the pictures, each a title and (name, value) rows (the demo adds the
        irreversibility threshold of a representative member).

    Returns
    -------
    pathlib.Path
        The file written.
    """
    from . import plots

    from .chaos import REVERSIBLE_THRESHOLD

    threshold = REVERSIBLE_THRESHOLD if threshold is None else threshold
    paths = [Path(stores)] if isinstance(stores, (str, Path)) else [Path(s) for s in stores]
    if not paths:
        raise ValueError("stores: at least one store is needed")
    entries = []
    for p in paths:
        manifest = read_manifest(p)
        settings = dict(read_settings(p))
        df = load_results(p)
        entries.append((p, manifest, settings, df))
    # every section and panel gets its own name: two stores with one label are told apart by task
    # and directory
    labels = [_label(p, m, s) for p, m, s, _d in entries]
    for (p, m, s, _d), label in zip(entries, labels):
        if labels.count(label) > 1:
            s["label"] = f"{label}, {m.get('definition', {}).get('task', '?')}: {p.name}"
    scale = next((store_scale(s) for _p, _m, s, _d in entries if store_scale(s) is not None), None)
    u = plots.axis_units(scale)

    parts = []
    heading = title or ("loschmidt report: " + ", ".join(p.name for p in paths))
    parts.append(f"<h1>{html.escape(heading)}</h1>")
    now = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    from ._version import __version__

    parts.append(f'<p class="muted">Written {now} by loschmidt {html.escape(str(__version__))}. '
                 f"Reversible means the round trip returned within delta &le; {threshold:.0e} of the start "
                 "(phase-space distance, N-body units).</p>")
    if scale is not None:
        parts.append(f'<p class="muted">Physical units: mass unit {scale.mass:g} solar masses, length unit '
                     f"{scale.length:.6g} m ({html.escape(u.length_name)}), time unit {scale.time:.6g} s.</p>")

    roundtrips = {_label(p, m, s): d for p, m, s, d in entries if "delta" in d.columns and len(d)}
    lifetimes = {_label(p, m, s): d for p, m, s, d in entries if "lifetime" in d.columns and len(d)}
    mapped = lambda frames: {k: v for k, v in frames.items() if "x" in v.columns and "y" in v.columns}  # noqa: E731
    if roundtrips:
        parts.append("<h2>Reversibility</h2>")
        if mapped(roundtrips):
            parts.append(_img(plots.reversibility_map(mapped(roundtrips), threshold=threshold, units=u),
                              "map of log10 delta over the free-fall region"))
        parts.append(_img(plots.delta_histogram(roundtrips, threshold=threshold), "histogram of log10 delta"))
    if lifetimes:
        parts.append("<h2>Lifetimes</h2>")
        if mapped(lifetimes):
            parts.append(_img(plots.lifetime_map(mapped(lifetimes), units=u), "map of lifetimes"))
        parts.append(_img(plots.lifetime_histogram(lifetimes, units=u), "histogram of lifetimes"))

    scatterings = {_label(p, m, s): d for p, m, s, d in entries
                   if (m.get("definition") or {}).get("task") == "scattering" and len(d)}
    for label, df in scatterings.items():
        parts.extend(scattering_section(label, df))

    for name, rows in sections:
        parts.append(f"<h2>{html.escape(str(name))}</h2>")
        parts.append(_table(rows))

    for p, manifest, settings, df in entries:
        label = _label(p, manifest, settings)
        parts.append(f"<h2>{html.escape(label)}</h2>")
        parts.append(f'<p class="muted">store: {html.escape(str(p.resolve()))}</p>')
        parts.append("<h3>Statistics</h3>")
        parts.append(_table(statistics(df, manifest)))
        parts.append("<h3>Settings</h3>")
        parts.append(_table(_settings_rows(manifest)))
        if settings.get("config"):
            parts.append("<details><summary>configuration file</summary><pre>"
                         f"{html.escape(str(settings['config']))}</pre></details>")
        parts.append("<details><summary>manifest.json</summary><pre>"
                     f"{html.escape(json.dumps(manifest, indent=2, sort_keys=True))}</pre></details>")

    page = ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>{html.escape(heading)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
            + "\n".join(parts) + "\n</body>\n</html>\n")
    out = Path(path)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(f".{out.name}.tmp")
    tmp.write_text(page, encoding="utf-8")
    tmp.replace(out)
    return out


def scattering_section(label: str, df: Any) -> list[str]:
    """The report section of a binary-single scattering store: cross sections and energy change.

    Parameters
    ----------
    label : str
        The store's label.
    df : pandas.DataFrame
        Its results (task ``"scattering"``).

    Returns
    -------
    list of str
        HTML fragments: a heading, the figure (``plots.cross_section_plot``) and a table of
        sigma / (pi a^2) per outcome and speed with Monte Carlo errors, the mean binding-energy
        change and the unresolved fraction.
    """
    from . import plots
    from .scattering import ENCOUNTER_OUTCOMES, cross_sections

    cs = cross_sections(df)
    out = [f"<h2>Binary-single scattering: {html.escape(label)}</h2>",
           _img(plots.cross_section_plot(df), "cross sections against v_inf / v_c and the energy change")]
    head = "".join(f"<th>{k}</th>" for k in ENCOUNTER_OUTCOMES)
    rows = [f"<table>\n<tr><th>v_inf / v_c</th><th>members</th>{head}<th>mean (B_f - B_i) / B_i</th></tr>"]
    for v, g in cs.groupby("v_over_vc", sort=True):
        cells = "".join(
            f"<td>{r.sigma_pi_a2:.4g} &plusmn; {r.sigma_pi_a2_error:.2g}</td>"
            for kind in ENCOUNTER_OUTCOMES for r in [g[g.outcome == kind].iloc[0]])
        r0 = g.iloc[0]
        rows.append(f"<tr><th>{v:g}</th><td>{int(r0.members)}</td>{cells}"
                    f"<td>{r0.mean_energy_change:+.4f} &plusmn; {r0.mean_energy_change_error:.2g}</td></tr>")
    rows.append("</table>")
    out.append("\n".join(rows))
    out.append('<p class="muted">Cross sections in units of pi a^2 (a: the initial semimajor axis, taken as 1), '
               "sigma = pi b_max^2 x fraction, errors binomial (Monte Carlo). Unresolved: the budget ran out "
               "first; never guessed.</p>")
    return out
