"""Waiting times, chain fidelity and network capacity bounds (netsim.network.bounds)."""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from netsim.network.bounds import (
    CapacityTable,
    chain_fidelity,
    expected_rounds,
    expected_wait_s,
    multipath_capacity,
    single_path_capacity,
)
from netsim.network import build_graph
from netsim.network.routing import widest_path


def hand_network() -> nx.Graph:
    """Capacities in bit/s, worked by hand::

            Ashby --5-- Bexley --3-- Tarn
              |           |          |
              4           2          |
              |           |          |
            Corvin ------ 6 ---------+

    Edges: Ashby-Bexley 5, Bexley-Tarn 3, Ashby-Corvin 4, Corvin-Tarn 6, Bexley-Corvin 2.

    Widest path Ashby -> Tarn: A-B-T min(5, 3) = 3; A-C-T min(4, 6) = 4; A-B-C-T min(5, 2, 6) = 2;
    A-C-B-T min(4, 2, 3) = 2. Widest: A-C-T with 4.

    Minimum cut Ashby | Tarn: {A} 5 + 4 = 9; {A, B} 3 + 2 + 4 = 9; {A, C} 5 + 2 + 6 = 13;
    {A, B, C} 3 + 6 = 9. Minimum 9 (max flow: A-B-T 3, A-C-T 4, A-B-C-T 2).
    """
    g = nx.Graph()
    for u, v, c in [("Ashby", "Bexley", 5.0), ("Bexley", "Tarn", 3.0), ("Ashby", "Corvin", 4.0),
                    ("Corvin", "Tarn", 6.0), ("Bexley", "Corvin", 2.0)]:
        g.add_edge(u, v, bound_bits_per_s=c, bound_cut_bits_per_s=c)
    return g


def test_widest_path_by_hand() -> None:
    """Single-path capacity = widest path (Pirandola, Commun. Phys. 2, 51, 2019); worked above."""
    g = hand_network()
    assert widest_path(g, "Ashby", "Tarn") == ["Ashby", "Corvin", "Tarn"]
    assert single_path_capacity(g, "Ashby", "Tarn") == pytest.approx(4.0)


def test_min_cut_by_hand() -> None:
    """Multipath capacity = minimum cut (Pirandola, Commun. Phys. 2, 51, 2019); worked above."""
    assert multipath_capacity(hand_network(), "Ashby", "Tarn") == pytest.approx(9.0)


def test_bounds_of_a_chain_are_its_weakest_link() -> None:
    """A chain is limited by its worst link (Pirandola, Commun. Phys. 2, 51, 2019)."""
    g = nx.path_graph(["Esk", "Fal", "Gwen", "Hale"])
    for (u, v), c in zip(itertools.pairwise(["Esk", "Fal", "Gwen", "Hale"]), [7.0, 2.5, 9.0]):
        g.edges[u, v].update(bound_bits_per_s=c, bound_cut_bits_per_s=c)
    assert single_path_capacity(g, "Esk", "Hale") == multipath_capacity(g, "Esk", "Hale") == pytest.approx(2.5)


def test_disconnected_pair_has_zero_capacity() -> None:
    g = hand_network()
    g.add_node("Islet")
    assert single_path_capacity(g, "Ashby", "Islet") == 0.0
    assert multipath_capacity(g, "Ashby", "Islet") == 0.0


@pytest.mark.parametrize("p", [0.9, 0.3, 0.01, 1e-5])
def test_two_link_waiting_time(p: float) -> None:
    """E[N] = (3 - 2p) / (p (2 - p)) for two links (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019)."""
    assert expected_rounds([p, p]) == pytest.approx((3 - 2 * p) / (p * (2 - p)), rel=1e-9)


@pytest.mark.parametrize("n", [1, 3, 4, 8])
def test_equal_links_waiting_time(n: int) -> None:
    """E[N] = sum_k C(n, k) (-1)^(k+1) / (1 - (1 - p)^k) (Shchukin, Schmidt & van Loock 2019)."""
    p = 0.2
    expected = sum(math.comb(n, k) * (-1) ** (k + 1) / (1 - (1 - p) ** k) for k in range(1, n + 1))
    assert expected_rounds([p] * n) == pytest.approx(expected, rel=1e-10)


def test_unequal_links_waiting_time_against_direct_sum() -> None:
    """Inclusion-exclusion (generalised here) against E[N] = sum_t P(N > t) summed directly."""
    q = [0.05, 0.2, 0.5]
    direct = sum(1 - math.prod(1 - (1 - x) ** t for x in q) for t in range(20_000))
    assert expected_rounds(q) == pytest.approx(direct, rel=1e-12)


def test_many_hops_use_the_series() -> None:
    """Above 16 hops the series replaces inclusion-exclusion; both agree at 16 (same definition)."""
    from netsim.network import bounds

    q = [0.1 + 0.01 * i for i in range(16)]
    assert bounds._expected_rounds_series(q) == pytest.approx(expected_rounds(q), rel=1e-9)
    assert expected_rounds([0.1] * 17) > expected_rounds([0.1] * 16)


def test_waiting_time_with_equal_periods_is_period_times_rounds() -> None:
    assert expected_wait_s([0.3, 0.3], [2e-4, 2e-4]) == pytest.approx(2e-4 * (3 - 0.6) / (0.3 * 1.7))


def test_waiting_time_with_unequal_periods_is_bracketed() -> None:
    """A faster hop helps: between the all-fast and the all-slow equal-period values (derived here)."""
    slow, fast = expected_wait_s([0.2, 0.2], [1e-3, 1e-3]), expected_wait_s([0.2, 0.2], [1e-4, 1e-4])
    mixed = expected_wait_s([0.2, 0.2], [1e-3, 1e-4])
    assert fast < mixed < slow
    assert mixed >= 1e-3 / 0.2  # never faster than the slow hop alone (its mean 1/p rounds)


def _geometric_pmf(q: float, tail: float = 1e-17) -> tuple[np.ndarray, np.ndarray]:
    """K ~ Geometric(q) on {1, 2, ...}: values and probabilities up to a tail below ``tail``."""
    n = int(math.ceil(math.log(tail) / math.log1p(-q))) + 1
    k = np.arange(1, n + 1, dtype=float)
    return k, q * (1.0 - q) ** (k - 1)


def _exact_mean(q1: float, t1: float, q2: float, t2: float, clock_s: float | None = None) -> float:
    """E[max(K1 t1, K2 t2)] by the exact double sum over the joint distribution of two independent
    geometric attempt counts (common practice; truncated where the tail is below 1e-17). With
    ``clock_s`` each time is first rounded up to a whole number of ticks of that clock."""
    k1, p1 = _geometric_pmf(q1)
    k2, p2 = _geometric_pmf(q2)
    a, b = k1 * t1, k2 * t2
    if clock_s is not None:
        a, b = clock_s * np.ceil(a / clock_s - 1e-9), clock_s * np.ceil(b / clock_s - 1e-9)
    return float(p1 @ np.maximum(a[:, None], b[None, :]) @ p2)


@pytest.mark.parametrize(("q_fast", "t_fast", "q_slow", "t_slow"), [
    (0.2, 1e-4, 0.05, 1e-3),     # ten fast rounds per slow round
    (0.3, 2.5e-4, 0.1, 1e-3),    # four
    (0.01, 2e-4, 0.02, 1e-3),    # five, small q: q tau / t would be 5 % off
    (0.05, 5e-4, 0.5, 1e-3),     # the slow hop is the likely one
])
def test_waiting_time_with_unequal_periods_against_an_exact_sum(q_fast: float, t_fast: float, q_slow: float,
                                                                  t_slow: float) -> None:
    """expected_wait_s clocks both hops at the slow period, each success noticed at the end of a
    slow round. For whole ratios of the periods that is exactly the mean of max(K1 t1, K2 t2)
    rounded up to the slow clock, summed here over the joint distribution of the attempt counts;
    and it lies within one slow period above the unrounded mean E[max(K1 t1, K2 t2)]."""
    got = expected_wait_s([q_fast, q_slow], [t_fast, t_slow])
    assert got == pytest.approx(_exact_mean(q_fast, t_fast, q_slow, t_slow, clock_s=t_slow), rel=1e-9)
    exact = _exact_mean(q_fast, t_fast, q_slow, t_slow)
    assert exact <= got < exact + t_slow
    assert expected_wait_s([q_slow, q_fast], [t_slow, t_fast]) == pytest.approx(got, rel=1e-12)  # hop order


def _swap_with_qutip(w1: float, w2: float, gate_error: float = 0.0) -> float:
    """Entanglement swapping of two Werner pairs computed with QuTiP as an independent reference.

    Qubits A B1 | B2 C; a Bell measurement on B1 B2 with outcome-dependent Pauli correction on C
    (Phi+ I, Phi- Z, Psi+ X, Psi- Y), averaged over outcomes; then depolarizing p on C.
    Returns the fidelity of the A C pair to Phi+.
    """
    import qutip
    zero, one = qutip.basis(2, 0), qutip.basis(2, 1)
    bell = {
        "phi+": (qutip.tensor(zero, zero) + qutip.tensor(one, one)).unit(),
        "phi-": (qutip.tensor(zero, zero) - qutip.tensor(one, one)).unit(),
        "psi+": (qutip.tensor(zero, one) + qutip.tensor(one, zero)).unit(),
        "psi-": (qutip.tensor(zero, one) - qutip.tensor(one, zero)).unit(),
    }
    fix = {"phi+": qutip.qeye(2), "phi-": qutip.sigmaz(), "psi+": qutip.sigmax(), "psi-": qutip.sigmay()}
    identity4 = qutip.tensor(qutip.qeye(2), qutip.qeye(2)) / 4

    def werner(w: float):  # type: ignore[no-untyped-def]
        phi = qutip.ket2dm(bell["phi+"])
        phi.dims = identity4.dims
        return w * phi + (1 - w) * identity4

    rho = qutip.tensor(werner(w1), werner(w2))
    out = 0
    for name, state in bell.items():
        proj = qutip.tensor(qutip.qeye(2), qutip.ket2dm(state), qutip.qeye(2))
        corr = qutip.tensor(qutip.qeye(2), qutip.qeye(2), qutip.qeye(2), fix[name])
        out = out + (corr * proj * rho * proj * corr.dag()).ptrace([0, 3])
    reduced_a = out.ptrace(0)
    out = (1 - gate_error) * out + gate_error * qutip.tensor(reduced_a, qutip.qeye(2) / 2)
    target = bell["phi+"]
    target.dims = [[2, 2], [1]]
    return float(qutip.expect(out, target))


@pytest.mark.parametrize(("f1", "f2", "gate"), [(0.95, 0.9, 0.0), (0.8, 0.99, 0.0), (0.9, 0.85, 0.05)])
def test_chain_fidelity_matches_a_qutip_swap(f1: float, f2: float, gate: float) -> None:
    """Werner swapping multiplies Werner parameters (Sangouard et al., RMP 83, 33, 2011 (memory));
    checked against an explicit QuTiP Bell measurement with Pauli corrections."""
    w1, w2 = (4 * f1 - 1) / 3, (4 * f2 - 1) / 3
    assert chain_fidelity([f1, f2], [gate]) == pytest.approx(_swap_with_qutip(w1, w2, gate), abs=1e-10)


def test_chain_fidelity_of_one_hop_is_its_own() -> None:
    assert chain_fidelity([0.87]) == pytest.approx(0.87)
    assert np.isclose(chain_fidelity([1.0, 1.0, 1.0]), 1.0)


def _random_network(seed: int, n: int) -> nx.Graph:
    rng = np.random.default_rng(seed)
    g = nx.gnp_random_graph(n, 0.5, seed=seed)
    for u, v in g.edges:
        c = float(rng.uniform(0.1, 10.0))
        g.edges[u, v].update(bound_bits_per_s=c, bound_cut_bits_per_s=c)
    return g


@pytest.mark.parametrize("seed", range(12))
def test_bounds_against_brute_force(seed: int) -> None:
    """Widest path against the maximum over every simple path of its weakest edge, and the minimum
    cut against the minimum over every vertex bipartition (definitions in Pirandola, Commun. Phys. 2,
    51, 2019); small random graphs with fixed seeds."""
    g = _random_network(seed, 6)
    a, b = 0, 5
    if not nx.has_path(g, a, b):
        assert single_path_capacity(g, a, b) == multipath_capacity(g, a, b) == 0.0
        return
    widest = max(min(g.edges[u, v]["bound_bits_per_s"] for u, v in itertools.pairwise(p))
                 for p in nx.all_simple_paths(g, a, b))
    others = [n for n in g if n not in (a, b)]
    cuts = []
    for k in range(len(others) + 1):
        for side in itertools.combinations(others, k):
            s = {a, *side}
            cuts.append(sum(d["bound_cut_bits_per_s"] for u, v, d in g.edges(data=True) if (u in s) != (v in s)))
    assert single_path_capacity(g, a, b) == pytest.approx(widest, rel=1e-12)
    assert multipath_capacity(g, a, b) == pytest.approx(min(cuts), rel=1e-9)
    assert single_path_capacity(g, a, b) <= multipath_capacity(g, a, b) + 1e-12


@pytest.mark.parametrize("seed", range(8))
def test_multipath_bound_equals_networkx_maximum_flow(seed: int) -> None:
    """The augmenting-path minimum cut against networkx's own maximum flow (preflow-push,
    ``nx.maximum_flow_value``, the reference library) on random meshes of 12 to 30 sites with
    capacities over five orders of magnitude, some links lossless (infinite) and some sites
    cut off: equal to float rounding, infinite exactly where networkx finds the flow unbounded."""
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(12, 31))
    g = nx.gnp_random_graph(n, float(rng.uniform(0.08, 0.4)), seed=seed)
    for u, v in g.edges:
        g.edges[u, v]["bound_cut_bits_per_s"] = math.inf if rng.random() < 0.03 else float(10 ** rng.uniform(-2, 3))
    for a, b in itertools.combinations(range(0, n, max(n // 6, 1)), 2):
        want: float
        if not nx.has_path(g, a, b):
            want = 0.0
        else:
            try:
                want = nx.maximum_flow_value(g, a, b, capacity="bound_cut_bits_per_s")
            except nx.NetworkXUnbounded:
                want = math.inf
        got = multipath_capacity(g, a, b)
        assert got == pytest.approx(want, rel=1e-12, abs=0.0) if math.isfinite(want) else got == want


@pytest.mark.parametrize("seed", range(4))
def test_bounds_read_from_a_table_of_the_graph_equal_the_bounds_read_from_the_graph(seed: int) -> None:
    """The budget reads the graph once (CapacityTable) for every demand's bounds, with the other
    end users left out of each: exactly the figures of reading the graph itself, and the minimum
    cut still networkx's maximum flow (reference library) on the graph without those sites."""
    rng = np.random.default_rng(300 + seed)
    n = int(rng.integers(14, 31))
    g = nx.relabel_nodes(nx.gnp_random_graph(n, float(rng.uniform(0.1, 0.4)), seed=seed), {k: f"S{k}" for k in range(n)})
    for u, v in g.edges:
        g.edges[u, v]["bound_cut_bits_per_s"] = float(10 ** rng.uniform(-2, 3))
        g.edges[u, v]["bound_bits_per_s"] = float(10 ** rng.uniform(-2, 3))
    table = CapacityTable(g)
    users = [f"S{k}" for k in range(0, n, 3)]
    for a, b in itertools.combinations(users, 2):
        skip = set(users) - {a, b}
        cut = multipath_capacity(g, a, b, exclude=skip, table=table)
        assert cut == multipath_capacity(g, a, b, exclude=skip)
        assert single_path_capacity(g, a, b, exclude=skip, table=table) == single_path_capacity(g, a, b, exclude=skip)
        rest = g.subgraph(n for n in g if n not in skip)
        want = nx.maximum_flow_value(rest, a, b, capacity="bound_cut_bits_per_s") if nx.has_path(rest, a, b) else 0.0
        assert cut == pytest.approx(want, rel=1e-12, abs=0.0)
    assert CapacityTable(nx.Graph()).links == []


def test_multipath_bound_of_the_bundled_mesh_equals_networkx_maximum_flow() -> None:
    """Every demand of the bundled Vellmoor mesh, on its relay graph, against networkx's maximum
    flow (reference library), to float rounding."""
    from netsim.network.routing import relay_graph
    from netsim.scenario import load

    scenario = load(Path(__file__).resolve().parent.parent / "scenarios" / "vellmoor-mesh.toml")
    graph = build_graph(scenario)
    for demand in scenario.demands:
        relays = relay_graph(graph, demand.a, demand.b)
        flow = nx.Graph()
        flow.add_edges_from((u, v, {"capacity": d["bound_cut_bits_per_s"]}) for u, v, d in relays.edges(data=True))
        want = nx.maximum_flow_value(flow, demand.a, demand.b)
        assert multipath_capacity(relays, demand.a, demand.b) == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_bounds_leaving_sites_out_equal_the_bounds_on_the_graph_without_them(seed: int) -> None:
    """``exclude`` gives the same floats as the graph with those sites removed (a copy without
    them, the definition), for the widest path and the minimum cut; both ends are never left out."""
    rng = np.random.default_rng(300 + seed)
    g = nx.gnp_random_graph(16, 0.3, seed=seed)
    for u, v in g.edges:
        c = float(10 ** rng.uniform(-1, 2))
        g.edges[u, v].update(bound_bits_per_s=c, bound_cut_bits_per_s=c)
    a, b = 0, 15
    out = {int(x) for x in rng.choice(np.arange(1, 15), size=5, replace=False)} | {a}
    smaller = g.copy()
    smaller.remove_nodes_from(out - {a, b})
    assert single_path_capacity(g, a, b, exclude=out) == single_path_capacity(smaller, a, b)
    assert multipath_capacity(g, a, b, exclude=out) == multipath_capacity(smaller, a, b)


@pytest.mark.parametrize("q", [[0.01] * 16, [0.3] * 16, [0.01] * 8 + [0.02] * 8, [0.05, 0.2, 0.5] * 5,
                               [0.001 * (k + 1) for k in range(12)], [0.02] * 24])
def test_waiting_time_against_exact_rational_arithmetic(q: list[float]) -> None:
    """Inclusion-exclusion (Shchukin, Schmidt & van Loock 2019, generalised to unequal links) in
    exact rational arithmetic on the binary values of q (fractions.Fraction, common practice for
    a reference free of rounding): the float sum, which groups equal links, is within 1e-12 also
    where the 2^n alternating terms cancel heavily (16 equal links of 0.01); a 24-hop chain goes to
    the series sum_t P(N > t), which must agree as well."""
    from collections import Counter
    from fractions import Fraction

    groups = Counter(Fraction(x) for x in q)
    exact = Fraction(0)
    for counts in itertools.product(*(range(m + 1) for m in groups.values())):
        k = sum(counts)
        if k:
            ways = math.prod(math.comb(m, c) for m, c in zip(groups.values(), counts))
            none = math.prod((1 - v) ** c for v, c in zip(groups, counts))
            exact += (-1) ** (k + 1) * ways / (1 - none)
    assert expected_rounds(q) == pytest.approx(float(exact), rel=1e-12)


@pytest.mark.parametrize("n", [17, 20, 30])
@pytest.mark.parametrize("p", ["1/200", "1/5"])
def test_long_chain_waiting_time_against_exact_rational_sum(n: int, p: str) -> None:
    """Beyond 16 hops expected_rounds sums P(N > t) numerically (the alternating form cancels
    too much in floats); checked against Shchukin, Schmidt & van Loock's (PRA 100, 032322, 2019)
    E[N] = sum_k C(n, k) (-1)^(k+1) / (1 - (1 - p)^k) evaluated in exact rational arithmetic."""
    from fractions import Fraction

    q = Fraction(p)
    exact = sum(Fraction(math.comb(n, k) * (-1) ** (k + 1)) / (1 - (1 - q) ** k) for k in range(1, n + 1))
    assert expected_rounds([float(q)] * n) == pytest.approx(float(exact), rel=1e-12)
