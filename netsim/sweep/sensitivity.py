"""Which uncertain parameter moves each demand's figures most: global sensitivity indices.

:func:`rank_parameters` varies the scenario's uncertain hardware parameters together over their
ranges and computes, for each demand's expected rate, expected fidelity and useful-pair rate,
either Sobol' indices (first order S1 and total ST, Saltelli's sampling scheme with Jansen's
estimators as implemented by SALib; Saltelli et al., Comput. Phys. Commun. 181, 259, 2010) or
Morris elementary-effect screening (mu*, sigma; Morris, Technometrics 33, 161, 1991; Campolongo,
Cariboni & Saltelli, Environ. Model. Softw. 22, 1509, 2007). Each sample is a whole scenario,
validated like a sweep point, evaluated on the closed forms of
:func:`netsim.network.budget.expected_figures` (fast) or, with ``simulate_pairs``, by a short
engine run per sample.

Ranges come from the scenario's ``[sensitivity]`` table (``ranges``: key path -> ``[low,
high]``, key paths as in ``[sweep]``; then only those parameters vary) or, without one, from a
relative ``spread`` around each value (default 20 %) for every default uncertain key
(:data:`DEFAULT_KEYS`), clipped to the key's allowed range (and T2 to at most 2 T1). Where the
entries of a key hold different values, the parameter is a common factor on all of them.

The useful-pair rate is the rate of pairs the users can use: on the closed forms, the expected
rate when the expected fidelity reaches the demand's ``min_fidelity`` and 0 otherwise (a field
``useful_rate_per_s`` of the figures is used instead where one exists); simulated, the rate times
the share of delivered pairs at or above ``min_fidelity`` where the run records it, else the
same step on the mean fidelity.

Beside the indices, every parameter gets its one-at-a-time swing (the figure with that parameter
at its low and at its high end, the others at their values): the bars of a tornado chart.
"""

from __future__ import annotations

import copy
import functools
import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from netsim.errors import NetsimError, ParameterError, ScenarioError, format_value
from netsim.scenario.model import Scenario
from netsim.sweep.keypath import assign, parse_key, resolve
from netsim.table import Column, Table

__all__ = ["DEFAULT_KEYS", "DEFAULT_SPREAD", "METHODS", "OUTPUTS", "Sensitivity", "Uncertain",
           "rank_parameters", "uncertain_parameters"]

#: Relative half-width of a parameter's range when the scenario gives none.
DEFAULT_SPREAD = 0.2
METHODS = ("sobol", "morris")

#: Keys varied by default: hardware figures a planner cannot know exactly in advance.
DEFAULT_KEYS: dict[str, tuple[str, ...]] = {
    "links": ("attenuation_db_per_km", "extra_loss_db", "detector_efficiency", "dark_count_probability"),
    "sites": ("emission_efficiency", "memory_efficiency", "bsm_success_probability", "gate_error", "t2_s"),
}

#: The figures ranked per demand, with their headers.
OUTPUTS: dict[str, str] = {
    "expected_rate_per_s": "expected rate (pairs/s)",
    "expected_fidelity": "expected fidelity",
    "useful_rate_per_s": "useful-pair rate (pairs/s)",
}


@dataclass(frozen=True)
class Uncertain:
    """One varied parameter.

    ``key`` is the key path as written (``links[*].attenuation_db_per_km``). With ``factor`` the
    sampled value multiplies each matched entry's own value (``low``/``high`` are factors);
    otherwise every matched entry takes the sampled value itself.
    """

    key: str
    low: float
    high: float
    unit: str
    factor: bool = False
    origin: str = "spread"

    @property
    def range_text(self) -> str:
        if self.factor:
            return f"x{self.low:.3g} to x{self.high:.3g}"
        return f"{self.low:.4g} to {self.high:.4g}" + (f" {self.unit}" if self.unit else "")


@dataclass
class Sensitivity:
    """The ranking of one scenario: ``rows`` (one per demand, figure and parameter, ranked),
    the parameters and how they were computed."""

    scenario: str
    method: str
    samples: int
    evaluations: int
    seed: int
    simulated_pairs: int | None
    parameters: list[Uncertain]
    rows: list[dict[str, Any]]
    notes: list[str] = field(default_factory=list)

    def table(self) -> Table:
        """The ranked table (rank 1 = the parameter that matters most for that figure)."""
        index = ([Column("s1", "S1", 3), Column("s1_ci95", "S1 95% CI", 2), Column("st", "ST", 3),
                  Column("st_ci95", "ST 95% CI", 2)] if self.method == "sobol" else
                 [Column("mu_star", "mu* (figure units)", 3), Column("mu_star_ci95", "mu* 95% CI", 2),
                  Column("sigma", "sigma (figure units)", 3)])
        columns = [Column("demand", "demand"), Column("figure", "figure"), Column("rank", "rank"),
                   Column("parameter", "parameter"), Column("range", "range"), *index,
                   Column("baseline", "at the scenario's values", 4),
                   Column("at_low", "parameter at low end", 4), Column("at_high", "parameter at high end", 4)]
        how = (f"Sobol' indices, {self.samples} base samples ({self.evaluations} evaluations)"
               if self.method == "sobol" else
               f"Morris screening, {self.samples} trajectories ({self.evaluations} evaluations)")
        on = (f"short simulations of {self.simulated_pairs} pairs per demand" if self.simulated_pairs
              else "the closed-form expectations of the budget")
        notes = [f"{how} on {on}, seed {self.seed}; parameters vary together, uniformly over their "
                 "ranges. Ranked by the total index ST (Sobol') or mu* (Morris) within each demand "
                 "and figure; the last two columns are one-at-a-time swings (the tornado chart)."]
        return Table(f"{self.scenario}: which parameter matters most", columns, list(self.rows),
                     notes + self.notes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (NaN becomes ``None``)."""
        return {"scenario": self.scenario, "method": self.method, "samples": self.samples,
                "evaluations": self.evaluations, "seed": self.seed,
                "simulated_pairs": self.simulated_pairs,
                "parameters": [{"key": p.key, "low": p.low, "high": p.high, "unit": p.unit,
                                "factor": p.factor, "origin": p.origin} for p in self.parameters],
                "rows": [{k: _clean(v) for k, v in r.items()} for r in self.rows], "notes": self.notes}


def _clean(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


# --------------------------------------------------------------------------- parameters


def _problem(scenario: Scenario, path: str, message: str) -> ScenarioError:
    from netsim.errors import Problem

    return ScenarioError([Problem(path, message)], str(scenario.source) if scenario.source else None)


def _spec(section: str, key: str) -> Any:
    from netsim.scenario import fields as F

    table = {"sites": F.SITE_FIELDS, "links": F.LINK_FIELDS, "demands": F.DEMAND_FIELDS,
             "protocol": F.PROTOCOL_FIELDS}.get(section.replace("defaults.site", "sites")
                                               .replace("defaults.link", "links"), {})
    return table.get(key)


def _clip(value: float, spec: Any, ceiling: float | None = None) -> float:
    """``value`` inside the key's allowed range (open ends approached, never reached)."""
    if spec is not None and spec.low is not None and value <= spec.low:
        value = float(np.nextafter(spec.low, np.inf)) if spec.low_open else float(spec.low)
    if spec is not None and spec.high is not None and value >= spec.high:
        value = float(np.nextafter(spec.high, -np.inf)) if spec.high_open else float(spec.high)
    return min(value, ceiling) if ceiling is not None else value


def _entries(scenario: Scenario, section: str) -> list[Any]:
    if section == "sites":
        return [s for s in scenario.sites if s.role != "switch"]  # switches hold no memory
    return list(scenario.links)


def uncertain_parameters(scenario: Scenario, spread: float = DEFAULT_SPREAD) -> tuple[list[Uncertain], list[str]]:
    """The parameters to vary and notes on those left out.

    From the scenario's ``[sensitivity]`` table when it has ``ranges``, else ``spread`` around
    every key of :data:`DEFAULT_KEYS` (a key whose values are all zero has no relative range and
    is left out, with a note).
    """
    table = scenario.data.get("sensitivity") or {}
    if not isinstance(table, Mapping):
        raise _problem(scenario, "sensitivity", f"{format_value(table)} is not allowed; expected a table")
    unknown = sorted(set(table) - {"ranges", "spread"})
    if unknown:
        raise _problem(scenario, f"sensitivity.{unknown[0]}", "unknown key; expected 'ranges' or 'spread'")
    if "spread" in table:
        spread = table["spread"]
        where = "sensitivity.spread"
    else:
        where = "--spread"
    if isinstance(spread, bool) or not isinstance(spread, (int, float)) or not 0 < spread < 1:
        raise ParameterError(where, spread, "a number in (0, 1): the relative half-width of each range")
    if table.get("ranges"):
        return _table_parameters(scenario, table["ranges"]), []
    found: list[Uncertain] = []
    notes: list[str] = []
    for section, keys in DEFAULT_KEYS.items():
        entries = _entries(scenario, section)
        for key in keys:
            values = [float(getattr(e, key)) for e in entries]
            if not values:
                continue
            spec = _spec(section, key)
            text = f"{section}[*].{key}"
            if all(v == 0 for v in values):
                notes.append(f"{text} is 0 everywhere, so a relative spread leaves it there; give it "
                             f"a range in [sensitivity.ranges] to rank it.")
                continue
            if len(set(values)) == 1:
                ceiling = min(2 * e.t1_s for e in entries) if key == "t2_s" else None
                low = _clip(values[0] * (1 - spread), spec, ceiling)
                high = _clip(values[0] * (1 + spread), spec, ceiling)
                if high > low:
                    found.append(Uncertain(text, low, high, spec.unit if spec else ""))
                continue
            found.append(Uncertain(text, 1 - spread, 1 + spread, "", factor=True))
    return found, notes


def _table_parameters(scenario: Scenario, ranges: Any) -> list[Uncertain]:
    if not isinstance(ranges, Mapping):
        raise _problem(scenario, "sensitivity.ranges", f"{format_value(ranges)} is not allowed; expected a table of "
                                   "key path = [low, high]")
    found = []
    for text, value in ranges.items():
        where = f"sensitivity.ranges.{format_value(text)}"
        try:
            path = parse_key(text)
            resolve(scenario.data, path)
        except (ValueError, NetsimError) as exc:
            raise _problem(scenario, where, str(exc)) from None
        ok = (isinstance(value, list) and len(value) == 2
              and all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in value)
              and value[0] < value[1])
        if not ok:
            raise _problem(scenario, where, f"{format_value(value)} is not allowed; expected [low, high] with low < high")
        spec = _spec(path.section, path.key)
        found.append(Uncertain(text, float(value[0]), float(value[1]), spec.unit if spec else "", origin="scenario"))
    return found


# --------------------------------------------------------------------------- evaluation


_parsed = functools.cache(parse_key)  # parsing looks up type hints: once per key, not per sample


def _variant(scenario: Scenario, parameters: Sequence[Uncertain], values: Sequence[float]) -> Scenario:
    """The scenario with each parameter at its sampled value, validated as a whole."""
    from netsim.scenario import load_data

    data = copy.deepcopy({k: v for k, v in scenario.data.items() if k not in ("sweep", "sensitivity")})
    for p, x in zip(parameters, values):
        if p.key.startswith(("sites[*].", "links[*].")) and (p.factor or p.origin == "spread"):
            section, key = p.key.split("[*].")
            spec = _spec(section, key)
            by_name = {e.name: e for e in _entries(scenario, section)}
            for raw, entry in zip(data[section], getattr(scenario, section)):
                if entry.name not in by_name:
                    continue
                ceiling = 2 * entry.t1_s if key == "t2_s" else None
                raw[key] = _clip(getattr(entry, key) * x, spec, ceiling) if p.factor else float(x)
        else:
            assign(data, _parsed(p.key), float(x))
    try:
        return load_data(data, source=scenario.source)
    except ScenarioError as exc:
        shown = ", ".join(f"{p.key} = {x:.4g}" for p, x in zip(parameters, values))
        raise NetsimError(f"a sample of the sensitivity ranges is not a valid scenario ({shown}): "
                          f"{str(exc).splitlines()[0]}; narrow [sensitivity.ranges]") from None


def _closed_form(scenario: Scenario) -> list[dict[str, float]]:
    from netsim.network.budget import expected_figures

    out = []
    for row in expected_figures(scenario):
        if row.get("route") is None:
            out.append({k: math.nan for k in OUTPUTS})
            continue
        rate, fidelity = float(row["expected_rate_per_s"]), float(row["expected_fidelity"])
        useful = row.get("useful_rate_per_s")
        if useful is None:
            useful = rate if fidelity >= row["min_fidelity"] else 0.0
        out.append({"expected_rate_per_s": rate, "expected_fidelity": fidelity, "useful_rate_per_s": float(useful)})
    return out


def _simulated(pairs: int, seed: int, max_link_pairs: float | None = None) -> Callable[[Scenario], list[dict[str, float]]]:
    def evaluate(scenario: Scenario) -> list[dict[str, float]]:
        from netsim import engine
        from netsim.network.workload import DEFAULT_MAX_LINK_PAIRS

        limit = DEFAULT_MAX_LINK_PAIRS if max_link_pairs is None else float(max_link_pairs)
        result = engine.run(scenario, pairs=pairs, seed=seed, max_link_pairs=limit).to_dict()
        out = []
        for demand, row in zip(scenario.demands, _demand_rows(result)):
            rate = float(row.get("rate_per_s") or 0.0)
            fidelity = row.get("fidelity_mean")
            fidelity = math.nan if fidelity is None else float(fidelity)
            useful = row.get("useful_rate_per_s")
            if useful is None:
                useful = rate if fidelity >= demand.min_fidelity else 0.0
            out.append({"expected_rate_per_s": rate, "expected_fidelity": fidelity,
                        "useful_rate_per_s": float(useful)})
        return out
    return evaluate


def _demand_rows(result: Mapping[str, Any]) -> list[Mapping[str, Any]]:
    demands = result.get("demands") or []
    if isinstance(demands, Mapping):
        return [dict(v, name=k) for k, v in demands.items()]
    return list(demands)


def rank_parameters(scenario: Scenario, *, method: str = "sobol", samples: int | None = None,
                    spread: float = DEFAULT_SPREAD, seed: int = 0, simulate_pairs: int | None = None,
                    progress: Callable[[int, int], None] | None = None,
                    max_link_pairs: float | None = None) -> Sensitivity:
    """Rank the uncertain parameters of ``scenario`` for each demand's figures.

    Parameters
    ----------
    scenario : Scenario
    method : {"sobol", "morris"}
        Sobol' indices (S1, ST with 95 % bootstrap intervals) or Morris screening (mu*, sigma).
    samples : int, optional
        Sobol': base samples N, a power of two (N (k + 2) evaluations for k parameters; default
        64). Morris: trajectories r (r (k + 1) evaluations; default 16).
    spread : float
        Relative half-width of the default ranges (see :func:`uncertain_parameters`).
    seed : int
        Seed of the sampling and the bootstrap (and of the engine with ``simulate_pairs``).
    simulate_pairs : int, optional
        Evaluate each sample by an engine run of this many pairs per demand instead of the
        closed forms (slow; noisy at small counts).
    progress : callable, optional
        Called with (evaluations done, evaluations planned).
    max_link_pairs : float, optional
        With ``simulate_pairs``: the engine's limit on a run's expected link pairs (None: its
        default); a sample beyond it stops the ranking with one line.
    """
    if method not in METHODS:
        raise ParameterError("--method", method, "one of " + ", ".join(METHODS))
    samples = samples if samples is not None else (64 if method == "sobol" else 16)
    if method == "sobol" and (samples < 2 or samples & (samples - 1)):
        raise ParameterError("--samples", samples, "a power of two >= 2 for Sobol' indices (e.g. 64)")
    if method == "morris" and samples < 2:
        raise ParameterError("--samples", samples, "an integer >= 2 (Morris trajectories)")
    if simulate_pairs is not None and simulate_pairs < 1:
        raise ParameterError("--simulate", simulate_pairs, "an integer >= 1 (pairs per demand per sample)")
    if not scenario.demands:
        raise NetsimError(f"{scenario.name}: the scenario has no demands to rank parameters for")
    parameters, notes = uncertain_parameters(scenario, spread)
    if not parameters:
        raise NetsimError(f"{scenario.name}: no parameter to vary; give [sensitivity.ranges] in the scenario")
    evaluate = _simulated(simulate_pairs, seed, max_link_pairs) if simulate_pairs else _closed_form
    problem = {"num_vars": len(parameters), "names": [p.key for p in parameters],
               "bounds": [[p.low, p.high] for p in parameters]}
    X = _sample(problem, method, samples, seed)
    baseline = evaluate(scenario)
    oat = [[evaluate(_variant(scenario, [p], [end])) for end in (p.low, p.high)] for p in parameters]
    Y = np.empty((len(X), len(scenario.demands), len(OUTPUTS)))
    for n, x in enumerate(X):
        figures = evaluate(_variant(scenario, parameters, list(x)))
        Y[n] = [[f[k] for k in OUTPUTS] for f in figures]
        if progress is not None:
            progress(n + 1, len(X))
    rows = []
    for d, demand in enumerate(scenario.demands):
        for o, output in enumerate(OUTPUTS):
            y = Y[:, d, o]
            indices, note = _analyse(problem, method, X, y, seed)
            if note:
                notes.append(f"{demand.name}, {OUTPUTS[output]}: {note}")
            block = []
            for i, p in enumerate(parameters):
                block.append({"demand": demand.name, "figure": OUTPUTS[output], "figure_key": output,
                              "parameter": p.key,
                              "range": p.range_text, **indices[i],
                              "baseline": baseline[d][output], "at_low": oat[i][0][d][output],
                              "at_high": oat[i][1][d][output]})
            score = "st" if method == "sobol" else "mu_star"
            block.sort(key=lambda r: -(r[score] if math.isfinite(r[score]) else -1.0))
            for rank, row in enumerate(block, start=1):
                row["rank"] = rank
            rows += block
    idle = [p.key for i, p in enumerate(parameters)
            if all(oat[i][0][d][o] == oat[i][1][d][o] == baseline[d][o]
                   for d in range(len(scenario.demands)) for o in OUTPUTS)]
    if idle:
        why = {"memory_efficiency": "used only by midpoint-source and direct links",
               "t2_s": "memory decay does not enter these closed forms; simulations include it",
               "bsm_success_probability": "no swap on these routes"}
        shown = [k + (f" ({why[k.rsplit('.', 1)[1]]})" if not simulate_pairs and k.rsplit(".", 1)[1] in why else "")
                 for k in idle]
        notes.append(("No effect seen in these short simulations: " if simulate_pairs else
                      "No effect on any closed-form figure of these demands: ") + "; ".join(shown) + ".")
    return Sensitivity(scenario.name, method, samples, len(X) + 1 + 2 * len(parameters), seed,
                       simulate_pairs, parameters, rows, notes)


def _sample(problem: dict[str, Any], method: str, samples: int, seed: int) -> np.ndarray:
    if method == "sobol":
        from SALib.sample import sobol as sobol_sample

        return np.asarray(sobol_sample.sample(problem, samples, calc_second_order=False, seed=seed))
    from SALib.sample import morris as morris_sample

    return np.asarray(morris_sample.sample(problem, samples, num_levels=4, seed=seed))


def _analyse(problem: dict[str, Any], method: str, X: np.ndarray, y: np.ndarray,
             seed: int) -> tuple[list[dict[str, Any]], str]:
    """Indices per parameter, and a note when they cannot be computed."""
    k = problem["num_vars"]
    if not np.all(np.isfinite(y)):
        empty = ({"s1": math.nan, "s1_ci95": None, "st": math.nan, "st_ci95": None} if method == "sobol"
                 else {"mu_star": math.nan, "mu_star_ci95": None, "sigma": math.nan})
        return [dict(empty) for _ in range(k)], "some samples have no value (no route), so no indices"
    if np.ptp(y) <= 1e-12 * max(1.0, float(np.max(np.abs(y)))):
        zero = ({"s1": 0.0, "s1_ci95": None, "st": 0.0, "st_ci95": None} if method == "sobol"
                else {"mu_star": 0.0, "mu_star_ci95": None, "sigma": 0.0})
        return [dict(zero) for _ in range(k)], "does not vary over these ranges"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "sobol":
            from SALib.analyze import sobol

            s = sobol.analyze(problem, y, calc_second_order=False, seed=seed)
            return [{"s1": float(s["S1"][i]), "s1_ci95": _ci(s["S1"][i], s["S1_conf"][i]),
                     "st": float(s["ST"][i]), "st_ci95": _ci(s["ST"][i], s["ST_conf"][i])}
                    for i in range(k)], ""
        from SALib.analyze import morris

        m = morris.analyze(problem, X, y, num_levels=4, seed=seed)
        return [{"mu_star": float(m["mu_star"][i]), "mu_star_ci95": _ci(m["mu_star"][i], m["mu_star_conf"][i]),
                 "sigma": float(m["sigma"][i])} for i in range(k)], ""


def _ci(value: float, half: float) -> list[float] | None:
    if not (math.isfinite(value) and math.isfinite(half)):
        return None
    return [float(value - half), float(value + half)]
