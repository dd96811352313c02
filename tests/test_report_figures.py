"""Figures: inspect the matplotlib objects (axes, labels, scales, lines), never pixels."""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.collections import LineCollection, PolyCollection

from netsim.report.figures import (
    COLUMN_WIDTH_IN,
    heatmap,
    metric_vs_parameter,
    rate_vs_distance,
    save_figure,
)
from netsim.report.netmap import MapLink, MapSite, network_map, scale_length_km

LENGTHS = np.linspace(1.0, 100.0, 25)


def _bound(length_km: np.ndarray, alpha_db_per_km: float = 0.2) -> np.ndarray:
    eta = 10 ** (-alpha_db_per_km * length_km / 10)
    return -np.log2(1 - eta)


def test_rate_vs_distance_axes_and_lines(tmp_path) -> None:
    rates = {"two_photon": 0.5 * 10 ** (-0.02 * LENGTHS), "single_photon": 0.1 * 10 ** (-0.01 * LENGTHS)}
    fig = rate_vs_distance(LENGTHS, rates, _bound(LENGTHS))
    ax = fig.axes[0]
    assert ax.get_yscale() == "log"
    assert ax.get_xlabel() == "link length (km)" and "channel use" in ax.get_ylabel()
    lines = ax.get_lines()
    assert [line.get_label() for line in lines][1:] == ["two photon", "single photon"]
    assert "repeaterless" in lines[0].get_label()
    # Repeaterless bound -log2(1 - eta) (Pirandola et al., Nat. Commun. 8, 15043, 2017).
    assert np.allclose(lines[0].get_ydata(), _bound(LENGTHS))
    assert len({str(line.get_linestyle()) for line in lines[1:]}) == 2
    assert len({line.get_marker() for line in lines[1:]}) == 2
    assert fig.get_size_inches()[0] == pytest.approx(COLUMN_WIDTH_IN)
    assert ax.xaxis.label.get_fontsize() >= 7
    paths = save_figure(fig, tmp_path / "rate")
    assert [p.suffix for p in paths] == [".png", ".pdf"] and all(p.stat().st_size > 0 for p in paths)
    assert paths[1].read_bytes()[:4] == b"%PDF"


def test_metric_vs_parameter_draws_bands() -> None:
    x = np.array([0.2, 0.25, 0.3])
    fig = metric_vs_parameter({"Aldmoor-Cindervale": (x, [3.0, 2.0, 1.0], [2.5, 1.5, 0.5],
                                                      [3.5, 2.5, 1.5])},
                              xlabel="attenuation (dB/km)", ylabel="delivered rate (pairs/s)")
    ax = fig.axes[0]
    assert ax.get_xlabel() == "attenuation (dB/km)"
    assert [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert np.allclose(ax.get_lines()[0].get_ydata(), [3.0, 2.0, 1.0])


def test_heatmap_has_labelled_colour_bar() -> None:
    z = np.arange(6.0).reshape(2, 3)
    fig = heatmap([0.2, 0.25, 0.3], [0.1, 1.0], z, xlabel="attenuation (dB/km)",
                  ylabel="T2 (s)", zlabel="delivered rate (pairs/s)")
    assert len(fig.axes) == 2
    assert fig.axes[1].get_ylabel() == "delivered rate (pairs/s)"
    assert np.array_equal(fig.axes[0].images[0].get_array(), z)
    assert fig.axes[0].images[0].get_cmap().name == "viridis"


def _sites(with_coordinates: bool = True) -> list[MapSite]:
    xy = {"Aldmoor": (0.0, 0.0), "Brackwater": (12.0, 3.0), "Cindervale": (25.0, -4.0),
          "Fenwick Cross": (10.0, -10.0)}
    roles = {"Aldmoor": "user", "Brackwater": "repeater", "Cindervale": "user",
             "Fenwick Cross": "switch"}
    return [MapSite(n, roles[n], *(xy[n] if with_coordinates else (None, None))) for n in xy]


LINKS = [MapLink("Aldmoor", "Brackwater", 300.0, 0.8), MapLink("Brackwater", "Cindervale", 80.0, 0.4),
         MapLink("Aldmoor", "Fenwick Cross", 150.0, 0.0), MapLink("Fenwick Cross", "Cindervale", 40.0)]


def test_network_map_colours_and_widths() -> None:
    fig = network_map(_sites(), LINKS)
    ax, key, bar = fig.axes
    links = next(c for c in ax.collections if isinstance(c, LineCollection))
    assert np.allclose(links.get_array(), [300.0, 80.0, 150.0, 40.0])
    widths = links.get_linewidths()
    assert widths[0] > widths[1] > widths[2] == widths[3]
    assert links.get_cmap().name == "cividis"
    assert "ebit/s" in bar.get_xlabel()
    assert ax.get_xlabel() == "x (km)" and ax.get_ylabel() == "y (km)"
    assert any("km" in t.get_text() for a in ax.artists for t in a.findobj(lambda o: hasattr(o, "get_text")))
    assert {t.get_text() for t in key.get_legend().get_texts()} >= {"user", "repeater", "switch"}
    labels = {t.get_text() for t in ax.texts}
    assert labels == {"Aldm", "Brac", "Cind", "FC"}            # long names abbreviated ...
    assert "FC: Fenwick Cross" in key.texts[0].get_text()     # ... and keyed below the map


def test_network_map_without_coordinates_is_marked_not_to_scale() -> None:
    fig = network_map(_sites(with_coordinates=False), LINKS)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "layout, not to scale" and not ax.artists


@pytest.mark.parametrize(("span", "expected"), [(25.0, 5.0), (100.0, 20.0), (3.0, 0.5), (60.0, 10.0)])
def test_scale_bar_length_is_round(span: float, expected: float) -> None:
    assert scale_length_km(span) == expected


def test_report_map_widths_follow_the_runs_utilisation() -> None:
    from pathlib import Path

    from netsim.report.build import report_figures
    from netsim.report.netmap import MAX_WIDTH, MIN_WIDTH
    from netsim.report.sources import load_source

    data = load_source(Path(__file__).resolve().parents[1] / "scenarios" / "chain3.toml")
    data.run = {"demands": [], "links": [{"link": "Alder Row Lab-Brackwater Relay", "utilisation": 0.5}]}
    figures = report_figures(data)
    assert set(figures) == {"network-map", "rate-vs-distance"}
    ax = figures["network-map"].axes[0]
    links = next(c for c in ax.collections if isinstance(c, LineCollection))
    assert np.allclose(links.get_linewidths(), [(MIN_WIDTH + MAX_WIDTH) / 2, MIN_WIDTH])
    assert np.allclose(links.get_array(), [r["plob_bits_per_s"] for r in data.links])
    curves = figures["rate-vs-distance"].axes[0].get_lines()
    assert [c.get_label() for c in curves[1:]] == ["two photon", "single photon", "midpoint source", "direct"]


def test_scheme_curves_scale_as_published() -> None:
    # Two-photon heralding succeeds with ~eta_a eta_b / 2, i.e. proportional to the whole link's
    # transmissivity (Barrett & Kok, PRA 71, 060310(R), 2005); single-photon heralding with
    # ~2 alpha eta_arm, i.e. proportional to its square root (Cabrillo et al., PRA 59, 1025,
    # 1999). Between 10 and 30 km (dark counts negligible) the log-log slopes are 1 and 1/2.
    from pathlib import Path

    from netsim.report.plots import scheme_curves
    from netsim.scenario import load

    scenario = load(Path(__file__).resolve().parents[1] / "scenarios" / "chain3.toml")
    rates, bound = scheme_curves(scenario, [10.0, 30.0])
    eta = 1 - 2.0 ** (-bound)                       # invert the bound -log2(1 - eta)
    slope = {s: np.log(r[1] / r[0]) / np.log(eta[1] / eta[0]) for s, r in rates.items()}
    assert slope["two_photon"] == pytest.approx(1.0, abs=0.02)
    assert slope["single_photon"] == pytest.approx(0.5, abs=0.02)


def _three_axis_records() -> list[dict]:
    """A synthetic sweep of three parameters (the third with two values, one of them a float
    with representation noise) for one demand; the metric encodes its own coordinates."""
    records = []
    for a in (0.2, 0.3):
        for t2 in (0.1, 1.0):
            for eff in (0.5, 0.7000000000000001):
                records.append({"defaults.link.attenuation_db_per_km": a, "sites[*].t2_s": t2,
                                "sites[role=user].emission_efficiency": eff, "kind": "demand",
                                "name": "Wick-Yarrow", "repeat": 0, "point_id": f"{a}-{t2}-{eff}",
                                "rate_per_s": 100 * a + 10 * t2 + eff, "fidelity_mean": 0.9})
    return records


def test_sweep_figures_cover_every_value_of_the_third_axis_with_rounded_names() -> None:
    """Figures were drawn for the first value of the third axis only, with raw floats in the
    names; now one heatmap and one line figure per value, key as written, value rounded."""
    from netsim.report.plots import sweep_figures
    from netsim.report.sources import ReportData

    params = ["defaults.link.attenuation_db_per_km", "sites[*].t2_s", "sites[role=user].emission_efficiency"]
    data = ReportData("store", "wick", "Wick test", records=_three_axis_records(), parameters=params)
    figures = sweep_figures(data, params, {"rate_per_s": None})
    stems = sorted(figures)
    assert len(stems) == 4, stems                                   # 2 kinds x 2 values of the third axis
    assert any("emission_efficiency-0.7" in s and "0000000000001" not in s for s in stems), stems
    assert any("emission_efficiency-0.5" in s for s in stems), stems
    for stem, fig in figures.items():
        title = fig.axes[0].get_title() if stem.startswith("heatmap") else fig._suptitle.get_text()
        flat = title.replace("\n", " ")
        assert "sites[role=user].emission_efficiency=0." in flat and "0000000000001" not in flat
        assert ("=0.5" in flat) == ("0.5" in stem)
        # the label (caption) names what is held fixed
        assert "held at sites[role=user].emission_efficiency=" in fig.get_label()
    heat = next(f for s, f in figures.items() if s.startswith("heatmap") and "0.7" in s)
    image = heat.axes[0].images[0].get_array()
    assert float(image[0, 0]) == pytest.approx(100 * 0.2 + 10 * 0.1 + 0.7)   # the 0.7 slice, not 0.5


def test_long_titles_wrap_inside_the_figure() -> None:
    """A heatmap title naming a long demand and a fixed parameter was clipped at the edges."""
    fig = heatmap([0.2, 0.3], [0.1, 1.0], np.ones((2, 2)), xlabel="a", ylabel="b", zlabel="c",
                  title="demand Saltmarsh Data Centre-Kestrel Park Research Campus, "
                        "sites[role=user].emission_efficiency=0.7, links[name=Harrow Quay-Brindle Gate].modes=4")
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    box = fig.axes[0].title.get_window_extent(renderer)
    width, height = fig.get_size_inches() * fig.dpi
    assert box.x0 >= 0 and box.x1 <= width and box.y1 <= height
    assert all(len(line) <= 58 for line in fig.axes[0].get_title().splitlines())
