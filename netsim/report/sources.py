"""What a report is made from: a scenario file, a run result (run.json) or a sweep store.

:func:`load_source` recognises the kind by the file's suffix and returns a
:class:`ReportData` of plain rows. Scenario files get the network budget (analytic numbers and
bounds) and, if asked, an engine run; run results carry the budget numbers the engine wrote
beside its own; stores give one flat record per (point, demand or link) for the sweep pivots.
The report layer never simulates: runs are requested from the engine's public ``run``.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from netsim.errors import NetsimError, ParameterError

__all__ = ["SOURCE_SUFFIXES", "ReportData", "from_run_result", "load_source", "mark_route_changes", "source_kind",
           "store_records"]

SOURCE_SUFFIXES = {".toml": "scenario", ".json": "run", ".sqlite": "store", ".db": "store",
                   ".sqlite3": "store"}


@dataclass
class ReportData:
    """Plain rows behind every table and figure of a report.

    Attributes
    ----------
    kind : str
        ``"scenario"``, ``"run"`` or ``"store"``.
    slug, title : str
        The scenario's file-system name and display name.
    links, demands : list of dict
        Budget rows (analytic), each joined later with ``run_links`` / ``run_demands``.
    run : dict or None
        The run result (``RunResult.to_dict()``) when the engine ran.
    records : list of dict
        Sweep records (store only): swept parameters, ``kind``, ``name`` and metrics.
    parameters : list of str
        The swept parameter paths (store only).
    scenario : object
        The loaded Scenario when known (for the network map and per-scheme curves).
    """

    kind: str
    slug: str
    title: str
    links: list[dict[str, Any]] = field(default_factory=list)
    demands: list[dict[str, Any]] = field(default_factory=list)
    run: dict[str, Any] | None = None
    records: list[dict[str, Any]] = field(default_factory=list)
    parameters: list[str] = field(default_factory=list)
    scenario: Any = None

    @property
    def run_links(self) -> list[dict[str, Any]]:
        return _entities(self.run.get("links")) if self.run else []

    @property
    def run_demands(self) -> list[dict[str, Any]]:
        return _entities(self.run.get("demands")) if self.run else []


def _entities(value: Any) -> list[dict[str, Any]]:
    """Rows from a list of mappings, or from a mapping keyed by name."""
    if isinstance(value, Mapping):
        return [{"name": k, **v} for k, v in value.items()]
    return [dict(v) for v in value or ()]


def source_kind(path: Path) -> str:
    """``scenario``, ``run`` or ``store`` from the suffix; a one-line error otherwise."""
    kind = SOURCE_SUFFIXES.get(path.suffix.lower())
    if kind is None:
        raise ParameterError("SOURCE", str(path), "a scenario (.toml), a run result (.json) or a "
                             "sweep store (.sqlite)")
    if not path.is_file():
        raise ParameterError("SOURCE", str(path), "an existing file")
    return kind


def _budget_rows(scenario: Any) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """The budget's rows, each link row with its analytic key rate added."""
    from netsim.network.budget import budget

    result = budget(scenario)
    links = [dict(r) for r in result.links]
    for row, rate in zip(links, link_key_rates(scenario)):
        row.setdefault("key_rate_per_s", rate)
    return links, [dict(r) for r in result.demands]


def link_key_rates(scenario: Any) -> list[float | None]:
    """Analytic secret-key rate of each link heralded on its own: pair rate x key fraction.

    The key fraction is the asymptotic entanglement-based BB84 fraction 1 - h(e_Z) - h(e_X) of
    the heralded state (``qinfo.key_fraction``; Shor & Preskill, PRL 85, 441, 2000). ``None``
    for links that end at a passive switch (heralded only as part of a light path).
    """
    from netsim import qinfo
    from netsim.hardware import link_physics

    rates: list[float | None] = []
    for link in scenario.links:
        a, b = scenario.site(link.a), scenario.site(link.b)
        if "switch" in (a.role, b.role):
            rates.append(None)
            continue
        physics = link_physics(link, a, b)
        rates.append(float(qinfo.key_fraction(physics.state)) * physics.rate_per_s)
    return rates


def _from_scenario(path: Path, simulate: bool, run_options: Mapping[str, Any]) -> ReportData:
    from netsim.scenario import load

    scenario = load(path)
    links, demands = _budget_rows(scenario)
    data = ReportData("scenario", scenario.slug, scenario.name, links, demands, scenario=scenario)
    if simulate:
        from netsim import engine

        data.run = engine.run(scenario, **dict(run_options)).to_dict()
    return data


def _read_json(path: Path) -> dict[str, Any]:
    from netsim.report.runfile import read_run_file

    return read_run_file(path)


def _run_name(run: Mapping[str, Any]) -> str | None:
    info = run.get("scenario")
    if isinstance(info, Mapping):
        return str(info.get("name")) if info.get("name") else None
    return str(info) if info else None


def _candidate_scenarios(path: Path) -> list[Path]:
    """Where the scenario of ``results/<slug>/run.json`` is usually found: ``<slug>.toml`` in
    ``scenarios/`` under the working directory or above the results directory."""
    slug = path.resolve().parent.name
    roots = [Path.cwd(), *path.resolve().parents[1:4]]
    return [root / folder / f"{slug}.toml" for root in roots for folder in ("scenarios", ".")]


def _find_scenario(path: Path, scenario_path: str | Path | None, matches: Callable[[Any], bool],
                   expected: str) -> Any:
    """``scenario_path`` if given (a ParameterError naming ``--scenario`` unless it ``matches``),
    else the first file of :func:`_candidate_scenarios` that matches; ``None`` if none does."""
    from netsim.scenario import load

    if scenario_path is not None:
        scenario = load(scenario_path)
        if not matches(scenario):
            raise ParameterError("--scenario", str(scenario_path), expected)
        return scenario
    for candidate in _candidate_scenarios(path):
        if candidate.is_file():
            scenario = load(candidate)
            if matches(scenario):
                return scenario
    return None


def _scenario_of_run(run: Mapping[str, Any], path: Path, scenario_path: str | Path | None) -> Any:
    """The scenario a run was made from: ``scenario_path`` if given (its name must match the
    run's), else a file found next to the results whose name matches; ``None`` if none is."""
    name = _run_name(run)
    if name is None and scenario_path is not None:
        from netsim.scenario import load

        return load(scenario_path)  # an unnamed run cannot be checked against its scenario
    return _find_scenario(path, scenario_path, lambda scenario: scenario.name == name,
                          f"the scenario the run was made from (named {name!r})")


def _from_run(path: Path, scenario_path: str | Path | None = None) -> ReportData:
    run = _read_json(path)
    scenario = _scenario_of_run(run, path, scenario_path)
    name = _run_name(run) or (scenario.name if scenario else path.parent.name)
    slug = scenario.slug if scenario else path.resolve().parent.name
    return _run_data(run, scenario, name, slug)


def _run_data(run: dict[str, Any], scenario: Any, name: str, slug: str) -> ReportData:
    """A run's ReportData: the budget's analytic rows when its scenario is known, else the run's."""
    data = ReportData("run", slug, name, run=run, scenario=scenario)
    if scenario is not None:
        data.links, data.demands = _budget_rows(scenario)
    else:
        data.links, data.demands = data.run_links, data.run_demands
    return data


def from_run_result(result: Any, scenario: Any = None) -> ReportData:
    """:class:`ReportData` of a run held in memory (an ``engine.run`` result, or its
    ``to_dict()``), with the budget's analytic columns when its ``scenario`` is given."""
    run = result.to_dict() if hasattr(result, "to_dict") else dict(result)
    name = _run_name(run) or (scenario.name if scenario is not None else "run")
    slug = scenario.slug if scenario is not None else str(getattr(result, "slug", "") or "run")
    if scenario is not None and scenario.name != name:
        raise ParameterError("scenario", scenario.name, f"the scenario the run was made from (named {name!r})")
    return _run_data(run, scenario, name, slug)


def store_records(store: Any) -> list[dict[str, Any]]:
    """Flat records, one per (point, kind, name): parameters, ``repeat`` and every metric.

    A ``X_ci95_low`` / ``X_ci95_high`` pair of metrics becomes the interval ``X_ci95``.
    """
    grouped: dict[tuple[str, str, str], dict[str, Any]] = {}
    for m in store.metrics():
        key = (m["point_id"], m["kind"], m["name"])
        record = grouped.setdefault(key, {**m["parameters"], "point_id": m["point_id"],
                                          "repeat": m["repeat"], "kind": m["kind"], "name": m["name"]})
        record[m["metric"]] = m["value"]
    for record in grouped.values():
        for low_key in [k for k in record if k.endswith("_ci95_low")]:
            high = record.get(low_key[:-4] + "_high")
            low = record[low_key]
            record[low_key[:-4]] = None if low is None or high is None else [low, high]
    for (point_id, kind, name), record in list(grouped.items()):
        if kind != "route":
            continue
        del grouped[(point_id, kind, name)]
        demand = grouped.get((point_id, "demand", name))
        routes = [k for k in record if " > " in k]  # a route joins at least two sites
        if demand is not None and routes:
            demand["route"] = routes[0]
    return list(grouped.values())


def mark_route_changes(records: Sequence[dict[str, Any]], base: Mapping[str, str]) -> int:
    """Set ``route_changed`` on demand records: True where the stored route differs from the
    base scenario's; returns how many differ (records without a stored route are left alone)."""
    changed = 0
    for record in records:
        if record.get("kind") != "demand" or "route" not in record or record.get("name") not in base:
            continue
        record["route_changed"] = record["route"] != base[str(record["name"])]
        changed += bool(record["route_changed"])
    return changed


def _sweep_base_hash(scenario: Any) -> str:
    """The hash a sweep store records for its base scenario (its data without the sweep table)."""
    from netsim.scenario import content_hash

    return content_hash({k: v for k, v in scenario.data.items() if k != "sweep"})


def _scenario_of_store(meta: Mapping[str, str], path: Path,
                       scenario_path: str | Path | None) -> Any:
    """The store's base scenario: ``scenario_path`` (checked against the stored hash), else
    ``scenarios/<slug>.toml`` near the results when its hash matches; ``None`` otherwise."""
    return _find_scenario(path, scenario_path,
                          lambda scenario: meta.get("scenario_hash") == _sweep_base_hash(scenario),
                          f"the scenario this store was swept from ({meta.get('scenario_name')!r})")


def _from_store(path: Path, scenario_path: str | Path | None = None, simulate: bool = False,
                run_options: Mapping[str, Any] | None = None) -> ReportData:
    from netsim.sweep.store import open_store  # type: ignore[import-not-found]

    with open_store(path) as store:
        meta = store.meta()
        records = store_records(store)
        points = store.points()
    parameters: list[str] = []
    for point in points:
        parameters += [p for p in point["parameters"] if p not in parameters]
    name = meta.get("scenario_name") or path.stem
    slug = path.parent.name if path.parent.name else path.stem
    if not records:
        raise NetsimError(f"{path}: the store has no finished points yet; run `netsim sweep` first")
    data = ReportData("store", slug, name, records=records, parameters=parameters)
    data.scenario = _scenario_of_store(meta, path, scenario_path)
    base = json.loads(meta["base_routes"]) if meta.get("base_routes") else None
    if base is None and data.scenario is not None:
        from netsim.sweep.routes import scenario_routes  # type: ignore[import-not-found]

        base = scenario_routes(data.scenario)
    if base is not None:
        mark_route_changes(records, base)
    if data.scenario is None and simulate:
        raise NetsimError(f"{path}: --simulate needs the scenario this store was swept from ({name!r}), "
                          f"which is not in scenarios/ or beside the results; give it with --scenario FILE")
    if data.scenario is not None:
        data.links, data.demands = _budget_rows(data.scenario)
        if simulate:
            from netsim import engine

            data.run = engine.run(data.scenario, **dict(run_options or {})).to_dict()
    return data


def load_source(source: str | Path, *, simulate: bool = False,
                run_options: Mapping[str, Any] | None = None,
                scenario_path: str | Path | None = None) -> ReportData:
    """Load ``source`` (scenario, run result or sweep store) into :class:`ReportData`.

    Parameters
    ----------
    source : str or Path
        ``.toml`` scenario, ``.json`` run result or ``.sqlite`` sweep store.
    simulate : bool
        For a scenario (or a store's base scenario, when found): also run the engine
        (``run_options`` passed to ``engine.run``).
    scenario_path : str or Path, optional
        For a run result or a store: the scenario it was made from (else looked for as
        ``scenarios/<slug>.toml`` and used when its name or content hash matches).
    """
    path = Path(source)
    kind = source_kind(path)
    if kind == "scenario":
        return _from_scenario(path, simulate, run_options or {})
    if kind == "run":
        return _from_run(path, scenario_path)
    return _from_store(path, scenario_path, simulate, run_options)


def demand_names(records: Sequence[Mapping[str, Any]], kind: str = "demand") -> list[str]:
    """Names of the entities of ``kind`` in sweep records, in first-seen order."""
    names: list[str] = []
    for r in records:
        if r.get("kind") == kind and r.get("name") not in names:
            names.append(str(r.get("name")))
    return names
