"""Fuzz campaign: mutated scenarios, sweep specs, run files, stores and flag sets through the CLI.

Run from the repository root::

    python -m tests.fuzz --n 1000 --seed 0            # summary table, one reproducer per failure
    python -m tests.fuzz --n 50 --json out.json       # machine-readable results (the tests use it)
    python -m tests.fuzz --n 200 --subprocess         # each input in its own `python -m netsim`

Every input is a set of files written into a fresh directory plus a ``netsim`` argument list. It
goes through the CLI entry point (``netsim.cli.main``) in this process, with stdout and stderr
captured and a SIGALRM time-out, or with ``--subprocess`` through ``python -m netsim``; the
hash-seed trials always run two subprocesses. Each outcome is classified:

- ``refused``: exit 2, an error on stderr whose every line is one complete message (``check``
  prints one line per problem), no traceback, no line longer than ``LONG_LINE`` characters;
- ``accepted``: exit 0 on an input that is valid or whose validity is not asserted;
- ``traceback``: an exception escaped the entry point (or "Traceback" on stderr);
- ``hang``: no answer within the time-out;
- ``silent``: exit 0 on an input of an invalid class (below);
- ``long-message``: refused, but a stderr line is longer than ``LONG_LINE`` characters;
- ``hash-seed``: one command gives different output under two PYTHONHASHSEED values;
- ``other``: any other exit (exit 2 without an error line, exit 1, 130).

Invalid classes (an input of one of them must be refused): ``out-of-range`` (a number outside its
key's range in the scenario reference, a non-finite number, a string not among a choice's values,
a negative seed or count on the command line), ``unknown-key`` (a key, table, key path or column
the reference does not define), ``wrong-type`` (a value of another type than the key's: text for a
number, a list or table for a scalar, a float for an integer, a file where a directory is named,
an address that is not one), and ``damaged`` (a run file or result store whose content is not what
netsim wrote: unparseable, cut short or with values of the wrong type). Inputs at the edges of the
allowed ranges (boundary values, subnormal and huge numbers) carry no expectation: they must be
accepted or refused in one line, and never crash or hang.

The failures, traceback, hang and silent, are the campaign's target: 0 of each. ``ISSUE_ITEMS``
maps each input family to the item of issue 14 that covers it, so a failure in a known family is
reported with its item and any other is a new finding.
"""

from __future__ import annotations

import argparse
import contextlib
import copy
import io
import json
import math
import os
import random
import re
import shlex
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import tomllib
import traceback
from collections import Counter
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = sorted((ROOT / "scenarios").glob("*.toml")) + sorted((ROOT / "scenarios" / "published").glob("*.toml"))
#: The small scenarios (quick to check and run) are drawn more often than the metro meshes.
SMALL = [p for p in SCENARIOS if "vellmoor" not in p.name]

LONG_LINE = 1000
FAILURES = ("traceback", "hang", "silent")
INVALID = ("out-of-range", "unknown-key", "wrong-type", "damaged")

#: Input family -> the item of issue 14 that covers failures in it ("-" for none: a new finding).
ISSUE_ITEMS = {
    "deep-nesting": "1", "long-dotted-key": "1", "huge-int": "2", "sweep-file-huge": "3",
    "boundary": "4 (range extremes) / 10 (runs that never end)", "out-path": "5", "cluster": "6",
    "run-file": "7", "store": "8", "seed": "11", "hash-seed": "13", "long-value": "14", "bare": "15",
}


@dataclass
class Case:
    """One fuzz input: files to write, the netsim arguments, and what it is."""

    id: str
    family: str
    argv: list[str]
    files: dict[str, bytes] = field(default_factory=dict)
    invalid: str | None = None  # one of INVALID: the input must be refused
    timeout_s: float = 30.0
    hash_seed: bool = False  # run twice in subprocesses under two hash seeds and compare stdout
    setup: str | None = None  # name of a prepared artefact to copy in ("run", "store")
    item: str | None = None  # the issue 14 item, where the input says more than its family
    damage: str | None = None  # what to do to the prepared store


@dataclass
class Outcome:
    id: str
    family: str
    outcome: str
    exit: int | None
    invalid: str | None
    argv: list[str]
    message: str
    issue_item: str
    seconds: float


# --- TOML writing (independent of netsim's own writer) -------------------------------------------

def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        text = repr(value)
        return text if any(c in text for c in ".en") else text + ".0"
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{json.dumps(str(k))} = {_toml_value(v)}" for k, v in value.items()) + " }"
    raise TypeError(type(value))


def _is_table_array(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def dumps_toml(data: dict[str, Any], prefix: tuple[str, ...] = ()) -> str:
    """A TOML document for nested dicts and lists (tables and arrays of tables written out)."""
    lines = []
    for key, value in data.items():
        if not isinstance(value, dict) and not _is_table_array(value):
            lines.append(f"{json.dumps(str(key))} = {_toml_value(value)}")
    for key, value in data.items():
        name = ".".join(json.dumps(str(k)) for k in (*prefix, key))
        if isinstance(value, dict):
            lines.append(f"\n[{name}]")
            lines.append(dumps_toml(value, (*prefix, key)))
        elif _is_table_array(value):
            for item in value:
                lines.append(f"\n[[{name}]]")
                lines.append(dumps_toml(item, (*prefix, key)))
    return "\n".join(line for line in lines if line != "")


# --- scenario mutations ----------------------------------------------------------------------------

def _specs() -> dict[str, Any]:
    from netsim.scenario import fields as f

    return {"sites": f.SITE_FIELDS, "links": f.LINK_FIELDS, "demands": f.DEMAND_FIELDS,
            "defaults.site": f.SITE_DEFAULTABLE, "defaults.link": f.LINK_DEFAULTABLE,
            "protocol": f.PROTOCOL_FIELDS, "network": f.NETWORK_FIELDS, "costs": f.COSTS_FIELDS}


def _tables(data: dict[str, Any]) -> list[tuple[str, str, dict[str, Any]]]:
    """(path as written, spec name, table) for every table of a parsed scenario that has specs."""
    found = []
    for name in ("sites", "links", "demands"):
        for i, table in enumerate(data.get(name, [])):
            found.append((f"{name}[{i}]", name, table))
    for name in ("site", "link"):
        table = data.get("defaults", {}).get(name)
        if isinstance(table, dict):
            found.append((f"defaults.{name}", f"defaults.{name}", table))
    for name in ("protocol", "network", "costs"):
        if isinstance(data.get(name), dict):
            found.append((name, name, data[name]))
    return found


def _numeric_invalid(spec: Any, rng: random.Random) -> list[Any]:
    """Values outside the spec's range (out-of-range)."""
    out: list[Any] = [math.nan, math.inf, -math.inf]
    if spec.low is not None:
        out += [spec.low] if spec.low_open else [math.nextafter(spec.low, -math.inf), spec.low - 1.0]
        if spec.low == 0.0:
            out.append(-5e-324)
    if spec.high is not None:
        out += [spec.high] if spec.high_open else [math.nextafter(spec.high, math.inf), spec.high + 1.0]
    if spec.kind == "int":
        out = [int(v) for v in out if isinstance(v, float) and math.isfinite(v) and v == int(v)
               and not spec.accepts(int(v))] or [-1]
    return [v for v in out if not spec.accepts(v)]


def _numeric_edges(spec: Any) -> list[Any]:
    """Values on or next to the edges of the spec's range, all accepted by it (no expectation)."""
    edges: list[Any] = []
    if spec.low is not None:
        edges.append(math.nextafter(spec.low, math.inf) if spec.low_open else spec.low)
        if spec.low == 0.0:
            edges += [5e-324, 1e-310, 2.2250738585072014e-308]
    if spec.high is not None:
        edges.append(math.nextafter(spec.high, -math.inf) if spec.high_open else spec.high)
    else:
        edges += [1e308, 1.7976931348623157e308, 1e15]
    if spec.kind == "int":
        edges = [int(v) for v in edges if math.isfinite(v) and v == int(v) and abs(v) < 1e19] + [2**53 + 1, 10**18]
    return [v for v in edges if spec.accepts(v)]


def _wrong_types(spec: Any) -> list[Any]:
    if spec.kind in ("real", "int"):
        values: list[Any] = ["abc", "1.5", True, [1, 2], {"value": 1}, ""]
        if spec.kind == "int":
            values.append(2.5)
        return values
    if spec.kind == "bool":
        return ["yes", 1, 0.0, [True]]
    return [5, 1.5, True, ["a"], {"a": "b"}]


def _typo(key: str, rng: random.Random, taken: Any = ()) -> str:
    """A misspelling of ``key`` (a letter dropped or two swapped) that is neither ``key`` itself nor
    any name in ``taken``; ``key + "_x"`` when no such misspelling comes up."""
    if len(key) > 3 and rng.random() < 0.7:
        i = rng.randrange(1, len(key) - 1)
        typo = key[:i] + key[i + 1:] if rng.random() < 0.5 else key[:i] + key[i + 1] + key[i] + key[i + 2:]
        if typo != key and typo not in taken:
            return typo
    return key + "_x"


def _scenario_case(rng: random.Random, n: int) -> Case:
    path = rng.choice(SMALL if rng.random() < 0.8 else SCENARIOS)
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    specs = _specs()
    where, spec_name, table = rng.choice(_tables(data))
    table_specs = specs[spec_name]
    key = rng.choice(sorted(table_specs))
    spec = table_specs[key]
    kind = rng.choice(["out-of-range", "boundary", "boundary", "wrong-type", "unknown-key", "delete"])
    invalid: str | None = None
    family = "scenario-" + kind
    if kind == "out-of-range":
        if spec.kind in ("real", "int"):
            table[key] = rng.choice(_numeric_invalid(spec, rng) or ["abc"])
        elif spec.kind == "choice":
            table[key] = _typo(rng.choice(spec.choices), rng) + "zz"
        elif spec.kind == "str":
            table[key] = "   "
        else:
            table[key] = "maybe"
        invalid = "out-of-range" if spec.kind != "bool" else "wrong-type"
    elif kind == "boundary":
        family = "boundary"
        if spec.kind in ("real", "int") and _numeric_edges(spec):
            table[key] = rng.choice(_numeric_edges(spec))
        elif spec.kind == "choice":
            table[key] = rng.choice(spec.choices)
        elif spec.kind == "str":
            table[key] = rng.choice(["x", "Ünïcödé ✓ site", "a" * 300])
        else:
            table[key] = rng.choice([True, False])
    elif kind == "wrong-type":
        table[key] = rng.choice(_wrong_types(spec))
        invalid = "wrong-type"
    elif kind == "unknown-key":
        present = [k for k in table if k in table_specs] or sorted(table_specs)
        base = rng.choice(present)
        table[_typo(base, rng, table_specs) if rng.random() < 0.8 else "zz_unknown_key"] = table.get(base, 1.0)
        invalid = "unknown-key"
    else:  # delete a key: validity depends on defaults; no expectation
        present = [k for k in table] or [key]
        table.pop(rng.choice(present), None)
        key = "(deleted)"
    argv = _scenario_command(rng, "s.toml")
    return Case(f"{n:04d}-{family}-{path.stem}-{where}.{key}", family, argv,
                {"s.toml": dumps_toml(data).encode("utf-8")}, invalid,
                timeout_s=30.0)


def _scenario_command(rng: random.Random, name: str) -> list[str]:
    roll = rng.random()
    if roll < 0.62:
        return ["check", name] + (["--no-scan"] if rng.random() < 0.5 else [])
    if roll < 0.90:
        return ["budget", name, "--format", rng.choice(["table", "json", "csv"])]
    return ["run", name, "--pairs", "1", "--seed", "0", "--out", "runout", "--format", "json"]


def _set_field_text(text: str, key: str, value_text: str) -> str:
    """Replace the first ``key = ...`` line's value in TOML text (keeps everything else)."""
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.split("=", 1)[0].strip() == key:
            lines[i] = f"{key} = {value_text}"
            return "\n".join(lines) + "\n"
    return text + f"\n{key} = {value_text}\n"


def _structural_case(rng: random.Random, n: int) -> Case:
    path = rng.choice(SMALL)
    text = path.read_text(encoding="utf-8")
    depth = rng.choice([200, 1000, 3000])
    kind = rng.choice(["deep-array", "deep-table", "long-dotted-key", "long-header", "huge-int", "huge-int-int",
                       "long-string", "long-key", "non-utf8", "truncated", "nul", "empty", "bom", "dup-table"])
    invalid: str | None = None
    family = {"deep-array": "deep-nesting", "deep-table": "deep-nesting", "long-header": "long-dotted-key",
              "huge-int-int": "huge-int", "long-string": "long-value", "long-key": "long-value"}.get(kind, kind)
    if kind == "deep-array":
        text = _set_field_text(text, "length_km", "[" * depth + "1" + "]" * depth)
        invalid = "wrong-type"
    elif kind == "deep-table":
        text = _set_field_text(text, "length_km", "{ a = " * depth + "1" + " }" * depth)
        invalid = "wrong-type"
    elif kind == "long-dotted-key":
        text = ".".join(["z"] * rng.choice([1000, 5000])) + " = 1\n" + text
        invalid = "unknown-key"
    elif kind == "long-header":
        text = text + "\n[" + ".".join(["z"] * rng.choice([1000, 5000])) + "]\nq = 1\n"
        invalid = "unknown-key"
    elif kind == "huge-int":
        text = _set_field_text(text, "length_km", "9" * rng.choice([4301, 5000, 20000]))
        invalid = "out-of-range"  # not a finite float: outside every range
    elif kind == "huge-int-int":
        text = text.replace("[[demands]]", "[[demands]]\npairs = " + "9" * rng.choice([4301, 5000]), 1)
    elif kind == "long-string":
        text = _set_field_text(text, "name", json.dumps("x" * rng.choice([100_000, 1_000_000])))
    elif kind == "long-key":
        text = text.replace("[network]", "[network]\n" + "k" * 5000 + " = 1", 1)
        invalid = "unknown-key"
    elif kind == "truncated":
        text = text[: rng.randrange(0, len(text))]
    elif kind == "nul":
        i = rng.randrange(0, len(text))
        text = text[:i] + "\x00" + text[i:]
    elif kind == "empty":
        text = ""
    elif kind == "bom":
        text = "\ufeff" + text
    elif kind == "dup-table":
        text = text + "\n[network]\nname = \"again\"\n"
    raw = text.encode("utf-8")
    if kind == "non-utf8":
        raw = raw.replace(b"name = \"", b"name = \"\xff\xfe", 1)
    argv = _scenario_command(rng, "s.toml") if rng.random() < 0.5 else ["check", "s.toml"]
    if argv[0] == "run":
        argv = ["check", "s.toml"]
    return Case(f"{n:04d}-{family}-{kind}-{path.stem}", family, argv, {"s.toml": raw}, invalid)


# --- sweep specifications ------------------------------------------------------------------------

_SWEEP_KEYS_VALID = ["links[*].length_km", "sites[role=repeater].t2_s", "sites[0].emission_efficiency",
                     "defaults.link.attenuation_db_per_km", "protocol.cutoff_s", "demands[0].min_fidelity",
                     "links[0].dark_count_probability", "sites[*].memory_slots"]
_SWEEP_KEYS_UNKNOWN = ["links[*].lenght_km", "nosuch[*].x", "links[*]", "sites[role=nobody].t2_s",
                       "sites[99].t2_s", "defaults.nowhere.x", "links[" * 200 + "0" + "]" * 200 + ".length_km",
                       ".".join(["z"] * 2000), "sites[name=].t2_s"]


def _sweep_case(rng: random.Random, n: int) -> Case:
    path = ROOT / "scenarios" / "chain3.toml"
    text = path.read_text(encoding="utf-8")
    roll = rng.random()
    invalid: str | None = None
    family = "sweep-spec"
    if roll < 0.35:
        key = rng.choice(_SWEEP_KEYS_VALID)
        value, invalid = rng.choice([
            ("5,10", None), ("lin:5:40:3", None), ("log:0.01:10:3", None), ("0.9,0.95", None),
            ("-1,5", "out-of-range"), ("nan", "out-of-range"), ("inf", "out-of-range"),
            ("abc", "wrong-type"), ("lin:5:40:x", "wrong-type"), ("lin:5:40:0", "out-of-range"),
            ("lin:5:40:-3", "out-of-range"), ("lin:5", "wrong-type"), ("", "wrong-type"), (",,,", "wrong-type"),
            ("1" + "0" * 5000, "out-of-range"), ("5e-324", None), ("1e-310", None), ("1e308", None),
            ("log:0:1:3", "out-of-range"), ("2.5", None), ("log:1:1e308:4", None),
        ])
        if invalid is None and key.endswith("memory_slots") and any(c in value for c in ".e"):
            invalid = "wrong-type"
        if invalid is None and (key.endswith(("min_fidelity", "emission_efficiency", "dark_count_probability"))
                                and value not in ("0.9,0.95", "5e-324", "1e-310")):
            invalid = "out-of-range"
        argv = ["sweep", "s.toml", "--dry-run", "--store", "st.sqlite", "--vary", f"{key}={value}"]
    elif roll < 0.55:
        key = rng.choice([*_SWEEP_KEYS_UNKNOWN, "protocol.routing"])
        argv = ["sweep", "s.toml", "--dry-run", "--store", "st.sqlite", "--vary", f"{key}=5,10"]
        invalid = "wrong-type" if key == "protocol.routing" else "unknown-key"  # a key that holds a name
        family = "long-dotted-key" if len(key) > 500 else "sweep-spec"
    elif roll < 0.8:
        family = "sweep-file"
        values, invalid = rng.choice([
            ("[10, 20]", None), ("[]", "wrong-type"), ('"lin:5:40:3"', None), ("[\"a\", 1]", "wrong-type"),
            ("[" + "9" * 5000 + "]", "out-of-range"), ("[-3, 5]", "out-of-range"), ("[nan]", "out-of-range"),
            ("{ from = 5, to = 40, points = 3 }", None), ("{ from = 5, to = 40, points = 0 }", "out-of-range"),
            ("{ from = 5, to = 40 }", "wrong-type"), ("{ from = 5, to = 40, points = 3, scale = \"cubic\" }",
                                                    "out-of-range"),
            ("[5e-324, 1e-310]", None), ("[[[[[1]]]]]", "wrong-type"),
        ])
        if values.startswith("[" + "9" * 10):
            family = "sweep-file-huge"
        extra = rng.choice(["", "repeats = 0\n", "combine = \"diagonal\"\n", "pairs = 5\n", "repeats = 2\n",
                            "seed = -1\n", "pairs = 1.5\n"])
        if "repeats = 0" in extra or "diagonal" in extra or "seed = -1" in extra:
            invalid = invalid or "out-of-range"
        if "1.5" in extra:
            invalid = invalid or "wrong-type"
        text += f"\n[sweep]\n{extra}\n[sweep.vary]\n\"links[*].length_km\" = {values}\n"
        argv = ["sweep", "s.toml", "--dry-run", "--store", "st.sqlite"]
    else:
        family = "sweep-flags"
        flags, invalid = rng.choice([
            (["--repeats", "0"], "out-of-range"), (["--repeats", "-2"], "out-of-range"),
            (["--combine", "diagonal"], "out-of-range"), (["--seed", "-1"], "out-of-range"),
            (["--pairs", "0"], "out-of-range"), (["--workers", "0"], "out-of-range"),
            (["--point-timeout-s", "-1"], "out-of-range"), (["--point-timeout-s", "nan"], "out-of-range"),
            (["--precision", "0"], "out-of-range"), (["--precision", "inf"], "out-of-range"),
            (["--time-s", "nan"], "out-of-range"), (["--seed", "1e3"], "wrong-type"),
            (["--combine", "zip", "--vary", "links[0].length_km=5,10", "--vary", "links[1].length_km=5,10,20"],
             "out-of-range"),
            (["--seed", str(2**64)], None), (["--seed", "0"], None),
        ])
        argv = ["sweep", "s.toml", "--dry-run", "--store", "st.sqlite",
                "--vary", "links[*].length_km=5,10", *flags]
        if flags[0] == "--seed" and invalid == "out-of-range":
            family = "seed"
    case = Case(f"{n:04d}-{family}-{shlex.join(argv[4:])[:60]}", family, argv, {"s.toml": text.encode("utf-8")},
                invalid)
    if any(tiny in text or tiny in " ".join(argv) for tiny in ("5e-324", "1e-310", "1e308")):
        case.item = "4"  # subnormal and huge numbers in the arithmetic
    if any(len(word) > 1000 for word in argv):
        case.item = "14"  # a long key or value, echoed whole in the message
    return case


# --- command-line flag sets ----------------------------------------------------------------------

def _flag_case(rng: random.Random, n: int) -> Case:
    chain3 = (ROOT / "scenarios" / "chain3.toml").read_bytes()
    star = (ROOT / "scenarios" / "vellmoor-star.toml").read_bytes()
    files = {"s.toml": chain3, "b.toml": star, "afile": b"not a directory\n"}
    cluster_sweep = ["sweep", "s.toml", "--vary", "links[0].length_km=5", "--pairs", "2", "--store", "c.sqlite",
                     "--quiet", "--cluster"]
    choices: list[tuple[str, list[str], str | None]] = [
        ("seed", ["compare", "s.toml", "s.toml", "--seed", "-1", "--no-simulate"], "out-of-range"),
        ("seed", ["run", "s.toml", "--pairs", "2", "--seed", "-1", "--out", "o"], "out-of-range"),
        ("seed", ["report", "s.toml", "--seed", "-5", "--no-figures", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--pairs", "0", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--pairs", "-3", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--pairs", "1.5", "--out", "o"], "wrong-type"),
        ("flags", ["run", "s.toml", "--time-s", "nan", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--time-s", "-1", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--precision", "0", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--pairs", "2", "--seed", "1e400", "--out", "o"], "wrong-type"),
        ("flags", ["run", "s.toml", "--pairs", "2", "--format", "xml", "--out", "o"], "out-of-range"),
        ("flags", ["run", "s.toml", "--pairs", "2", "--columns", "nosuch", "--out", "o"], "unknown-key"),
        ("flags", ["budget", "s.toml", "--columns", "nosuch"], "unknown-key"),
        ("flags", ["budget", "s.toml", "--routing", "scenic"], "out-of-range"),
        ("flags", ["budget", "s.toml", "--pairz", "3"], "unknown-key"),
        ("flags", ["link", "--length-km", "-5"], "out-of-range"),
        ("flags", ["link", "--length-km", "nan"], "out-of-range"),
        ("flags", ["link", "--length-km", "1e308"], None),
        ("flags", ["link", "--length-km", "5e-324"], None),
        ("flags", ["link", "--length-km", "10", "--depolarizing", "1.5"], "out-of-range"),
        ("flags", ["profiles", "no-such-profile"], "unknown-key"),
        ("flags", ["check", "missing.toml"], "wrong-type"),
        ("flags", ["check", "."], "wrong-type"),
        ("flags", ["check", "afile"], "wrong-type"),
        ("flags", ["compare", "s.toml"], None),
        ("bare", [], None),
        ("out-path", ["run", "s.toml", "--pairs", "2", "--out", "afile"], "wrong-type"),
        ("out-path", ["run", "s.toml", "--pairs", "2", "--out", "afile/sub"], "wrong-type"),
        ("out-path", ["report", "s.toml", "--no-figures", "--out", "afile"], "wrong-type"),
        ("out-path", ["report", "s.toml", "--no-figures", "--out", "afile/sub"], "wrong-type"),
        ("out-path", ["compare", "s.toml", "b.toml", "--no-simulate", "--out", "afile"], "wrong-type"),
        ("out-path", ["compare", "s.toml", "b.toml", "--no-simulate", "--out", "afile/sub"], "wrong-type"),
        ("out-path", ["sweep", "s.toml", "--vary", "links[0].length_km=5", "--pairs", "2", "--workers", "1",
                      "--quiet", "--store", "afile/x.sqlite"], "wrong-type"),
        ("out-path", ["sweep", "s.toml", "--vary", "links[0].length_km=5", "--pairs", "2", "--workers", "1",
                      "--quiet", "--store", "afile"], "damaged"),
        ("cluster", [*cluster_sweep, "nonsense::::"], "wrong-type"),
        ("cluster", [*cluster_sweep, "tcp://"], "wrong-type"),
        ("cluster", [*cluster_sweep, "local:0"], "out-of-range"),
        ("cluster", [*cluster_sweep, "local:-2"], "out-of-range"),
        ("cluster", [*cluster_sweep, "local:abc"], "wrong-type"),
        ("cluster", [*cluster_sweep, "256.1.1.1:99999"], "wrong-type"),
    ]
    family, argv, invalid = rng.choice(choices)
    return Case(f"{n:04d}-{family}-{shlex.join(argv)[:70]}", family, argv, files, invalid, timeout_s=60.0)


# --- run files and stores ------------------------------------------------------------------------

def _run_file_case(rng: random.Random, n: int, artefacts: dict[str, Path]) -> Case:
    base = json.loads((artefacts["run"] / "run.json").read_text(encoding="utf-8"))
    data = copy.deepcopy(base)
    kind = rng.choice(["top-type", "top-type", "row-type", "delete", "truncate", "not-json", "list", "deep",
                       "huge-number", "unknown-top", "empty-object"])
    invalid: str | None = "damaged"
    key = ""
    if kind == "top-type":
        key = rng.choice(sorted(data))
        data[key] = rng.choice([5, "x", None, [], {}, [1, 2], True])
        if _json_kind(data[key]) == _json_kind(base[key]) or base[key] is None:
            invalid = None  # same type (an empty list for a list) or a key that may be null
        elif key in ("links", "sites") and data[key] == {}:
            invalid = None  # rows may also be a mapping keyed by name (netsim.report.sources): none
    elif kind == "row-type":
        rows = data.get("demands") or [{}]
        key = rng.choice(sorted(rows[0]) or ["x"])
        old = rows[0].get(key)
        rows[0][key] = rng.choice(["abc", [1], {"a": 1}, True] if isinstance(old, (int, float)) else [5, [1], {"a": 1}])
        if old is None or isinstance(old, bool) or _json_kind(rows[0][key]) == _json_kind(old):
            invalid = None
    elif kind == "delete":
        key = rng.choice(sorted(data))
        data.pop(key)
        invalid = None  # which keys a report needs is the report's business; no expectation
    elif kind == "list":
        data = [data]
    elif kind == "huge-number":
        data["demands"][0]["rate_per_s"] = "HUGE"  # replaced by a 5,000-digit number in the text
    elif kind == "unknown-top":
        data["zz_unknown"] = 1
        invalid = None  # extra keys in a result file carry no expectation
    elif kind == "empty-object":
        data = {}
    text = json.dumps(data)
    if kind == "truncate":
        text = text[: rng.randrange(1, len(text) - 1)]
    elif kind == "not-json":
        text = "this is not json {"
    elif kind == "deep":
        text = "{\"demands\": " + "[" * 100_000 + "]" * 100_000 + "}"
    elif kind == "huge-number":
        text = text.replace('"HUGE"', "9" * 5000)
    files = {"r.json": text.encode("utf-8"),
             "s.toml": (ROOT / "scenarios" / "chain3.toml").read_bytes()}
    argv = ["report", "r.json", "--no-figures", "--out", "rep", "--format", rng.choice(["md", "csv", "json"])]
    if rng.random() < 0.3:
        argv += ["--scenario", "s.toml"]
    return Case(f"{n:04d}-run-file-{kind}-{key}", "run-file", argv, files, invalid)


def _json_kind(value: Any) -> str:
    if isinstance(value, bool):
        return "bool"
    if isinstance(value, (int, float)):
        return "number"
    return type(value).__name__


_STORE_DAMAGE = {
    "params-not-json": "UPDATE points SET parameters = 'not json'",
    "value-text": "UPDATE metrics SET value = 'abc'",
    "value-null": "UPDATE metrics SET value = NULL",
    "drop-metrics": "DROP TABLE metrics",
    "drop-points": "DROP TABLE points",
    "meta-empty": "DELETE FROM meta",
    "meta-garbage": "UPDATE meta SET value = '{{{'",
    "status-pending": "UPDATE points SET status = 'pending'",
    "params-list": "UPDATE points SET parameters = '[1, 2, 3]'",
    "params-deep": "UPDATE points SET parameters = '" + "[" * 50_000 + "]" * 50_000 + "'",
}


def _store_case(rng: random.Random, n: int) -> Case:
    damage = rng.choice([*_STORE_DAMAGE, "truncate", "random-bytes", "empty-file", "text-file"])
    # a pending status (an interrupted sweep) and NULL metric values (a figure with no value, e.g.
    # the fidelity of a demand that delivered nothing) are states netsim writes itself: valid
    invalid: str | None = "damaged" if damage not in ("status-pending", "value-null") else None
    if rng.random() < 0.7:
        argv = ["report", "st.sqlite", "--no-figures", "--out", "rep", "--format", "md"]
    else:
        argv = ["sweep", "s.toml", "--vary", "links[0].length_km=5,10", "--pairs", "3", "--workers", "1",
                "--store", "st.sqlite", "--quiet"]
    if damage == "empty-file" and argv[0] == "sweep":
        # a zero-length file is a valid empty SQLite database (sqlite.org, "Database File Format",
        # memory) and holds nothing to lose: a sweep may make its store there
        invalid = None
    files = {"s.toml": (ROOT / "scenarios" / "chain3.toml").read_bytes()}
    return Case(f"{n:04d}-store-{damage}-{argv[0]}", "store", argv, files, invalid, setup="store", damage=damage,
                timeout_s=60.0)


def _hash_case(rng: random.Random, n: int) -> Case:
    # the metro mesh most often: its multipath bounds once depended on set order (issue 14, item 13)
    path = ROOT / "scenarios" / "vellmoor-mesh.toml" if rng.random() < 0.6 else rng.choice(SCENARIOS)
    argv = rng.choice([["budget", "s.toml", "--format", "json"], ["check", "s.toml", "--format", "json"]])
    return Case(f"{n:04d}-hash-seed-{path.stem}-{argv[0]}", "hash-seed", argv, {"s.toml": path.read_bytes()},
                None, timeout_s=120.0, hash_seed=True)


# --- preparing artefacts, running, classifying ---------------------------------------------------

def prepare(workdir: Path) -> dict[str, Path]:
    """A run directory (run.json) and a small finished store, made once by netsim itself."""
    from netsim.cli import main

    base = workdir / "artefacts"
    base.mkdir(parents=True, exist_ok=True)
    shutil.copy(ROOT / "scenarios" / "chain3.toml", base / "s.toml")
    with _cwd(base), contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert main(["run", "s.toml", "--pairs", "20", "--seed", "1", "--out", "run", "--format", "json"]) == 0
        assert main(["sweep", "s.toml", "--vary", "links[0].length_km=5,10", "--pairs", "3", "--workers", "1",
                     "--store", "st.sqlite", "--quiet"]) == 0
    return {"run": base / "run", "store": base / "st.sqlite"}


@contextlib.contextmanager
def _cwd(path: Path) -> Any:
    old = os.getcwd()
    os.chdir(path)
    try:
        yield
    finally:
        os.chdir(old)


def _damage_store(path: Path, damage: str, rng: random.Random) -> None:
    if damage in _STORE_DAMAGE:
        with contextlib.closing(sqlite3.connect(path)) as db:
            db.execute(_STORE_DAMAGE[damage])
            db.commit()
        return
    raw = path.read_bytes()
    if damage == "truncate":
        path.write_bytes(raw[: len(raw) // 2])
    elif damage == "random-bytes":
        path.write_bytes(raw[:100] + bytes(rng.randrange(256) for _ in range(512)) + raw[612:])
    elif damage == "empty-file":
        path.write_bytes(b"")
    else:
        path.write_text("points,metrics\n1,2\n", encoding="utf-8")


class _Timeout(BaseException):
    """Raised by SIGALRM: the input hangs (BaseException, so `except Exception` cannot swallow it)."""


def _alarm(signum: int, frame: Any) -> None:
    raise _Timeout


def _in_process(argv: list[str], cwd: Path, timeout_s: float) -> tuple[int | None, str, str, bool]:
    from netsim.cli import main

    out, err = io.StringIO(), io.StringIO()
    code: int | None = None
    timed_out = False
    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, timeout_s)
    try:
        with _cwd(cwd), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    except _Timeout:
        timed_out = True
    except BaseException:  # noqa: BLE001 -- any escape is what the campaign looks for
        err.write(traceback.format_exc())
        code = 1
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
    return code, out.getvalue(), err.getvalue(), timed_out


def _subprocess(argv: list[str], cwd: Path, timeout_s: float, hash_seed: str | None = None
                ) -> tuple[int | None, str, str, bool]:
    env = dict(os.environ, PYTHONPATH=str(ROOT), MPLBACKEND="Agg")
    if hash_seed is not None:
        env["PYTHONHASHSEED"] = hash_seed
    proc = subprocess.Popen([sys.executable, "-m", "netsim", *argv], cwd=cwd, env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        out, err = proc.communicate(timeout=timeout_s)
        return proc.returncode, out, err, False
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        out, err = proc.communicate()
        return None, out, err, True


def classify(code: int | None, err: str, timed_out: bool, invalid: str | None) -> tuple[str, str]:
    """(outcome, the message that shows it) for one run of an input."""
    lines = [line for line in err.splitlines() if line.strip()]
    if timed_out:
        return "hang", "no answer within the time-out"
    if "Traceback (most recent call last)" in err:
        named = [line for line in lines if re.match(r"^[A-Za-z_][\w.]*(Error|Exception|Exit|Interrupt|Warning)\b", line)]
        return "traceback", (named or lines)[-1][:300]
    if code == 0:
        return ("silent", f"exit 0 on {invalid} input") if invalid else ("accepted", "")
    if code == 2 and lines:
        errors = [line for line in lines if "error" in line.lower()]
        longest = max(len(line) for line in lines)
        if longest > LONG_LINE:
            return "long-message", f"a stderr line of {longest} characters: {lines[-1][:200]}..."
        if errors:
            return "refused", errors[-1][:300]
    return "other", f"exit {code}; stderr: {' | '.join(lines)[-300:] or '(empty)'}"


def run_case(case: Case, root: Path, artefacts: dict[str, Path], mode: str, rng: random.Random) -> Outcome:
    import time

    cwd = root / case.id[:120].replace("/", "_").replace(" ", "_")
    cwd.mkdir(parents=True, exist_ok=True)
    for name, content in case.files.items():
        (cwd / name).write_bytes(content)
    if case.setup == "store":
        shutil.copy(artefacts["store"], cwd / "st.sqlite")
        _damage_store(cwd / "st.sqlite", case.damage or "", rng)
    start = time.perf_counter()
    if case.hash_seed:
        first = _subprocess(case.argv, cwd, case.timeout_s, "1")
        second = _subprocess(case.argv, cwd, case.timeout_s, "5")
        outcome, message = classify(first[0], first[2], first[3], case.invalid)
        if outcome == "accepted" and _strip_timing(first[1]) != _strip_timing(second[1]):
            diff = next((a, b) for a, b in zip(first[1].splitlines(), second[1].splitlines()) if a != b)
            outcome, message = "hash-seed", f"PYTHONHASHSEED=1 vs 5: {diff[0].strip()[:120]} / {diff[1].strip()[:120]}"
        code = first[0]
    else:
        run = _subprocess if mode == "subprocess" else _in_process
        code, _out, err, timed_out = run(case.argv, cwd, case.timeout_s)
        outcome, message = classify(code, err, timed_out, case.invalid)
    seconds = time.perf_counter() - start
    item = (case.item or ISSUE_ITEMS.get(case.family, "-")) if outcome not in ("accepted", "refused") else ""
    return Outcome(case.id, case.family, outcome, code, case.invalid, case.argv, message, item, seconds)


def _strip_timing(text: str) -> str:
    """Output lines that state how long something took vary run to run; compare the rest."""
    return "\n".join(line for line in text.splitlines() if not re.search(r"\bin [\d.]+ ?(s|ms)\b", line))


FAMILIES: list[tuple[str, float, Callable[..., Case]]] = [
    ("scenario", 0.50, _scenario_case),
    ("structural", 0.10, _structural_case),
    ("sweep", 0.14, _sweep_case),
    ("flags", 0.10, _flag_case),
    ("run-file", 0.08, _run_file_case),
    ("store", 0.07, _store_case),
    ("hash-seed", 0.01, _hash_case),
]


def generate(n: int, seed: int, hash_trials: bool = True) -> list[tuple[str, random.Random, int]]:
    """The plan of ``n`` inputs: (family, its own random stream, index). Every family appears
    at least once when ``n`` allows (stratified: the first inputs cycle through the families)."""
    rng = random.Random(seed)
    names = [f for f, _, _ in FAMILIES if hash_trials or f != "hash-seed"]
    weights = [w for f, w, _ in FAMILIES if hash_trials or f != "hash-seed"]
    plan = []
    for i in range(n):
        family = names[i] if i < len(names) else rng.choices(names, weights)[0]
        plan.append((family, random.Random(f"{seed}-{i}"), i))
    return plan


def campaign(n: int, seed: int, mode: str = "in-process", workdir: Path | None = None,
             hash_trials: bool = True, progress: Callable[[Outcome], None] | None = None) -> list[Outcome]:
    own = workdir is None
    root = Path(tempfile.mkdtemp(prefix="netsim-fuzz-")) if workdir is None else workdir
    try:
        artefacts = prepare(root)
        makers = {f: m for f, _, m in FAMILIES}
        results = []
        for family, rng, i in generate(n, seed, hash_trials):
            case = makers[family](rng, i, artefacts) if family == "run-file" else makers[family](rng, i)
            result = run_case(case, root / "cases", artefacts, mode, rng)
            results.append(result)
            if progress:
                progress(result)
            shutil.rmtree(root / "cases", ignore_errors=True)
        return results
    finally:
        if own:
            shutil.rmtree(root, ignore_errors=True)


def summary(results: list[Outcome], n: int | None = None, seed: int | None = None) -> str:
    """The summary table: outcome counts per family, then up to three inputs of every failure
    class (outcome and family) with the command and how to write the input's files out."""
    outcomes = ["refused", "accepted", "traceback", "hang", "silent", "long-message", "hash-seed", "other"]
    families = sorted({r.family for r in results})
    counts = Counter((r.family, r.outcome) for r in results)
    width = max(len(f) for f in families + ["family"])
    lines = [f"{'family':<{width}}  " + "  ".join(f"{o:>12}" for o in outcomes) + "  " + f"{'total':>6}"]
    for family in families:
        row = [counts[(family, o)] for o in outcomes]
        lines.append(f"{family:<{width}}  " + "  ".join(f"{c:>12}" for c in row) + f"  {sum(row):>6}")
    total = Counter(r.outcome for r in results)
    lines.append(f"{'all':<{width}}  " + "  ".join(f"{total[o]:>12}" for o in outcomes) + f"  {len(results):>6}")
    bad = [r for r in results if r.outcome not in ("refused", "accepted")]
    if bad:
        lines.append("")
        lines.append("failures (outcome, issue 14 item, input, reproducer, message):")
        seen: Counter[tuple[str, str]] = Counter()
        for r in bad:
            seen[(r.outcome, r.family)] += 1
            if seen[(r.outcome, r.family)] > 3:
                continue
            lines.append(f"- {r.outcome} [issue 14 item {r.issue_item}] {r.id}\n"
                         f"    netsim {shlex.join(r.argv)[:300]}\n    {r.message}")
            if n is not None:
                lines.append(f"    files: python -m tests.fuzz --n {n} --seed {seed} --reproduce {r.id[:4]}- --out DIR")
    return "\n".join(lines)


def reproduce(case_id_prefix: str, n: int, seed: int, out: Path) -> Path:
    """Write the files and the command of one input of a campaign into ``out`` (a reproducer)."""
    artefacts = prepare(out / "_artefacts")
    makers = {f: m for f, _, m in FAMILIES}
    for family, rng, i in generate(n, seed):
        case = makers[family](rng, i, artefacts) if family == "run-file" else makers[family](rng, i)
        if case.id.startswith(case_id_prefix):
            target = out / f"{i:04d}"
            target.mkdir(parents=True, exist_ok=True)
            for name, content in case.files.items():
                (target / name).write_bytes(content)
            if case.setup == "store":
                shutil.copy(artefacts["store"], target / "st.sqlite")
                _damage_store(target / "st.sqlite", case.damage or "", rng)
            (target / "command.txt").write_text("netsim " + shlex.join(case.argv) + "\n", encoding="utf-8")
            return target
    raise SystemExit(f"no input {case_id_prefix!r} among the first {n} of seed {seed}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.fuzz", description=__doc__.split("\n\n")[0])
    parser.add_argument("--n", type=int, default=1000, help="number of inputs (default 1000)")
    parser.add_argument("--seed", type=int, default=0, help="campaign seed (default 0)")
    parser.add_argument("--subprocess", action="store_true", help="run every input through python -m netsim")
    parser.add_argument("--no-hash", action="store_true", help="leave out the hash-seed trials (subprocesses)")
    parser.add_argument("--json", type=Path, help="write every outcome to this JSON file")
    parser.add_argument("--reproduce", metavar="ID", help="write the files of the input whose id starts with ID "
                        "(with the same --n and --seed) into --out and stop")
    parser.add_argument("--out", type=Path, default=Path("fuzz-reproducer"), help="directory for --reproduce")
    parser.add_argument("--verbose", action="store_true", help="one line per input as it finishes")
    args = parser.parse_args(argv)
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 1000))
    if args.reproduce:
        print(reproduce(args.reproduce, args.n, args.seed, args.out))
        return 0

    def show(r: Outcome) -> None:
        if args.verbose:
            print(f"{r.outcome:>12} {r.seconds:6.1f}s {r.id}", file=sys.stderr, flush=True)

    results = campaign(args.n, args.seed, "subprocess" if args.subprocess else "in-process",
                       hash_trials=not args.no_hash, progress=show)
    if args.json:
        args.json.write_text(json.dumps([asdict(r) for r in results], indent=1), encoding="utf-8")
    print(summary(results, args.n, args.seed))
    return 1 if any(r.outcome in FAILURES for r in results) else 0


if __name__ == "__main__":
    raise SystemExit(main())
