"""Figures for proposals (matplotlib, drawn off-screen with the Agg canvas; PNG and PDF).

Every function takes plain arrays or records and returns a :class:`matplotlib.figure.Figure`
(no pyplot, so no global state and no display needed). Figures are sized for one column
(3.5 in wide) with 8 pt text, put units on every axis, and stay readable in greyscale: each
series has its own line style and marker, and colour maps are perceptually uniform (viridis,
cividis). The network map lives in :mod:`netsim.report.netmap`.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any, ParamSpec, TypeVar

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

P = ParamSpec("P")
R = TypeVar("R")

__all__ = [
    "COLUMN_WIDTH_IN",
    "LINE_STYLES",
    "MARKERS",
    "STYLE",
    "grouped_bars",
    "heatmap",
    "metric_vs_parameter",
    "new_figure",
    "rate_vs_distance",
    "save_figure",
    "with_style",
]

COLUMN_WIDTH_IN = 3.5
#: Text sizes legible at column width (8 pt body, 7 pt ticks and legends).
STYLE: dict[str, Any] = {"font.size": 8, "axes.labelsize": 8, "axes.titlesize": 8,
                         "xtick.labelsize": 7, "ytick.labelsize": 7, "legend.fontsize": 7,
                         "lines.linewidth": 1.2, "lines.markersize": 4, "pdf.fonttype": 42}
LINE_STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 3)))
MARKERS = ("o", "s", "^", "D", "v", "x")
#: Greyscale-distinguishable colours sampled from cividis (dark to light).
COLOURS = ("#00204c", "#414d6b", "#7c7b78", "#bcaf6f", "#575c6d", "#a59c74")


def with_style(func: Callable[P, R]) -> Callable[P, R]:
    """Run a figure function under the report's text sizes (:data:`STYLE`)."""

    @functools.wraps(func)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
        with matplotlib.rc_context(STYLE):  # type: ignore[arg-type]
            return func(*args, **kwargs)

    return wrapper


def wrap_title(title: str, width: int = 58) -> str:
    """A title in lines short enough for a column-wide figure, so it is never clipped."""
    import textwrap

    return "\n".join(textwrap.wrap(title, width, break_long_words=True, break_on_hyphens=False)) or title


@with_style
def new_figure(height_in: float = 2.6, width_in: float = COLUMN_WIDTH_IN) -> tuple[Figure, Axes]:
    """A one-axes figure at column width (call it from a function wrapped by :func:`with_style`)."""
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig, fig.add_subplot()


def save_figure(fig: Figure, stem: str | Path) -> list[Path]:
    """Write ``stem.png`` (300 dpi) and ``stem.pdf``; return both paths."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    # not with_suffix: a stem naming a key path ("...links-.length_km") would lose its last part
    paths = [stem.with_name(stem.name + ".png"), stem.with_name(stem.name + ".pdf")]
    fig.savefig(paths[0], dpi=300)
    fig.savefig(paths[1])
    return paths


def _style(i: int) -> dict[str, Any]:
    return {"linestyle": LINE_STYLES[i % len(LINE_STYLES)], "marker": MARKERS[i % len(MARKERS)],
            "color": COLOURS[i % len(COLOURS)], "markevery": 0.1}


@with_style
def rate_vs_distance(length_km: ArrayLike, rates: Mapping[str, ArrayLike],
                     bound: ArrayLike, *, ylabel: str = "entangled pairs per channel use",
                     bound_label: str = r"repeaterless bound $-\log_2(1-\eta)$") -> Figure:
    """Rate against link length for each heralding scheme, with the repeaterless bound (log y).

    Parameters
    ----------
    length_km : sequence of float
        Link lengths (x axis).
    rates : mapping of str to sequence of float
        Scheme name -> rate at each length (same unit as ``bound``). Zeros are not drawn.
    bound : sequence of float
        The repeaterless bound at each length, drawn as a thick grey line.

    References
    ----------
    S. Pirandola, R. Laurenza, C. Ottaviani and L. Banchi, "Fundamental limits of
    repeaterless quantum communications", Nat. Commun. 8, 15043 (2017).
    """
    fig, ax = new_figure()
    x = np.asarray(length_km, dtype=float)
    ax.plot(x, np.asarray(bound, dtype=float), color="0.55", linewidth=2.5, linestyle="-",
            label=bound_label, zorder=1)
    for i, (name, values) in enumerate(rates.items()):
        y = np.asarray(values, dtype=float)
        ax.plot(x, np.where(y > 0, y, np.nan), label=name.replace("_", " "), zorder=2, **_style(i))
    ax.set_yscale("log")
    ax.set_xlabel("link length (km)")
    ax.set_ylabel(ylabel)
    ax.grid(True, which="major", linewidth=0.3, color="0.85")
    # above the axes: inside, the legend hid the curves that run through the upper right
    ax.legend(frameon=False, loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=2)
    return fig


@with_style
def metric_vs_parameter(curves: Mapping[str, tuple[Any, Any, Any, Any]], *, xlabel: str,
                        ylabel: str, logx: bool = False, logy: bool = False,
                        title: str | None = None, requirements: Mapping[str, float] | None = None,
                        marked: Mapping[str, tuple[Any, Any]] | None = None) -> Figure:
    """A metric against one swept parameter, one line per series with its 95 % band.

    Parameters
    ----------
    curves : mapping of str to (x, y, low, high)
        Series name -> arrays; ``low``/``high`` may hold NaN where no interval is known.
    xlabel, ylabel : str
        Axis labels, units included.
    logx, logy : bool
        Logarithmic axes; ``logy`` only takes effect when the values span a decade or more.
    requirements : mapping of str to float, optional
        Label -> required value, drawn as a dashed horizontal line (e.g. a minimum fidelity).
    marked : mapping of str to (x, y), optional
        Series name -> points to ring (e.g. where the route differs from the base scenario's);
        the legend entry says what the rings mean.
    """
    fig, ax = new_figure()
    for i, (name, (x, y, low, high)) in enumerate(curves.items()):
        style = _style(i)
        ax.plot(x, y, label=name, **{**style, "markevery": 1})
        ok = np.isfinite(np.asarray(low, float)) & np.isfinite(np.asarray(high, float))
        if ok.any():
            ax.fill_between(np.asarray(x, float)[ok], np.asarray(low, float)[ok],
                            np.asarray(high, float)[ok], color=style["color"], alpha=0.2,
                            linewidth=0, label=None)
    for k, (label, value) in enumerate((requirements or {}).items()):
        ax.axhline(float(value), color="0.25", linestyle=(0, (4, 2 + k)), linewidth=0.9, label=label)
    ring_label = "route differs from the base scenario's"
    for name, (mx, my) in (marked or {}).items():
        if len(mx):
            ax.plot(mx, my, linestyle="none", marker="o", markersize=8, markerfacecolor="none",
                    markeredgecolor="#d62728", markeredgewidth=1.0, label=ring_label)
            ring_label = "_nolegend_"
    ax.set_xscale("log" if logx else "linear")
    ax.set_yscale("log" if logy and _decades(curves) >= 1.0 else "linear")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.grid(True, linewidth=0.3, color="0.85")
    if title:
        fig.suptitle(wrap_title(title), fontsize=7)  # above the legend, which sits above the axes
    if len(curves) > 1 or next(iter(curves), "") or requirements or marked:
        # above the axes: inside, it covered curves and their 95 % bands
        ax.legend(frameon=False, title="shaded: 95% interval", title_fontsize=7, loc="lower center",
                  bbox_to_anchor=(0.5, 1.0), ncol=_legend_columns(curves))
    return fig


def _legend_columns(names: Iterable[str]) -> int:
    """Legend columns that fit a column-wide figure: three short entries a row, long ones alone."""
    names = list(names)
    longest = max(map(len, names), default=0)
    return min(len(names), 3) if longest <= 14 else (2 if longest <= 24 else 1)


def _decades(curves: Mapping[str, tuple[Any, Any, Any, Any]]) -> float:
    """How many decades the positive y values span (log axes only pay off beyond one)."""
    parts = [np.asarray(c[1], dtype=float).ravel() for c in curves.values()]
    values = np.concatenate(parts) if parts else np.zeros(0)
    positive = values[np.isfinite(values) & (values > 0)]
    return float(np.log10(positive.max() / positive.min())) if positive.size else 0.0


@with_style
def heatmap(x: ArrayLike, y: ArrayLike, z: ArrayLike, *, xlabel: str, ylabel: str,
            zlabel: str, annotate: bool = True, title: str | None = None,
            passing: ArrayLike | None = None, passing_label: str = "meets the requirement",
            marked: ArrayLike | None = None) -> Figure:
    """A two-parameter heatmap of a metric (viridis, colour bar with the metric and its unit).

    ``passing`` (booleans shaped like ``z``) outlines the cells that meet a requirement in white
    and hatches the others; ``marked`` (booleans) rings the cells whose route differs from the
    base scenario's in red.
    """
    fig, ax = new_figure(height_in=2.8)
    z = np.asarray(z, dtype=float)
    mesh = ax.imshow(z, origin="lower", aspect="auto", cmap="viridis", interpolation="nearest")
    xs, ys = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    ax.set_xticks(range(xs.size), [f"{v:g}" for v in xs])
    ax.set_yticks(range(ys.size), [f"{v:g}" for v in ys])
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    bar = fig.colorbar(mesh, ax=ax)
    bar.set_label(zlabel)
    if title:
        ax.set_title(wrap_title(title), fontsize=7)
    if annotate and z.size <= 64:
        _annotate(ax, z)
    handles: list[Any] = []
    if passing is not None:
        from matplotlib.patches import Patch, Rectangle

        ok = np.asarray(passing, dtype=bool)
        for (i, j), good in np.ndenumerate(ok):
            if not np.isfinite(z[i, j]):
                continue
            ax.add_patch(Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, linewidth=1.2 if good else 0,
                                   edgecolor="white", hatch=None if good else "///", alpha=0.9))
        handles += [Patch(facecolor="none", edgecolor="0.3", label=passing_label),
                    Patch(facecolor="none", edgecolor="0.3", hatch="///", label="does not")]
    if marked is not None:
        from matplotlib.lines import Line2D

        rings = np.argwhere(np.asarray(marked, dtype=bool))
        if rings.size:
            ax.plot(rings[:, 1], rings[:, 0], linestyle="none", marker="o", markersize=13,
                    markerfacecolor="none", markeredgecolor="#d62728", markeredgewidth=1.0)
            handles.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                                  markeredgecolor="#d62728", label="route differs from the base scenario's"))
    if handles:
        ax.legend(handles=handles, frameon=False, loc="lower center", bbox_to_anchor=(0.5, 1.0 if not title else 1.06),
                  ncol=len(handles), fontsize=6)
    return fig


def _annotate(ax: Axes, z: np.ndarray) -> None:
    finite = z[np.isfinite(z)]
    middle = (finite.min() + finite.max()) / 2 if finite.size else 0.0
    for (i, j), value in np.ndenumerate(z):
        if np.isfinite(value):
            ax.text(j, i, f"{value:.3g}", ha="center", va="center", fontsize=6,
                    color="white" if value < middle else "black")


HATCHES = ("", "///", "...", "xxx", "\\\\\\", "ooo")


@with_style
def grouped_bars(groups: Sequence[str], series: Mapping[str, tuple[Any, Any, Any]], *,
                 xlabel: str, logx: bool = False) -> Figure:
    """Horizontal bars, one group per label and one bar per series, with 95 % error bars.

    Parameters
    ----------
    groups : sequence of str
        Group labels (e.g. demands), top to bottom.
    series : mapping of str to (values, low, high)
        Series name (e.g. candidate) -> arrays over the groups; NaN where a series has no value.
    xlabel : str
        Axis label with unit.
    logx : bool
        Logarithmic value axis (bars then start at the axis edge, not at zero).
    """
    fig, ax = new_figure(height_in=0.9 + 0.35 * len(groups) * max(1, len(series)) ** 0.5)
    n = max(len(series), 1)
    height = 0.8 / n
    y = np.arange(len(groups))[::-1].astype(float)
    for i, (name, (values, low, high)) in enumerate(series.items()):
        v = np.asarray(values, dtype=float)
        err = np.abs(np.vstack([v - np.asarray(low, float), np.asarray(high, float) - v]))
        ax.barh(y + (n / 2 - i - 0.5) * height, np.nan_to_num(v), height=height, label=name,
                color=COLOURS[i % len(COLOURS)], hatch=HATCHES[i % len(HATCHES)], edgecolor="white",
                linewidth=0.3, xerr=np.nan_to_num(err), error_kw={"elinewidth": 0.8, "capsize": 2})
    ax.set_yticks(y, list(groups))
    ax.set_xscale("log" if logx else "linear")
    ax.set_xlabel(xlabel)
    ax.grid(True, axis="x", linewidth=0.3, color="0.85")
    ax.legend(frameon=False, loc="lower center", bbox_to_anchor=(0.5, 1.0), ncol=min(n, 3),
              title="error bars: 95% interval", title_fontsize=6)
    return fig
