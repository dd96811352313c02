"""Recorded histories of delivered pairs and the one batched pass that turns them into states.

The event engines (:mod:`netsim.engine.vector`, :mod:`netsim.engine.des`) decide *when* things
happen; for every delivered end-to-end pair they record, per hop of the chain, which heralded state
the hop contributed and how long each of its two qubits sat in memory. :func:`pair_states` then
computes all delivered states at once with numpy.

Why this is exact
-----------------
Memory noise is a local channel on one qubit; Bell measurements act on other qubits. Local
channels on different qubits commute, so every stored qubit can be brought up to date for its
whole storage time first and the Bell measurements done afterwards, in any order. The Pauli
corrections are kept in a Pauli frame and applied by the end user on delivery, after all swap
outcomes have arrived: this is exactly what chaining :func:`netsim.qinfo.entanglement_swap`
(outcome-averaged, correction on the far qubit) over the decohered link states computes, because a
Pauli applied to a qubit just before it is Bell-measured only relabels that measurement's outcome.
A site's ``gate_error`` q depolarizes the two measured qubits before an ideal Bell measurement
(the convention of :func:`netsim.qinfo.entanglement_swap`: the swapped pair becomes
(1 - q) rho + q rho_A (x) I/2). The fully mixed part on the far qubit is created at the swap; here
it is not damped by that qubit's later T1 decay, which misstates the state by at most
q (1 - exp(-t/T1)) for a far qubit stored a further time t after the swap (a documented
approximation; exact when ``gate_error == 0`` or T1 is infinite).

Attempt dephasing: a qubit stored at a site whose ``attempt_dephasing`` is a has its coherence
multiplied by (1 - a) per entanglement attempt the site starts while the qubit waits (after the
start of the qubit's own successful round, up to its Bell measurement or delivery), i.e.
:func:`netsim.qinfo.dephasing` with p = 1 - (1 - a)^k for k such attempts (Kalb et al., Nat.
Commun. 9, 1089 (2018); Reiserer et al., PRX 6, 021040 (2016)). The engines count k from the
geometric attempt counts they draw (:func:`rounds_between`); dephasing commutes with the memory
decay of the same qubit, so applying it after :func:`netsim.qinfo.decohere` is exact.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from netsim.qinfo import pauli_form
from netsim.engine.chain import Chain

__all__ = ["History", "dephase", "pair_states", "rounds_between"]


@dataclass
class History:
    """What the engine records for each delivered pair of one chain (N pairs, n hops).

    Attributes
    ----------
    delivered_s : array (N,)
        Delivery times: both end users know every herald and swap outcome.
    store_left_s, store_right_s : arrays (N, n)
        Storage time of hop i's qubit at its left and right site before it was Bell-measured
        (inner sites) or delivered (end users), counted from the moment its state was valid.
    state_id : array (N, n) of int
        0: the hop's heralded state; k >= 1: ``extra_states[i][k - 1]`` (a purified pair).
    extra_states : list of n lists of (4, 4) arrays
    attempts_left, attempts_right : arrays (N, n) of int, optional
        Attempts the left (right) site of hop i started while hop i's qubit waited there (for
        ``attempt_dephasing``); None: none counted.
    """

    delivered_s: NDArray[np.float64]
    store_left_s: NDArray[np.float64]
    store_right_s: NDArray[np.float64]
    state_id: NDArray[np.int64]
    extra_states: list[list[NDArray[np.complex128]]] = field(default_factory=list)
    attempts_left: NDArray[np.float64] | None = None
    attempts_right: NDArray[np.float64] | None = None

    def __len__(self) -> int:
        return int(self.delivered_s.shape[0])

    @classmethod
    def empty(cls, n_hops: int) -> History:
        z = np.zeros((0, n_hops))
        return cls(np.zeros(0), z, z.copy(), np.zeros((0, n_hops), dtype=np.int64),
                   [[] for _ in range(n_hops)])


def _hop_forms(chain: Chain, hist: History, i: int) -> NDArray[np.complex128]:
    """Pauli form of hop ``i``'s pair before storage: (4, 4), or (N, 4, 4) when purified pairs
    (``extra_states``) take part."""
    table = [chain.link_states[i]] + list(hist.extra_states[i] if hist.extra_states else [])
    if len(table) == 1:
        return pauli_form.to_pauli(table[0])
    return pauli_form.to_pauli(np.stack(table))[hist.state_id[:, i]]


def pair_states(chain: Chain, hist: History) -> NDArray[np.complex128]:
    """States of all delivered pairs, shape (N, 4, 4), qubit 0 at ``chain.sites[0]``.

    Each hop's state is decohered on qubit 0 with the left site's T1/T2 for ``store_left_s`` and
    on qubit 1 with the right site's for ``store_right_s`` (:func:`netsim.qinfo.decohere`), then
    the hops are swapped left to right with each inner site's gate error
    (:func:`netsim.qinfo.entanglement_swap`); computed in Pauli form
    (:func:`netsim.qinfo.pauli_form.chain_states`, an exact rewrite of those two functions).
    """
    if len(hist) == 0:
        return np.zeros((0, 4, 4), dtype=complex)
    n = chain.n_hops
    gl, cl, gr, cr = pauli_form.chain_decay(
        hist.store_left_s, hist.store_right_s, np.array([float(s.t1_s) for s in chain.sites]),
        np.array([float(s.t2_s) for s in chain.sites]), np.array([float(s.attempt_dephasing) for s in chain.sites]),
        hist.attempts_left, hist.attempts_right)
    forms = [_hop_forms(chain, hist, i) for i in range(n)]
    gate_errors = [float(chain.sites[i].gate_error) for i in range(1, n)]
    return pauli_form.from_pauli(pauli_form.chain_states(forms, gl, cl, gr, cr, gate_errors))


_OFF = {q: np.array([[((r >> (1 - q)) & 1) != ((c >> (1 - q)) & 1) for c in range(4)] for r in range(4)])
        for q in (0, 1)}


def dephase(rho: NDArray[np.complex128], factor: NDArray[np.float64] | float, qubit: int) -> NDArray[np.complex128]:
    """Multiply the coherences of ``qubit`` of two-qubit states (N, 4, 4) by ``factor`` (per state):
    :func:`netsim.qinfo.dephasing` with p = 1 - factor, batched."""
    f = np.asarray(factor, dtype=float).reshape(-1, 1, 1)
    return np.where(_OFF[qubit], rho * f, rho)


def rounds_between(start_s: NDArray[np.float64], period_s: NDArray[np.float64] | float, k: NDArray[np.float64],
                   after_s: NDArray[np.float64] | float, until_s: NDArray[np.float64] | float) -> NDArray[np.float64]:
    """How many of the rounds start + m period (m = 0 .. k - 1) begin in (after, until) (batched).

    Rounds starting at the same time as ``after`` or ``until`` (to 1e-9 of a period) do not count:
    the qubit's own round, and a round started as the qubit is measured or handed over.
    """
    lo = np.maximum(0.0, np.floor((after_s - start_s) / period_s + 1e-9) + 1.0)
    hi = np.minimum(k - 1.0, np.ceil((until_s - start_s) / period_s - 1e-9) - 1.0)
    return np.maximum(0.0, hi - lo + 1.0)
