"""The error corpus: malformed scenarios and the one-line message each must produce.

Each case is a small scenario (the valid BASE with one or more edits) and the fragments its
ScenarioError must contain. Outside sources of the rules:

- TOML syntax and types: the TOML v1.0.0 specification (toml.io, 2021), as parsed by the
  standard library's tomllib (PEP 680, 2022).
- Probabilities and efficiencies lie in [0, 1] (Kolmogorov's axioms; common practice).
- T2 <= 2 T1 for a qubit: the coherence decay rate is at least half the energy decay rate
  (Nielsen & Chuang, Quantum Computation and Quantum Information, CUP 2010, Sec. 8.3; memory).
- A Bloch vector has length <= 1 (Nielsen & Chuang 2010, Sec. 4.2 and Ex. 2.72; memory).
- Lengths of fibre are positive (common practice).
"""

from __future__ import annotations

import re

import pytest

from netsim.errors import ScenarioError
from netsim.scenario import load, load_data

BASE = """\
[network]
name = "Corpus base"

[[sites]]
name = "Quill Street Lab"
role = "user"

[[sites]]
name = "Otterby Exchange"
role = "repeater"

[[sites]]
name = "Marrow Fen Campus"
role = "user"

[[links]]
ends = ["Quill Street Lab", "Otterby Exchange"]
length_km = 8.0

[[links]]
ends = ["Otterby Exchange", "Marrow Fen Campus"]
length_km = 11.0

[[demands]]
users = ["Quill Street Lab", "Marrow Fen Campus"]
pairs = 50
"""

SWITCH = '\n[[sites]]\nname = "Pellow Switch"\nrole = "switch"\nmemory_slots = 0\n'
ISLAND = '\n[[sites]]\nname = "Ferrow Isle"\nrole = "user"\n'


def edit(old: str, new: str) -> str:
    """BASE with ``old`` replaced by ``new`` (``old`` must occur exactly once)."""
    if BASE.count(old) != 1:
        raise ValueError(f"corpus edit target {old!r} must occur once in BASE")
    return BASE.replace(old, new)


# (id, scenario text, fragments the error must contain). Paths are zero-based.
CORPUS: list[tuple[str, str, tuple[str, ...]]] = [
    ("empty-file", "", ("the file is empty",)),
    ("only-comments", "# nothing here\n\n", ("the file is empty",)),
    ("toml-syntax-at-end", BASE + "\n[[links]]\nends = [\"a\", \n", ("TOML syntax error", "end of document, line 29")),
    ("toml-syntax-line", edit("length_km = 8.0", "length_km = 8.0.0"),
     ("TOML syntax error", "line 18")),
    ("toml-duplicate-key", edit("pairs = 50", "pairs = 50\npairs = 60"), ("TOML syntax error",)),
    ("unknown-top-key", BASE + "\n[netwrok]\nname = 'x'\n", ("netwrok: unknown key", "did you mean 'network'?")),
    ("unknown-link-key", edit("length_km = 8.0", "lenght_km = 8.0"),
     ("links[0].lenght_km: unknown key; did you mean 'length_km'?", "links[0].length_km: missing")),
    ("unknown-site-key", edit('role = "repeater"', 'role = "repeater"\nt2_seconds = 1.0'),
     ("sites[1].t2_seconds: unknown key; did you mean 't2_s'?",)),
    ("unknown-key-no-guess", edit("pairs = 50", "pairs = 50\ncolour = 'red'"),
     ("demands[0].colour: unknown key; allowed keys: pairs, duration_s, min_fidelity, min_rate_per_s, users",)),
    ("missing-network", BASE.replace('[network]\nname = "Corpus base"\n', ""),
     ("network: missing; required",)),
    ("missing-name", edit('name = "Corpus base"', 'purpose = "no name"'), ("network.name: missing",)),
    ("missing-role", edit('role = "repeater"\n', ""), ("sites[1].role: missing; required, one of 'user'",)),
    ("missing-length", edit("length_km = 11.0\n", ""), ("links[1].length_km: missing; required, a number in [0.0001, 40000] (km)",)),
    ("missing-ends", edit('ends = ["Quill Street Lab", "Otterby Exchange"]\n', ""),
     ("links[0].ends: missing; required, two site names",)),
    ("missing-sites", BASE[:BASE.index("[[sites]]")] + "[[links]]\nends = ['a', 'b']\nlength_km = 1.0\n",
     ("sites: missing; required",)),
    ("one-site", BASE[:BASE.index('[[sites]]\nname = "Otterby')] + "[[links]]\nends = ['a', 'b']\nlength_km = 1\n",
     ("sites: 1 site(s) is not allowed; expected at least two",)),
    ("string-length", edit("length_km = 8.0", 'length_km = "8 km"'),
     ("links[0].length_km: '8 km' is not allowed; expected a number in [0.0001, 40000] (km)",)),
    ("bool-as-number", edit("length_km = 8.0", "length_km = true"),
     ("links[0].length_km: True is not allowed; expected a number in [0.0001, 40000] (km)",)),
    ("float-as-integer", edit("pairs = 50", "pairs = 50.0"),
     ("demands[0].pairs: 50.0 is not allowed; expected an integer >= 1",)),
    ("nan-length", edit("length_km = 8.0", "length_km = nan"), ("links[0].length_km: nan is not allowed",)),
    ("inf-t1", edit('role = "repeater"', 'role = "repeater"\nt1_s = inf'), ("sites[1].t1_s: inf is not allowed",)),
    ("negative-length", edit("length_km = 11.0", "length_km = -3.0"),
     ("links[1].length_km: -3 is not allowed; expected a number in [0.0001, 40000] (km)",)),
    ("zero-length", edit("length_km = 11.0", "length_km = 0"), ("links[1].length_km: 0 is not allowed",)),
    ("probability-above-one", edit("length_km = 8.0", "length_km = 8.0\ndetector_efficiency = 1.2"),
     ("links[0].detector_efficiency: 1.2 is not allowed; expected a number in (0, 1]",)),
    ("probability-negative", edit('role = "repeater"', 'role = "repeater"\ngate_error = -0.1'),
     ("sites[1].gate_error: -0.1 is not allowed; expected a number in [0, 1]",)),
    ("min-fidelity-above-one", edit("pairs = 50", "pairs = 50\nmin_fidelity = 1.5"),
     ("demands[0].min_fidelity: 1.5 is not allowed",)),
    ("t2-above-2t1", edit('role = "repeater"', 'role = "repeater"\nt1_s = 1.0\nt2_s = 3.0'),
     ("sites[1].t2_s: 3 is not allowed; expected t2_s <= 2 * t1_s = 2 s",)),
    ("t2-above-2t1-in-defaults", BASE + "\n[defaults.site]\nt1_s = 0.1\n",
     ("defaults.site.t1_s: t2_s = 0.4 (built-in default) and t1_s = 0.1 are not allowed together",)),
    ("t2-above-2t1-from-profile", edit('role = "repeater"', 'role = "repeater"\nprofile = "nv-diamond-demonstrated"\nt1_s = 0.1'),
     ("sites[1].t2_s: 0.4 (from profile 'nv-diamond-demonstrated') is not allowed; expected t2_s <= 2 * t1_s = 0.2 s",)),
    ("unknown-profile", edit('role = "repeater"', 'role = "repeater"\nprofile = "trapped-ion"'),
     ("sites[1].profile: 'trapped-ion' is not allowed; did you mean 'trapped-ion-",
      "expected one of 'nv-diamond-demonstrated'")),
    ("unknown-profile-in-defaults", BASE + '\n[defaults.link]\nprofile = "diamond"\n',
     ("defaults.link.profile: 'diamond' is not allowed",)),
    ("t2-above-2t1-site-and-defaults", edit('role = "repeater"', 'role = "repeater"\nt2_s = 3.0')
     + "\n[defaults.site]\nt1_s = 1.0\n",
     ("sites[1].t2_s: 3 is not allowed; expected t2_s <= 2 * t1_s = 2 s (T2 <= 2 T1; t1_s = 1 (from defaults))",)),
    ("duplicate-site", edit('name = "Marrow Fen Campus"', 'name = "Quill Street Lab"'),
     ("sites[2].name: 'Quill Street Lab' is not allowed; it is already the name of sites[0]",)),
    ("link-unknown-site", edit('ends = ["Otterby Exchange", "Marrow Fen Campus"]',
                               'ends = ["Otterby Exchange", "Marow Fen Campus"]'),
     ("links[1].ends[1]: 'Marow Fen Campus' is not allowed; it is not the name of a site; did you mean",
      "did you mean 'Marrow Fen Campus'?")),
    ("self-loop", edit('ends = ["Otterby Exchange", "Marrow Fen Campus"]',
                       'ends = ["Otterby Exchange", "Otterby Exchange"]'), ("links[1].ends:", "self-loop")),
    ("duplicate-link", BASE + '\n[[links]]\nends = ["Otterby Exchange", "Quill Street Lab"]\nlength_km = 9.0\n',
     ("links[2].ends:", "links[0] already joins these sites")),
    ("ends-not-pair", edit('ends = ["Quill Street Lab", "Otterby Exchange"]', 'ends = "Quill Street Lab"'),
     ("links[0].ends: 'Quill Street Lab' is not allowed; expected two site names",)),
    ("demand-unknown-site", edit('users = ["Quill Street Lab", "Marrow Fen Campus"]',
                                 'users = ["Quill Street Lab", "Harbour Lab"]'),
     ("demands[0].users[1]: 'Harbour Lab' is not allowed; it is not the name of a site",)),
    ("demand-not-user", edit('users = ["Quill Street Lab", "Marrow Fen Campus"]',
                             'users = ["Quill Street Lab", "Otterby Exchange"]'),
     ("demands[0].users[1]: 'Otterby Exchange' is not allowed; it is a repeater site",)),
    ("demand-to-switch", BASE + SWITCH + '\n[[links]]\nends = ["Pellow Switch", "Otterby Exchange"]\n'
     'length_km = 2.0\n\n[[demands]]\nusers = ["Pellow Switch", "Quill Street Lab"]\n',
     ("demands[1].users[0]: 'Pellow Switch' is not allowed; it is a switch site",)),
    ("demand-unconnected", BASE + ISLAND + '\n[[demands]]\nusers = ["Ferrow Isle", "Quill Street Lab"]\n',
     ("demands[1].users: ['Ferrow Isle', 'Quill Street Lab'] is not allowed; no path of links",)),
    ("demand-relayed-by-user", BASE + ISLAND + '\n[[links]]\nends = ["Marrow Fen Campus", "Ferrow Isle"]\n'
     'length_km = 3.0\n\n[[demands]]\nusers = ["Ferrow Isle", "Quill Street Lab"]\n',
     ("demands[1].users:", "(end users do not relay)")),
    ("demand-to-itself", edit('users = ["Quill Street Lab", "Marrow Fen Campus"]',
                              'users = ["Quill Street Lab", "Quill Street Lab"]'),
     ("demands[0].users:", "a demand joins two different user sites")),
    ("demand-pairs-and-duration", edit("pairs = 50", "pairs = 50\nduration_s = 2.0"),
     ("demands[0]: both pairs and duration_s are given",)),
    ("bad-role", edit('role = "repeater"', 'role = "relay"'),
     ("sites[1].role: 'relay' is not allowed; expected one of 'user', 'repeater', 'switch'",)),
    ("bad-scheme", edit("length_km = 8.0", 'length_km = 8.0\nscheme = "single-photon"'),
     ("links[0].scheme: 'single-photon' is not allowed; expected one of 'two_photon', 'single_photon'",)),
    ("bad-routing", BASE + '\n[protocol]\nrouting = "shortest"\n',
     ("protocol.routing: 'shortest' is not allowed; expected one of 'least_loss', 'fewest_hops'",
      "'highest_bound'")),
    ("bad-purification", BASE + '\n[protocol]\npurification = "dejmp"\n',
     ("protocol.purification: 'dejmp' is not allowed; expected one of 'none', 'bbpssw', 'dejmps'",)),
    ("rounds-without-purification", BASE + "\n[protocol]\npurification_rounds = 2\n",
     ("protocol.purification_rounds: 2 is not allowed without a purification protocol",)),
    ("zero-modes", edit("length_km = 8.0", "length_km = 8.0\nmodes = 0"),
     ("links[0].modes: 0 is not allowed; expected an integer in [1, 1000000]",)),
    ("zero-slots-at-user", edit('role = "user"\n\n[[sites]]\nname = "Otterby',
                                'role = "user"\nmemory_slots = 0\n\n[[sites]]\nname = "Otterby'),
     ("sites[0].memory_slots: 0 is not allowed at a user site",)),
    ("one-coordinate", edit('role = "repeater"', 'role = "repeater"\nx_km = 3.0'),
     ("sites[1].y_km: missing; required when x_km is given",)),
    ("sites-not-array", 'sites = 3\n[network]\nname = "x"\n' + BASE[BASE.index("[[links]]"):],
     ("sites: 3 is not allowed; expected an array of tables, written [[sites]]",)),
    ("defaults-forbidden-key", BASE + "\n[defaults.site]\nrole = \"user\"\n",
     ("defaults.site.role: cannot have a default",)),
    ("defaults-unknown-section", BASE + "\n[defaults.demand]\npairs = 3\n",
     ("defaults.demand: unknown key",)),
    ("defaults-bad-value", BASE + "\n[defaults.link]\nattenuation_db_per_km = -0.2\n",
     ("defaults.link.attenuation_db_per_km: -0.2 is not allowed; expected a number >= 0 (dB/km)",)),
    ("encoding-unknown-name", BASE + '\n[encoding]\nstates = "bb48"\n',
     ("encoding.states: 'bb48' is not allowed; expected 'binary', 'bb84' or a list of Bloch vectors",)),
    ("encoding-long-vector", BASE + "\n[encoding]\nstates = [[0, 0, 1], [1, 1, 0]]\n",
     ("encoding.states[1]: [1, 1, 0] has length 1.41421", "expected a Bloch vector of length <= 1")),
    ("encoding-short-vector", BASE + "\n[encoding]\nstates = [[0, 0, 1], [1, 0]]\n",
     ("encoding.states[1]: [1, 0] is not allowed; expected a Bloch vector of three finite numbers",)),
    ("encoding-probabilities-sum", BASE + '\n[encoding]\nstates = "binary"\nprobabilities = [0.5, 0.6]\n',
     ("encoding.probabilities: [0.5, 0.6] sums to 1.1",)),
    ("encoding-probabilities-count", BASE + '\n[encoding]\nstates = "bb84"\nprobabilities = [0.5, 0.5]\n',
     ("encoding.probabilities: [0.5, 0.5] is not allowed; expected 4 numbers in [0, 1]",)),
]

LINE = re.compile(r"^\S.*: \S.*$")


def _error(text: str, tmp_path) -> ScenarioError:  # type: ignore[no-untyped-def]
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load(path)
    return info.value


def test_corpus_is_large_enough() -> None:
    """Issue 3, section 2: at least 25 malformed scenarios."""
    assert len(CORPUS) >= 25
    assert len({case[0] for case in CORPUS}) == len(CORPUS)


def test_base_is_valid() -> None:
    """The base of every case loads, so each case's error comes from its own edit."""
    import tomllib

    scenario = load_data(tomllib.loads(BASE))
    assert [s.name for s in scenario.sites] == ["Quill Street Lab", "Otterby Exchange", "Marrow Fen Campus"]


@pytest.mark.parametrize(("text", "fragments"), [c[1:] for c in CORPUS], ids=[c[0] for c in CORPUS])
def test_malformed_scenario_message(text: str, fragments: tuple[str, ...], tmp_path) -> None:  # type: ignore[no-untyped-def]
    error = _error(text, tmp_path)
    message = str(error)
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in:\n{message}"
    for line in message.splitlines():
        assert line.startswith(str(tmp_path / "case.toml") + ": ")
        assert LINE.match(line), line
    assert all("\n" not in str(p) for p in error.problems)


def test_every_problem_is_reported_at_once(tmp_path) -> None:  # type: ignore[no-untyped-def]
    """Three independent mistakes give three lines, in file order."""
    text = edit("length_km = 8.0", "length_km = -8.0")
    text = text.replace("pairs = 50", "pairs = 0").replace('role = "repeater"', 'role = "relay"')
    error = _error(text, tmp_path)
    paths = [p.path for p in error.problems]
    assert paths == ["sites[1].role", "links[0].length_km", "demands[0].pairs"]


def test_unreadable_file_is_a_scenario_error(tmp_path) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(ScenarioError, match="cannot read the file"):
        load(tmp_path / "absent.toml")


def test_non_utf8_file_is_a_scenario_error(tmp_path) -> None:  # type: ignore[no-untyped-def]
    """TOML files are UTF-8 (TOML v1.0.0 specification)."""
    path = tmp_path / "latin1.toml"
    path.write_bytes(BASE.replace("Corpus base", "Caf\u00e9").encode("latin-1"))
    with pytest.raises(ScenarioError, match="not UTF-8"):
        load(path)


def test_check_command_prints_each_problem_on_one_line_and_exits_2(tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    """Issue 3, section 2: no traceback, one line per problem, exit code 2."""
    from netsim.cli import main

    for name, text, _ in CORPUS:
        path = tmp_path / f"{name}.toml"
        path.write_text(text, encoding="utf-8")
        expected = len(_error(text, tmp_path).problems)
        assert main(["check", str(path)]) == 2, name
        err = capsys.readouterr().err
        assert "Traceback" not in err, name
        assert len(err.splitlines()) == expected, (name, err)
