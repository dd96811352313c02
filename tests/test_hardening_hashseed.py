"""The same numbers on every interpreter: results must not depend on Python's hash seed.

Python randomises the iteration order of sets of strings per process (``PYTHONHASHSEED``); a
float sum or a graph algorithm that walks such a set gives results that differ in the last bits
from one interpreter to the next (reported: the Vellmoor mesh's multipath bound 30488.95419034536
against 30488.954190345365). The reference here is the language's own rule (the Python
documentation of ``PYTHONHASHSEED`` and ``object.__hash__``, (common practice)): a deterministic
program gives byte-identical output under any two hash seeds. Each seed runs every bundled
scenario through ``budget``, ``check`` and a short ``run``, and compares the two Vellmoor
networks (minimum cuts, bottleneck links), in one subprocess; the files are compared byte for
byte.
"""

from __future__ import annotations

import itertools
import math
import os
import subprocess
import sys
from pathlib import Path

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = sorted((ROOT / "scenarios").glob("*.toml")) + sorted((ROOT / "scenarios" / "published").glob("*.toml"))

#: Run inside the subprocess: every scenario's budget CSV and a short run's run.json / run.csv.
_SCRIPT = """
import contextlib, io, sys
from pathlib import Path
from netsim.cli import main
out = Path(sys.argv[1])
for path in sys.argv[2:]:
    name = Path(path).stem
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        code = main(["budget", path, "--format", "csv", "--wide"])
    assert code == 0, (path, code)
    (out / f"{name}.budget.csv").write_text(buffer.getvalue())
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(["run", path, "--pairs", "4", "--seed", "3", "--out", str(out / name), "--format", "csv"])
    assert code == 0, (path, code)
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        code = main(["check", path, "--format", "json", "--no-scan"])
    assert code == 0, (path, code)
    (out / f"{name}.check.json").write_text(buffer.getvalue())
mesh, star = (p for p in sys.argv[2:] if Path(p).stem in ("vellmoor-mesh", "vellmoor-star"))
buffer = io.StringIO()
with contextlib.redirect_stdout(buffer):
    code = main(["compare", mesh, star, "--no-simulate", "--format", "csv", "--out", str(out / "compare")])
assert code == 0, code
# the last lines name the files written (under each seed's own directory, compared below) and how
# long the comparison took (wall clock): not results
(out / "compare.csv").write_text("\\n".join(line for line in buffer.getvalue().splitlines()
                                           if not line.startswith("compared ") and str(out) not in line))
"""


def _outputs(tmp: Path, hash_seed: str) -> dict[str, bytes]:
    out = tmp / f"seed{hash_seed}"
    out.mkdir()
    env = {**os.environ, "PYTHONHASHSEED": hash_seed, "PYTHONPATH": str(ROOT)}
    done = subprocess.run([sys.executable, "-c", _SCRIPT, str(out), *map(str, SCENARIOS)], env=env, cwd=tmp,
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    return {str(p.relative_to(out)): p.read_bytes() for p in sorted(out.rglob("*")) if p.is_file()}


def test_bundled_scenarios_same_bytes_under_two_hash_seeds(tmp_path: Path) -> None:
    first, second = _outputs(tmp_path, "1"), _outputs(tmp_path, "5")
    # every scenario wrote its three files (so the comparison below cannot pass on nothing)
    assert len([k for k in first if not k.startswith("compare")]) == 4 * len(SCENARIOS) and len(SCENARIOS) >= 4
    assert "compare.csv" in first
    assert first.keys() == second.keys()
    differ = [name for name in first if first[name] != second[name]]
    assert not differ, f"outputs depend on the hash seed: {differ}"


def test_multipath_bound_independent_of_insertion_order() -> None:
    """The minimum cut of a small mesh, whatever order its sites and links were added in.

    Between a and e in the mesh below, the cut {a} severs 0.1 + 0.2 + 0.3 = 0.6 and every other
    cut more (worked by hand; max-flow min-cut theorem, Ford & Fulkerson, Can. J. Math. 8, 399,
    1956). Every insertion order must give the same float, not only the same value to rounding.
    """
    from netsim.network.bounds import multipath_capacity

    edges = {("a", "b"): 0.1, ("a", "c"): 0.2, ("a", "d"): 0.3, ("b", "e"): 1.0, ("c", "e"): 1.0,
             ("d", "e"): 1.0, ("b", "c"): 0.7}
    values = set()
    for names in itertools.permutations("abcde"):
        graph = nx.Graph()
        graph.add_nodes_from(names)
        for (u, v), w in sorted(edges.items(), key=lambda item: (names.index(item[0][1]), names.index(item[0][0]))):
            graph.add_edge(u, v, bound_cut_bits_per_s=w)
        values.add(multipath_capacity(graph, "a", "e"))
    assert len(values) == 1
    assert values.pop() == pytest.approx(0.6, rel=1e-12)


def test_relay_view_keeps_the_graph_order() -> None:
    """The relays between two users of a star with many users walk in the graph's own order.

    A networkx subgraph of fewer than half the nodes iterates its node *set* (hash order), which
    feeds Dijkstra's and the spanning tree's tie-breaks; the relay view must not (the reference
    is the graph's insertion order, which Python dicts keep by the language definition,
    (common practice))."""
    from netsim.network.routing import relay_graph
    from netsim.scenario.model import Site

    graph = nx.Graph()
    relays = [f"relay {k}" for k in range(6)]
    users = [f"user {k}" for k in range(20)]
    for name in relays:
        graph.add_node(name, site=Site(name=name, role="repeater"))
    for name in users:
        graph.add_node(name, site=Site(name=name, role="user"))
    view = relay_graph(graph, "user 3", "user 11")
    assert list(view) == [*relays, "user 3", "user 11"]


@settings(max_examples=60, deadline=None)
@given(data=st.data(), size=st.integers(3, 7))
def test_multipath_bound_is_the_minimum_cut_in_any_order(data: st.DataObject, size: int) -> None:
    """Against the definition (max-flow min-cut theorem, Ford & Fulkerson, Can. J. Math. 8, 399,
    1956): the smallest sum over every vertex set holding a but not b, enumerated; and the same
    float whichever order sites and links were added in."""
    from netsim.network.bounds import multipath_capacity

    names = [f"site {k}" for k in range(size)]
    pairs = [(u, v) for i, u in enumerate(names) for v in names[i + 1:]]
    chosen = data.draw(st.lists(st.sampled_from(pairs), min_size=1, unique=True))
    weights = data.draw(st.lists(st.floats(1e-3, 1e3), min_size=len(chosen), max_size=len(chosen)))
    a, b = names[0], names[-1]
    inner = names[1:-1]
    best = math.inf
    for mask in range(2 ** len(inner)):
        side = {a} | {n for k, n in enumerate(inner) if mask >> k & 1}
        best = min(best, math.fsum(w for (u, v), w in zip(chosen, weights) if (u in side) != (v in side)))
    values = set()
    for order in (names, names[::-1], names[1:] + names[:1]):
        graph = nx.Graph()
        graph.add_nodes_from(order)
        for (u, v), w in sorted(zip(chosen, weights), key=lambda e: order.index(e[0][1])):
            graph.add_edge(u, v, bound_cut_bits_per_s=w)
        values.add(multipath_capacity(graph, a, b))
    assert len(values) == 1
    value = values.pop()
    expected = best if nx.has_path(graph, a, b) else 0.0
    assert value == pytest.approx(expected, rel=1e-9, abs=1e-12)
