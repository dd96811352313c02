"""A map of the network: sites at their coordinates, links coloured by capacity, width by use.

Sites without coordinates are placed by a seeded spring layout (then the map is marked
"layout, not to scale" and has no km scale bar). Sites are drawn with a marker per role, links
with a perceptually uniform colour map (cividis, readable in greyscale) on a logarithmic scale
with a colour bar, and line width growing with utilisation.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.colors import LogNorm, Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from netsim.report.figures import COLUMN_WIDTH_IN, with_style

__all__ = ["ROLE_MARKERS", "MapLink", "MapSite", "network_map", "positions", "scale_length_km", "short_labels"]

ROLE_MARKERS = {"user": "o", "repeater": "s", "switch": "^"}
MIN_WIDTH, MAX_WIDTH = 0.8, 4.0


@dataclass(frozen=True)
class MapSite:
    """A site to draw: name, role and coordinates in km (``None`` when unknown)."""

    name: str
    role: str = "user"
    x_km: float | None = None
    y_km: float | None = None


@dataclass(frozen=True)
class MapLink:
    """A link to draw: its ends, capacity (colour) and utilisation in [0, 1] (width)."""

    a: str
    b: str
    capacity: float
    utilisation: float | None = None


def positions(sites: Sequence[MapSite], links: Sequence[MapLink],
              seed: int = 1) -> tuple[dict[str, tuple[float, float]], bool]:
    """Site positions and whether they are true coordinates in km.

    Uses the sites' coordinates when every site has them; otherwise a spring layout of the link
    graph (networkx, fixed ``seed``), which has no physical scale.
    """
    if all(s.x_km is not None and s.y_km is not None for s in sites):
        return {s.name: (float(s.x_km), float(s.y_km)) for s in sites}, True  # type: ignore[arg-type]
    import networkx as nx

    graph = nx.Graph()
    graph.add_nodes_from(s.name for s in sites)
    graph.add_edges_from((link.a, link.b) for link in links)
    layout = nx.spring_layout(graph, seed=seed)
    return {n: (float(p[0]), float(p[1])) for n, p in layout.items()}, False


def scale_length_km(span_km: float) -> float:
    """A round scale-bar length (1, 2 or 5 times a power of ten) near a fifth of ``span_km``."""
    target = max(span_km, 1e-9) / 5.0
    power = 10.0 ** math.floor(math.log10(target))
    return max(m * power for m in (1, 2, 5) if m * power <= target)


def _widths(links: Sequence[MapLink]) -> np.ndarray:
    use = np.array([np.nan if link.utilisation is None else link.utilisation for link in links])
    use = np.clip(np.nan_to_num(use, nan=0.0), 0.0, 1.0)
    return MIN_WIDTH + (MAX_WIDTH - MIN_WIDTH) * use


def _norm(capacity: np.ndarray) -> Normalize:
    positive = capacity[capacity > 0]
    if positive.size and positive.max() > positive.min() * 1.0001:
        return LogNorm(vmin=positive.min(), vmax=positive.max())
    top = float(positive.max()) if positive.size else 1.0
    return Normalize(vmin=0.0, vmax=top)


def _draw_links(ax: Axes, links: Sequence[MapLink], pos: Mapping[str, tuple[float, float]],
                cmap: str) -> LineCollection:
    segments = [[pos[link.a], pos[link.b]] for link in links]
    capacity = np.array([link.capacity for link in links], dtype=float)
    collection = LineCollection(segments, cmap=cmap, norm=_norm(capacity),
                                linewidths=_widths(links), capstyle="round", zorder=1)
    collection.set_array(np.where(capacity > 0, capacity, np.nan))
    ax.add_collection(collection)
    return collection


def short_labels(names: Sequence[str], max_length: int = 6) -> dict[str, str]:
    """Map labels: names up to ``max_length`` characters kept, longer ones as their initials
    (``"Harrow Quay Exchange"`` -> ``"HQE"``) or, for one word, its first four letters;
    numbered where two would coincide."""
    labels: dict[str, str] = {}
    for name in names:
        words = [w for w in name.replace("-", " ").split() if w]
        label = (name if len(name) <= max_length or not words else
                 words[0][:4] if len(words) == 1 else "".join(w[0].upper() for w in words))
        base, k = label, 2
        while label in labels.values():
            label, k = f"{base}{k}", k + 1
        labels[name] = label
    return labels


def _draw_sites(ax: Axes, sites: Sequence[MapSite], pos: Mapping[str, tuple[float, float]],
                labels: Mapping[str, str]) -> None:
    for role, marker in ROLE_MARKERS.items():
        chosen = [s for s in sites if s.role == role]
        if chosen:
            xy = np.array([pos[s.name] for s in chosen])
            ax.scatter(xy[:, 0], xy[:, 1], marker=marker, s=28, facecolor="white",
                       edgecolor="black", linewidth=0.9, zorder=3, label=role)
    xs = [p[0] for p in pos.values()]
    right_edge = max(xs) - 0.15 * (max(xs) - min(xs))
    for s in sites:
        x, y = pos[s.name]
        left = len(xs) > 1 and x > right_edge  # near the right frame: label on the left, not clipped
        ax.annotate(labels[s.name], (x, y), xytext=(-3 if left else 3, 3), textcoords="offset points",
                    fontsize=6, ha="right" if left else "left", zorder=4)


def _scale_bar(ax: Axes, pos: Mapping[str, tuple[float, float]]) -> float:
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    xs = [p[0] for p in pos.values()]
    length = scale_length_km(max(xs) - min(xs) if len(xs) > 1 else 1.0)
    bar = AnchoredSizeBar(ax.transData, length, f"{length:g} km", "lower right", pad=0.3,
                          frameon=False, size_vertical=0, fontproperties={"size": 7})
    ax.add_artist(bar)
    return length


def _legend(ax: Axes, sites: Sequence[MapSite], simulated: bool) -> None:
    """Markers per role and line widths for utilisation (when simulated), in the key axes ``ax``."""
    handles = [Line2D([], [], marker=m, linestyle="none", markerfacecolor="white",
                      markeredgecolor="black", label=r) for r, m in ROLE_MARKERS.items()
               if any(s.role == r for s in sites)]
    if simulated:
        handles += [Line2D([], [], color="0.3", linewidth=w, label=f"utilisation {u:.0%}")
                    for u, w in ((0.0, MIN_WIDTH), (0.5, (MIN_WIDTH + MAX_WIDTH) / 2), (1.0, MAX_WIDTH))]
    else:  # widths would all read "0 %": say instead that nothing was simulated
        handles.append(Line2D([], [], color="0.3", linewidth=MIN_WIDTH, label="fibre (not simulated)"))
    ax.legend(handles=handles, loc="upper center", ncol=3, frameon=False, fontsize=6,
              borderaxespad=0.0)


def _key(ax: Axes, labels: Mapping[str, str]) -> None:
    """The key of abbreviated site labels, at the bottom of the key axes ``ax``."""
    pairs = [f"{short}: {name}" for name, short in labels.items() if short != name]
    if pairs:
        ax.text(0.5, 0.0, "; ".join(pairs), ha="center", va="bottom", fontsize=5, wrap=True,
                transform=ax.transAxes)


def _map_axes() -> tuple[Figure, Axes, Axes]:
    """A column-wide figure: the map above, a key panel (legend and labels) below."""
    fig = Figure(figsize=(COLUMN_WIDTH_IN, 4.6), layout="constrained")
    FigureCanvasAgg(fig)
    ax, key = fig.subplots(2, 1, height_ratios=[5.0, 1.0])
    key.set_axis_off()
    return fig, ax, key


@with_style
def network_map(sites: Sequence[MapSite], links: Sequence[MapLink], *,
                capacity_label: str = "repeaterless bound (ebit/s)", cmap: str = "cividis",
                seed: int = 1) -> Figure:
    """Draw the network: a colour bar for link capacity, line widths for utilisation.

    Returns
    -------
    Figure
        One map axes (equal aspect, km on both axes when coordinates are known) and one colour
        bar axes labelled ``capacity_label``.
    """
    fig, ax, key = _map_axes()
    pos, to_scale = positions(sites, links, seed=seed)
    labels = short_labels([s.name for s in sites])
    collection = _draw_links(ax, links, pos, cmap)
    _draw_sites(ax, sites, pos, labels)
    ax.autoscale_view()
    ax.margins(0.12)
    ax.set_aspect("equal", adjustable="datalim")
    if to_scale:
        ax.set_xlabel("x (km)")
        ax.set_ylabel("y (km)")
        _scale_bar(ax, pos)
    else:
        ax.set_xticks([])
        ax.set_yticks([])
        ax.set_xlabel("layout, not to scale")
    bar = fig.colorbar(collection, ax=ax, location="top", shrink=0.8, aspect=30)
    bar.set_label(capacity_label)
    if isinstance(collection.norm, LogNorm):
        bar.ax.xaxis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
        bar.ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        bar.ax.xaxis.set_minor_formatter(NullFormatter())
    _legend(key, sites, simulated=any(link.utilisation is not None for link in links))
    _key(key, labels)
    return fig
