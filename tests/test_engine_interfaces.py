"""Communication qubits, memory transfer and attempt dephasing in both engines.

Closed forms derived here from the geometric law of attempt counts (mean 1/p, generating function
E[x^K] = p x / (1 - (1 - p) x), E[max(K_1, K_2)] = 2/p - 1/(2p - p^2) for two independent counts:
common practice), the depolarizing convention rho -> (1 - p) rho + p I/2 (Nielsen & Chuang 2010,
Sec. 8.3.4 (memory)) and the per-attempt dephasing of a memory beside an optically active spin
(Kalb et al., Nat. Commun. 9, 1089, 2018; Reiserer et al., PRX 6, 021040, 2016 (memory)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from netsim import qinfo
from netsim.engine import Chain, HopSpec, StopRule, simulate_chain_vector, simulate_des
from netsim.engine.api import simulate
from netsim.engine.chain import synthetic_physics
from netsim.engine.history import dephase
from netsim.errors import ScenarioError
from netsim.qinfo.states import random_density_matrices
from netsim.scenario import load_data
from netsim.scenario.model import Site

Z = 4.5   # wide acceptance for statistical comparisons (z-score; common practice)


#: Stated for the closed forms here: every slot may attempt, no transfer time or error, no gate error and no
#: attempt dephasing unless a test sets them (the built-in defaults are demonstrated NV values).
IDEAL: dict[str, object] = {"communication_qubits": None, "memory_transfer_s": 0.0, "memory_transfer_error": 0.0,
                            "attempt_dephasing": 0.0, "gate_error": 0.0}


def _chain(n_hops: int, p: float, period: float, *, herald: float | None = None, length_km: float = 0.0,
           inner: dict[str, object] | None = None, ends: dict[str, object] | None = None,
           t1: float = math.inf, t2: float = math.inf, state: np.ndarray | None = None,
           prefix: str = "Tarn") -> Chain:
    """An invented line of sites Tarn0 .. Tarn<n> with identical hops."""
    sites = tuple(Site(f"{prefix}{k}", "user" if k in (0, n_hops) else "repeater", t1_s=t1, t2_s=t2,
                       memory_slots=1 if k in (0, n_hops) else 2,
                       **{**IDEAL, **((ends or {}) if k in (0, n_hops) else (inner or {}))})  # type: ignore[arg-type]
                  for k in range(n_hops + 1))
    physics = synthetic_physics(p, period, state, herald_s=herald, length_km=length_km)
    hops = tuple(HopSpec(f"{sites[k].name}-{sites[k + 1].name}", physics) for k in range(n_hops))
    return Chain(f"{prefix}-line", sites, hops)


def _rate(run) -> tuple[float, float]:  # type: ignore[no-untyped-def]
    rate = run.metrics.n / run.simulated_time_s
    return rate, rate * run.rate_relative_halfwidth() / 1.96


def _fidelity(run) -> tuple[float, float]:  # type: ignore[no-untyped-def]
    mean, ci = run.metrics.mean_ci(run.metrics.sum_fidelity, run.metrics.sum_fidelity_sq)
    return mean, (ci[1] - mean) / 1.96


def _both(chain: Chain, pairs: int = 2500) -> list:  # type: ignore[type-arg]
    vec = simulate_chain_vector(chain, StopRule(pairs=4 * pairs), np.random.default_rng(11))
    (des,), _ = simulate_des([chain], StopRule(pairs=pairs), [np.random.default_rng(12)])
    return [vec, des]


P, T, TAU = 0.1, 1e-3, 2e-4


def test_one_interface_at_the_repeater_gives_the_sequential_rate() -> None:
    """Two hops, one communication qubit at the repeater: hop 0 attempts until its pair is heralded
    (h after its successful round) and moved to memory (tau), then hop 1 does the same; the swap
    is immediate on zero-length hops. Cycle = 2 ((1 - p)/p T + h + tau) (derived; geometric mean
    1/p, common practice). With parallel generation the cycle is (E[max(K0, K1)] - 1) T + h + tau."""
    sequential = 1.0 / (2 * ((1 - P) / P * T + T + TAU))
    e_max = 2 / P - 1 / (2 * P - P * P)
    parallel = 1.0 / ((e_max - 1) * T + T + TAU)
    chain = _chain(2, P, T, inner={"communication_qubits": 1, "memory_transfer_s": TAU},
                   ends={"memory_transfer_s": TAU})
    for run in _both(chain):
        rate, se = _rate(run)
        assert abs(rate - sequential) < Z * se, run.engine
        assert abs(rate - parallel) > 10 * se, run.engine
    free = _chain(2, P, T, inner={"communication_qubits": 2, "memory_transfer_s": TAU})
    for run in _both(free):
        rate, se = _rate(run)
        assert abs(rate - parallel) < Z * se, run.engine


def test_memory_transfer_error_depolarizes_each_end() -> None:
    """Phi+ with p_a = 0.1 at one end and p_b = 0.2 at the other: Werner w = (1 - p_a)(1 - p_b) = 0.72,
    F = (1 + 3 w) / 4 = 0.79 (depolarizing convention, Nielsen & Chuang 2010 (memory))."""
    sites = (Site("Ulva", "user", memory_slots=1, t1_s=math.inf, t2_s=math.inf, memory_transfer_error=0.1),
             Site("Vorn", "user", memory_slots=1, t1_s=math.inf, t2_s=math.inf, memory_transfer_error=0.2))
    chain = Chain("Ulva-Vorn", sites, (HopSpec("Ulva-Vorn", synthetic_physics(0.2, 1e-3)),))
    for run in _both(chain, pairs=200):
        fid, _ = _fidelity(run)
        assert fid == pytest.approx(0.79, abs=1e-12), run.engine


def test_attempt_dephasing_with_sequential_generation_closed_form() -> None:
    """With one interface at the repeater, hop 0's qubit there waits through all K1 attempts of hop 1
    and hop 1's qubit through none: the pair's coherence is (1 - a)^K1, F = (1 + (1 - a)^K1) / 2, and
    the mean is (1 + p (1 - a) / (1 - (1 - p)(1 - a))) / 2 (geometric generating function, common
    practice)."""
    a = 0.05
    expected = (1 + P * (1 - a) / (1 - (1 - P) * (1 - a))) / 2
    chain = _chain(2, P, T, inner={"communication_qubits": 1, "attempt_dephasing": a})
    for run in _both(chain):
        fid, se = _fidelity(run)
        assert abs(fid - expected) < Z * se, run.engine
    undisturbed = _chain(2, P, T, inner={"communication_qubits": 1})
    for run in _both(undisturbed, pairs=200):
        assert _fidelity(run)[0] == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("interfaces", [1, None])
def test_vector_engine_matches_event_engine_with_the_new_physics(interfaces: int | None) -> None:
    """Same model, two engines: a 3-hop chain of 25 km hops with herald delay below the period,
    memory decay, transfer time and error, attempt dephasing at the repeaters, and one or
    unlimited communication qubits there (parallel attempts overlap the waiting qubits)."""
    inner: dict[str, object] = {"communication_qubits": interfaces, "memory_transfer_s": 3e-5, "memory_transfer_error": 0.01,
             "attempt_dephasing": 0.004}
    chain = _chain(3, 0.08, 2e-4, herald=1.2e-4, length_km=25.0, inner=inner, t1=0.2, t2=0.05,
                   state=qinfo.werner_state(0.97), ends={"memory_transfer_s": 1e-5})
    vec = simulate_chain_vector(chain, StopRule(pairs=12_000), np.random.default_rng(5))
    (des,), _ = simulate_des([chain], StopRule(pairs=2_000), [np.random.default_rng(6)])
    for measure in (_rate, _fidelity):
        (v, sv), (d, sd) = measure(vec), measure(des)
        assert abs(v - d) < Z * math.hypot(sv, sd), measure.__name__


def test_a_shared_interface_is_never_used_by_two_hops_at_once() -> None:
    """Two demands through one hub with a single communication qubit (and slots for both): its four
    hops take turns, so their summed attempt time never exceeds the simulated time (one interface
    attempts one link at a time: the brief's definition). Without the limit they overlap."""
    def hub_chains(interfaces: int | None) -> list[Chain]:
        hub = Site("Wexcombe Hub", "repeater", memory_slots=4, t1_s=math.inf, t2_s=math.inf,
                   communication_qubits=interfaces)
        ends = [Site(n, "user", memory_slots=1, t1_s=math.inf, t2_s=math.inf)
                for n in ("Alder", "Brae", "Cove", "Dale")]
        hop = synthetic_physics(0.05, 1e-3)
        return [Chain("Alder-Cove", (ends[0], hub, ends[2]),
                      (HopSpec("Alder-Hub", hop, ("f0",)), HopSpec("Hub-Cove", hop, ("f2",))), index=0),
                Chain("Brae-Dale", (ends[1], hub, ends[3]),
                      (HopSpec("Brae-Hub", hop, ("f1",)), HopSpec("Hub-Dale", hop, ("f3",))), index=1)]

    def busy_fraction(interfaces: int | None) -> float:
        runs = simulate(hub_chains(interfaces), rule=StopRule(pairs=800), seed=3)
        horizon = max(r.simulated_time_s for r in runs)
        return sum(float(r.hop_busy_s.sum()) for r in runs) / horizon

    assert busy_fraction(1) <= 1.0 + 1e-9
    assert busy_fraction(None) > 1.5


def test_dephase_equals_the_dephasing_channel() -> None:
    """The batched helper is qinfo.dephasing(p) with p = 1 - factor on the named qubit (phase
    damping multiplies coherences by 1 - p: Nielsen & Chuang 2010, Sec. 8.3.6 (memory))."""
    rho = random_density_matrices(3, 4, seed=1)
    factors = np.array([1.0, 0.7, 0.0])
    for qubit in (0, 1):
        out = dephase(rho, factors, qubit)
        for k, f in enumerate(factors):
            np.testing.assert_allclose(out[k], qinfo.dephasing(1 - f).apply(rho[k], qubit=qubit), atol=1e-12)


@pytest.mark.parametrize(("where", "key", "value", "allowed"), [
    ("sites", "communication_qubits", 0, "an integer in [1, 100000]"),
    ("sites", "memory_transfer_error", 1.5, "a number in [0, 1]"),
    ("sites", "photon_indistinguishability", -0.1, "a number in [0, 1]"),
    ("sites", "attempt_dephasing", 2, "a number in [0, 1]"),
    ("sites", "memory_transfer_s", -1e-3, "a number >= 0 (s)"),
    ("links", "phase_noise_rad", -0.2, "a number in [0, 10] (rad)"),
])
def test_bad_values_get_one_line_errors(where: str, key: str, value: object, allowed: str) -> None:
    """Each new key refuses values outside its range with a message naming the key, the value and
    what is allowed (the scenario reference's ranges)."""
    data: dict[str, object] = {
        "network": {"name": "Yarrow pair"},
        "sites": [{"name": "Yarrow", "role": "user"}, {"name": "Zeal", "role": "user"}],
        "links": [{"ends": ["Yarrow", "Zeal"], "length_km": 5.0}],
        "demands": [{"users": ["Yarrow", "Zeal"]}],
    }
    data[where][0][key] = value  # type: ignore[index]
    with pytest.raises(ScenarioError) as err:
        load_data(data)
    message = str(err.value)
    assert f"{where}[0].{key}" in message and allowed in message and "\n" not in message.strip()


def test_a_lone_chain_with_one_interface_stays_on_the_vectorised_engine() -> None:
    """netsim run on an invented two-hop chain: with one communication qubit at the repeater the
    demand still runs on the fast path, and delivers more slowly than with two (sequential vs
    parallel generation, closed forms above)."""
    from netsim.engine import run

    def scenario(interfaces: int) -> object:
        return load_data({
            "network": {"name": "Ashby line"},
            "sites": [{"name": "Ashby", "role": "user"},
                      {"name": "Bramble Relay", "role": "repeater", "communication_qubits": interfaces,
                       "memory_transfer_s": 1e-4, "attempt_dephasing": 1e-3},
                      {"name": "Crane", "role": "user"}],
            "links": [{"ends": ["Ashby", "Bramble Relay"], "length_km": 10.0},
                      {"ends": ["Bramble Relay", "Crane"], "length_km": 10.0}],
            "demands": [{"users": ["Ashby", "Crane"], "pairs": 3000}],
        })

    one, two = (run(scenario(k), seed=4, ensembles=False).demands[0] for k in (1, 2))  # type: ignore[arg-type]
    assert one["engine"] == "vector" and two["engine"] == "vector"
    assert one["rate_ci95"][1] < two["rate_ci95"][0]


def test_budget_expected_fidelity_counts_transfer_errors() -> None:
    """The closed-form budget: a transfer error p depolarizes one qubit of a (twirled) Werner hop
    pair, multiplying its Werner parameter by 1 - p (depolarizing convention, Nielsen & Chuang 2010
    (memory)); two users with p = 0.02 and a repeater with p = 0.05 on both of its qubits give
    w' = w 0.98^2 0.95^2, F = (1 + 3 w') / 4. The memories dephase only (T1 = 1e12 s): the transfer
    error acts on the heralded pair before the memories' decay, as in the engine, and only pure
    dephasing commutes with it (with T1 the order is checked against the engine's own state in
    tests/test_network_estimate.py)."""
    from netsim.network import budget

    def scenario(user_p: float, relay_p: float) -> object:
        return load_data({
            "network": {"name": "Ashby line"},
            "sites": [{"name": "Ashby", "role": "user", "memory_transfer_error": user_p, "t1_s": 1e12},
                      {"name": "Bramble Relay", "role": "repeater", "memory_transfer_error": relay_p, "t1_s": 1e12},
                      {"name": "Crane", "role": "user", "memory_transfer_error": user_p, "t1_s": 1e12}],
            "links": [{"ends": ["Ashby", "Bramble Relay"], "length_km": 10.0},
                      {"ends": ["Bramble Relay", "Crane"], "length_km": 10.0}],
            "demands": [{"users": ["Ashby", "Crane"]}],
        })

    clean = budget(scenario(0.0, 0.0)).demands[0]["expected_fidelity"]  # type: ignore[arg-type]
    noisy = budget(scenario(0.02, 0.05)).demands[0]["expected_fidelity"]  # type: ignore[arg-type]
    w = (4 * clean - 1) / 3
    assert noisy == pytest.approx((1 + 3 * w * 0.98**2 * 0.95**2) / 4, abs=1e-12)


def test_pruning_the_attempt_log_changes_nothing(monkeypatch: pytest.MonkeyPatch) -> None:
    """The event engine forgets attempt sequences older than every stored qubit; pruning after every
    few deliveries must give exactly the numbers of a run that keeps them all (same seed). Two
    demands share a dephasing hub, so one flushes while the other holds qubits there, and
    purification stacks hold qubits too (invariant of the implementation). The patches need the
    plain-Python engine: a compiled module reads its own constants and methods."""
    from netsim.engine import DesOptions
    from netsim.engine.build import plain_engine

    des_module = plain_engine()

    def site(name: str, role: str) -> Site:
        return Site(name, role, memory_slots=8 if role == "repeater" else 2, t1_s=1.0, t2_s=0.5,  # type: ignore[arg-type]
                    attempt_dephasing=0.01)

    hub, ends = site("Fenwick Hub", "repeater"), [site(n, "user") for n in ("Gale", "Holm", "Irby", "Jessop")]
    hop = synthetic_physics(0.1, 1e-4, qinfo.werner_state(0.9))
    chains = [Chain("Gale-Irby", (ends[0], hub, ends[2]), (HopSpec("g", hop), HopSpec("i", hop)), index=0),
              Chain("Holm-Jessop", (ends[1], hub, ends[3]), (HopSpec("h", hop), HopSpec("j", hop)), index=1)]
    options = DesOptions(purification="bbpssw", purification_rounds=1)

    def fidelity_sums() -> list[float]:
        runs, _ = des_module.simulate_des(chains, StopRule(pairs=100),
                                          [np.random.default_rng(9), np.random.default_rng(10)], options)
        return [float(r.metrics.sum_fidelity) for r in runs]

    kept = fidelity_sums()
    sizes: list[int] = []
    original = des_module._Des.prune_sequences

    def spy(self: des_module._Des) -> None:
        original(self)
        sizes.append(sum(len(v) for v in self.sequences.values()))

    monkeypatch.setattr(des_module, "FLUSH_ROWS", 5)
    monkeypatch.setattr(des_module, "PRUNE_SEQUENCES", 10)
    monkeypatch.setattr(des_module, "ROW_STAGE", 4)  # the pruning reads staged starts too
    monkeypatch.setattr(des_module._Des, "prune_sequences", spy)
    assert fidelity_sums() == pytest.approx(kept, rel=1e-12)
    assert sizes and max(sizes) < 300        # without pruning the log ends with about 1900 sequences
