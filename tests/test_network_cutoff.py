"""The route estimate with a cut-off (netsim.network.cutoff, netsim.network.estimate): an exactly
solvable chain, and the event engine on small chains across cut-off/coherence ratios."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import networkx as nx
import numpy as np
import pytest

from netsim.engine.api import demand_row
from netsim.engine.chain import Chain, line_chain, synthetic_physics
from netsim.engine.des import DesOptions, simulate_des
from netsim.engine.metrics import StopRule
from netsim.network.cutoff import sample_cycles
from netsim.network.estimate import RouteEstimate, estimate_hops
from netsim.network.routing import Hop
from netsim.scenario.model import Site


def _bare(site: Site, comm: int | None, dephasing: float = 0.0) -> Site:
    """A memory without the extra hardware effects (but ``dephasing`` per neighbouring attempt),
    so that only the timeline and T1/T2 act."""
    return dataclasses.replace(site, communication_qubits=comm, attempt_dephasing=dephasing,
                               memory_transfer_error=0.0, memory_transfer_s=0.0, gate_error=0.0)


def test_a_sure_hop_beside_a_slow_one_matches_the_exact_renewal_sum() -> None:
    """Two hops, no shared interface; hop 1 succeeds in its first round (q = 1), hop 0 after
    K ~ Geometric(q) rounds of period T; both pairs are usable r after their round starts.
    Derivation (for this test): hop 1's pair is born at 0 and, while hop 0 has none, is discarded
    at each multiple of the cut-off c and made again at once, so the hop-1 pair in use was born
    at j c, j = floor(R0 / c), R0 = (K - 1) T + r. If R0 >= j c + r the repeater swaps at R0,
    else at j c + r (hop 0's pair, kept until R0 - r + c, outlives it when c > 2r). With no
    signalling time the pair is delivered at the swap, s: the cycle lasts s, hop 0's qubits are
    stored s - (K - 1) T each, hop 1's s - j c each. Pure dephasing of Phi+ multiplies the
    coherence by exp(-t/T2) per qubit and swapping multiplies them (Nielsen & Chuang 2010,
    Sec. 8.3.6), so F = (1 + E[exp(-S/T2)]) / 2 with S the summed storage. Sampling error of the
    estimate's 1200 cycles: about 3 % on the rate, 0.003 on F."""
    q, period, r, c, t2 = 0.01, 1e-3, 2e-3, 0.05, 0.2
    k = np.arange(1, 5000)
    prob = q * (1 - q) ** (k - 1)
    r0 = (k - 1) * period + r
    j = np.floor(r0 / c)
    swap = np.maximum(r0, j * c + r)
    storage = 2 * (swap - (k - 1) * period) + 2 * (swap - j * c)
    rate = 1.0 / float((prob * swap).sum())
    fidelity = (1 + float((prob * np.exp(-storage / t2)).sum())) / 2

    sites = [_bare(Site(name, "user", t1_s=math.inf, t2_s=t2), None) for name in ("Pell Lab", "Quill Lab")]
    sites.insert(1, _bare(Site("Rook Relay", "repeater", t1_s=math.inf, t2_s=t2), None))
    hops = [Hop("Pell Lab", "Rook Relay", (), synthetic_physics(q, period, herald_s=r)),
            Hop("Rook Relay", "Quill Lab", (), synthetic_physics(1.0, period, herald_s=r))]
    est = estimate_hops(nx.Graph(), hops, sites, cutoff_s=c)
    assert est.sampled
    assert est.rate_per_s == pytest.approx(rate, rel=0.08)
    assert est.fidelity == pytest.approx(fidelity, abs=0.01)
    # without the cut-off the closed form is used: hop 1's pair would wait the whole ~0.1 s
    plain = estimate_hops(nx.Graph(), hops, sites, cutoff_s=None)
    assert not plain.sampled and fidelity - plain.fidelity > 0.1


def test_the_sampler_is_deterministic_and_one_hop_is_left_to_the_closed_form() -> None:
    """A fixed seed: the same inputs give the same figures (the budget must not flicker)."""
    args = ((0.01, 0.02), (1e-3, 1e-3), (2e-3, 2e-3), (0.0,), 0.05, (True,), (1.0,))
    a, b = sample_cycles(*args), sample_cycles(*args, seed=20230523)
    assert a is not None and b is not None
    assert np.array_equal(a.delivered_s, b.delivered_s)
    assert sample_cycles((0.01,), (1e-3,), (2e-3,), (), 0.05, (), ()) is None
    # a pair that is only usable after the cut-off can never be swapped: no delivery
    assert sample_cycles((0.01, 0.02), (1e-3, 1e-3), (0.06, 2e-3), (0.0,), 0.05, (False,), (1.0,)) is None


def _engine_and_estimate(n: int, p: float, t2_s: float, cutoff_s: float, comm: int | None, pairs: int,
                         seed: int, bsm: float = 1.0, dephasing: float = 0.0) -> tuple[dict[str, Any], RouteEstimate]:
    chain = line_chain(n, p, 1e-4, herald_s=1e-4, t1_s=100.0, t2_s=t2_s, bsm_success_probability=bsm)
    sites = tuple(_bare(s, comm, dephasing) for s in chain.sites)
    chain = Chain(chain.name, sites, chain.hops)
    # the event engine itself: the vectorised engine, which a lone chain would get, shares the
    # estimate's timeline code, so it would not be an independent check
    run = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(seed)], DesOptions(cutoff_s=cutoff_s))[0][0]
    assert run.engine == "des"
    hops = [Hop(sites[i].name, sites[i + 1].name, (), h.physics) for i, h in enumerate(chain.hops)]
    return demand_row(chain, run), estimate_hops(nx.Graph(), hops, list(sites), cutoff_s=cutoff_s)


@pytest.mark.parametrize(("n", "p", "t2_s", "cutoff_s", "comm", "dephasing"), [
    (2, 2e-4, 1.0, 0.5, 1, 0.0),      # the bundled regime: one interface at the repeater, cut-off T2/2
    (2, 5e-4, 0.5, 0.1, None, 0.0),   # parallel hops, a tight cut-off (T2/5)
    (2, 5e-4, 0.5, 0.1, None, 3e-4),  # and attempt dephasing (costs ~0.05 of fidelity here)
])
def test_two_hops_with_a_cut_off_follow_the_event_engine(n: int, p: float, t2_s: float, cutoff_s: float,
                                                        comm: int | None, dephasing: float) -> None:
    """The engine (its states checked against QuTiP in tests/test_engine_states.py) runs 1500
    pairs: the estimate's fidelity within 0.02 and its rate within 10 % (the engine's own rate
    interval is about +-5 % at this size)."""
    row, est = _engine_and_estimate(n, p, t2_s, cutoff_s, comm, pairs=1500, seed=2, dephasing=dephasing)
    assert abs(est.fidelity - row["fidelity_mean"]) < 0.02
    assert est.rate_per_s == pytest.approx(row["rate_per_s"], rel=0.10)
    # the cut-off acts here: the estimate without it misses both figures by far
    hops = [Hop(f"N{i}", f"N{i + 1}", (), synthetic_physics(p, 1e-4, herald_s=1e-4)) for i in range(n)]
    sites = [_bare(Site(f"N{i}", "repeater", t1_s=100.0, t2_s=t2_s), comm) for i in range(n + 1)]
    without = estimate_hops(nx.Graph(), hops, sites, cutoff_s=None)
    assert abs(without.fidelity - row["fidelity_mean"]) > 0.1
    assert without.rate_per_s > 1.15 * row["rate_per_s"]


@pytest.mark.slow
@pytest.mark.parametrize(("n", "p", "t2_s", "cutoff_s", "comm", "bsm"), [
    (3, 2e-4, 1.0, 0.5, 1, 1.0),
    (3, 5e-4, 2.0, 0.2, None, 1.0),     # cut-off / T2 = 0.1
    (3, 5e-4, 0.3, 1.0, None, 1.0),     # cut-off / T2 = 3.3: it rarely acts
    (4, 1e-3, 0.5, 0.1, None, 1.0),
    (2, 2e-4, 1.0, 0.5, None, 0.5),     # failing swaps (their messages' delay left out)
])
def test_longer_chains_with_a_cut_off_follow_the_event_engine(n: int, p: float, t2_s: float, cutoff_s: float,
                                                              comm: int | None, bsm: float) -> None:
    """As above for three and four hops, a cut-off that barely acts, and swaps that fail half
    the time."""
    row, est = _engine_and_estimate(n, p, t2_s, cutoff_s, comm, pairs=2500, seed=4, bsm=bsm)
    assert abs(est.fidelity - row["fidelity_mean"]) < 0.02
    assert est.rate_per_s == pytest.approx(row["rate_per_s"], rel=0.10)


# (q, period, ready, tell, cutoff, shared, swap_p, cycles, seed, extra): discards on three hops
# with shared sites; failing swaps on four; a horizon that leaves cycles unfinished; an attempt
# table with start offsets (the vectorised engine's use).
_RECORDED_CYCLE_CASES = [
    ((0.05, 0.02, 0.04), (2e-4, 1.5e-4, 2e-4), (7e-4, 6.5e-4, 7e-4), (1.5e-4, 1.7e-4), 0.006, (True, True),
     (1.0, 1.0), 400, 1, {}),
    ((0.3, 0.1, 0.2, 0.5), (1e-4, 2e-4, 1e-4, 3e-4), (3e-4, 5e-4, 2e-4, 6e-4), (5e-5, 6e-5, 7e-5), 0.004,
     (False, True, False), (0.6, 0.9, 0.5), 300, 2, {}),
    ((0.01, 0.02), (5e-4, 5e-4), (1e-3, 1.2e-3), (1e-4,), 0.02, (True,), (0.8,), 300, 3, {"horizon_s": 0.3}),
    ((0.2, 0.4, 0.1), (1e-4, 1e-4, 1e-4), (2e-4, 2e-4, 2e-4), (1e-5, 1e-5), 0.002, (False, False), (1.0, 1.0),
     300, 4, {"table": True}),
    # two waiting neighbours at a shared site and both neighbours of a site granted in one step
    # (discarded runs of two and three hops), as in the purified routes `netsim check` samples
    ((0.05, 0.02, 0.015), (2e-4, 1.5e-4, 2e-4), (7e-4, 6.5e-4, 7e-4), (1.5e-4, 1.7e-4), 0.004, (True, True),
     (1.0, 1.0), 300, 5, {}),
    # an attempt table on five hops, some sites shared, event times on one lattice (ties)
    ((0.3, 0.1, 0.05, 0.2, 0.4), (1e-4, 1e-4, 1e-4, 1e-4, 1e-4), (3e-4, 3e-4, 3e-4, 3e-4, 3e-4),
     (1e-5, 1e-5, 1e-5, 1e-5), 0.001, (False, True, True, False), (1.0, 1.0, 1.0, 1.0), 200, 6, {"table": True}),
    # no pair ever lost (a cut-off that never acts, sure swaps): six hops with every inner site
    # shared, as on the generated metro grids, and four on an attempt table with offsets
    ((0.015, 0.013, 0.02, 0.013, 0.011, 0.015), (1.5e-5, 3.7e-5, 2e-5, 3.7e-5, 4e-5, 1.5e-5),
     (5.1e-4, 5.4e-4, 5.2e-4, 5.4e-4, 5.5e-4, 5.1e-4), (1e-4, 7e-5, 5e-5, 7e-5, 1e-4), 0.5, (True,) * 5,
     (1.0,) * 5, 400, 7, {}),
    ((0.3, 0.1, 0.05, 0.2), (1e-4, 1e-4, 1e-4, 1e-4), (3e-4, 3e-4, 3e-4, 3e-4), (1e-5, 1e-5, 1e-5), 1.0,
     (False, True, False), (1.0, 1.0, 1.0), 300, 8, {"table": True}),
]


@pytest.mark.parametrize("index", range(len(_RECORDED_CYCLE_CASES)))
def test_run_cycles_gives_the_figures_recorded_before_its_rewrite(index: int) -> None:
    """The timeline sampler after its rewrites (flat indices, then whole hop-major planes per
    step: fewer numpy calls per event, the same draws in the same order and the same arithmetic)
    against the figures the code gave before them, recorded in tests/data/cutoff_cycle_figures.json
    (cases 0-3 before the first, 4-5 before the second, 6-7 before attempt counts were taken from
    the current sequences while no pair is lost): equal to float rounding (in fact exactly)."""
    import json
    from pathlib import Path

    from netsim.network.cutoff import AttemptTable, run_cycles

    recorded = json.loads((Path(__file__).parent / "data" / "cutoff_cycle_figures.json").read_text())["cases"][index]
    q, period, ready, tell, cutoff, shared, swap, cycles, seed, extra = _RECORDED_CYCLE_CASES[index]
    rng = np.random.default_rng(seed)
    kw: dict[str, Any] = {}
    draws: Any = rng
    if extra.get("table"):
        draws = AttemptTable(rng, np.array(q), cycles)
        kw["offset_s"] = np.random.default_rng(seed + 100).uniform(0, 2e-4, (cycles, len(q)))
    if "horizon_s" in extra:
        kw["horizon_s"] = extra["horizon_s"]
    out = run_cycles(q, period, ready, tell, cutoff, shared, swap, cycles=cycles, draws=draws, max_steps=50000, **kw)
    f = out.finished
    got = {"finished": int(f.sum()), "delivered_s": out.delivered_s[f].sum(),
           "store_left_s": out.store_left_s[f].sum(), "store_right_s": out.store_right_s[f].sum(),
           "attempts_left": out.attempts_left[f].sum(), "attempts_right": out.attempts_right[f].sum(),
           "rounds": out.rounds.sum(), "sequences": out.sequences.sum(), "discarded": out.discarded.sum(),
           "discards": out.discards.sum(), "lost_qubit_s": out.lost_qubit_s.sum(),
           "next_round_s": out.next_round_s[f].sum()}
    for key, value in recorded.items():
        assert got[key] == pytest.approx(value, rel=1e-12, abs=0.0), key


def test_cycles_that_lose_no_pair_give_the_same_numbers_in_closed_form_as_stepped() -> None:
    """run_cycles with an attempt table finishes the cycles that lose no pair in closed form
    (_quiet_cycles); stepping every cycle (closed_form=False) reads the same table entries, so
    every field of every cycle must be equal, exactly: random chains with every pattern of
    shared sites, event times on one lattice (ties), start offsets, horizons and table rows, and
    cut-offs from always acting to never."""
    from netsim.network.cutoff import AttemptTable, run_cycles
    g = np.random.default_rng(11)
    quiet = 0
    for case in range(60):
        n = int(g.integers(2, 10))
        q = tuple(float(x) for x in g.uniform(0.2, 0.9, n))
        lattice = case % 4 == 0
        period = (1.0,) * n if lattice else tuple(float(x) for x in g.uniform(1, 3, n))
        ready = (1.0,) * n if lattice else tuple(float(x) for x in g.uniform(0.5, 2, n))
        tell = tuple(float(x) for x in g.uniform(0, 2, n - 1))
        cutoff = float(g.choice([6.0, 12.0, 1e9]))
        shared = tuple(bool(x) for x in g.integers(0, 2, n - 1)) if case % 3 else (True,) * (n - 1)
        cycles = int(g.integers(1, 120))
        kw: dict[str, Any] = {"horizon_s": float(g.choice([np.inf, 30.0])), "max_steps": 600}
        if case % 2:
            kw["offset_s"] = g.uniform(0, 3, (cycles, n))
        rows = np.sort(g.choice(200, cycles, replace=False)) if case % 5 == 0 else None
        got = []
        for closed in (True, False):
            table = AttemptTable(np.random.default_rng(case), np.array(q), 200 if rows is not None else cycles)
            got.append(run_cycles(q, period, ready, tell, cutoff, shared, (1.0,) * (n - 1), cycles=cycles, draws=table,
                                  table_rows=rows, closed_form=closed, **kw))
        fast, stepped = got
        assert np.array_equal(fast.finished, stepped.finished)
        f = fast.finished
        for name in fast.__dataclass_fields__:
            a, b = getattr(fast, name), getattr(stepped, name)
            if name in ("rounds", "sequences", "discarded", "discards", "lost_qubit_s"):
                assert np.array_equal(a, b), (case, name)
            elif name != "finished":
                assert np.array_equal(a[f], b[f]), (case, name)
        quiet += int((fast.discards == 0).sum())
    assert quiet > 1000   # the closed form did serve many of the cycles


def test_the_samplers_array_helpers_give_numpys_own_results() -> None:
    """The fast forms in run_cycles against numpy itself (a reference library): the geometric
    draws are the numbers ``Generator.geometric`` gives from the same generator (inversion below
    p = 1/3, numpy's own draw above, the generator left in the same state), the running count is
    ``np.cumsum`` along the hops, the positions are ``np.nonzero``."""
    from netsim.network.cutoff import _geometric, _nonzero, _running_count
    g = np.random.default_rng(7)
    for trial in range(40):
        size = int(g.integers(0, 2000))
        if trial % 3 == 0:
            p = g.uniform(1e-12, 0.3333, size)
        elif trial % 3 == 1:
            p = np.full(size, 10 ** g.uniform(-300, -0.5))    # down to 1e-300: the int64 cap
        else:
            p = g.uniform(1e-6, 1.0, size)                  # above 1/3 too: numpy's search
        seed = int(g.integers(1 << 30))
        ours, theirs = np.random.default_rng(seed), np.random.default_rng(seed)
        assert np.array_equal(_geometric(ours, p), theirs.geometric(p).astype(float))
        assert ours.random() == theirs.random()
        plane = g.random((int(g.integers(1, 30)), int(g.integers(1, 500)))) < 0.3
        assert np.array_equal(_running_count(plane), np.cumsum(plane, axis=0))
        for got, want in zip(_nonzero(plane), np.nonzero(plane)):
            assert np.array_equal(got, want)
