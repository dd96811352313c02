"""Analytic end-to-end expectations for repeater chains and capacity bounds for networks.

Conventions: Werner w |Phi+><Phi+| + (1 - w) I/4 with F = (1 + 3w)/4; rates in 1/s;
capacities in bits/s.
"""

from __future__ import annotations

import heapq
import itertools
from collections import Counter
import math
from collections.abc import Collection, Sequence
from typing import TYPE_CHECKING, Any

import networkx as nx
import numpy as np

if TYPE_CHECKING:
    import scipy.sparse

__all__ = [
    "CapacityTable",
    "MAX_EXACT_SWAP_HOPS",
    "bottleneck_capacity",
    "chain_fidelity",
    "expected_delivery_rounds",
    "expected_delivery_s",
    "expected_rounds",
    "expected_wait_s",
    "multipath_capacity",
    "single_path_capacity",
    "werner_parameter",
]

#: Beyond this many hops the exact inclusion-exclusion sum gives way to a series.
_MAX_EXACT_HOPS = 16


def expected_rounds(probabilities: Sequence[float]) -> float:
    """Expected number of synchronous rounds until every hop holds a pair (kept once made).

    With hop i succeeding with probability q_i per round, independently, the waiting time is the
    maximum of geometric variables, and by inclusion-exclusion

        E[N] = sum over non-empty subsets S of (-1)^(|S| + 1) / (1 - prod_{i in S} (1 - q_i)).

    For equal q = p this is Shchukin, Schmidt & van Loock's
    E[N] = sum_k C(n, k) (-1)^(k + 1) / (1 - (1 - p)^k), e.g. (3 - 2p) / (p (2 - p)) for n = 2;
    the unequal form is generalised here by the same inclusion-exclusion.

    References
    ----------
    E. Shchukin, F. Schmidt and P. van Loock, "Waiting time in quantum repeaters with
    probabilistic entanglement swapping", Phys. Rev. A 100, 032322 (2019).
    """
    q = [float(x) for x in probabilities]
    if not q:
        return 0.0
    if any(x <= 0.0 for x in q):
        return math.inf
    if any(x >= 1.0 for x in q):
        return expected_rounds([x for x in q if x < 1.0]) if any(x < 1.0 for x in q) else 1.0
    # equal probabilities are summed together: a subset is then k_j hops of each distinct value
    # v_j (C(m_j, k_j) ways), so the sum has prod (m_j + 1) - 1 terms instead of 2^n - 1 (n + 1
    # for a uniform chain, Shchukin et al.'s form) and cancels less
    if len(q) > _MAX_EXACT_HOPS:  # the alternating terms (up to C(n, n/2) each) would cancel too much
        return _expected_rounds_series(q)
    groups = sorted(Counter(math.log1p(-x) for x in q).items())
    total = 0.0
    for counts in itertools.product(*(range(m + 1) for _, m in groups)):
        k = sum(counts)
        if k == 0:
            continue
        ways = math.prod(math.comb(m, c) for (_, m), c in zip(groups, counts))
        log_none = sum(c * log for (log, _), c in zip(groups, counts))
        # 1 - prod(1 - q_i) over the subset, accurate for small q
        total += (1.0 if k % 2 else -1.0) * ways / -math.expm1(log_none)
    return total


def _expected_rounds_series(q: list[float]) -> float:
    """E[N] = sum_{t >= 0} P(N > t) = sum_t (1 - prod_i (1 - (1 - q_i)^t)), summed in blocks."""
    logs = np.log1p(-np.asarray(q))[:, None]
    # P(N > t) <= n (1 - q_min)^t: one block of about the t where that bound reaches 1e-13 holds
    # every term that counts (a fixed 65,536 was ten times that for q ~ 0.005: 30 ms a route)
    reach = math.log(1e-13 / len(q)) / float(logs.max())
    total, start, block = 1.0, 1, int(min(65_536, max(1_024, math.ceil(reach) + 1)))  # t = 0: P(N > 0) = 1
    while True:
        t = np.arange(start, start + block)[None, :]
        tails = -np.expm1(np.log1p(-np.exp(t * logs)).sum(axis=0))
        total += float(tails.sum())
        start += block
        if tails[-1] < 1e-13 or start > 2**31:
            return total


def expected_wait_s(round_probabilities: Sequence[float], periods_s: Sequence[float]) -> float:
    """Expected time until every hop holds a pair, with hop-specific attempt periods.

    Generalised here: all hops are clocked at the slowest period tau = max(tau_i); in one such
    round hop i makes tau / tau_i attempt rounds, so its success per slow round is
    1 - (1 - q_i)^(tau / tau_i). E[T] = tau E[N] with :func:`expected_rounds`. For equal periods
    this is exact (Shchukin, Schmidt & van Loock 2019); otherwise it slightly overestimates the
    wait because a hop's success is only noticed at the end of a slow round.
    """
    if not periods_s:
        return 0.0
    tau = max(periods_s)
    per_round = [-math.expm1((tau / t) * math.log1p(-q)) if q < 1 else 1.0
                 for q, t in zip(round_probabilities, periods_s)]
    return tau * expected_rounds(per_round)


#: Largest chain whose delivery time with uncertain swaps is computed exactly (2^n Markov states).
MAX_EXACT_SWAP_HOPS = 10


def expected_delivery_rounds(round_probabilities: Sequence[float], swap_successes: Sequence[float]) -> float:
    """Expected synchronous rounds until a chain delivers one end-to-end pair, swaps uncertain.

    The protocol is swap as soon as possible with unlimited memory time: hop i succeeds with
    probability q_i per round and keeps its pair; an inner site j (1 <= j <= n - 1) Bell-measures
    as soon as it holds both of its qubits and joins the two segments with probability s_j, else
    both segments are lost and their hops start again the next round. Pairs that arrive in the
    same round are joined one at a time from left to right, the new pair first with its left
    neighbour and then (if that worked) with its right one, as the simulation does.

    Method (written here for netsim): after each round no two segments touch, so the state is the
    set of hops that hold a pair (2^n states; the maximal runs are the segments). One round is
    the product over hops i of "if hop i was empty at the start of the round, it succeeds with
    q_i and is joined to its neighbours"; the delivery time is the absorption time of this
    Markov chain, E[N] = (I - Q)^-1 1 from the empty chain (Q: transitions among the states
    that have not delivered), solved densely up to :data:`MAX_EXACT_SWAP_HOPS` hops. With sure
    swaps it reduces to the maximum of geometric variables, :func:`expected_rounds`
    (Shchukin, Schmidt & van Loock, PRA 100, 032322, 2019, who also treat uncertain swaps with
    a Markov chain for a different swapping order); with two hops it is E[max] / s_1, the renewal
    form. Raises ``ValueError`` beyond :data:`MAX_EXACT_SWAP_HOPS` hops with an uncertain swap.

    References
    ----------
    E. Shchukin, F. Schmidt and P. van Loock, "Waiting time in quantum repeaters with
    probabilistic entanglement swapping", Phys. Rev. A 100, 032322 (2019).
    """
    q = [float(x) for x in round_probabilities]
    s = [float(x) for x in swap_successes]
    n = len(q)
    if len(s) != max(n - 1, 0):
        raise ValueError(f"{n} hops need {max(n - 1, 0)} swap success probabilities, got {len(s)}")
    if n == 0:
        return 0.0
    if any(x <= 0.0 for x in q) or any(x <= 0.0 for x in s):
        return math.inf
    if all(x >= 1.0 for x in s):
        return expected_rounds(q)
    if n > MAX_EXACT_SWAP_HOPS:
        raise ValueError(f"{n} hops with uncertain swaps: the exact delivery time is computed up to "
                         f"{MAX_EXACT_SWAP_HOPS} hops")
    size = 1 << n
    masks = np.arange(size)
    # site j joins hops j - 1 and j; success[j] for j = 1..n - 1
    success = [1.0, *s, 1.0]
    # rows: the state at the start of the round; columns: the state so far in the round
    dist = np.eye(size)
    for i in range(n):
        step = _arrival_matrix(n, i, q[i], success)
        rows = (masks >> i) & 1 == 0
        dist[rows] = (step.T @ dist[rows].T).T
    full = size - 1
    transient = masks != full
    a = np.eye(size - 1) - dist[np.ix_(transient, transient)]
    rounds = np.linalg.solve(a, np.ones(size - 1))
    return float(rounds[0])


def _arrival_matrix(n: int, i: int, q: float, success: Sequence[float]) -> scipy.sparse.csr_array:
    """Transition of the present-hop set when hop ``i`` (empty) may gain a pair and be joined.

    Rows and columns are bit masks of the hops holding pairs. Rows where hop ``i`` already holds
    a pair are the identity (they are never used: the caller applies this only to rounds in which
    hop ``i`` started empty).
    """
    import scipy.sparse  # here, not at the top: importing it costs a quarter of a second at start-up

    size = 1 << n
    m = np.arange(size, dtype=np.int64)
    bit = 1 << i
    below = bit - 1
    # the run of present hops ending at hop i - 1: from just above the highest empty hop below i
    holes = ~m & below
    top_hole = np.where(holes > 0, np.frexp(holes.astype(float))[1] - 1, -1)
    left = below & ~((np.int64(1) << (top_hole + 1)) - 1)
    # the run of present hops starting at hop i + 1: as many as the trailing ones above i
    above = m >> (i + 1)
    first_hole = (~above) & (above + 1)
    right = (first_hole - 1) << (i + 1)
    right &= size - 1
    s_left, s_right = success[i], success[i + 1]
    has_l, has_r = left != 0, right != 0
    rows, cols, vals = [], [], []

    def add(mask: np.ndarray, to: np.ndarray, p: np.ndarray | float) -> None:
        weight = np.broadcast_to(np.asarray(p, dtype=float), mask.shape)[mask]
        keep = weight != 0.0
        rows.append(m[mask][keep])
        cols.append(to[mask][keep])
        vals.append(weight[keep])

    empty = (m & bit) == 0
    add(~empty, m, 1.0)
    add(empty, m, 1.0 - q)
    joined = m | bit
    p_join = np.where(has_l, s_left, 1.0) * np.where(has_r, s_right, 1.0)
    add(empty, joined, q * p_join)
    add(empty & has_l, m & ~left, q * (1 - s_left))
    add(empty & has_r & ~has_l, m & ~right, q * (1 - s_right))
    add(empty & has_l & has_r, m & ~left & ~right, q * s_left * (1 - s_right))
    return scipy.sparse.csr_array((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                                  shape=(size, size))


def expected_delivery_s(round_probabilities: Sequence[float], periods_s: Sequence[float],
                        swap_successes: Sequence[float]) -> float:
    """Expected time for a chain to deliver one end-to-end pair (see :func:`expected_delivery_rounds`).

    Hop-specific periods are handled as in :func:`expected_wait_s`: every hop is clocked at the
    slowest period tau, in which hop i succeeds with 1 - (1 - q_i)^(tau / tau_i). The expected
    rate of the chain is 1 / E[T] (one pair per delivery; a new one starts from empty hops).
    """
    if not periods_s:
        return 0.0
    tau = max(periods_s)
    per_round = [-math.expm1((tau / t) * math.log1p(-q)) if q < 1 else 1.0
                 for q, t in zip(round_probabilities, periods_s)]
    return tau * expected_delivery_rounds(per_round, swap_successes)


def werner_parameter(fidelity: float) -> float:
    """w = (4F - 1) / 3, the Werner parameter of the state twirled to fidelity F."""
    return (4.0 * fidelity - 1.0) / 3.0


def chain_fidelity(hop_fidelities: Sequence[float], gate_errors: Sequence[float] = ()) -> float:
    """End-to-end fidelity of a swapped chain of Werner pairs, ignoring memory decay.

    Each hop's pair is replaced by the Werner state of equal fidelity (a twirl; approximation).
    Swapping Werner pairs multiplies their parameters (w = w_1 w_2; e.g. Sangouard et al.,
    Rev. Mod. Phys. 83, 33, 2011), and a depolarizing gate error p on the swapped pair
    multiplies w by (1 - p). F = (1 + 3 prod w_i prod (1 - p_j)) / 4.
    """
    w = math.prod(werner_parameter(f) for f in hop_fidelities)
    w *= math.prod(1.0 - p for p in gate_errors)
    return (1.0 + 3.0 * w) / 4.0


class CapacityTable:
    """``graph``'s sites and links read once, for the bounds between many pairs of its sites
    (:func:`single_path_capacity` and :func:`multipath_capacity` take it as ``table``; the budget
    builds one per network rather than walking the graph's views again for every demand). It
    holds the graph's own link attribute dicts; valid while ``graph`` is not changed."""

    def __init__(self, graph: nx.Graph) -> None:
        self.graph = graph
        #: each site's neighbours with their link's attributes, in the graph's order
        self.adj = {n: list(nbrs.items()) for n, nbrs in graph.adj.items()}
        #: every site, in sorted-name order (multipath_capacity's numbering), and its number
        self.names = sorted(graph, key=str)
        self.order = {n: k for k, n in enumerate(self.names)}
        #: every link as (its ends' numbers, their names, its attributes)
        self.links = [(self.order[u], self.order[v], u, v, d) for u, v, d in graph.edges(data=True)]


def single_path_capacity(graph: nx.Graph, a: str, b: str, weight: str = "bound_bits_per_s", *,
                         exclude: Collection[str] = (), table: CapacityTable | None = None) -> float:
    """Single-path (widest path) capacity bound: max over routes of the weakest link's capacity.

    ``exclude``: sites no route passes through (the same as removing them from ``graph``; the
    budget passes the end users other than ``a`` and ``b``, cheaper than a subgraph view).

    References
    ----------
    S. Pirandola, "End-to-end capacities of a quantum communication network",
    Commun. Phys. 2, 51 (2019).
    """
    return bottleneck_capacity(graph, a, b, weight, exclude=exclude, table=table)


def bottleneck_capacity(graph: nx.Graph, a: str, b: str, weight: str = "bound_bits_per_s", *,
                        exclude: Collection[str] = (), table: CapacityTable | None = None) -> float:
    """max over paths from ``a`` to ``b`` of the smallest edge ``weight`` on the path (0 without a
    path): the widest-path value, by the max-min form of Dijkstra's search (Pollack, "The
    maximum capacity through a network", Oper. Res. 8, 733 (1960)). It visits only what it
    must, where a maximum spanning tree of the whole graph (:func:`netsim.network.routing.widest_path`)
    costs the same for every pair; the value (a min of edge weights, no arithmetic) is the same.
    ``table``: ``graph`` read once (:class:`CapacityTable`).
    """
    if a == b:
        return math.inf
    best: dict[str, float] = {a: math.inf}
    heap = [(-math.inf, 0, a)]
    order = 1
    done: set[str] = set(exclude) - {a, b}
    if table is not None and table.graph is graph:
        neighbours = table.adj.__getitem__
    else:
        def neighbours(node: str) -> Any:
            return graph.adj[node].items()
    while heap:
        neg, _, node = heapq.heappop(heap)
        if node in done:
            continue
        if node == b:
            return -neg
        done.add(node)
        width = -neg
        for nbr, data in neighbours(node):
            if nbr in done:
                continue
            w = min(width, data[weight])
            if w > best.get(nbr, -math.inf):
                best[nbr] = w
                heapq.heappush(heap, (-w, order, nbr))
                order += 1
    return 0.0


def multipath_capacity(graph: nx.Graph, a: str, b: str, weight: str = "bound_cut_bits_per_s", *,
                       exclude: Collection[str] = (), table: CapacityTable | None = None) -> float:
    """Multipath (flooding) capacity bound: the minimum cut between ``a`` and ``b``.

    The capacity of a cut is the sum of the link capacities it severs; the bound is the
    smallest over cuts separating ``a`` from ``b`` (max-flow min-cut: an undirected edge carries
    its capacity either way). ``exclude``: sites no flow passes through (as removed from ``graph``). The cut is found by shortest augmenting paths (Edmonds & Karp,
    J. ACM 19, 248, 1972) and its value is the correctly rounded sum (``math.fsum``) of the
    capacities it severs, so the float does not depend on the order of sites, links or the hash
    seed (tests check it against networkx's maximum flow and against every cut of small graphs).
    ``table``: ``graph`` read once (:class:`CapacityTable`).

    References
    ----------
    S. Pirandola, "End-to-end capacities of a quantum communication network",
    Commun. Phys. 2, 51 (2019).
    """
    skip = set(exclude) - {a, b}
    if a == b or a not in graph or b not in graph:
        return _networkx_min_cut(_without(graph, skip), a, b, weight)  # networkx's errors for these
    # sites in sorted-name order and each site's neighbours in that order: the search, and so
    # the cut it finds, is the same however the graph was built (numbering the left-out sites
    # too changes no site's place among the others)
    if table is None or table.graph is not graph:
        table = CapacityTable(graph)
    order = table.order
    edges = []
    residual: list[dict[int, float]] = [{} for _ in table.names]
    for i, j, u, v, d in table.links:
        if u in skip or v in skip:
            continue
        c = float(d[weight])
        if not c >= 0.0:  # NaN or negative: not a capacity; networkx decides what that gives
            return _networkx_min_cut(_without(graph, skip), a, b, weight)
        if i == j:
            continue
        edges.append((i, j, c))
        residual[i][j] = c
        residual[j][i] = c
    adj = [sorted(nbrs) for nbrs in residual]
    s, t = order[a], order[b]
    if _reaches(adj, s, t, lambda u, v: residual[u][v] == math.inf):
        return math.inf  # a path of lossless links (eta = 1): -log2(1 - eta) is unbounded
    while True:
        parent = _search(adj, residual, s)
        if t not in parent:
            break
        path, v = [], t
        while v != s:
            path.append((parent[v], v))
            v = parent[v]
        push = min(residual[u][v] for u, v in path)
        for u, v in path:
            residual[u][v] -= push
            residual[v][u] += push
    side = parent.keys()
    return math.fsum(c for i, j, c in edges if (i in side) != (j in side))


def _search(adj: list[list[int]], residual: list[dict[int, float]], s: int) -> dict[int, int]:
    """Breadth-first search from ``s`` over edges with residual capacity left: each reached node's parent."""
    parent = {s: s}
    frontier = [s]
    while frontier:
        nxt = []
        for u in frontier:
            ru = residual[u]
            for v in adj[u]:
                if v not in parent and ru[v] > 0.0:
                    parent[v] = u
                    nxt.append(v)
        frontier = nxt
    return parent


def _reaches(adj: list[list[int]], s: int, t: int, usable) -> bool:  # type: ignore[no-untyped-def]
    seen, stack = {s}, [s]
    while stack:
        u = stack.pop()
        for v in adj[u]:
            if v not in seen and usable(u, v):
                if v == t:
                    return True
                seen.add(v)
                stack.append(v)
    return s == t


def _without(graph: nx.Graph, skip: set[str]) -> nx.Graph:
    return nx.subgraph_view(graph, filter_node=lambda n: n not in skip) if skip else graph


def _networkx_min_cut(graph: nx.Graph, a: str, b: str, weight: str) -> float:
    """The minimum cut by networkx's preflow-push (the reference :func:`multipath_capacity` is
    checked against; used for inputs it does not take: unknown or equal ends, capacities that
    are NaN or negative)."""
    if not nx.has_path(graph, a, b):
        return 0.0
    # networkx's preflow-push keeps its active nodes in sets; with site names as nodes their
    # order (and so the float sums of the flow) follows the interpreter's hash seed. Integer
    # nodes in sorted-name order make the computation the same on every interpreter.
    order = {n: k for k, n in enumerate(sorted(graph, key=str))}
    flow = nx.Graph()
    flow.add_nodes_from(range(len(order)))
    flow.add_edges_from(sorted((min(order[u], order[v]), max(order[u], order[v]), {"capacity": d[weight]})
                               for u, v, d in graph.edges(data=True)))
    try:
        return float(nx.minimum_cut_value(flow, order[a], order[b], capacity="capacity"))
    except nx.NetworkXUnbounded:  # a path of lossless links (eta = 1): -log2(1 - eta) is unbounded
        return math.inf
