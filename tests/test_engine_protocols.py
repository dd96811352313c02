"""Cut-offs, contention between demands, ensembles, and the vectorised engine against simpy."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest

from netsim import qinfo
from netsim.engine import (
    Chain,
    DesOptions,
    HopSpec,
    StopRule,
    send_ensemble,
    simulate_chain_vector,
    simulate_des,
)
from netsim.engine.chain import line_chain, synthetic_physics
from netsim.engine.policies import SCHEDULING
from netsim.hardware.types import LinkPhysics
from netsim.scenario.model import Encoding, Site

#: Stated for the timelines and closed forms here: every slot may attempt, no transfer time or
#: error, no attempt dephasing, no gate error (the built-in defaults are demonstrated NV values).
IDEAL: dict[str, Any] = {"communication_qubits": None, "memory_transfer_s": 0.0, "memory_transfer_error": 0.0,
                         "attempt_dephasing": 0.0, "gate_error": 0.0}

Z = 4.5


def _hop(name: str, p: float, period: float, herald: float | None = None, length_km: float = 0.0) -> HopSpec:
    return HopSpec(name, synthetic_physics(p, period, herald_s=herald, length_km=length_km))


def test_cutoff_discard_fraction_of_a_stored_link() -> None:
    # A pair of hop 0 that finds no partner waits for hop 1, which attempts every T1 with success
    # p1. It is discarded if none of the m rounds of hop 1 heralding within w = cutoff - h0 of
    # its herald succeeds: P = (1 - p1)^m with m = floor(w / T1) or one more, by the phase of
    # hop 1's rounds (geometric law, common practice); exp(-p1 w / T1) in the continuum limit.
    p1, t1, w = 0.002, 1e-6, 6e-4
    h0 = 1e-5
    sites = tuple(Site(n, r, memory_slots=m, t1_s=math.inf, t2_s=math.inf, **IDEAL)
                  for n, r, m in (("Arden", "user", 1), ("Bexley", "repeater", 2), ("Corrin", "user", 1)))
    chain = Chain("Arden-Corrin", sites, (_hop("Arden-Bexley", 0.05, h0), _hop("Bexley-Corrin", p1, t1)))
    opts = DesOptions(cutoff_s=w + h0, log_pairs=True)
    _, (log,) = simulate_des([chain], StopRule(pairs=2500), [np.random.default_rng(8)], opts)
    alone = [p for p in log if p.hop == 0 and p.fate in ("discarded", "swapped") and p.end[1] > p.herald]
    discarded = sum(p.fate == "discarded" for p in alone)
    frac, n = discarded / len(alone), len(alone)
    m = math.floor(w / t1)
    lo, hi = (1 - p1) ** (m + 1), (1 - p1) ** m
    se = math.sqrt(hi * (1 - hi) / n)
    assert n > 1500
    assert lo - Z * se <= frac <= hi + Z * se
    assert frac == pytest.approx(math.exp(-p1 * w / t1), abs=Z * se + 2 * p1)


def test_cutoff_never_lets_a_qubit_wait_longer() -> None:
    # Invariant: with cut-off c no delivered link pair was stored longer than c (before the
    # delivery messages, which the cut-off does not cover here: zero-length hops).
    chain = line_chain(3, 0.05, 1e-4, t1_s=1.0, t2_s=0.5)
    cutoff = 1.5e-3
    _, (log,) = simulate_des([chain], StopRule(pairs=400), [np.random.default_rng(2)],
                             DesOptions(cutoff_s=cutoff, log_pairs=True))
    ages = [max(p.end) - p.start for p in log if p.fate in ("swapped", "delivered")]
    assert ages and max(ages) <= cutoff + 1e-12
    assert any(p.fate == "discarded" for p in log)


def _star(slots: int) -> tuple[Chain, Chain]:
    def site(name: str, role: str) -> Site:
        return Site(name, role, memory_slots=slots if role == "repeater" else 1, t1_s=math.inf, t2_s=math.inf, **IDEAL)

    hub = site("Quillon Hub", "repeater")
    ends = [site(n, "user") for n in ("Amberly", "Birchold", "Cawdor", "Dunmere")]
    a = Chain("Amberly-Cawdor", (ends[0], hub, ends[2]),
              (_hop("Amberly-Quillon Hub", 0.1, 1e-3), _hop("Quillon Hub-Cawdor", 0.1, 1e-3)), index=0)
    b = Chain("Birchold-Dunmere", (ends[1], hub, ends[3]),
              (_hop("Birchold-Quillon Hub", 0.1, 1e-3), _hop("Quillon Hub-Dunmere", 0.1, 1e-3)), index=1)
    return a, b


@pytest.mark.parametrize("policy", sorted(SCHEDULING))
def test_contention_rates_sum_to_at_most_the_single_demand_rate(policy: str) -> None:
    # Two demands through one repeater with room for one demand's pair of slots: they take
    # turns, so their rates sum to at most the rate of one demand alone (common practice: a
    # shared resource cannot serve more than its capacity). With two demands every policy
    # alternates (a finished demand queues behind the waiting one), splitting it evenly.
    pairs = 2000
    a, b = _star(slots=2)
    opts = DesOptions(scheduling=policy)
    (single,), _ = simulate_des([a], StopRule(pairs=pairs), [np.random.default_rng(1)], opts)
    both, _ = simulate_des([a, b], StopRule(pairs=pairs), [np.random.default_rng(2), np.random.default_rng(3)], opts)
    r_single = single.metrics.n / single.simulated_time_s
    rates = [r.metrics.n / r.simulated_time_s for r in both]
    rel = Z * 1.0 / math.sqrt(pairs)
    assert sum(rates) <= r_single * (1 + rel)
    assert rates[0] == pytest.approx(rates[1], rel=2 * rel)


def test_enough_slots_remove_contention() -> None:
    # With four slots at the hub both demands run as if alone.
    pairs = 2000
    a, b = _star(slots=4)
    (single,), _ = simulate_des([a], StopRule(pairs=pairs), [np.random.default_rng(1)])
    both, _ = simulate_des([a, b], StopRule(pairs=pairs), [np.random.default_rng(2), np.random.default_rng(3)])
    r_single = single.metrics.n / single.simulated_time_s
    for r in both:
        assert r.metrics.n / r.simulated_time_s == pytest.approx(r_single, rel=2 * Z / math.sqrt(pairs))


def test_vector_engine_matches_event_engine() -> None:
    # The fast path must reproduce the simpy engine's statistics (same model): a 3-hop chain with
    # 25 km hops, herald delay shorter than the period, T1/T2 memories and Werner link states.
    chain = line_chain(3, 0.08, 2e-4, qinfo.werner_state(0.97), herald_s=1.2e-4, length_km=25.0,
                       t1_s=0.2, t2_s=0.05)
    vec = simulate_chain_vector(chain, StopRule(pairs=60_000), np.random.default_rng(5))
    (des,), _ = simulate_des([chain], StopRule(pairs=6_000), [np.random.default_rng(6)])
    for name in ("rate", "fidelity"):
        if name == "rate":
            values = [r.metrics.n / r.simulated_time_s for r in (vec, des)]
            ses = [v * r.rate_relative_halfwidth() / 1.96 for v, r in zip(values, (vec, des))]
        else:
            stats = [r.metrics.mean_ci(r.metrics.sum_fidelity, r.metrics.sum_fidelity_sq) for r in (vec, des)]
            values = [s[0] for s in stats]
            ses = [(s[1][1] - s[0]) / 1.96 for s in stats]
        assert abs(values[0] - values[1]) < Z * math.hypot(*ses), name


def _physics(eta: float, period: float) -> LinkPhysics:
    base = synthetic_physics(0.1, period)
    return LinkPhysics(base.scheme, 10.0, -10 * math.log10(eta), eta, 0.1, 1, 0.1, period, period,
                       base.state, base.fidelity)


def _ensemble_chain(etas: tuple[float, ...], prep: float, t1: float, t2: float, eff: float) -> Chain:
    n = len(etas)
    sites = tuple(Site(f"Pell{k}", "user" if k in (0, n) else "repeater", t1_s=t1, t2_s=t2,
                       memory_efficiency=eff, attempt_prep_time_s=prep) for k in range(n + 1))
    hops = tuple(HopSpec(f"Pell{k}-Pell{k + 1}", _physics(eta, 1e-4)) for k, eta in enumerate(etas))
    return Chain(f"Pell0-Pell{n}", sites, hops)


def test_ensemble_with_fixed_waits_equals_composed_channel() -> None:
    # chi of the ensemble through the composed channel: memory channel at each inner site for its
    # (fixed) wait, then one erasure with the product of transmissivities and memory efficiencies
    # (erasures commute with channels on the qubit block). holevo_information is the reference.
    etas, prep, t1, t2, eff = (0.6, 0.8, 0.7), 2e-3, 0.01, 0.004, 0.9
    chain = _ensemble_chain(etas, prep, t1, t2, eff)
    enc = Encoding("bb84", (0.25,) * 4, ((0, 0, 1), (0, 0, -1), (1, 0, 0), (-1, 0, 0)))
    got = send_ensemble(chain, enc, waits="fixed")
    channel = qinfo.compose(qinfo.memory_decoherence(prep, t1, t2), qinfo.memory_decoherence(prep, t1, t2),
                            qinfo.erasure(1 - math.prod(etas) * eff**2))
    from netsim.engine.ensemble import encoding_states

    probs, states = encoding_states(enc)
    expected = float(qinfo.holevo_information(probs, channel.apply(states)))
    assert got.chi_bits_per_qubit == pytest.approx(expected, abs=1e-12)
    assert got.arrival_probability == pytest.approx(math.prod(etas) * eff**2, rel=1e-12)


def test_ensemble_published_values_without_noise() -> None:
    # Lossless, noiseless route: {|0>, |+>} with equal priors gives chi = h((1 + 1/sqrt2)/2)
    # ~ 0.601 (Nielsen & Chuang 2010, Sec. 12.1.1); BB84's four states give 1 bit (memory).
    chain = _ensemble_chain((1.0, 1.0), 0.0, math.inf, math.inf, 1.0)
    two = Encoding("zero-plus", (0.5, 0.5), ((0, 0, 1), (1, 0, 0)))
    lam = (1 + 1 / math.sqrt(2)) / 2
    h = -lam * math.log2(lam) - (1 - lam) * math.log2(1 - lam)
    assert send_ensemble(chain, two, waits="fixed").chi_bits_per_qubit == pytest.approx(h, abs=1e-10)
    assert h == pytest.approx(0.6009, abs=1e-4)
    bb84 = Encoding("bb84", (0.25,) * 4, ((0, 0, 1), (0, 0, -1), (1, 0, 0), (-1, 0, 0)))
    assert send_ensemble(chain, bb84, waits="uniform", realisations=50).chi_bits_per_qubit == pytest.approx(1.0, abs=1e-10)


def test_three_demands_on_one_slot_pair_share_it() -> None:
    # Three demands, room for one at a time: fair scheduling gives each about a third of the
    # lone rate; the sum never exceeds it (common practice).
    a, b = _star(slots=2)
    hub, far = a.sites[1], Site("Elsworth", "user", memory_slots=1, t1_s=math.inf, t2_s=math.inf, **IDEAL)
    c = Chain("Elsworth-Cawdor", (far, hub, a.sites[2]),
              (_hop("Elsworth-Quillon Hub", 0.1, 1e-3), _hop("Quillon Hub-Cawdor", 0.1, 1e-3)), index=2)
    pairs = 1000
    (single,), _ = simulate_des([a], StopRule(pairs=3 * pairs), [np.random.default_rng(1)])
    runs, _ = simulate_des([a, b, c], StopRule(pairs=pairs), [np.random.default_rng(k) for k in (4, 5, 6)])
    rates = [r.metrics.n / r.simulated_time_s for r in runs]
    r_single = single.metrics.n / single.simulated_time_s
    assert sum(rates) <= r_single * (1 + Z / math.sqrt(3 * pairs))
    for r in rates:
        assert r == pytest.approx(r_single / 3, rel=2 * Z / math.sqrt(pairs))


def test_interrupt_keeps_what_was_delivered(monkeypatch: pytest.MonkeyPatch) -> None:
    # Ctrl-C during a run: the pairs delivered so far are kept and the run says so.
    from netsim.engine import vector

    calls = {"n": 0}
    original = vector._solve_offsets

    def interrupting(*args: object) -> object:
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt
        return original(*args)  # type: ignore[arg-type]

    monkeypatch.setattr(vector, "_solve_offsets", interrupting)
    run = simulate_chain_vector(line_chain(2, 0.1, 1e-3), StopRule(pairs=100_000), np.random.default_rng(0))
    assert run.interrupted and 0 < run.metrics.n < 100_000
    assert run.simulated_time_s > 0


def test_no_demand_starves_between_two_busy_neighbours() -> None:
    # Demand X crosses repeaters R1 and R2; demand Y uses only R1, demand Z only R2; each
    # repeater has room for one demand. Y and Z alternate their reservations; a broker that lets
    # them take turns past X's older request would starve X for ever. With earmarking X gets a
    # fair share: at least a fifth of its lone rate (a generous bound; common practice).
    def site(name: str, role: str) -> Site:
        return Site(name, role, memory_slots=2 if role == "repeater" else 1, t1_s=math.inf, t2_s=math.inf, **IDEAL)

    r1, r2 = site("Rook One", "repeater"), site("Rook Two", "repeater")
    u = {n: site(n, "user") for n in ("Ulla", "Vane", "Yarrow", "Yew", "Zephyr", "Zinnia")}
    x = Chain("Ulla-Vane", (u["Ulla"], r1, r2, u["Vane"]),
              (_hop("Ulla-Rook One", 0.1, 1e-3), _hop("Rook One-Rook Two", 0.1, 1e-3), _hop("Rook Two-Vane", 0.1, 1e-3)), index=0)
    y = Chain("Yarrow-Yew", (u["Yarrow"], r1, u["Yew"]),
              (_hop("Yarrow-Rook One", 0.1, 1e-3), _hop("Rook One-Yew", 0.1, 1e-3)), index=1)
    z = Chain("Zephyr-Zinnia", (u["Zephyr"], r2, u["Zinnia"]),
              (_hop("Zephyr-Rook Two", 0.1, 1e-3), _hop("Rook Two-Zinnia", 0.1, 1e-3)), index=2)
    (alone,), _ = simulate_des([x], StopRule(pairs=300), [np.random.default_rng(1)])
    runs, _ = simulate_des([x, y, z], StopRule(pairs=300), [np.random.default_rng(k) for k in (2, 3, 4)])
    rate_x = runs[0].metrics.n / runs[0].simulated_time_s
    assert rate_x >= 0.2 * alone.metrics.n / alone.simulated_time_s


def test_batched_flushing_does_not_change_results(monkeypatch: pytest.MonkeyPatch) -> None:
    # The event engine turns histories into states in batches to bound memory; the batch size
    # must not change any figure (same seed, same numbers). The patch needs the plain-Python
    # engine: a compiled module reads its own constants.
    from netsim.engine.build import plain_engine

    des = plain_engine()
    chain = line_chain(2, 0.2, 1e-3, qinfo.werner_state(0.9), t1_s=0.5, t2_s=0.2, length_km=5.0)

    def figures() -> tuple[float, ...]:
        (run,), _ = des.simulate_des([chain], StopRule(pairs=300), [np.random.default_rng(3)],
                                     DesOptions(cutoff_s=5e-3))
        m = run.metrics
        return (m.n, m.sum_fidelity, m.sum_eof, run.simulated_time_s, *run.site_qubit_s)

    whole = figures()
    monkeypatch.setattr(des, "FLUSH_ROWS", 7)
    np.testing.assert_allclose(figures(), whole, rtol=1e-12)
    monkeypatch.setattr(des, "ROW_STAGE", 3)  # staged row values spilled every pair or two, between flushes
    np.testing.assert_allclose(figures(), whole, rtol=1e-12)


def test_demands_sharing_a_fibre_share_its_attempts() -> None:
    # Two demands between the same two users over the same single fibre, with memory for both:
    # the fibre carries one attempt sequence at a time, so together they cannot exceed the one-link
    # rate p_round / T (the heralding law of the single-link test; geometric number of rounds,
    # common practice), and split it about evenly under first-come-first-served. Without the
    # shared-fibre rule each would get the full rate.
    p, period, pairs = 0.02, 1e-3, 3000
    sites = tuple(Site(n, "user", memory_slots=2, t1_s=math.inf, t2_s=math.inf, **IDEAL) for n in ("Quillan", "Ravensey"))
    hop = HopSpec("Quillan-Ravensey", synthetic_physics(p, period), links=("Quillan-Ravensey",))
    a, b = Chain("first", sites, (hop,), index=0), Chain("second", sites, (hop,), index=1)
    runs, _ = simulate_des([a, b], StopRule(pairs=pairs), [np.random.default_rng(11), np.random.default_rng(12)])
    rates = [r.metrics.n / r.simulated_time_s for r in runs]
    single = p / period
    rel = Z / math.sqrt(pairs)
    assert sum(rates) == pytest.approx(single, rel=rel)
    assert rates[0] == pytest.approx(rates[1], rel=2 * rel)
