"""A sweep plan: the scenario, the spec, every point, and the checks made before any point runs."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from netsim.errors import Problem, ScenarioError
from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS
from netsim.scenario.model import Scenario
from netsim.sweep.spec import (
    Point,
    SweepSpec,
    build_spec,
    check_targets,
    expand,
    point_data,
)

__all__ = ["SweepPlan", "describe_parameters", "make_plan"]

#: At most this many invalid points are listed in one error (the count of the rest follows).
_MAX_LISTED = 20


@dataclass(frozen=True)
class SweepPlan:
    """What a sweep will run: the base scenario, the spec and the points in listing order."""

    scenario: Scenario
    spec: SweepSpec
    points: tuple[Point, ...]

    def data_for(self, point: Point) -> dict[str, Any]:
        """The scenario data of a point (a deep copy with its overrides applied)."""
        return point_data(self.scenario.data, self.spec, point.parameters)


def describe_parameters(parameters: Mapping[str, Any]) -> str:
    """``key=value, key=value`` with compact numbers, for messages and listings."""
    return ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}" for k, v in parameters.items())


def _point_problems(data: dict[str, Any], source: str | None, stop: Mapping[str, Any],
                    max_link_pairs: float) -> list[Problem]:
    """What is wrong with one point's scenario: the file checks, then what the engine refuses
    before a run (too few slots on a route, a cut-off that discards every pair, more expected
    link pairs than ``max_link_pairs`` under the sweep's stop rule), which would otherwise fail
    the point only when it runs -- or never end."""
    from netsim.engine.api import check_run
    from netsim.errors import ParameterError, format_value
    from netsim.scenario import load_data

    try:
        check_run(load_data(data, source), pairs=stop.get("pairs"), time_s=stop.get("time_s"),
                  precision=stop.get("precision"), max_link_pairs=max_link_pairs)
    except ScenarioError as exc:
        return list(exc.problems)
    except ParameterError as exc:
        return [Problem(exc.name, f"{format_value(exc.value)} is not allowed; expected {exc.allowed}")]
    return []


def _validate_points(plan: SweepPlan, max_link_pairs: float) -> None:
    problems: list[Problem] = []
    invalid = 0
    seen: set[str] = set()
    for point in plan.points:
        if point.repeat != 0 or point.point_id in seen:
            continue
        seen.add(point.point_id)
        found = _point_problems(plan.data_for(point), plan.scenario.source, plan.spec.stop, max_link_pairs)
        if found:
            invalid += 1
            if invalid <= _MAX_LISTED:
                where = f"sweep point {point.ordinal} ({describe_parameters(point.parameters)})"
                problems.extend(Problem(where, f"is refused: {p}") for p in found)
    if invalid > _MAX_LISTED:
        problems.append(Problem("sweep", f"{invalid - _MAX_LISTED} more points are refused"))
    if problems:
        raise ScenarioError(problems, plan.scenario.source)


def make_plan(scenario: Scenario, vary: Sequence[str] = (), *, validate: bool = True,
              max_link_pairs: float = DEFAULT_MAX_LINK_PAIRS, **overrides: Any) -> SweepPlan:
    """Build and check the plan of a sweep over ``scenario``.

    Parameters
    ----------
    scenario : Scenario
        The base scenario; its ``data["sweep"]`` table (if any) is read here.
    vary : sequence of str
        ``KEY=VALUES`` items from the command line; they replace file axes of the same key.
    validate : bool
        Apply every point's overrides and load the result again (``load_data``), so that a point
        making the scenario invalid is an error before any point runs. So is a point whose run
        is expected to herald more than ``max_link_pairs`` link pairs (or never to end): the
        whole sweep is refused before it starts, listing such points, rather than leaving them
        to fail (or hang) mid-sweep (``netsim sweep --max-link-pairs`` raises the limit).
    **overrides
        ``combine``, ``repeats``, ``seed``, ``pairs``, ``time_s``, ``precision`` (None = not given).

    Raises
    ------
    ScenarioError
        One line per problem of the spec or of the points.
    """
    try:
        spec = build_spec(scenario.data.get("sweep"), vary, **overrides)
        check_targets(scenario.data, spec)
    except ScenarioError as exc:
        raise ScenarioError(exc.problems, exc.source or scenario.source) from None
    plan = SweepPlan(scenario, spec, tuple(expand(spec)))
    if validate:
        _validate_points(plan, max_link_pairs)
    return plan
