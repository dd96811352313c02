"""Every numeric key of a scenario at each extreme of its allowed range (issue 14, item 4).

For every numeric key of ``[[sites]]``, ``[[links]]``, ``[[demands]]``, ``[protocol]`` and
``[costs]`` (read from ``netsim.scenario.fields``, so a new key is covered without editing this
file), each extreme of its allowed range -- the boundary itself, the smallest value above an open
boundary, subnormal and smallest normal floats above zero (5e-324, 1e-310, 2.2e-308), the largest
double (1.8e308) and 1e300 where the range is unbounded, and 10**18 / 10**308 for unbounded
integers -- is set in a bundled scenario. ``netsim budget`` and ``netsim check`` (in process)
must then either refuse the file with one line per problem, or give finite, plausible figures:
no NaN, every fidelity in [0, 1], every rate and capacity >= 0, and warnings without "nan".

Reported reproducers: ``length_km = 5e-324`` raised "NaN found as an edge weight" (the link's
extra loss was spread per km by dividing by the length, which overflowed to inf), and with
``1e-310`` the expected fidelity came out 0.45. Ranges tightened where the extreme was no
physical value (README scenario reference): ``length_km`` in [0.0001, 40000] km,
``bsm_success_probability`` in [0.01, 1], ``phase_noise_rad`` in [0, 10] rad.
"""

from __future__ import annotations

import copy
import math
import sys
import tomllib
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from netsim.errors import NetsimError, ScenarioError
from netsim.hardware.lightpath import LightPath
from netsim.network.audit import audit
from netsim.network.budget import budget
from netsim.scenario import load_data
from netsim.scenario.fields import COSTS_FIELDS, DEMAND_FIELDS, LINK_FIELDS, PROTOCOL_FIELDS, SITE_FIELDS, Spec

ROOT = Path(__file__).resolve().parents[1]

#: IEEE 754 binary64 (common practice): smallest subnormal, a mid subnormal, smallest normal, largest.
SMALLEST, SUBNORMAL, NORMAL, LARGEST = 5e-324, 1e-310, sys.float_info.min, sys.float_info.max

TABLES = {"site": SITE_FIELDS, "link": LINK_FIELDS, "demand": DEMAND_FIELDS, "protocol": PROTOCOL_FIELDS,
          "costs": COSTS_FIELDS}


def extremes(spec: Spec) -> list[float | int]:
    """The extreme values of a spec's allowed range (module docstring)."""
    if spec.kind == "int":
        low = [int(spec.low)] if spec.low is not None else []
        return low + ([int(spec.high)] if spec.high is not None else [10 ** 18, 10 ** 308])
    values: list[float] = []
    if spec.low is None:
        values += [-LARGEST, -1e300]
    elif spec.low_open:
        values.append(math.nextafter(spec.low, math.inf))
        values += [SUBNORMAL, NORMAL] if spec.low == 0 else []
    else:
        values.append(spec.low)
        values += [SMALLEST, SUBNORMAL, NORMAL] if spec.low == 0 else [math.nextafter(spec.low, math.inf)]
    if spec.high is None:
        values += [LARGEST, 1e300]
    elif spec.high_open:
        values.append(math.nextafter(spec.high, -math.inf))
    else:
        values += [spec.high, math.nextafter(spec.high, -math.inf)]
    return values


def cases() -> Iterator[tuple[str, str, float | int]]:
    for table, fields in TABLES.items():
        for key, spec in fields.items():
            if spec.kind in ("real", "int"):
                for value in extremes(spec):
                    yield table, key, value


def with_value(data: dict[str, Any], table: str, key: str, value: float | int) -> dict[str, Any]:
    """A copy of ``data`` with ``key`` set at the repeater (or first site), the first link, the
    first demand, [protocol] or [costs]."""
    data = copy.deepcopy(data)
    data.pop("sweep", None)
    if table == "site":
        site = ([s for s in data["sites"] if s.get("role") == "repeater"] or data["sites"])[0]
        site[key] = value
        if key in ("x_km", "y_km"):  # coordinates come in pairs
            site.setdefault("y_km" if key == "x_km" else "x_km", 0.0)
    elif table == "link":
        data["links"][0][key] = value
    elif table == "demand":
        demand = data["demands"][0]
        if key in ("pairs", "duration_s"):
            demand.pop("pairs", None)
            demand.pop("duration_s", None)
        demand[key] = value
    elif table == "protocol":
        data.setdefault("protocol", {})[key] = value
        if key == "purification_rounds" and value:
            data["protocol"]["purification"] = "bbpssw"
    else:
        data.setdefault("costs", {})[key] = value
    return data


def implausible(value: Any, path: str = "") -> list[str]:
    """The figures of a budget that a practitioner would reject (module docstring)."""
    found: list[str] = []
    if isinstance(value, dict):
        for k, v in value.items():
            found += implausible(v, f"{path}.{k}")
    elif isinstance(value, (list, tuple)):
        for i, v in enumerate(value):
            found += implausible(v, f"{path}[{i}]")
    elif isinstance(value, float):
        name = path.rsplit(".", 1)[-1]
        if math.isnan(value):
            found.append(f"{path} = nan")
        elif "fidelity" in name and not 0.0 <= value <= 1.0 + 1e-12:
            found.append(f"{path} = {value} (a fidelity outside [0, 1])")
        elif any(word in name for word in ("rate", "bits", "capacity")) and value < 0:
            found.append(f"{path} = {value} (a negative rate)")
    return found


def outcome(data: dict[str, Any]) -> str:
    """'refused' (one line per problem) or 'figures' after checking them; fails otherwise."""
    try:
        scenario = load_data(data)
        result = budget(scenario)
        warnings = audit(scenario, result)
    except NetsimError as exc:
        assert all(line.strip() for line in str(exc).splitlines())
        return "refused"
    bad = implausible(result.to_dict())
    assert not bad, bad[:5]
    for row in result.links + result.demands:
        for key, value in row.items():
            if isinstance(value, float) and ("fidelity" in key or "rate" in key):
                assert not math.isnan(value) or key == "expected_fidelity", (key, value)
    for line in warnings:
        assert "nan" not in line.lower().replace("nanos", ""), line
    return "figures"


def _scenario(name: str) -> dict[str, Any]:
    with (ROOT / "scenarios" / name).open("rb") as handle:
        return tomllib.load(handle)


CHAIN3 = _scenario("chain3.toml")


@pytest.mark.parametrize("table, key, value", list(cases()), ids=lambda v: repr(v) if isinstance(v, float) else None)
def test_every_extreme_of_every_range_gives_plausible_figures_or_one_line(table: str, key: str,
                                                                          value: float | int) -> None:
    outcome(with_value(CHAIN3, table, key, value))


@pytest.mark.slow
@pytest.mark.parametrize("name", ["vellmoor-mesh.toml", "published/hensen2015_nv_1p3km.toml"])
def test_every_extreme_on_a_mesh_and_a_published_link(name: str) -> None:
    data = _scenario(name)
    for table, key, value in cases():
        outcome(with_value(data, table, key, value))


def test_the_extremes_include_the_reported_values() -> None:
    # the generator must produce the reported inputs' kind of value for length_km and every (0, x] key
    assert extremes(LINK_FIELDS["length_km"])[:1] == [1e-4]
    assert SMALLEST in extremes(SITE_FIELDS["attempt_prep_time_s"])
    assert SUBNORMAL in extremes(SITE_FIELDS["t2_s"]) and LARGEST in extremes(SITE_FIELDS["t2_s"])
    assert 100_000 in extremes(SITE_FIELDS["memory_slots"])  # bounded now: 1e308 slots is a typo, refused


@pytest.mark.parametrize("length", [5e-324, 1e-310, 1e-5, 40_000.5, 1e300])
def test_a_length_outside_the_range_is_refused_in_one_line(length: float) -> None:
    data = with_value(CHAIN3, "link", "length_km", length)
    with pytest.raises(ScenarioError) as info:
        load_data(data)
    assert str(info.value) == (f"links[0].length_km: {length:g} is not allowed; expected a number in "
                               "[0.0001, 40000] (km)")


def test_a_near_zero_link_has_the_figures_of_a_short_patch() -> None:
    # Fibre loss is attenuation x length + extra loss (common practice): at 0.1 m the fibre adds
    # 0.25 dB/km x 1e-4 km = 2.5e-5 dB, so the link is its 1 dB of connectors (chain3, TIA-568 pairs,
    # memory), and the heralded fidelity must be that of a 1 m patch to 3 digits. The bug gave 0.45
    # for 1e-310 km (the arms' losses became inf and 0).
    figures = {}
    for length in (1e-4, 1e-3):
        data = with_value(CHAIN3, "link", "length_km", length)
        row = budget(load_data(data)).links[0]
        figures[length] = row
        assert row["transmissivity"] == pytest.approx(10 ** (-(0.25 * length + 1.0) / 10), rel=1e-9)
    assert figures[1e-4]["fidelity"] == pytest.approx(figures[1e-3]["fidelity"], abs=1e-3)
    assert figures[1e-4]["pair_rate_per_s"] == pytest.approx(figures[1e-3]["pair_rate_per_s"], rel=1e-2)


def test_the_arm_losses_of_a_subnormal_link_are_finite() -> None:
    # the light path itself (below the loader's range): the extra loss sits at a share of the length,
    # so the arms split 1 dB by the station position whatever the length (0.5 each at a midpoint)
    scenario = load_data(CHAIN3)
    link = scenario.links[0]
    sites = {s.name: s for s in scenario.sites}
    for length in (5e-324, 1e-310, 1e-3, 10.0):
        tiny = type(link)(**{**link.__dict__, "length_km": length})
        path = LightPath.join((tiny,), sites[tiny.a], sites[tiny.b])
        to_station, from_station = path.arm_losses_db()
        assert math.isfinite(to_station) and math.isfinite(from_station)
        assert to_station + from_station == pytest.approx(0.25 * length + 1.0, rel=1e-9)
        if length >= 1e-3:
            assert to_station == pytest.approx(from_station, rel=1e-9)


def test_a_lossless_route_has_an_unbounded_repeaterless_bound() -> None:
    # attenuation 0 and extra loss 0 are allowed: eta = 1, and the PLOB bound -log2(1 - eta) is
    # unbounded (Pirandola, Laurenza, Ottaviani & Banchi, Nat. Commun. 8, 15043 (2017)); the minimum
    # cut over such links raised NetworkXUnbounded. It is reported as no bound (None in JSON).
    data = copy.deepcopy(CHAIN3)
    data["defaults"]["link"].update(attenuation_db_per_km=0.0, extra_loss_db=0.0)
    for link in data["links"]:
        link.pop("extra_loss_db", None)
    result = budget(load_data(data))
    assert all(row["transmissivity"] == 1.0 for row in result.links)
    demand = result.demands[0]
    assert demand["multipath_bits_per_s"] == math.inf
    assert result.to_dict()["demands"][0]["multipath_bits_per_s"] is None
    assert 0.0 <= demand["expected_fidelity"] <= 1.0


@pytest.mark.parametrize("table,key,value", [("site", "memory_slots", 10 ** 308), ("site", "communication_qubits", 10 ** 6),
                                             ("link", "modes", 10 ** 7)])
def test_absurd_counts_are_refused_in_one_line(table: str, key: str, value: int) -> None:
    # found by the fuzz campaign: --vary 'sites[*].memory_slots=1e308' was accepted and listed as a
    # 309-digit slot count; counts now have upper ends far beyond any built node (common practice)
    with pytest.raises(ScenarioError) as info:
        load_data(with_value(CHAIN3, table, key, value))
    assert str(info.value).count("\n") == 0 and f"{key}" in str(info.value) and "is not allowed" in str(info.value)
