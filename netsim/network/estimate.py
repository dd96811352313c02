"""Planning expectation of one route: delivered rate and fidelity with memory decay and cut-off.

:func:`estimate_route` is the one planning estimate of a route that the budget, ``netsim check``
(warnings and advice), the design command and the ``highest_rate`` routing policy use. It
follows the engine's timeline of one end-to-end cycle under swap-as-soon-as-possible. Without a
cut-off (``[protocol] cutoff_s`` unset) it is in closed form and replaces every random time by
its expectation (below). With a cut-off and two hops or more it is NOT in closed form: the
timeline is sampled (section "With a cut-off").

The timeline (derived here for the model the engine runs)
---------------------------------------------------------
Hop i (of n) succeeds after K_i ~ Geometric(q_i) attempt rounds of period T_i; its pair is valid
from the start of the successful round, b_i = (K_i - 1) T_i, and both ends learn of it at
H_i = b_i + h_i (h_i the herald delay). An inner site j between hops j - 1 and j Bell-measures
its two qubits as soon as it knows both pairs: s_j = max(H_{j-1}, H_j). The end users hold their
qubits until the pair is delivered, when every herald and swap outcome has reached them:
t_D = max(H_0, H_{n-1}, max_j (s_j + d_j)), with d_j the classical signalling time from site j
to the farther end. So the storage times are

- hop i's qubit at an inner site: s_j - b_i (j = i or i + 1), with
  E[s_j] = E[max(H_{j-1}, H_j)];
- an end user's qubit: t_D - b_0 (or t_D - b_{n-1}), with E[t_D] <= E[max_i H_i] + max_j d_j
  (the bound is used; it is exact for two hops);
- one hop alone: both qubits h_0 (stored from the start of the round to the herald).

The expected maxima come from :func:`netsim.network.bounds.expected_wait_s` (the waiting time of
Shchukin, Schmidt & van Loock, PRA 100, 032322 (2019): E[max_i K_i T] for hops on one clock):
E[max_{i in S} H_i] ~= expected_wait_s(S) - max_S T_i + max_S h_i, exact for equal periods and
herald delays. E[b_i] = T_i (1/q_i - 1).

The fidelity: each hop's heralded state, with each end's memory transfer error (depolarizing)
applied to it as the engine does, is decohered at each of its two sites for that qubit's
expected storage time (amplitude damping with T1 and total coherence exp(-t/T2),
:func:`netsim.qinfo.decohere`), and the hops are swapped left to right with each inner site's
gate error (:func:`netsim.qinfo.entanglement_swap`). This is the engine's own state computation
with the storage times replaced by their means; the treatment of storage times as the decay
clock of a swapped chain follows Brand, Coopmans & Elkouss, IEEE JSAC 38, 619 (2020), where the
delivered fidelity of a swap-asap chain is a function of the summed storage times. Replacing the
random times by their means understates the fidelity (exp(-t/T2) is convex, so
E[exp(-t/T2)] >= exp(-E[t]/T2), Jensen's inequality): the estimate is conservative, by a term
second order in t/T2 (on the bundled mesh with T2 = 0.2 s, 0.005 below the simulated mean; with
T2 = 0.05 s, 0.03 below).

With a cut-off
--------------
A run of joined pairs that does not yet span the route is discarded once its oldest pair is
``cutoff_s`` old, and its hops start again: the rate falls and the pairs stored longest are
removed, so the closed form above (which keeps every pair) would be optimistic in rate and
conservative in fidelity -- by 0.12 on the bundled chain, whose cut-off is half of T2. No closed
form of the cycle time with discards is at hand for three hops or more (for the waiting time with a
cut-off see Kamin, Shchukin, Schmidt & van Loock, PRR 5, 023086 (2023), and for waiting time and
fidelity of swap-asap with cut-offs computed by iterating distributions, Brand, Coopmans &
Elkouss, IEEE JSAC 38, 619 (2020), both (memory)). So :mod:`netsim.network.cutoff` samples the
engine's rules -- turns at a site with one communication qubit, memory transfer time, the
cut-off clock from the start of each pair's round, discards and restarts, failing swaps -- for
1200 cycles at once with numpy and a fixed seed (the same inputs always give the same figures),
and the estimate takes from the sample:

- rate: one over the mean sampled cycle time;
- state: the delivered state is multilinear in the hop states and each hop state is linear in
  its memory channel, so the mean delivered state is the mean over the sampled cycles of the
  hops' states decohered for that cycle's storage times (and dephased for the attempts the
  neighbouring hop starts at the same site meanwhile, ``attempt_dephasing``) and swapped
  (computed in Pauli form: a swap keeps of the later pair only its <XX>, <YY>, <ZZ>). This is exact
  for the sampled times: no mean-time (Jensen) error, only sampling error, about 0.003 in
  fidelity and 3 % in rate.

Measured against the event engine: within 0.003 of the simulated mean fidelity and 2-5 % (low)
in rate for each demand of the bundled chain and mesh alone; within 0.005 and 1-6 % (low) on 2-
to 4-hop chains with cut-off/T2 from 0.1 to 3.3 (tests/test_network_cutoff.py). One hop is delivered
at its herald and the cut-off never acts on it. Left out: the message time before a failed
swap frees the far ends (a few 10 us in a metro network) and the carry of at most one attempt
period from one cycle to the next (each sampled cycle starts afresh). The sample does not depend on T1/T2, so it is cached: a
scan over coherence (``netsim check`` advice) samples once.
Where a delivery needs more than ``MAX_SAMPLED_LINK_PAIRS`` link pairs
(:func:`netsim.network.workload.route_work`: tries the cut-off discards, failing swaps), the
sampler would step through every discarded try of every cycle; it is skipped, the rate is that
order-of-magnitude figure and the fidelity is left unknown (NaN). A route on which the cut-off
discards every pair is refused before any estimate (:func:`netsim.network.workload.cutoff_problems`).

Not modelled: purification, contention with other demands; without a cut-off also failed Bell
measurements beyond the rate factor prod_j p_BSM, turns at shared communication qubits, memory
transfer time and attempt dephasing.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import networkx as nx
import numpy as np

from netsim.errors import ParameterError, probability
from netsim.hardware.fibre import propagation_delay_s
from netsim.network.bounds import expected_delivery_s, expected_wait_s
from netsim.network.cutoff import sample_cycles
from netsim.network.routing import Hop, register_policy, route_hops
from netsim.network.workload import route_work
from netsim.qinfo.channels import decoherence_factors
from netsim.qinfo.pauli_form import chain_decay, chain_mean, chain_states, from_pauli, to_pauli
from netsim.qinfo.states import phi_plus_fidelity
from netsim.scenario.model import Site

#: Above this many link pairs per delivered pair (:func:`netsim.network.workload.route_work`)
#: the cut-off timeline is not sampled: the rate is then that order of magnitude, the
#: fidelity unknown (NaN).
MAX_SAMPLED_LINK_PAIRS = 2000.0
#: :func:`estimate_hops` keeps its results by what they are computed from (:func:`_estimate_key`):
#: a metro's demands often run over chains of the same hops and sites (on a generated 10x10 grid,
#: 100 demands over 41 distinct chains), and each is then estimated once. Emptied when it holds
#: this many.
ESTIMATES_KEPT = 4096
_ESTIMATES: dict[tuple[object, ...], RouteEstimate] = {}

__all__ = ["MAX_SAMPLED_LINK_PAIRS", "HighestRate", "RouteEstimate", "cutoff_scan_point", "estimate_hops", "estimate_route", "expected_storage_s"]


# The chain's states are computed in Pauli form (netsim.qinfo.pauli_form: an exact rewrite of
# decohere / depolarizing / entanglement_swap of netsim.qinfo, the same arithmetic the event
# engine's history pass uses); memory transfer error (depolarizing p) scales a qubit's Pauli
# components by 1 - p.


def _all_decay_factors(sites: Sequence[Site], left_s: np.ndarray, right_s: np.ndarray,
                       attempts_left: np.ndarray | None = None,
                       attempts_right: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(gamma, coherence) of every hop's left and right memory after ``left_s``, ``right_s`` (N, n)
    at once (:func:`netsim.qinfo.pauli_form.chain_decay`, with the sites' attempt dephasing when
    attempt counts are given), with qinfo.decohere's checks (once per site and per array of times)."""
    for t1, t2 in {(site.t1_s, site.t2_s) for site in sites}:
        decoherence_factors(0.0, t1, t2)
    for times in (left_s, right_s):
        bad = ~((times >= 0) & np.isfinite(times))
        if bad.any():
            raise ParameterError("t_s", float(times[bad].flat[0]), "a finite time >= 0 in seconds")
    return chain_decay(left_s, right_s, np.array([float(s.t1_s) for s in sites]), np.array([float(s.t2_s) for s in sites]),
                       np.array([float(s.attempt_dephasing) for s in sites]), attempts_left, attempts_right)


def _depolarized(r: np.ndarray, site: Site, qubit: int) -> np.ndarray:
    """The memory transfer error of ``site`` (depolarizing) on ``qubit`` of Pauli form ``r`` (4, 4)."""
    p = probability("memory_transfer_error", float(site.memory_transfer_error))
    if p <= 0:
        return r
    scale = np.array([1.0, 1.0 - p, 1.0 - p, 1.0 - p])
    return r * scale[:, None] if qubit == 0 else r * scale[None, :]


@dataclass(frozen=True)
class RouteEstimate:
    """The planning expectation of one route (see the module docstring).

    Attributes
    ----------
    rate_per_s : float
        Expected delivered pairs per second: one over the expected delivery time, a failed Bell
        measurement losing both segments it joins (exact Markov chain of
        :func:`netsim.network.bounds.expected_delivery_s`); beyond the hops that method takes,
        the approximation prod_j p_BSM / E[max_i K_i T_i] (``rate_exact`` False).
    fidelity : float
        Expected fidelity to Phi+ with memory decay over the expected storage times.
    fidelity_no_decay : float
        The same with every storage time zero.
    wait_s : float
        E[max_i K_i T_i], the expected time until every hop holds a pair.
    storage_s : tuple of (float, float)
        Per hop, the expected storage time of its qubit at its left and at its right site.
    state : numpy array (4, 4)
        The delivered state of the estimate (qubit 0 at the route's first site).
    rate_exact : bool
        False where the rate is the approximation beyond the exact Markov chain.
    sampled : bool
        True where a cut-off acts (two hops or more): rate, storage times and state then come
        from the seeded timeline sampler of :mod:`netsim.network.cutoff` (module docstring).
    """

    rate_per_s: float
    fidelity: float
    fidelity_no_decay: float
    wait_s: float
    storage_s: tuple[tuple[float, float], ...]
    state: np.ndarray
    rate_exact: bool = True
    sampled: bool = False

    def __iter__(self):  # type: ignore[no-untyped-def]
        """``rate, fidelity = estimate_route(...)`` unpacks the two headline figures."""
        return iter((self.rate_per_s, self.fidelity))


def _max_herald_s(q: Sequence[float], period: Sequence[float], herald: Sequence[float]) -> float:
    """E[max_i H_i] for the hops given (module docstring)."""
    return expected_wait_s(list(q), list(period)) - max(period) + max(herald)


def expected_storage_s(q: Sequence[float], period_s: Sequence[float], herald_s: Sequence[float],
                       tell_s: Sequence[float] = ()) -> list[tuple[float, float]]:
    """Expected storage time of each hop's left and right qubit under swap-asap (module docstring).

    Parameters
    ----------
    q, period_s, herald_s : sequences of length n
        Per hop: success probability per attempt round, attempt period and herald delay.
    tell_s : sequence of length n - 1
        Per inner site: classical signalling time to the farther end user.
    """
    n = len(q)
    if not (len(period_s) == len(herald_s) == n and len(tell_s) == max(n - 1, 0)):
        raise ParameterError("hops", n, "equal numbers of probabilities, periods and herald delays, and n - 1 tell times")
    if n == 1:
        return [(float(herald_s[0]), float(herald_s[0]))]
    born = [t * (1.0 / p - 1.0) for p, t in zip(q, period_s)]
    swap = [_max_herald_s(q[j - 1:j + 1], period_s[j - 1:j + 1], herald_s[j - 1:j + 1]) for j in range(1, n)]
    delivered = _max_herald_s(q, period_s, herald_s) + max(tell_s)
    out = []
    for i in range(n):
        left_end = delivered if i == 0 else swap[i - 1]
        right_end = delivered if i == n - 1 else swap[i]
        out.append((max(left_end - born[i], 0.0), max(right_end - born[i], 0.0)))
    return out


def graph_cutoff_s(graph: nx.Graph) -> float | None:
    """The ``[protocol] cutoff_s`` of the scenario ``graph`` was built from (None: no cut-off)."""
    scenario = graph.graph.get("scenario")
    protocol = getattr(scenario, "protocol", None)
    cutoff = getattr(protocol, "cutoff_s", None)
    return None if cutoff is None else float(cutoff)


def estimate_hops(graph: nx.Graph, hops: Sequence[Hop], sites: Sequence[Site] | None = None, *,
                  cutoff_s: float | None | Literal["scenario"] = "scenario") -> RouteEstimate:
    """:func:`estimate_route` for a route already split into heralded hops.

    ``sites`` (the ``len(hops) + 1`` memory sites in route order) replaces the graph's sites, to
    ask what other memories would give. ``cutoff_s`` is the protocol's cut-off; by default the
    one of the scenario the graph was built from (:func:`graph_cutoff_s`); None for none.
    """
    if sites is None:
        sites = [graph.nodes[h.a]["site"] for h in hops] + [graph.nodes[hops[-1].b]["site"]]
    cutoff = graph_cutoff_s(graph) if cutoff_s == "scenario" else cutoff_s
    key = _estimate_key(hops, sites, cutoff)
    known = _ESTIMATES.get(key)
    if known is None:
        if len(_ESTIMATES) >= ESTIMATES_KEPT:
            _ESTIMATES.clear()
        known = _ESTIMATES[key] = _estimate(hops, sites, cutoff)
        known.state.setflags(write=False)  # shared by every caller with the same key
    return known


def _estimate_key(hops: Sequence[Hop], sites: Sequence[Site], cutoff: float | None) -> tuple[object, ...]:
    """Everything :func:`_estimate` reads of ``hops``, ``sites`` and the cut-off (a test changes
    every field of the sites and the hops' physics and requires a changed estimate to change the
    key): the hops' light-path physics and the sites' memory and node figures, not their names."""
    return (cutoff,
            tuple((p.round_success_probability, p.attempt_period_s, p.herald_delay_s, p.length_km,
                   p.state.shape, p.state.tobytes()) for p in (h.physics for h in hops)),
            tuple((s.t1_s, s.t2_s, s.attempt_dephasing, s.gate_error, s.memory_transfer_error,
                   s.memory_transfer_s, s.communication_qubits, s.bsm_success_probability) for s in sites))


def _estimate(hops: Sequence[Hop], sites: Sequence[Site], cutoff: float | None) -> RouteEstimate:
    """:func:`estimate_hops`, computed."""
    q = [h.physics.round_success_probability for h in hops]
    period = [h.physics.attempt_period_s for h in hops]
    herald = [h.physics.herald_delay_s for h in hops]
    position = np.concatenate([[0.0], np.cumsum([propagation_delay_s(h.physics.length_km) for h in hops])])
    tell = [max(position[j] - position[0], position[-1] - position[j]) for j in range(1, len(hops))]
    wait = expected_wait_s(q, period)
    swaps = [s.bsm_success_probability for s in sites[1:-1]]
    if cutoff is not None and len(hops) > 1:
        return _with_cutoff(hops, sites, cutoff, q, period, tell, wait)
    exact = True
    try:
        deliver = expected_delivery_s(q, period, swaps)
        rate = 1.0 / deliver if deliver > 0 and math.isfinite(deliver) else 0.0
    except ValueError:  # too many hops with fallible swaps for the exact chain
        exact = False
        rate = math.prod(swaps) / wait if wait > 0 and math.isfinite(wait) else 0.0
    if not math.isfinite(wait):
        storage = [(math.inf, math.inf)] * len(hops)
    else:
        storage = expected_storage_s(q, period, herald, tell)
    fid0 = _fidelity(_delivered(hops, sites, [(0.0, 0.0)] * len(hops)))
    if math.isfinite(wait):
        state = _delivered(hops, sites, storage)
        fid = _fidelity(state)
    else:
        state, fid = np.full((4, 4), np.nan, dtype=complex), math.nan
    return RouteEstimate(rate, fid, fid0, wait, tuple(storage), state, exact)


def _with_cutoff(hops: Sequence[Hop], sites: Sequence[Site], cutoff_s: float, q: list[float],
                 period: list[float], tell: list[float], wait: float) -> RouteEstimate:
    """The estimate with a cut-off: the timeline sampled (:mod:`netsim.network.cutoff`), the
    mean delivered state over the sampled storage times in closed form."""
    ready = [h.physics.herald_delay_s + max(sites[i].memory_transfer_s, sites[i + 1].memory_transfer_s)
             for i, h in enumerate(hops)]
    shared = [s.communication_qubits == 1 for s in sites[1:-1]]
    swaps = [s.bsm_success_probability for s in sites[1:-1]]
    work = route_work(q, period, ready, swaps, cutoff_s, shared)
    if work.link_pairs > MAX_SAMPLED_LINK_PAIRS:
        # the sampler would step through every discarded try of 1200 cycles: far too long for
        # a planning figure; the rate is the order of magnitude of netsim.network.workload
        nan_state = np.full((4, 4), np.nan, dtype=complex)
        fid0 = _fidelity(_delivered(hops, sites, [(0.0, 0.0)] * len(hops)))
        return RouteEstimate(1.0 / work.seconds, math.nan, fid0, wait, ((math.inf, math.inf),) * len(hops),
                             nan_state, True, False)
    sample = sample_cycles(tuple(q), tuple(period), tuple(ready), tuple(tell), cutoff_s, tuple(shared), tuple(swaps))
    if sample is None:
        nan_state = np.full((4, 4), np.nan, dtype=complex)
        fid0 = _fidelity(_delivered(hops, sites, [(0.0, 0.0)] * len(hops)))
        return RouteEstimate(0.0, math.nan, fid0, wait, ((math.inf, math.inf),) * len(hops), nan_state, True, True)
    # the sampled cycles and, as one more row with nothing stored, the no-decay state: one pass
    # for the decay factors, then the mean of the cycles and the state of that row
    fresh = np.zeros((1, len(hops)))
    forms, gl, cl, gr, cr, gates = _chain_parts(hops, sites, *(np.concatenate([times, fresh]) for times in (
        sample.store_left_s, sample.store_right_s, sample.attempts_left, sample.attempts_right)))
    state = from_pauli(chain_mean(forms, gl[:-1], cl[:-1], gr[:-1], cr[:-1], gates))
    fid0 = _fidelity(from_pauli(chain_states(forms, gl[-1:], cl[-1:], gr[-1:], cr[-1:], gates)[0]))
    storage = tuple((float(a), float(b)) for a, b in zip(sample.store_left_s.mean(axis=0),
                                                         sample.store_right_s.mean(axis=0)))
    rate = 1.0 / float(sample.delivered_s.mean())
    return RouteEstimate(rate, _fidelity(state), fid0, wait, storage, state, True, True)


def estimate_route(graph: nx.Graph, route: Sequence[str]) -> RouteEstimate:
    """Expected delivered rate and fidelity (memory decay, the scenario's cut-off) of ``route`` under swap-asap.

    ``graph`` from :func:`netsim.network.build_graph`; ``route`` site names, switches included.
    ``rate, fidelity = estimate_route(graph, route)`` unpacks the headline figures; the
    returned :class:`RouteEstimate` holds the rest. Derivation and what is not modelled: module
    docstring of :mod:`netsim.network.estimate`.
    """
    return estimate_hops(graph, route_hops(graph, route))


def _delivered(hops: Sequence[Hop], sites: Sequence[Site], storage: Sequence[tuple[float, float]]) -> np.ndarray:
    """The delivered state for fixed storage times: :func:`_mean_delivered` for one cycle with
    those times. As in the engine, each end's memory transfer error acts on the heralded state
    and the memories' decay (qinfo.decohere) after it; then the swaps, with each inner site's gate
    error (qinfo.entanglement_swap). No attempt dephasing: the attempts are not sampled here."""
    return _mean_delivered(hops, sites, np.array([[s[0] for s in storage]], dtype=float),
                           np.array([[s[1] for s in storage]], dtype=float), None, None)


def _gate_error(site: Site) -> float:
    return probability("gate_error", float(site.gate_error))


def cutoff_scan_point(graph: nx.Graph, hops: Sequence[Hop], cutoff_s: float,
                      min_fidelity: float) -> tuple[float, float, float] | None:
    """(rate per s, useful rate per s, mean fidelity) of a route of two hops or more at cut-off
    ``cutoff_s``, from the sampled timeline (:mod:`netsim.network.cutoff`): each sampled cycle's
    delivered state is computed from its own storage times, and a cycle counts as useful when its
    own fidelity reaches ``min_fidelity`` (as a simulated pair does). None when nothing can be
    delivered at that cut-off."""
    sites = [graph.nodes[h.a]["site"] for h in hops] + [graph.nodes[hops[-1].b]["site"]]
    q = [h.physics.round_success_probability for h in hops]
    period = [h.physics.attempt_period_s for h in hops]
    position = np.concatenate([[0.0], np.cumsum([propagation_delay_s(h.physics.length_km) for h in hops])])
    tell = [max(position[j] - position[0], position[-1] - position[j]) for j in range(1, len(hops))]
    ready = [h.physics.herald_delay_s + max(sites[i].memory_transfer_s, sites[i + 1].memory_transfer_s)
             for i, h in enumerate(hops)]
    shared = [s.communication_qubits == 1 for s in sites[1:-1]]
    swaps = [s.bsm_success_probability for s in sites[1:-1]]
    sample = sample_cycles(tuple(q), tuple(period), tuple(ready), tuple(tell), cutoff_s, tuple(shared), tuple(swaps))
    if sample is None:
        return None
    states = _mean_delivered(hops, sites, sample.store_left_s, sample.store_right_s, sample.attempts_left,
                             sample.attempts_right, per_cycle=True)
    fid = phi_plus_fidelity(states)
    rate = 1.0 / float(sample.delivered_s.mean())
    return rate, rate * float(np.mean(fid >= min_fidelity)), float(fid.mean())


def _mean_delivered(hops: Sequence[Hop], sites: Sequence[Site], left_s: np.ndarray, right_s: np.ndarray,
                    attempts_left: np.ndarray | None, attempts_right: np.ndarray | None,
                    per_cycle: bool = False) -> np.ndarray:
    """Mean delivered state over sampled storage times ``left_s``, ``right_s`` (N, n).

    As the engine does, each end's memory transfer error is applied to the heralded state before
    the decay (exact for pure dephasing), and a site's ``attempt_dephasing`` d multiplies a
    stored qubit's coherences by (1 - d)^a for the a attempts its neighbour starts there while
    it waits; the mean is then over the swapped per-cycle states (in Pauli form, above: the
    first hop's decayed pair with its columns scaled by the later hops' kept correlations).
    ``per_cycle``: return the (N, 4, 4) delivered states of the sampled cycles instead of their mean.
    """
    forms, gamma_l, coh_l, gamma_r, coh_r, gates = _chain_parts(hops, sites, left_s, right_s, attempts_left,
                                                                attempts_right)
    if per_cycle:
        return from_pauli(chain_states(forms, gamma_l, coh_l, gamma_r, coh_r, gates))
    # the mean form in closed form from a few weighted means (no (N, 4, 4) forms)
    return from_pauli(chain_mean(forms, gamma_l, coh_l, gamma_r, coh_r, gates))


def _chain_parts(hops: Sequence[Hop], sites: Sequence[Site], left_s: np.ndarray, right_s: np.ndarray,
                 attempts_left: np.ndarray | None, attempts_right: np.ndarray | None,
                 ) -> tuple[list[np.ndarray], np.ndarray, np.ndarray, np.ndarray, np.ndarray, list[float]]:
    """What :func:`netsim.qinfo.pauli_form.chain_states` and ``chain_mean`` take for the storage
    times (N, n) of :func:`_mean_delivered`: the hops' heralded pairs in Pauli form with each
    end's memory transfer error, the memories' decay factors, the inner sites' gate errors."""
    gamma_l, coh_l, gamma_r, coh_r = _all_decay_factors(sites, left_s, right_s, attempts_left, attempts_right)
    forms = [_depolarized(_depolarized(to_pauli(hop.physics.state), sites[i], 0), sites[i + 1], 1)
             for i, hop in enumerate(hops)]
    return forms, gamma_l, coh_l, gamma_r, coh_r, [_gate_error(site) for site in sites[1:-1]]


def _fidelity(state: np.ndarray) -> float:
    return float(phi_plus_fidelity(state))


class HighestRate:
    """The route with the highest expected delivered rate (:func:`estimate_route`).

    Candidates are the ``candidates`` routes of least loss in dB (Yen's k-shortest simple paths,
    as networkx gives them); the one with the highest closed-form rate wins, ties to the smaller
    loss. A full search over every simple path grows exponentially with the mesh.
    """

    name = "highest_rate"

    def __init__(self, candidates: int = 16) -> None:
        self.candidates = candidates

    def route(self, graph: nx.Graph, a: str, b: str) -> list[str]:
        best: tuple[float, list[str]] | None = None
        for path in itertools.islice(nx.shortest_simple_paths(graph, a, b, weight="loss_db"), self.candidates):
            try:
                hops = route_hops(graph, path)
                rate = estimate_hops(graph, hops).rate_per_s
            except ParameterError:
                continue
            if best is None or rate > best[0]:
                best = (rate, [str(n) for n in path])
        if best is None:
            raise nx.NetworkXNoPath(f"no route between {a} and {b}")
        return best[1]


register_policy(HighestRate())
