"""Tornado charts of a sensitivity ranking: per demand, one panel per figure (expected rate,
expected fidelity, useful-pair rate); per parameter a bar from the figure at the scenario's
values to the figure with that parameter at the low end (light) and at the high end (dark) of
its range, parameters ordered by their global index (the most important on top) and labelled
with it."""

from __future__ import annotations

import math
import textwrap
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from netsim.report.figures import COLOURS, with_style

__all__ = ["MAX_BARS", "tornado_figure", "tornado_figures"]

#: Parameters drawn per panel (the most important ones; the table holds them all).
MAX_BARS = 6


def _score(row: Mapping[str, Any], method: str) -> str:
    value = row.get("st" if method == "sobol" else "mu_star")
    if value is None or not math.isfinite(value):
        return ""
    return f"ST {value:.2f}" if method == "sobol" else f"mu* {value:.3g}"


@with_style
def tornado_figure(demand: str, rows: Sequence[Mapping[str, Any]], method: str,
                   subtitle: str = "") -> Figure:
    """One demand's tornado chart from its ranked rows (see
    :class:`netsim.sweep.sensitivity.Sensitivity`)."""
    figures = list(dict.fromkeys(r["figure"] for r in rows))
    fig = Figure(figsize=(7.0, 0.5 + 0.32 * MAX_BARS * len(figures)), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(len(figures), 1, squeeze=False)[:, 0]
    for ax, figure in zip(axes, figures):
        mine = sorted((r for r in rows if r["figure"] == figure), key=lambda r: r["rank"])[:MAX_BARS]
        base = float(mine[0]["baseline"]) if mine else 0.0
        y = np.arange(len(mine))[::-1]
        low = [float(r["at_low"]) - base for r in mine]
        high = [float(r["at_high"]) - base for r in mine]
        ax.barh(y, low, left=base, color=COLOURS[3], edgecolor="black", linewidth=0.4, label="parameter at low end")
        ax.barh(y, high, left=base, color=COLOURS[0], edgecolor="black", linewidth=0.4, label="parameter at high end")
        ax.axvline(base, color="black", linewidth=0.8)
        ax.set_yticks(y, [f"{r['parameter']} ({r['range']}){'; ' if _score(r, method) else ''}{_score(r, method)}"
                          for r in mine])
        span = max([abs(v) for v in low + high] + [abs(base) * 1e-6, 1e-300])
        ax.set_xlim(base - 1.1 * span, base + 1.1 * span)
        ax.set_xlabel(f"{figure} (line: at the scenario's values, {base:.4g})")
    axes[0].legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), ncol=2, frameon=False)
    title = f"What moves {demand} most"
    fig.suptitle("\n".join(textwrap.wrap(title + (f" ({subtitle})" if subtitle else ""), 110)))
    return fig


def tornado_figures(result: Any) -> dict[str, Figure]:
    """One tornado chart per demand of a :class:`~netsim.sweep.sensitivity.Sensitivity`, by
    file stem ``tornado-<demand>``."""
    from netsim.report.build import file_stem

    how = "Sobol' total index ST" if result.method == "sobol" else "Morris mu*"
    charts = {}
    for demand in dict.fromkeys(r["demand"] for r in result.rows):
        rows = [r for r in result.rows if r["demand"] == demand]
        charts[file_stem(f"tornado-{demand}")] = tornado_figure(demand, rows, result.method, f"ordered by {how}")
    return charts
