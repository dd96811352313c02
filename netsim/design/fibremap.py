"""Fibre maps in: GeoJSON, GraphML or a pair of CSV tables -> a scenario mapping (TOML-ready).

- **GeoJSON** (RFC 7946; longitude/latitude on WGS84): ``Point`` features are sites, with
  properties ``name`` and ``role`` and any other site key (``candidate``, ``cost``,
  ``memory_slots``, ...); ``LineString`` features are fibres. A fibre names its ends with the
  properties ``a`` and ``b``, or else each end point is matched to the site within
  ``snap_m`` metres of it. Its ``length_km`` is the geodesic length of the line on the WGS84
  ellipsoid (pyproj) unless a property gives ``length_km``; a ``loss_db`` property (measured
  end-to-end fibre loss) becomes ``attenuation_db_per_km = loss_db / length_km``; ``cost`` and
  any other link key pass through.
- **GraphML**: nodes are sites (``name`` attribute or the node id, ``role``, and ``lon``/``lat``
  or ``x_km``/``y_km``); edges are fibres with ``length_km`` (or ``length_m``) and link keys.
- **CSV**: a sites table (``name``, ``role``, ``lon``/``lat`` or ``x_km``/``y_km``, site keys)
  and a links table (``a``, ``b``, ``length_km`` or ``length_m``, link keys).

Longitude and latitude become ``x_km`` (east) and ``y_km`` (north) through an azimuthal
equidistant projection centred on the sites' mean position (pyproj): distances from the centre
are exact and, across a metropolitan area, map distances are off by well under 0.1 %.

Every bad feature, node, edge or row gets one problem naming it, and the caller writes nothing.
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from netsim.errors import Problem, ScenarioError, format_value
from netsim.scenario.fields import LINK_FIELDS, SITE_FIELDS, Spec

__all__ = ["FORMATS", "import_fibre_map", "lonlat_to_km"]

FORMATS = ("geojson", "graphml", "csv")
#: Site and link keys a fibre map may carry (coordinates are computed, ends named apart).
_SITE_KEYS = {k: v for k, v in SITE_FIELDS.items() if k not in ("x_km", "y_km")}
_LINK_KEYS = dict(LINK_FIELDS)


def lonlat_to_km(points: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
    """(lon, lat) in degrees -> (x_km, y_km) on an azimuthal equidistant projection (WGS84)
    centred on the points' mean position."""
    from pyproj import CRS, Transformer

    if not points:
        return []
    lon0 = sum(p[0] for p in points) / len(points)
    lat0 = sum(p[1] for p in points) / len(points)
    crs = CRS.from_proj4(f"+proj=aeqd +lat_0={lat0} +lon_0={lon0} +datum=WGS84 +units=m +no_defs")
    to_map = Transformer.from_crs("EPSG:4326", crs, always_xy=True)
    out = []
    for lon, lat in points:
        x, y = to_map.transform(lon, lat)
        out.append((round(x / 1000.0, 4), round(y / 1000.0, 4)))
    return out


def geodesic_km(lons: Sequence[float], lats: Sequence[float]) -> float:
    """Length of a polyline on the WGS84 ellipsoid (pyproj.Geod), in km."""
    from pyproj import Geod

    return float(Geod(ellps="WGS84").line_length(list(lons), list(lats))) / 1000.0


def _convert(text: Any, spec: Spec) -> Any:
    """A CSV/GraphML string as the spec's type (a number stays as given if already typed)."""
    if not isinstance(text, str):
        return text
    raw = text.strip()
    if spec.kind == "bool":
        low = raw.lower()
        return True if low == "true" else False if low == "false" else raw
    if spec.kind == "int":
        try:
            return int(raw)
        except ValueError:
            return raw
    if spec.kind == "real":
        try:
            return float(raw)
        except ValueError:
            return raw
    return raw


def _keys(label: str, props: Mapping[str, Any], specs: Mapping[str, Spec], skip: Sequence[str],
          problems: list[Problem]) -> dict[str, Any]:
    """Checked scenario keys of one element; a problem per bad or unknown key, naming ``label``."""
    out: dict[str, Any] = {}
    for key, value in props.items():
        if key in skip or value is None or (isinstance(value, str) and value.strip() == "" and key != "name"):
            continue
        spec = specs.get(key)
        if spec is None:
            allowed = ", ".join([*specs, *skip])
            problems.append(Problem(label, f"{key}: unknown property; allowed: {allowed}"))
            continue
        value = _convert(value, spec)
        if not spec.accepts(value):
            problems.append(Problem(label, f"{key}: {spec.complaint(value)}"))
        else:
            out[key] = spec.convert(value)
    for key in ("name", "role") if specs is _SITE_KEYS else ():
        if key not in out and not any(p.path == label and p.message.startswith(f"{key}:") for p in problems):
            problems.append(Problem(label, f"{key}: missing; required, {specs[key].allowed()}"))
    return out


def _number(label: str, key: str, value: Any, problems: list[Problem], low: float | None = None,
            high: float | None = None) -> float | None:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = math.nan
    if isinstance(value, bool) or not math.isfinite(x) or (low is not None and x < low) or (high is not None and x > high):
        rng = f" in [{low:g}, {high:g}]" if low is not None and high is not None else ""
        problems.append(Problem(label, f"{key}: {format_value(value)} is not allowed; expected a number{rng}"))
        return None
    return x


def _length(label: str, props: dict[str, Any], problems: list[Problem]) -> None:
    """``length_m`` -> ``length_km``; ``loss_db`` -> ``attenuation_db_per_km`` (needs a length)."""
    if "length_m" in props:
        metres = _number(label, "length_m", props.pop("length_m"), problems, 0.0)
        if metres is not None and "length_km" not in props:
            props["length_km"] = metres / 1000.0
    if "loss_db" in props:
        loss = _number(label, "loss_db", props.pop("loss_db"), problems, 0.0)
        length = props.get("length_km")
        if loss is not None and isinstance(length, (int, float)) and length > 0:
            props["attenuation_db_per_km"] = float(f"{loss / float(length):.6g}")
            props.setdefault("extra_loss_db", 0.0)


def _site_entries(raw: list[tuple[str, dict[str, Any], tuple[float, float] | None, tuple[float, float] | None]],
                  problems: list[Problem]) -> tuple[list[dict[str, Any]], list[str]]:
    """Sites from (label, properties, lon/lat, x/y km); every site needs one kind of position or
    none at all, and the file must not mix lon/lat with km."""
    kinds = {("lonlat" if ll else "km" if xy else "none") for _, _, ll, xy in raw}
    if "lonlat" in kinds and "km" in kinds:
        problems.append(Problem("sites", "some sites give lon/lat and others x_km/y_km, which is not allowed; "
                                         "expected one kind of coordinates for every site"))
    lonlat = [ll for _, _, ll, _ in raw if ll]
    projected = iter(lonlat_to_km(lonlat))
    sites, labels = [], []
    for label, props, ll, xy in raw:
        site = _keys(label, props, _SITE_KEYS, (), problems)
        if ll:
            site["x_km"], site["y_km"] = next(projected)
        elif xy:
            site["x_km"], site["y_km"] = xy
        sites.append(site)
        labels.append(label)
    return sites, labels


def _geojson(path: Path, snap_m: float, problems: list[Problem]) -> tuple[list[dict[str, Any]], list[str],
                                                                           list[dict[str, Any]], list[str]]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        problems.append(Problem("", f"not a readable GeoJSON file: {exc}"))
        return [], [], [], []
    features = data.get("features") if isinstance(data, dict) and data.get("type") == "FeatureCollection" else None
    if not isinstance(features, list):
        problems.append(Problem("", 'not a GeoJSON FeatureCollection; expected {"type": "FeatureCollection", '
                                    '"features": [...]}'))
        return [], [], [], []
    raw_sites: list[Any] = []
    lines: list[tuple[str, dict[str, Any], list[tuple[float, float]]]] = []
    for i, feature in enumerate(features):
        geometry = feature.get("geometry") if isinstance(feature, dict) else None
        props = dict(feature.get("properties") or {}) if isinstance(feature, dict) else {}
        kind = geometry.get("type") if isinstance(geometry, dict) else None
        name = props.get("name")
        label = f"features[{i}]" + (f" ({format_value(name)})" if isinstance(name, str) else "")
        coords = geometry.get("coordinates") if isinstance(geometry, dict) else None
        if kind == "Point":
            point = _lonlat(label, coords, problems)
            raw_sites.append((label, props, point, None))
        elif kind == "LineString":
            if not isinstance(coords, list) or len(coords) < 2:
                problems.append(Problem(label, f"coordinates: {format_value(coords)} is not allowed; expected "
                                               "a LineString of at least two [lon, lat] positions"))
                continue
            checked = [_lonlat(label, c, problems) for c in coords]
            points = [p for p in checked if p is not None]
            if len(points) == len(checked):
                lines.append((label, props, points))
        else:
            problems.append(Problem(label, f"geometry type {format_value(kind)} is not allowed; expected "
                                           "Point (a site) or LineString (a fibre)"))
    sites, site_labels = _site_entries(raw_sites, problems)
    positions: dict[str, tuple[float, float]] = {
        str(s["name"]): ll for s, (_, _, ll, _) in zip(sites, raw_sites) if ll and s.get("name")}
    links, link_labels = [], []
    for label, props, points in lines:
        ends = _line_ends(label, props, points, positions, snap_m, problems)
        if "length_km" not in props and "length_m" not in props:
            props["length_km"] = round(geodesic_km([p[0] for p in points], [p[1] for p in points]), 4)
        _length(label, props, problems)
        link = _keys(label, props, _LINK_KEYS, ("a", "b", "name"), problems)
        if ends:
            links.append({"ends": list(ends), **link})
            link_labels.append(label)
    return sites, site_labels, links, link_labels


def _lonlat(label: str, value: Any, problems: list[Problem]) -> tuple[float, float] | None:
    ok = isinstance(value, (list, tuple)) and len(value) >= 2 and all(
        isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in value[:2])
    if not ok or not (-180.0 <= value[0] <= 180.0 and -90.0 <= value[1] <= 90.0):
        problems.append(Problem(label, f"coordinates: {format_value(value)} is not allowed; expected "
                                       "[longitude, latitude] in degrees (WGS84, longitude first)"))
        return None
    return float(value[0]), float(value[1])


def _line_ends(label: str, props: dict[str, Any], points: list[tuple[float, float]],
               positions: Mapping[str, tuple[float, float]], snap_m: float,
               problems: list[Problem]) -> tuple[str, str] | None:
    if "a" in props or "b" in props:
        a, b = props.get("a"), props.get("b")
        bad = [(k, v) for k, v in (("a", a), ("b", b)) if not isinstance(v, str) or v not in positions]
        for key, value in bad:
            problems.append(Problem(label, f"{key}: {format_value(value)} is not allowed; expected the name of a "
                                           "Point site of the file"))
        return None if bad else (str(a), str(b))
    from pyproj import Geod

    geod = Geod(ellps="WGS84")
    ends = []
    for which, (lon, lat) in (("first", points[0]), ("last", points[-1])):
        best, best_m = None, math.inf
        for name, (slon, slat) in positions.items():
            _, _, metres = geod.inv(lon, lat, slon, slat)
            if metres < best_m:
                best, best_m = name, metres
        if best is None or best_m > snap_m:
            near = f"; the nearest site, {format_value(best)}, is {best_m:.0f} m away" if best else ""
            problems.append(Problem(label, f"the {which} point [{lon:g}, {lat:g}] is not within {snap_m:g} m of a "
                                           f"site{near}; give properties a and b or move the point"))
            return None
        ends.append(best)
    return ends[0], ends[1]


def _read_csv(path: Path, label: str, problems: list[Problem]) -> list[tuple[str, dict[str, Any]]]:
    try:
        with path.open(newline="", encoding="utf-8-sig") as handle:
            rows = list(csv.DictReader(handle))
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        problems.append(Problem(str(path), f"not a readable CSV file: {exc}"))
        return []
    out = []
    for i, row in enumerate(rows):
        name = row.get("name") or (f"{row.get('a')}-{row.get('b')}" if row.get("a") else None)
        extra = row.pop(None, None)  # type: ignore[call-overload]
        tag = f"{path.name} row {i + 2}" + (f" ({format_value(name)})" if name else "")
        if extra:
            problems.append(Problem(tag, f"{len(extra)} value(s) beyond the header's columns is not allowed"))
        out.append((tag, {k: v for k, v in row.items() if k is not None}))
    return out


def _positioned(label: str, props: dict[str, Any], problems: list[Problem]
                ) -> tuple[tuple[float, float] | None, tuple[float, float] | None]:
    """Pull lon/lat or x_km/y_km out of ``props``."""
    lon, lat, x, y = (props.pop(k, None) for k in ("lon", "lat", "x_km", "y_km"))
    given = lambda v: v is not None and v != ""  # noqa: E731
    if given(lon) or given(lat):
        lo = _number(label, "lon", lon, problems, -180.0, 180.0)
        la = _number(label, "lat", lat, problems, -90.0, 90.0)
        return ((lo, la) if lo is not None and la is not None else None), None
    if given(x) or given(y):
        xs, ys = _number(label, "x_km", x, problems), _number(label, "y_km", y, problems)
        return None, ((xs, ys) if xs is not None and ys is not None else None)
    return None, None


def _table_links(rows: list[tuple[str, dict[str, Any]]], names: set[str], problems: list[Problem]
                 ) -> tuple[list[dict[str, Any]], list[str]]:
    links, labels = [], []
    for label, props in rows:
        a, b = props.pop("a", None), props.pop("b", None)
        bad = False
        for key, value in (("a", a), ("b", b)):
            if not isinstance(value, str) or value not in names:
                problems.append(Problem(label, f"{key}: {format_value(value)} is not allowed; expected the name of "
                                               "a site of the sites table"))
                bad = True
        props = {k: v for k, v in props.items() if not (isinstance(v, str) and v.strip() == "")}
        if "length_km" not in props and "length_m" not in props:
            problems.append(Problem(label, "length_km: missing; required, the fibre route length (or length_m)"))
            bad = True
        _length(label, props, problems)
        link = _keys(label, props, _LINK_KEYS, ("name",), problems)
        if not bad:
            links.append({"ends": [a, b], **link})
            labels.append(label)
    return links, labels


def _graphml(path: Path, problems: list[Problem]) -> tuple[list[dict[str, Any]], list[str],
                                                          list[dict[str, Any]], list[str]]:
    import networkx as nx

    try:
        graph = nx.read_graphml(path)
    except Exception as exc:  # noqa: BLE001 - any parser failure is one line for the user
        problems.append(Problem("", f"not a readable GraphML file: {exc}"))
        return [], [], [], []
    raw_sites, ids = [], {}
    for node, attrs in graph.nodes(data=True):
        props = {k: (str(v) if not isinstance(v, str) else v) if isinstance(v, bool) is False else v
                 for k, v in attrs.items()}
        props.setdefault("name", str(node))
        label = f"node {format_value(node)}"
        ll, xy = _positioned(label, props, problems)
        raw_sites.append((label, props, ll, xy))
        ids[node] = props["name"]
    sites, site_labels = _site_entries(raw_sites, problems)
    rows = []
    for u, v, attrs in graph.edges(data=True):
        rows.append((f"edge {format_value(u)}-{format_value(v)}", {"a": ids.get(u), "b": ids.get(v), **dict(attrs)}))
    links, link_labels = _table_links(rows, set(ids.values()), problems)
    return sites, site_labels, links, link_labels


def import_fibre_map(path: str | Path, *, fmt: str | None = None, links_path: str | Path | None = None,
                     snap_m: float = 100.0) -> dict[str, Any]:
    """Read a fibre map and return ``{"sites": [...], "links": [...]}`` (scenario tables).

    Parameters
    ----------
    path : path
        The GeoJSON or GraphML file, or the sites CSV table.
    fmt : {"geojson", "graphml", "csv"}, optional
        Guessed from the suffix when not given (``.geojson``/``.json``, ``.graphml``, ``.csv``).
    links_path : path, optional
        The links CSV table (required with ``csv``).
    snap_m : float
        Largest distance (m) between a LineString's end point and the site it is matched to.

    Raises
    ------
    ScenarioError
        One line per bad feature, node, edge or row; nothing is returned then.
    """
    path = Path(path)
    fmt = fmt or {".geojson": "geojson", ".json": "geojson", ".graphml": "graphml", ".csv": "csv"}.get(
        path.suffix.lower())
    problems: list[Problem] = []
    if fmt not in FORMATS:
        raise ScenarioError([Problem("format", f"{format_value(fmt)} is not allowed; expected one of "
                                               + ", ".join(FORMATS))], source=str(path))
    if fmt == "geojson":
        sites, site_labels, links, link_labels = _geojson(path, snap_m, problems)
    elif fmt == "graphml":
        sites, site_labels, links, link_labels = _graphml(path, problems)
    else:
        if links_path is None:
            raise ScenarioError([Problem("links", "missing; the csv format needs a links table as well")],
                                source=str(path))
        raw = []
        for label, props in _read_csv(path, "sites", problems):
            ll, xy = _positioned(label, props, problems)
            raw.append((label, props, ll, xy))
        sites, site_labels = _site_entries(raw, problems)
        names = {s["name"] for s in sites if "name" in s}
        links, link_labels = _table_links(_read_csv(Path(links_path), "links", problems), names, problems)
    if not problems:
        problems += _duplicates(sites, site_labels, links, link_labels)
    if problems:
        raise ScenarioError(_one_line_each(problems), source=str(path))
    return {"sites": sites, "links": links}


def _one_line_each(problems: list[Problem]) -> list[Problem]:
    """One problem per feature, node, edge or row: its complaints joined with '; '."""
    import re

    merged: dict[str, list[str]] = {}
    for p in problems:
        merged.setdefault(p.path, []).append(p.message)

    def order(path: str) -> tuple[str, int]:  # file order: features[3] before features[12]
        match = re.match(r"(.*?)(?:\[(\d+)\]| row (\d+))", path)
        return (match[1], int(match[2] or match[3])) if match else (path, -1)

    return [Problem(path, "; ".join(merged[path])) for path in sorted(merged, key=order)]


def _duplicates(sites: list[dict[str, Any]], site_labels: list[str], links: list[dict[str, Any]],
                link_labels: list[str]) -> list[Problem]:
    out: list[Problem] = []
    seen: dict[str, str] = {}
    pairs: dict[frozenset[str], str] = {}
    for site, label in zip(sites, site_labels):
        if site["name"] in seen:
            out.append(Problem(label, f"name: {format_value(site['name'])} is not allowed; {seen[site['name']]} has it already"))
        seen.setdefault(site["name"], label)
    for link, label in zip(links, link_labels):
        key = frozenset(link["ends"])
        if len(key) == 1:
            out.append(Problem(label, f"both ends are {format_value(link['ends'][0])}, which is not allowed; a fibre joins two "
                                      "different sites"))
        elif key in pairs:
            out.append(Problem(label, f"a second fibre between {format_value(link['ends'][0])} and {format_value(link['ends'][1])} is not "
                                      f"allowed ({pairs[key]} joins them); merge them and give modes"))
        pairs.setdefault(key, label)
    return out
