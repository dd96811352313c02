"""``netsim check``: summary, planning warnings and one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from netsim.cli import main

CHAIN = Path(__file__).resolve().parent.parent / "scenarios" / "chain3.toml"

LONG_LINK = """
[network]
name = "Kettleby long haul"

[[sites]]
name = "Kettleby Lab"
role = "user"
t2_s = {t2}

[[sites]]
name = "Lowen Lab"
role = "user"

[[links]]
ends = ["Kettleby Lab", "Lowen Lab"]
length_km = {length}
scheme = "{scheme}"
bright_state_population = 0.6
dark_count_probability = 1e-5

[[demands]]
users = ["Kettleby Lab", "Lowen Lab"]
min_fidelity = {min_fidelity}
"""


def write(tmp_path: Path, length: float = 10.0, min_fidelity: float = 0.5, t2: float = 1.0,
          scheme: str = "two_photon") -> Path:
    path = tmp_path / "kettleby.toml"
    path.write_text(LONG_LINK.format(length=length, min_fidelity=min_fidelity, t2=t2, scheme=scheme))
    return path


def test_summary_of_a_bundled_scenario(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(CHAIN)]) == 0
    out = capsys.readouterr().out
    assert "valid scenario 'Chain of three'" in out
    assert "sites: 3 (2 user, 1 repeater, 0 switch)" in out
    assert "links: 2 (22 km of fibre)" in out
    assert "demands: 1" in out
    # On demonstrated trapped-ion hardware the chain's one demand falls just short of its
    # min_fidelity 0.7: the estimate (memory decay and the 0.5 s cut-off included) gives 0.685 and
    # the simulation of the demand alone 0.684-0.70 (tests/test_network_estimate.py); check says
    # so before any run, and nothing else.
    assert "warnings: 1" in out or out.count("below min_fidelity 0.7") == 1
    assert "expected fidelity 0.68" in out and "below min_fidelity 0.7" in out


def test_a_link_beyond_its_scheme_is_flagged(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """300 km at 0.25 dB/km is 76 dB: two-photon heralding gives far below 1e-3 pairs/s."""
    path = write(tmp_path, length=300.0)
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "links[0] (Kettleby Lab-Lowen Lab)" in out
    assert "below 0.001 pairs/s" in out and "two_photon heralding" in out
    assert "dark counts" in out  # at this loss dark counts swamp the true heralds
    assert main(["check", "--strict", str(path)]) == 1


def test_route_fidelity_below_min_fidelity_is_flagged(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = write(tmp_path, length=150.0, min_fidelity=0.999)
    main(["check", str(path)])
    assert "below min_fidelity 0.999" in capsys.readouterr().out


def test_memory_shorter_than_the_wait_is_flagged(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Two hops of 50 km two-photon: each pair takes ~1 s to herald, far longer than t2_s = 1 ms,
    and the first pair decays while the second is made."""
    two_hops = LONG_LINK.format(length=50.0, min_fidelity=0.5, t2=1e-3, scheme="two_photon").replace(
        '[[links]]\nends = ["Kettleby Lab", "Lowen Lab"]',
        '[[sites]]\nname = "Mire Relay"\nrole = "repeater"\nt2_s = 1e-3\nmemory_slots = 2\n\n'
        '[[links]]\nends = ["Kettleby Lab", "Mire Relay"]\nlength_km = 50.0\nscheme = "two_photon"\n\n'
        '[[links]]\nends = ["Mire Relay", "Lowen Lab"]')
    path = tmp_path / "two.toml"
    path.write_text(two_hops)
    main(["check", str(path)])
    out = capsys.readouterr().out
    assert "longer than t2_s = 0.001 s at Kettleby Lab" in out


def test_a_lone_link_is_judged_by_its_herald_delay(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """One hop stores nothing while it waits; only the herald delay counts: 100 km two-photon
    returns the herald after 2 x 50 km / (c / 1.468) ~ 0.49 ms (common practice), against t2_s =
    1 ms (more than a tenth of it) and 1 s (no warning)."""
    main(["check", str(write(tmp_path, length=100.0, t2=1e-3))])
    out = capsys.readouterr().out
    assert "all hops are ready" not in out and "the herald returns after 0.000" in out
    main(["check", str(write(tmp_path, length=100.0, t2=1.0))])
    assert "herald returns" not in capsys.readouterr().out


def test_unentangled_heralds_are_flagged(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Single-photon heralding with alpha = 0.6: F ~ 1 - alpha = 0.4 (Humphreys et al., Nature 558,
    268, 2018 (memory)), no better than a classical mixture."""
    main(["check", str(write(tmp_path, scheme="single_photon"))])
    assert "is not above 1/2" in capsys.readouterr().out


def test_json_output(capsys: pytest.CaptureFixture[str]) -> None:
    # The bundled chain (demonstrated trapped-ion values) draws one warning: its demand falls
    # just short of min_fidelity 0.7 (see test_summary_of_a_bundled_scenario).
    assert main(["check", "--format", "json", str(CHAIN)]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["valid"] is True and data["sites"] == 3 and data["users"] == 2
    assert len(data["warnings"]) == 1 and "below min_fidelity 0.7" in data["warnings"][0]
    assert [u["profile"] for u in data["profiles"]] == ["trapped-ion-demonstrated"]


def test_invalid_file_exits_2_with_one_line_per_problem(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = write(tmp_path, length=-5.0)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "links[0].length_km" in err and "-5" in err
    assert "Traceback" not in err
    assert all(line.startswith("netsim check: error:") for line in err.strip().splitlines())


def test_missing_file_exits_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(tmp_path / "absent.toml")]) == 2
    assert "cannot read the file" in capsys.readouterr().err


SWITCHED = """
[network]
name = "Marsden switched"

[[sites]]
name = "Marsden Lab"
role = "user"

[[sites]]
name = "Nab Switch"
role = "switch"

[[sites]]
name = "Oxley Lab"
role = "user"

[[links]]
ends = ["Marsden Lab", "Nab Switch"]
length_km = 5.0
scheme = "single_photon"

[[links]]
ends = ["Nab Switch", "Oxley Lab"]
length_km = 7.0
scheme = "two_photon"

[[demands]]
users = ["Marsden Lab", "Oxley Lab"]
"""


def test_mixed_settings_along_a_light_path_are_flagged(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "marsden.toml"
    path.write_text(SWITCHED)
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "light path links[0] + links[1] (Marsden Lab to Oxley Lab): links disagree on scheme" in out
    assert "sites: 3 (2 user, 0 repeater, 1 switch)" in out


def test_a_light_path_walked_both_ways_is_warned_about_once() -> None:
    # Two demands cross the same switched light path in opposite directions; the warning about
    # that path (far too lossy for its scheme at 22 dB/km; any rate below 1e-3 pairs/s is flagged,
    # common practice for this check) must appear once, not once per direction.
    from netsim.network.audit import audit
    from netsim.scenario import load_data

    scenario = load_data({
        "network": {"name": "Skerrow"},
        "defaults": {"link": {"attenuation_db_per_km": 22.0}},
        "sites": [{"name": "Skerrow Lab", "role": "user"}, {"name": "Tolly Switch", "role": "switch"},
                  {"name": "Umber Lab", "role": "user"}],
        "links": [{"ends": ["Skerrow Lab", "Tolly Switch"], "length_km": 3.0},
                  {"ends": ["Tolly Switch", "Umber Lab"], "length_km": 4.0}],
        "demands": [{"users": ["Skerrow Lab", "Umber Lab"]}, {"users": ["Umber Lab", "Skerrow Lab"]}],
    })
    path_lines = [w for w in audit(scenario) if "light path" in w]
    assert path_lines, "the lossy light path should be flagged"
    assert len(path_lines) == len(set(w.split(":", 1)[1] for w in path_lines))
    assert not any("links[1] + links[0]" in w for w in path_lines)
