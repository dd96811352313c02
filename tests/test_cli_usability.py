"""What a planner reads: names in outputs match the scenario file as written."""

from __future__ import annotations

from pathlib import Path

import pytest

from netsim.cli import main

CHAIN = """
[network]
name = "Yarrowby spur"

[[sites]]
name = "Yarrowby Lab"
role = "user"

[[sites]]
name = "Quillmere Relay"
role = "repeater"

[[sites]]
name = "Ashwick Campus"
role = "user"

[[links]]
ends = ["Yarrowby Lab", "Quillmere Relay"]
length_km = 6.0

[[links]]
ends = ["Quillmere Relay", "Ashwick Campus"]
length_km = 14.0

[[demands]]
users = ["Yarrowby Lab", "Ashwick Campus"]
pairs = 20
"""


def test_bottleneck_link_is_named_as_in_the_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A chain's minimum cut is its weakest link (Pirandola, Commun. Phys. 2, 51, 2019): here the
    longer 14 km link, which the file and the budget table call 'Quillmere Relay-Ashwick Campus'
    (its ends in file order, not sorted)."""
    path = tmp_path / "spur.toml"
    path.write_text(CHAIN)
    twin = tmp_path / "spur-b.toml"
    twin.write_text(CHAIN.replace("length_km = 6.0", "length_km = 5.0"))
    assert main(["compare", str(path), str(twin), "--no-simulate", "--format", "csv"]) == 0
    out = capsys.readouterr().out
    assert "Quillmere Relay-Ashwick Campus" in out
    assert "Ashwick Campus-Quillmere Relay" not in out
    assert main(["budget", str(path), "--format", "csv", "--only", "links"]) == 0
    assert "Quillmere Relay-Ashwick Campus" in capsys.readouterr().out


def test_rate_vs_distance_legend_sits_clear_of_the_curves() -> None:
    """The scheme legend is drawn above the plotting area, so no curve runs under it."""
    import numpy as np

    from netsim.report.figures import rate_vs_distance

    lengths = np.linspace(1.0, 120.0, 20)
    eta = 10 ** (-0.2 * lengths / 10)
    rates = {name: k * eta for name, k in
             (("two_photon", 0.1), ("single_photon", 0.3), ("midpoint_source", 0.01), ("direct", 0.5))}
    fig = rate_vs_distance(lengths, rates, -np.log2(1 - eta))
    fig.canvas.draw()
    ax = fig.axes[0]
    legend = ax.get_legend().get_window_extent()
    assert legend.y0 >= ax.get_window_extent().y1 - 1.0
