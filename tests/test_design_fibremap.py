"""netsim import: fibre maps (GeoJSON, GraphML, CSV) into scenarios; the round trip to a design.

Geodesic reference values: one degree of latitude at the equator is 110.574 km and one degree of
longitude along the equator 111.320 km on the WGS84 ellipsoid (memory; standard geodesy tables).
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import pytest

from netsim.cli import main
from netsim.design.fibremap import geodesic_km, import_fibre_map, lonlat_to_km
from netsim.errors import ScenarioError
from netsim.scenario import load

ROOT = Path(__file__).resolve().parent.parent
TARROWBY = ROOT / "scenarios" / "tarrowby"


def test_geodesic_degree_lengths() -> None:
    """WGS84: 1 degree of latitude at the equator 110.574 km, of longitude 111.320 km (memory)."""
    assert geodesic_km([0.0, 0.0], [0.0, 1.0]) == pytest.approx(110.574, abs=0.002)
    assert geodesic_km([0.0, 1.0], [0.0, 0.0]) == pytest.approx(111.320, abs=0.002)


def test_projection_keeps_metro_distances() -> None:
    """Map distances on the projection agree with geodesic distances to better than 0.1 % over
    30 km (an azimuthal equidistant projection is exact from its centre; common practice)."""
    points = [(-30.1, -39.95), (-29.78, -39.88), (-30.02, -40.12)]
    km = lonlat_to_km(points)
    for i in range(3):
        for j in range(i + 1, 3):
            d_map = math.dist(km[i], km[j])
            d_geo = geodesic_km([points[i][0], points[j][0]], [points[i][1], points[j][1]])
            assert d_map == pytest.approx(d_geo, rel=1e-3)


def feature_collection(*features: dict[str, Any]) -> dict[str, Any]:
    return {"type": "FeatureCollection", "features": list(features)}


def point(name: str, role: str, lon: float, lat: float, **props: Any) -> dict[str, Any]:
    return {"type": "Feature", "geometry": {"type": "Point", "coordinates": [lon, lat]},
            "properties": {"name": name, "role": role, **props}}


def line(coords: list[list[float]], **props: Any) -> dict[str, Any]:
    return {"type": "Feature", "geometry": {"type": "LineString", "coordinates": coords}, "properties": props}


def test_geojson_lengths_snapping_and_properties(tmp_path: Path) -> None:
    """Invented sites on the equator: a fibre along 0.1 degree of longitude is 11.132 km
    (111.320 km per degree, memory); a length property wins; loss_db becomes dB/km."""
    path = tmp_path / "map.geojson"
    path.write_text(json.dumps(feature_collection(
        point("Ossa Lab", "user", 0.0, 0.0), point("Pell Relay", "repeater", 0.1, 0.0, candidate=True, cost=90),
        point("Quill Lab", "user", 0.2, 0.0),
        line([[0.0, 0.0], [0.1, 0.0005]], loss_db=3.0),
        line([[0.1, 0.0], [0.2, 0.0]], a="Pell Relay", b="Quill Lab", length_km=14.5, candidate=True))))
    tables = import_fibre_map(path)
    first, second = tables["links"]
    assert first["ends"] == ["Ossa Lab", "Pell Relay"]
    assert first["length_km"] == pytest.approx(11.132, abs=0.01)
    assert first["attenuation_db_per_km"] == pytest.approx(3.0 / first["length_km"], rel=1e-5)
    assert second["length_km"] == 14.5 and second["candidate"] is True
    pell = tables["sites"][1]
    assert pell["candidate"] is True and pell["cost"] == 90.0
    assert pell["x_km"] - tables["sites"][0]["x_km"] == pytest.approx(11.132, abs=0.01)


def test_geojson_bad_features_one_line_each_nothing_written(tmp_path: Path, capsys: Any) -> None:
    path = tmp_path / "bad.geojson"
    path.write_text(json.dumps(feature_collection(
        point("Ossa Lab", "user", 0.0, 0.0, memory_slots=-1, colour="red"),
        point("Pell Relay", "router", 0.1, 0.0),
        {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": []}, "properties": {}},
        line([[0.0, 0.0], [0.3, 0.0]]),
        point("Quill Lab", "user", 200.0, 0.0))))
    out = tmp_path / "out.toml"
    assert main(["import", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 5
    assert err[0].startswith("netsim import: error: ") and "features[0] ('Ossa Lab'): memory_slots: -1 is not allowed" in err[0]
    assert "colour: unknown property" in err[0]
    assert "features[1] ('Pell Relay'): role: 'router' is not allowed; expected one of 'user'" in err[1]
    assert "features[2]: geometry type 'Polygon' is not allowed" in err[2]
    assert "features[3]: the last point [0.3, 0] is not within 100 m of a site" in err[3]
    assert "features[4] ('Quill Lab'): coordinates: [200.0, 0.0] is not allowed" in err[4]
    assert not out.exists()


def test_csv_tables(tmp_path: Path) -> None:
    sites = tmp_path / "sites.csv"
    sites.write_text("name,role,x_km,y_km,candidate,memory_slots\nRook Lab,user,0,0,,\n"
                     "Sable Relay,repeater,8,1,true,4\nTern Lab,user,15,0,,\n")
    links = tmp_path / "links.csv"
    links.write_text("a,b,length_km,cost,candidate\nRook Lab,Sable Relay,9.5,,true\n"
                     "Sable Relay,Tern Lab,,12.5,true\n")
    with pytest.raises(ScenarioError) as err:
        import_fibre_map(sites, links_path=links)
    assert str(err.value).splitlines() == [
        f"{sites}: links.csv row 3 ('Sable Relay-Tern Lab'): length_km: missing; required, the fibre route "
        "length (or length_m)"]
    links.write_text("a,b,length_km,cost,candidate\nRook Lab,Sable Relay,9.5,,true\n"
                     "Sable Relay,Tern Lab,7.25,12.5,true\n")
    tables = import_fibre_map(sites, links_path=links)
    assert tables["sites"][1] == {"name": "Sable Relay", "role": "repeater", "candidate": True, "memory_slots": 4,
                                  "x_km": 8.0, "y_km": 1.0}
    assert tables["links"][1] == {"ends": ["Sable Relay", "Tern Lab"], "length_km": 7.25, "cost": 12.5,
                                  "candidate": True}


def test_graphml(tmp_path: Path) -> None:
    import networkx as nx

    graph = nx.Graph()
    graph.add_node("n1", name="Umber Lab", role="user", lon=0.0, lat=0.0)
    graph.add_node("n2", name="Vetch Relay", role="repeater", lon=0.05, lat=0.0, candidate="true")
    graph.add_node("n3", name="Wren Lab", role="user", lon=0.1, lat=0.0)
    graph.add_edge("n1", "n2", length_m=6100.0)
    graph.add_edge("n2", "n3", length_km=6.4, modes=2)
    path = tmp_path / "map.graphml"
    nx.write_graphml(graph, path)
    tables = import_fibre_map(path)
    assert [s["name"] for s in tables["sites"]] == ["Umber Lab", "Vetch Relay", "Wren Lab"]
    assert tables["sites"][1]["candidate"] is True
    assert tables["links"][0] == {"ends": ["Umber Lab", "Vetch Relay"], "length_km": 6.1}
    assert tables["links"][1]["modes"] == 2


def test_round_trip_geojson_design_simulation(tmp_path: Path) -> None:
    """The README workflow on the invented city: import, design, load the design and simulate it;
    the designed network's simulated rates and fidelities meet every demand."""
    scenario = tmp_path / "tarrowby.toml"
    assert main(["import", str(TARROWBY / "fibre.geojson"), "--with", str(TARROWBY / "plan.toml"),
                 "--out", str(scenario)]) == 0
    loaded = load(scenario)
    assert len(loaded.candidate_sites) == 3 and len(loaded.demands) == 4
    out = tmp_path / "design"
    assert main(["design", str(scenario), "--out", str(out), "--pairs", "300"]) == 0
    record = json.loads((out / "design.json").read_text())
    assert record["status"] == "optimal"
    assert all(v["verdict"] == "met" for v in record["verdicts"])
    designed = load(out / "design.toml")
    from netsim.engine import run

    result = run(designed, pairs=300, seed=5, ensembles=False).to_dict()
    for demand, row in zip(designed.demands, result["demands"]):
        assert row["fidelity_mean"] >= demand.min_fidelity
        assert row["rate_ci95"][1] >= (demand.min_rate_per_s or 0.0)
