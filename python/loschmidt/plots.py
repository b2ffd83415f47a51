"""Pictures of ensembles and single systems, with matplotlib (imported only when a plot is made).

Every function returns a ``matplotlib.figure.Figure`` built without pyplot (no display, no global
state; PNGs are drawn by the Agg renderer), and ``save(fig, path)`` writes it. Ensemble plots take
a pandas DataFrame (``Sweep.results()``, ``loschmidt.store.read_store``) or a mapping of column
names to arrays; several labelled tables (``{"f64": df1, "dd": df2}``) give panels side by side on
one colour scale, or overlaid histograms.

- :func:`reversibility_map`: log10 of the round-trip distance delta over the free-fall region
  (body 2's starting point ``x``, ``y``; bodies are counted from 0, as in the API; grid cells
  when ``ix``, ``iy`` are present, dots otherwise).
- :func:`lifetime_map`: the same region coloured by the time to the first escape.
- :func:`delta_histogram`, :func:`lifetime_histogram`: their distributions.
- :func:`amplification_plot`: growth of a small perturbation against time.
- :func:`orbit_plot`: one system's paths in the x-y plane.
- :func:`cross_section_plot`: binary-single cross sections against v_inf / v_c and the binary's
  energy change (a ``scattering`` sweep).

Lengths and times are in N-body units unless an :class:`AxisUnits` (``axis_units(scale)``) says
how to show them in physical units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

__all__ = [
    "AxisUnits",
    "axis_units",
    "reversibility_map",
    "lifetime_map",
    "delta_histogram",
    "lifetime_histogram",
    "amplification_plot",
    "orbit_plot",
    "cross_section_plot",
    "save",
    "DEFAULT_THRESHOLD",
]

from .chaos import REVERSIBLE_THRESHOLD  # noqa: E402

#: Round-trip distance at or below which a member counts as reversible (N-body units); the one
#: threshold of the package (``loschmidt.chaos.REVERSIBLE_THRESHOLD``).
DEFAULT_THRESHOLD = REVERSIBLE_THRESHOLD

_SQRT3_2 = math.sqrt(3.0) / 2.0
_NOT_FINISHED = "#b0b0b0"  # members whose run did not finish
_CENSORED = "#e8e8e8"  # members still bound at the end of the lifetime run


# ---------------------------------------------------------------------------------------------------
# units


@dataclass(frozen=True)
class AxisUnits:
    """How lengths and times are shown: the value in N-body units times ``*_factor``, named ``*_name``.

    Parameters
    ----------
    length_name : str, optional
        Unit name of lengths on the axis labels (default ``"N-body units"``).
    length_factor : float, optional
        Factor from N-body lengths to the shown unit (default 1).
    time_name : str, optional
        Unit name of times (default ``"N-body units"``).
    time_factor : float, optional
        Factor from N-body times to the shown unit (default 1).
    """

    length_name: str = "N-body units"
    length_factor: float = 1.0
    time_name: str = "N-body units"
    time_factor: float = 1.0

    @property
    def physical(self) -> bool:
        """True when lengths or times are shown in physical units."""
        return self.length_name != "N-body units" or self.time_name != "N-body units"

    def length(self, what: str) -> str:
        """An axis label for a length.

        Parameters
        ----------
        what : str
            The quantity, e.g. ``"x"``.

        Returns
        -------
        str
            ``"x [pc]"`` and the like.
        """
        return f"{what} [{self.length_name}]"

    def time(self, what: str = "time") -> str:
        """An axis label for a time.

        Parameters
        ----------
        what : str, optional
            The quantity (default ``"time"``).

        Returns
        -------
        str
            ``"time [kyr]"`` and the like.
        """
        return f"{what} [{self.time_name}]"


NBODY = AxisUnits()


def axis_units(scale: Any = None) -> AxisUnits:
    """Axis units for a physical scale.

    Parameters
    ----------
    scale : loschmidt.units.Scale, optional
        The physical units; None gives N-body units.

    Returns
    -------
    AxisUnits
        Lengths in pc, au or m as the scale's length unit suggests; times in yr, kyr or Myr by the
        size of the time unit.

    Examples
    --------
    >>> from loschmidt import plots, units
    >>> u = plots.axis_units(units.Scale(mass=1e6, length=units.PARSEC))
    >>> u.length("x"), u.time()
    ('x [pc]', 'time [kyr]')
    """
    if scale is None:
        return NBODY
    from . import units

    if not isinstance(scale, units.Scale):
        raise TypeError(f"scale: expected a loschmidt.units.Scale, got {type(scale).__name__}")
    if math.isclose(scale.length, units.PARSEC, rel_tol=1e-12):
        lname, lfac = "pc", 1.0
    elif math.isclose(scale.length, units.AU, rel_tol=1e-12):
        lname, lfac = "au", 1.0
    elif scale.length >= 0.1 * units.PARSEC:
        lname, lfac = "pc", scale.length / units.PARSEC
    elif scale.length >= 0.1 * units.AU:
        lname, lfac = "au", scale.length / units.AU
    else:
        lname, lfac = "m", scale.length
    years = scale.time / units.YEAR
    if years >= 1e5:
        tname, tfac = "Myr", years / 1e6
    elif years >= 100:
        tname, tfac = "kyr", years / 1e3
    else:
        tname, tfac = "yr", years
    return AxisUnits(lname, lfac, tname, tfac)


# ---------------------------------------------------------------------------------------------------
# helpers


def _mpl():
    """matplotlib's Figure class and colors module (imported here: plotting is optional)."""
    try:
        import matplotlib
        from matplotlib import colors
        from matplotlib.figure import Figure
    except ImportError:  # pragma: no cover - matplotlib is a dependency, but say what is missing
        raise ImportError("plots need matplotlib: pip install matplotlib") from None
    del matplotlib
    return Figure, colors


def _frames(data: Any, default_label: str = "") -> list[tuple[str, Any]]:
    """[(label, table)] from one table or a mapping label -> table."""
    if isinstance(data, Mapping) and data and all(not isinstance(v, np.ndarray) and hasattr(v, "__getitem__")
                                                 and not np.isscalar(v) and _is_table(v) for v in data.values()):
        return [(str(k), v) for k, v in data.items()]
    if not _is_table(data):
        raise TypeError("data: expected a DataFrame, a mapping of columns, or a mapping of labels to those")
    return [(default_label, data)]


def _is_table(obj: Any) -> bool:
    if hasattr(obj, "columns") and hasattr(obj, "__getitem__"):  # a DataFrame
        return True
    return isinstance(obj, Mapping) and all(np.ndim(v) >= 1 for v in obj.values())


def _has(table: Any, name: str) -> bool:
    cols = table.columns if hasattr(table, "columns") else table.keys()
    return name in cols


def _col(table: Any, name: str, dtype: Any = np.float64) -> np.ndarray:
    if not _has(table, name):
        raise ValueError(f"data: no column {name!r} (columns: {', '.join(map(str, _columns(table)))})")
    return np.asarray(table[name], dtype=dtype)


def _columns(table: Any) -> list:
    return list(table.columns if hasattr(table, "columns") else table.keys())


def _finished(table: Any, value: np.ndarray) -> np.ndarray:
    """Rows whose run finished: status 'success' when a status column exists, else a finite value."""
    ok = np.isfinite(value) | np.isinf(value)
    if _has(table, "status"):
        from .status import SUCCESS_STATUSES

        status = np.asarray(table["status"], dtype=object)
        ok &= np.array([s in SUCCESS_STATUSES for s in status], dtype=bool)
    return ok


def _log10_delta(delta: np.ndarray, floor: float) -> np.ndarray:
    """log10 delta with exact returns (delta = 0) put at ``floor``."""
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.log10(delta)
    out[delta == 0] = floor
    return out


def _grid(table: Any) -> tuple[int, int] | None:
    """(nx, ny) of a free-fall grid, recovered from the cell indices and centres; None otherwise.

    Cell centres are x = (2 ix + 1) / (4 nx) and y = (2 iy + 1) sqrt(3) / (4 ny)
    (``loschmidt.ics.free_fall_grid``)."""
    if not all(_has(table, c) for c in ("ix", "iy", "x", "y")) or len(table["x"]) == 0:
        return None
    ix, iy = _col(table, "ix"), _col(table, "iy")
    x, y = _col(table, "x"), _col(table, "y")
    if np.any(x <= 0) or np.any(y <= 0):
        return None
    nx = np.rint((2 * ix + 1) / (4 * x))
    ny = np.rint((2 * iy + 1) * _SQRT3_2 / (2 * y))
    if np.ptp(nx) != 0 or np.ptp(ny) != 0 or nx[0] < 1 or ny[0] < 1:
        return None
    nx_, ny_ = int(nx[0]), int(ny[0])
    if not (np.allclose(x, (2 * ix + 1) / (4 * nx_), rtol=1e-12)
            and np.allclose(y, (2 * iy + 1) * _SQRT3_2 / (2 * ny_), rtol=1e-12)):
        return None
    return nx_, ny_


def _region_outline(ax: Any, u: AxisUnits) -> None:
    """The boundary of the free-fall region: x = 0, y = 0 and the arc (x + 1/2)^2 + y^2 = 1."""
    f = u.length_factor
    th = np.linspace(0.0, math.pi / 3.0, 200)
    ax.plot(f * (np.cos(th) - 0.5), f * np.sin(th), color="black", lw=1.0)
    ax.plot([0, 0], [0, f * _SQRT3_2], color="black", lw=1.0)
    ax.plot([0, 0.5 * f], [0, 0], color="black", lw=1.0)
    ax.plot([0.5 * f], [0], marker="o", ms=6, color="black", clip_on=False, zorder=5)
    # label body 1 from the empty corner outside the arc, so no cell is hidden
    ax.annotate("body 1", (0.5 * f, 0), xytext=(0.47 * f, 0.42 * f), textcoords="data", ha="center", fontsize=8,
                arrowprops={"arrowstyle": "-", "color": "0.3", "lw": 0.6, "shrinkB": 4})
    ax.set_xlim(-0.02 * f, 0.52 * f)
    ax.set_ylim(-0.02 * f, 0.89 * f)
    ax.set_aspect("equal")
    ax.set_xlabel(u.length("x of body 2 at release"))
    ax.set_ylabel(u.length("y of body 2 at release"))


def _paint(ax: Any, table: Any, values: np.ndarray, shown: np.ndarray, cmap: Any, norm: Any,
           u: AxisUnits, special: Sequence[tuple[np.ndarray, str]] = ()) -> Any:
    """Colour the region by ``values`` where ``shown``; each (mask, colour) in ``special`` paints
    those members in a flat colour. Grid cells as an image, other ensembles as dots."""
    Figure, colors = _mpl()
    del Figure
    f = u.length_factor
    grid = _grid(table)
    x, y = _col(table, "x"), _col(table, "y")
    if grid is not None:
        nx, ny = grid
        ix, iy = _col(table, "ix", np.int64), _col(table, "iy", np.int64)
        extent = (0.0, 0.5 * f, 0.0, _SQRT3_2 * f)
        img = np.full((ny, nx), np.nan)
        img[iy[shown], ix[shown]] = values[shown]
        mappable = ax.imshow(np.ma.masked_invalid(img), origin="lower", extent=extent, cmap=cmap, norm=norm,
                             interpolation="nearest", aspect="equal")
        for mask, colour in special:
            if np.any(mask):
                flat = np.zeros((ny, nx))
                flat[iy[mask], ix[mask]] = 1.0
                ax.imshow(np.ma.masked_equal(flat, 0.0), origin="lower", extent=extent,
                          cmap=colors.ListedColormap([colour]), vmin=0, vmax=1, interpolation="nearest",
                          aspect="equal")
    else:
        size = max(4.0, min(40.0, 6000.0 / max(len(x), 1)))
        for mask, colour in special:
            ax.scatter(f * x[mask], f * y[mask], s=size, c=colour, linewidths=0)
        mappable = ax.scatter(f * x[shown], f * y[shown], c=values[shown], s=size, cmap=cmap, norm=norm,
                              linewidths=0)
    _region_outline(ax, u)
    return mappable


def _legend_patches(ax: Any, entries: Sequence[tuple[str, str]]) -> None:
    """A legend of flat colours; a colour ``"outline:C"`` is an empty box edged in C."""
    from matplotlib.patches import Patch

    handles = [Patch(facecolor="none", edgecolor=c.split(":", 1)[1], lw=1.5, label=label) if c.startswith("outline:")
               else Patch(facecolor=c, edgecolor="0.4", label=label) for label, c in entries]
    if handles:
        ax.legend(handles=handles, loc="upper right", fontsize=8, framealpha=0.9)


def _outline(ax: Any, table: Any, mask: np.ndarray, colour: str, u: AxisUnits) -> None:
    """Edge the cells (or dots) of ``mask`` in ``colour``: members singled out without hiding their value."""
    if not np.any(mask):
        return
    f = u.length_factor
    grid = _grid(table)
    x, y = _col(table, "x"), _col(table, "y")
    if grid is not None:
        from matplotlib.collections import PatchCollection
        from matplotlib.patches import Rectangle

        nx, ny = grid
        ix, iy = _col(table, "ix", np.int64), _col(table, "iy", np.int64)
        w, h = 0.5 * f / nx, _SQRT3_2 * f / ny
        boxes = [Rectangle((i * w, j * h), w, h) for i, j in zip(ix[mask], iy[mask])]
        ax.add_collection(PatchCollection(boxes, facecolor="none", edgecolor=colour, linewidth=1.2, zorder=4))
    else:
        size = max(4.0, min(40.0, 6000.0 / max(len(x), 1)))
        ax.scatter(f * x[mask], f * y[mask], s=size * 2.5, facecolors="none", edgecolors=colour, linewidths=1.0,
                   zorder=4)


_IRREVERSIBLE = "outline:red"


def _axes_title(ax: Any, text: str, fontsize: float = 11) -> None:
    """An axes title wrapped to the figure's width (a long title is never clipped)."""
    import textwrap

    width_pt = ax.figure.get_figwidth() * 72.0 * 0.9
    chars = max(20, int(width_pt / (0.55 * fontsize)))
    ax.set_title("\n".join(textwrap.wrap(text, chars)) or text, fontsize=fontsize)


def _ending_counts(ended: np.ndarray, kinds: np.ndarray | None) -> dict:
    """How the members' lifetimes ended: {"escaped": k, "merged": k, "collided": k, ...}; an escape
    count always, the others when non-zero (a merger is never called an escape)."""
    if kinds is None:
        return {"escaped": int(np.count_nonzero(ended))}
    out = {}
    for word, kind in (("escaped", "escape"), ("merged", "merger"), ("collided", "collision")):
        k = int(np.count_nonzero(ended & (kinds == kind)))
        if k or kind == "escape":
            out[word] = k
    other = int(np.count_nonzero(ended & ~np.isin(kinds, ["escape", "merger", "collision"])))
    if other:
        out["ended otherwise"] = other
    return out


def _figure(size: tuple[float, float] | None, default: tuple[float, float]):
    Figure, _colors = _mpl()
    return Figure(figsize=size or default, layout="constrained")


def _panel_width(panels: int) -> tuple[float, float]:
    # 6 inches for one panel: at 4.5 the default title was clipped and the y label pushed out
    return (max(6.0, 1.5 + 3.0 * panels), 5.2)


def _suptitle(fig: Any, text: str, fontsize: float = 11) -> None:
    """A figure title wrapped to the figure's width (a long title is never clipped)."""
    import textwrap

    width_pt = fig.get_figwidth() * 72.0
    chars = max(20, int(width_pt / (0.55 * fontsize)))  # about 0.55 em per character in the default font
    fig.suptitle("\n".join(textwrap.wrap(text, chars)) or text, fontsize=fontsize)


# ---------------------------------------------------------------------------------------------------
# ensemble maps


def reversibility_map(
    data: Any,
    threshold: float = DEFAULT_THRESHOLD,
    units: AxisUnits | None = None,
    title: str | None = None,
    size: tuple[float, float] | None = None,
    column: str = "delta",
):
    """Map of log10 delta (round-trip distance to the start) over the free-fall region.

    ``data``: a table with columns ``x``, ``y`` (body 2's start) and ``delta`` (and ``status``,
    ``ix``, ``iy`` when present), or a mapping label -> table for panels on one colour scale.
    Members at or below ``threshold`` are the reversible ones (marked on the colour bar); members
    whose run did not finish are grey.

    Parameters
    ----------
    data : table or mapping of str to table
        A pandas DataFrame (``Sweep.results()``) or a mapping of column names to arrays, or a
        mapping label -> such a table.
    threshold : float, optional
        Round-trip distance counted as reversible (default ``DEFAULT_THRESHOLD``).
    units : AxisUnits, optional
        Physical units for the axes (``axis_units(scale)``); default N-body units.
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.
    column : str, optional
        The distance column (default ``"delta"``).

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.

    Examples
    --------
    >>> import numpy as np
    >>> from loschmidt import plots
    >>> table = {"x": np.array([0.1, 0.3]), "y": np.array([0.2, 0.4]), "delta": np.array([1e-12, 1e-3])}
    >>> fig = plots.reversibility_map({"dd": table})
    >>> len(fig.axes)    # the panel and its colour bar
    2
    """
    Figure, colors = _mpl()
    del Figure
    u = units or NBODY
    frames = _frames(data)
    logs, oks = [], []
    for _label, table in frames:
        d = _col(table, column)
        ok = _finished(table, d) & ~np.isnan(d)
        logs.append(d)
        oks.append(ok)
    finite = np.concatenate([np.log10(d[ok & (d > 0)]) for d, ok in zip(logs, oks)] or [np.zeros(0)])
    lo = math.floor(finite.min()) if finite.size else math.log10(threshold) - 5
    hi = math.ceil(finite.max()) if finite.size else 0
    hi = max(hi, math.ceil(math.log10(threshold)) + 1)
    lo = min(lo, math.floor(math.log10(threshold)) - 1)
    norm = colors.Normalize(vmin=lo, vmax=hi)
    cmap = _cmap("viridis")
    fig = _figure(size, _panel_width(len(frames)))
    axes = fig.subplots(1, len(frames), squeeze=False)[0]
    mappable = None
    for ax, (label, table), d, ok in zip(axes, frames, logs, oks):
        lg = _log10_delta(d, lo)
        failed = ~ok
        mappable = _paint(ax, table, lg, ok, cmap, norm, u, [(failed, _NOT_FINISHED)])
        irreversible = ok & ~(d <= threshold)
        _outline(ax, table, irreversible, _IRREVERSIBLE.split(":", 1)[1], u)
        # each panel explains its own marks
        legend = [(f"irreversible (delta > {threshold:.0e})", _IRREVERSIBLE)] if np.any(irreversible) else []
        if np.any(failed):
            legend.append(("did not finish", _NOT_FINISHED))
        _legend_patches(ax, legend)
        rev = np.count_nonzero(ok & (d <= threshold))
        sub = f"{rev} of {len(d)} reversible (delta <= {threshold:.0e})"
        ax.set_title(f"{label}\n{sub}" if label else sub, fontsize=10)
        if ax is not axes[0]:
            ax.set_ylabel("")
    cb = fig.colorbar(mappable, ax=list(axes), shrink=0.75, aspect=30, extend="min")
    cb.set_label("log10 delta: phase-space distance to the start\nafter the round trip (N-body units)")
    cb.ax.axhline(math.log10(threshold), color="red", lw=1.5)
    cb.ax.text(-0.15, math.log10(threshold), "threshold", color="red", fontsize=7, ha="right", va="center",
               transform=cb.ax.get_yaxis_transform())
    _suptitle(fig, title or "Reversibility of the free fall: forward, velocities reversed, back")
    return fig


def _integer_ticks(axis: Any) -> None:
    from matplotlib.ticker import MaxNLocator

    axis.set_major_locator(MaxNLocator(integer=True))


def _plain_log_ticks(axis: Any, lo: float | None = None, hi: float | None = None) -> None:
    """Ticks at powers of ten (and at 2 and 5 times them when the range spans at most two decades),
    written as plain numbers (not 6 x 10^1); 1, 2, 5 over more decades made labels like 1000 and
    2000 run together."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    few = lo is not None and hi is not None and lo > 0 and math.log10(hi / lo) <= 2.0
    axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0) if few else (1.0,)))
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())


def _cmap(name: str):
    from matplotlib import colormaps

    return colormaps[name].with_extremes(bad=(0.0, 0.0, 0.0, 0.0))


def lifetime_map(
    data: Any,
    units: AxisUnits | None = None,
    title: str | None = None,
    size: tuple[float, float] | None = None,
    column: str = "lifetime",
):
    """Map of the time to the first escape over the free-fall region (log colour scale).

    ``lifetime`` is NaN for members still bound when their run ended (painted light grey, "no
    escape yet"); members whose run failed are grey.

    Parameters
    ----------
    data : table or mapping of str to table
        Tables with columns ``x``, ``y`` and ``lifetime`` (and ``status``, ``ix``, ``iy`` when
        present), or a mapping label -> table.
    units : AxisUnits, optional
        Physical units for the axes (``axis_units(scale)``); default N-body units.
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.
    column : str, optional
        The lifetime column (default ``"lifetime"``).

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.
    """
    Figure, colors = _mpl()
    del Figure
    u = units or NBODY
    frames = _frames(data)
    values = []
    for _label, table in frames:
        values.append(_col(table, column) * u.time_factor)
    allv = np.concatenate(values)
    pos = allv[np.isfinite(allv) & (allv > 0)]
    lo, hi = (pos.min(), pos.max()) if pos.size else (1.0, 10.0)
    if hi <= lo:
        hi = lo * 10
    norm = colors.LogNorm(vmin=lo, vmax=hi)
    cmap = _cmap("magma")
    fig = _figure(size, _panel_width(len(frames)))
    axes = fig.subplots(1, len(frames), squeeze=False)[0]
    mappable = None
    any_merger = False
    for ax, (label, table), v in zip(axes, frames, values):
        finished = _finished(table, np.where(np.isnan(v), 0.0, v))
        ended = finished & np.isfinite(v) & (v > 0)
        censored = finished & ~ended
        failed = ~finished
        mappable = _paint(ax, table, v, ended, cmap, norm, u,
                          [(censored, _CENSORED), (failed, _NOT_FINISHED)])
        # each panel explains its own flat colours (a legend on one panel left the other's unexplained)
        legend = []
        if np.any(censored):
            legend.append(("still bound at the end", _CENSORED))
        if np.any(failed):
            legend.append(("did not finish", _NOT_FINISHED))
        _legend_patches(ax, legend)
        med = np.median(v[ended]) if np.any(ended) else float("nan")
        kinds = _col(table, "outcome", object) if _has(table, "outcome") else None
        counts = _ending_counts(ended, kinds)
        any_merger |= "merged" in counts
        sub = f"{', '.join(f'{k} {w}' for w, k in counts.items())} of {len(v)}\nmedian {med:.3g} {u.time_name}"
        ax.set_title(f"{label}\n{sub}" if label else sub, fontsize=10)
        if ax is not axes[0]:
            ax.set_ylabel("")
    cb = fig.colorbar(mappable, ax=list(axes), shrink=0.85)
    _plain_log_ticks(cb.ax.yaxis, lo, hi)
    cb.set_label(u.time("time to the first escape or merger" if any_merger else "time to the first escape"))
    _suptitle(fig, title or "Lifetime of the free-fall triple")
    return fig


# ---------------------------------------------------------------------------------------------------
# histograms


def delta_histogram(
    data: Any,
    threshold: float = DEFAULT_THRESHOLD,
    title: str | None = None,
    size: tuple[float, float] | None = None,
    column: str = "delta",
):
    """Histogram of log10 delta, one outline per labelled table, with the threshold marked.

    Parameters
    ----------
    data : table or mapping of str to table
        Tables with a ``delta`` column (and ``status``), or a mapping label -> table.
    threshold : float, optional
        Round-trip distance counted as reversible (default ``DEFAULT_THRESHOLD``).
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.
    column : str, optional
        The distance column (default ``"delta"``).

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.
    """
    frames = _frames(data)
    fig = _figure(size, (7.0, 4.6))
    ax = fig.subplots()
    series = []
    for label, table in frames:
        d = _col(table, column)
        ok = _finished(table, d) & ~np.isnan(d)
        series.append((label, d, ok))
    pos = np.concatenate([np.log10(d[ok & (d > 0)]) for _l, d, ok in series] or [np.zeros(0)])
    lo = math.floor(pos.min()) if pos.size else -20
    hi = math.ceil(pos.max()) if pos.size else 0
    lo, hi = min(lo, math.floor(math.log10(threshold)) - 1), max(hi, math.ceil(math.log10(threshold)) + 1)
    bins = np.linspace(lo - 0.5, hi + 0.5, max(10, min(80, 2 * (hi - lo + 1))) + 1)
    top = 1
    for k, (label, d, ok) in enumerate(series):
        lg = _log10_delta(d[ok], lo)
        rev = np.count_nonzero(d[ok] <= threshold)
        failed = np.count_nonzero(~ok)
        text = f"{label + ': ' if label else ''}{rev / max(len(d), 1):.0%} reversible"
        if failed:
            text += f", {failed} not finished"
        counts, _edges, _patches = ax.hist(lg, bins=bins, histtype="stepfilled", alpha=0.35, color=f"C{k}")
        top = max(top, int(np.max(counts)) if len(counts) else 1)
        ax.hist(lg, bins=bins, histtype="step", lw=1.5, color=f"C{k}", label=text)
    ax.set_ylim(0, 1.3 * top)  # headroom for the legend
    _integer_ticks(ax.yaxis)
    ax.axvline(math.log10(threshold), color="red", ls="--", lw=1.2)
    ax.text(math.log10(threshold), 0.98, "threshold ", color="red", fontsize=8, va="top", ha="right",
            transform=ax.get_xaxis_transform())
    ax.set_xlabel("log10 delta: phase-space distance after the round trip (N-body units)")
    ax.set_ylabel("members")
    ax.legend(fontsize=8)
    _axes_title(ax, title or "Round-trip distance to the start")
    return fig


def lifetime_histogram(
    data: Any,
    units: AxisUnits | None = None,
    title: str | None = None,
    size: tuple[float, float] | None = None,
    column: str = "lifetime",
):
    """Histogram of lifetimes (log-spaced bins; members with no escape yet counted in the legend).

    Parameters
    ----------
    data : table or mapping of str to table
        Tables with a ``lifetime`` column, or a mapping label -> table.
    units : AxisUnits, optional
        Physical units for the axes (``axis_units(scale)``); default N-body units.
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.
    column : str, optional
        The lifetime column (default ``"lifetime"``).

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.
    """
    u = units or NBODY
    frames = _frames(data)
    fig = _figure(size, (7.0, 4.6))
    ax = fig.subplots()
    series = []
    any_merger = False
    for label, table in frames:
        v = _col(table, column) * u.time_factor
        kinds = _col(table, "outcome", object) if _has(table, "outcome") else None
        series.append((label, v, kinds))
        any_merger |= kinds is not None and bool(np.any(kinds == "merger"))
    pos = np.concatenate([v[np.isfinite(v) & (v > 0)] for _l, v, _k in series] or [np.zeros(0)])
    lo, hi = (pos.min(), pos.max()) if pos.size else (1.0, 10.0)
    if hi <= lo:
        hi = lo * 10
    bins = np.geomspace(lo / 1.2, hi * 1.2, 30)
    top = 1
    for k, (label, v, kinds) in enumerate(series):
        good = np.isfinite(v) & (v > 0)
        # the lifetime ends at an escape, a merger or a contact: each is counted under its own name
        parts = [f"{k} {w}" for w, k in _ending_counts(good, kinds).items()]
        text = f"{label + ': ' if label else ''}{', '.join(parts)}"
        if np.count_nonzero(~good):
            text += f", {np.count_nonzero(~good)} still bound at the end"
        counts, _edges, _patches = ax.hist(v[good], bins=bins, histtype="stepfilled", alpha=0.35, color=f"C{k}")
        top = max(top, int(np.max(counts)) if len(counts) else 1)
        ax.hist(v[good], bins=bins, histtype="step", lw=1.5, color=f"C{k}", label=text)
    ax.set_ylim(0, 1.3 * top)
    _integer_ticks(ax.yaxis)
    ax.set_xscale("log")
    _plain_log_ticks(ax.xaxis, lo / 1.2, hi * 1.2)
    ax.set_xlabel(u.time("time to the first escape or merger" if any_merger else "time to the first escape"))
    ax.set_ylabel("members")
    ax.legend(fontsize=8)
    _axes_title(ax, title or "Lifetimes of the free-fall triples")
    return fig


# ---------------------------------------------------------------------------------------------------
# single systems


def amplification_plot(
    curves: Any,
    units: AxisUnits | None = None,
    title: str | None = None,
    size: tuple[float, float] | None = None,
):
    """log10 of the amplification A(t) of a small perturbation against time.

    Parameters
    ----------
    curves : Growth, Amplification, tuple or mapping
        A ``loschmidt.chaos.Growth`` or ``Amplification`` (``times`` with ``log_factor`` or
        ``factor``), a ``(times, factor)`` pair, or a mapping label -> any of those.
    units : AxisUnits, optional
        Physical units for the axes (``axis_units(scale)``); default N-body units.
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.
    """
    u = units or NBODY
    items = list(curves.items()) if isinstance(curves, Mapping) else [("", curves)]
    fig = _figure(size, (7.0, 4.6))
    ax = fig.subplots()
    top = 0.0
    for k, (label, c) in enumerate(items):
        t, log10a = _curve(c)
        top = max(top, float(np.nanmax(log10a)) if log10a.size else 0.0)
        ax.plot(t * u.time_factor, log10a, color=f"C{k}", lw=1.5, label=label or None)
    ax.set_xlabel(u.time("time"))
    ax.set_ylabel("log10 A(t) = log10 delta(t) / delta(0)")
    if any(label for label, _c in items):
        ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    _axes_title(ax, title or "Growth of a small perturbation")
    return fig


def _curve(c: Any) -> tuple[np.ndarray, np.ndarray]:
    if hasattr(c, "log_factor") and hasattr(c, "times"):
        return np.asarray(c.times, dtype=float), np.asarray(c.log_factor, dtype=float) / math.log(10)
    if hasattr(c, "factor") and hasattr(c, "times"):
        return np.asarray(c.times, dtype=float), np.log10(np.asarray(c.factor, dtype=float))
    if isinstance(c, (tuple, list)) and len(c) == 2:
        return np.asarray(c[0], dtype=float), np.log10(np.asarray(c[1], dtype=float))
    raise TypeError("curves: expected a Growth, an Amplification, a (times, factor) pair or a mapping of them")


def orbit_plot(
    positions: Any,
    masses: Sequence[float] | None = None,
    units: AxisUnits | None = None,
    title: str | None = None,
    size: tuple[float, float] | None = None,
    labels: Sequence[str] | None = None,
):
    """Paths of the bodies in the x-y plane.

    Starts are marked with circles, ends with crosses.

    Parameters
    ----------
    positions : array-like, shape (M, N, 3) or (M, N, 2), or Trajectory
        Positions at M times (``Result.trajectory.positions``, with the start prepended), or a
        ``Trajectory``.
    masses : sequence of N floats, optional
        Shown in the legend.
    units : AxisUnits, optional
        Physical units for the axes (``axis_units(scale)``); default N-body units.
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.
    labels : sequence of N str, optional
        Legend entries (default ``"body 0"``, ``"body 1"`` ...: bodies are counted from 0, as
        everywhere in loschmidt).

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.figure_eight("f64")
    >>> r = loschmidt.integrate(s, loschmidt.ics.FIGURE_EIGHT_PERIOD, times=[k / 10 for k in range(1, 64)])
    >>> fig = loschmidt.plots.orbit_plot(r.trajectory, masses=s.masses)
    """
    u = units or NBODY
    if hasattr(positions, "positions") and hasattr(positions, "times"):
        positions = positions.positions
    p = np.asarray(positions, dtype=float)
    if p.ndim != 3 or p.shape[2] not in (2, 3):
        raise ValueError(f"positions: expected shape (M, N, 3) or (M, N, 2), got {p.shape}")
    p = p * u.length_factor
    n = p.shape[1]
    fig = _figure(size, (6.4, 6.0))
    ax = fig.subplots()
    for i in range(n):
        name = labels[i] if labels is not None else f"body {i}" + (
            f" (m = {masses[i]:g})" if masses is not None else "")
        ax.plot(p[:, i, 0], p[:, i, 1], color=f"C{i}", lw=0.9, label=name)
        ax.plot(p[0, i, 0], p[0, i, 1], "o", color=f"C{i}", ms=6)
        ax.plot(p[-1, i, 0], p[-1, i, 1], "x", color=f"C{i}", ms=8, mew=2)
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(u.length("x"))
    ax.set_ylabel(u.length("y"))
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="best")
    _axes_title(ax, title or "Orbits (o start, x end)")
    return fig


# ---------------------------------------------------------------------------------------------------
# output


def parse_size(text: str) -> tuple[int, int]:
    """'800x600' -> (800, 600) pixels."""
    try:
        w, h = (int(v) for v in str(text).lower().split("x"))
    except ValueError:
        raise ValueError(f"size: expected WIDTHxHEIGHT in pixels, like 1200x900, got {text!r}") from None
    if not (16 <= w <= 20000 and 16 <= h <= 20000):
        raise ValueError(f"size: width and height must lie in [16, 20000] pixels, got {text!r}")
    return w, h


def save(fig: Any, path: Any, dpi: float = 150, pixels: tuple[int, int] | None = None) -> Path:
    """Write a figure to a file (format from the suffix; PNG usual).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure of this module.
    path : str or os.PathLike
        The file; missing directories are created.
    dpi : float, optional
        Resolution (default 150).
    pixels : (int, int), optional
        Exact image size in pixels (the figure is resized at ``dpi``).

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    path = Path(path)
    if pixels is not None:
        w, h = pixels
        fig.set_size_inches(w / dpi, h / dpi)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=dpi, metadata={"Software": "loschmidt"} if path.suffix.lower() == ".png" else None)
    return path


def to_png_bytes(fig: Any, dpi: float = 110) -> bytes:
    """The figure as PNG bytes (for embedding)."""
    import io

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


# ---------------------------------------------------------------------------------------------------
# binary-single scattering


_OUTCOME_COLOURS = {"preservation": "#1f77b4", "exchange": "#d62728", "ionization": "#2ca02c",
                    "merger": "#9467bd", "unresolved": "#7f7f7f"}


def cross_section_plot(
    data: Any,
    semimajor_axis: float = 1.0,
    title: str | None = None,
    size: tuple[float, float] | None = None,
):
    """Cross sections of binary-single encounters against v_inf / v_c, and the binary's energy change.

    Left: sigma / (pi a^2) per outcome (``loschmidt.scattering.cross_sections``) with Monte Carlo
    error bars, log-log (outcomes never seen are left out). Right: the distribution of the
    relative change of the binary's binding energy, (B_f - B_i) / B_i, one outline per speed,
    over the encounters that leave a binary (positive: harder).

    Parameters
    ----------
    data : table
        A scattering sweep's results (``speed_index``, ``v_over_vc``, ``b_max``, ``outcome``,
        ``energy_change``).
    semimajor_axis : float, optional
        The initial binary's semimajor axis (default 1).
    title : str, optional
        Figure title (a default otherwise).
    size : (float, float), optional
        Figure size in inches.

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; write it with :func:`save`.
    """
    from .scattering import ENCOUNTER_OUTCOMES, cross_sections

    cs = cross_sections(data, semimajor_axis)
    fig = _figure(size, (11.0, 4.6))
    ax, bx = fig.subplots(1, 2)
    for kind in ENCOUNTER_OUTCOMES:
        rows = cs[(cs.outcome == kind) & (cs["count"] > 0)]
        if not len(rows):
            continue
        ax.errorbar(rows.v_over_vc, rows.sigma_pi_a2, yerr=rows.sigma_pi_a2_error, marker="o", ms=4, capsize=3,
                    color=_OUTCOME_COLOURS[kind], label=f"{kind} ({int(rows['count'].sum())})")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("v_inf / v_c")
    ax.set_ylabel("cross section / (pi a^2)")
    ax.legend(fontsize=8)
    ax.grid(True, which="both", alpha=0.3)
    change = _col(data, "energy_change")
    speeds = _col(data, "v_over_vc")
    kinds = _col(data, "outcome", object)
    kept = np.isfinite(change) & np.isin(kinds, ("preservation", "exchange"))
    x = np.sign(change) * np.log10(1 + np.abs(change) * 1e4)  # symmetric log, linear within 1e-4
    bins = np.linspace(-5, 5, 61)
    for v in np.unique(speeds):
        sel = kept & (speeds == v)
        if np.any(sel):
            bx.hist(x[sel], bins=bins, histtype="step", lw=1.4, label=f"v/v_c = {v:g} ({np.count_nonzero(sel)})")
    ticks = [-1, -1e-2, 0, 1e-2, 1]
    bx.set_xticks([math.copysign(math.log10(1 + abs(t) * 1e4), t) for t in ticks])
    bx.set_xticklabels([f"{t:g}" for t in ticks])
    bx.set_xlabel("(B_final - B_initial) / B_initial  (> 0: harder)")
    bx.set_ylabel("encounters")
    bx.legend(fontsize=8)
    fig.suptitle(title or "Binary-single scattering: cross sections and energy change", fontsize=11)
    return fig
