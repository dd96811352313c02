"""The objects the engine runs on: a demand's chain of heralded hops between memory sites.

A :class:`Chain` is one demand seen by the engine: the memory sites along its route
(``sites[0]`` and ``sites[-1]`` are the two end users, the others repeaters) and one
:class:`HopSpec` per heralded hop between consecutive memory sites. Passive switches are already
folded into the hops by the network layer. The engine never parses files: tests and benchmarks
build chains directly (see :func:`synthetic_physics`), and :mod:`netsim.engine.api` builds them
from a scenario.

Conventions: times in seconds, lengths in km. Classical messages (heralds, swap outcomes,
purification outcomes) travel at c / 1.468 along the hops (:func:`netsim.hardware.fibre.propagation_delay_s`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from netsim.errors import ParameterError, probability
from netsim.hardware.fibre import propagation_delay_s
from netsim.hardware.types import LinkPhysics
from netsim.scenario.model import Site

__all__ = ["Chain", "HopSpec", "line_chain", "synthetic_physics"]


@dataclass(frozen=True, eq=False)
class HopSpec:
    """One heralded hop between consecutive memory sites of a chain.

    Attributes
    ----------
    name : str
        Display name, e.g. ``"Ashford-Brill"`` (site names of its two ends).
    physics : LinkPhysics
        What the hop delivers per attempt round; qubit 0 of ``physics.state`` sits at the hop's
        left site (nearer ``Chain.sites[0]``).
    links : tuple of str
        Names of the fibre links the hop's light path uses (for per-link statistics).
    """

    name: str
    physics: LinkPhysics
    links: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class Chain:
    """A demand as the engine sees it: memory sites and the hops between them.

    Attributes
    ----------
    name : str
        The demand's name (``"A-B"``).
    sites : tuple of Site
        The ``len(hops) + 1`` memory sites in route order; ``sites[0]`` and ``sites[-1]`` are the
        end users, the inner ones swap.
    hops : tuple of HopSpec
    index : int
        Position of the demand in the scenario (for error messages and ordering).
    pairs : int or None
        Pairs the demand asks for (used when the run has no explicit stop rule).
    duration_s : float or None
        Simulated time the demand asks for.
    min_fidelity : float
        A delivered pair whose own fidelity reaches this is useful (0: every pair).
    route : tuple of str
        The demand's route as site names, passive switches included (empty: ``sites``).
    """

    name: str
    sites: tuple[Site, ...]
    hops: tuple[HopSpec, ...]
    index: int = 0
    pairs: int | None = None
    duration_s: float | None = None
    min_fidelity: float = 0.0
    route: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if len(self.hops) < 1:
            raise ParameterError(f"demands[{self.index}].route", self.name, "a route with at least one hop")
        if len(self.sites) != len(self.hops) + 1:
            raise ParameterError(f"demands[{self.index}].route", len(self.sites),
                                 f"{len(self.hops) + 1} memory sites for {len(self.hops)} hops")
        for i, hop in enumerate(self.hops):
            p = hop.physics.round_success_probability
            if not (0.0 < p <= 1.0):
                raise ParameterError(f"hops[{i}].round_success_probability ({hop.name})", p,
                                     "a number in (0, 1]: a hop that never succeeds cannot deliver pairs")
            if not hop.physics.attempt_period_s > 0:
                raise ParameterError(f"hops[{i}].attempt_period_s ({hop.name})", hop.physics.attempt_period_s,
                                     "a time > 0 in seconds")

    @property
    def n_hops(self) -> int:
        return len(self.hops)

    @cached_property
    def p(self) -> NDArray[np.float64]:
        """Per-round success probability of each hop, shape (n_hops,)."""
        return np.array([h.physics.round_success_probability for h in self.hops], dtype=float)

    @cached_property
    def period_s(self) -> NDArray[np.float64]:
        """Attempt period of each hop, shape (n_hops,)."""
        return np.array([h.physics.attempt_period_s for h in self.hops], dtype=float)

    @cached_property
    def herald_s(self) -> NDArray[np.float64]:
        """Herald delay of each hop, shape (n_hops,)."""
        return np.array([h.physics.herald_delay_s for h in self.hops], dtype=float)

    @cached_property
    def position_s(self) -> NDArray[np.float64]:
        """Classical signalling time from ``sites[0]`` to each site along the route, (n_hops + 1,)."""
        delays = [propagation_delay_s(h.physics.length_km) for h in self.hops]
        return np.concatenate([[0.0], np.cumsum(delays)])

    def delay_s(self, j: int, k: int) -> float:
        """Classical message time between memory sites ``j`` and ``k`` of the chain."""
        return float(abs(self.position_s[k] - self.position_s[j]))

    @cached_property
    def transfer_s(self) -> NDArray[np.float64]:
        """Per hop: the larger ``memory_transfer_s`` of its two ends, shape (n_hops,).

        After the herald each end moves its qubit from the optical interface to a memory qubit;
        the hop's pair counts as made (usable for swapping or delivery, interfaces free) once
        both ends have done so.
        """
        return np.array([max(self.sites[i].memory_transfer_s, self.sites[i + 1].memory_transfer_s)
                         for i in range(self.n_hops)], dtype=float)

    @cached_property
    def ready_s(self) -> NDArray[np.float64]:
        """From the start of a successful round until the hop's pair is usable: herald delay plus
        :attr:`transfer_s`, shape (n_hops,)."""
        return self.herald_s + self.transfer_s

    @cached_property
    def link_states(self) -> NDArray[np.complex128]:
        """Heralded state of each hop, shape (n_hops, 4, 4), qubit 0 at the left site.

        Each end's ``memory_transfer_error`` p depolarizes its qubit (rho -> (1 - p) rho + p I/2;
        :func:`netsim.qinfo.depolarizing`, applied in Pauli form). It is applied to the heralded state, before memory
        decay: exact for pure dephasing, and off by at most p (1 - exp(-t/T1)) otherwise.
        """
        from netsim.qinfo import pauli_form

        states = np.stack([np.asarray(h.physics.state, dtype=complex) for h in self.hops])
        kept = np.ones((self.n_hops, 2, 4))  # per hop and qubit: what depolarizing keeps of each Pauli component
        for i in range(self.n_hops):
            for qubit in (0, 1):
                p = probability("memory_transfer_error", float(self.sites[i + qubit].memory_transfer_error))
                kept[i, qubit, 1:] = 1.0 - p
        if np.all(kept == 1.0):
            return states
        # in Pauli form depolarizing p on a qubit scales its X, Y, Z components by 1 - p
        # (netsim.qinfo.pauli_form); the two qubits' channels commute
        forms = pauli_form.to_pauli(states) * kept[:, 0, :, None] * kept[:, 1, None, :]
        return pauli_form.from_pauli(forms)

    @cached_property
    def interface_waits(self) -> tuple[tuple[int, tuple[int, ...]], ...]:
        """For a lone chain: the hops that wait for a site's optical interface, and for whom.

        An inner site with ``communication_qubits == 1`` cannot attempt on both of its hops at
        once (an end user has one hop here, so it never waits). Consecutive hops that share such
        a site form a run; the event engine grants the interfaces atomically in hop order at the
        start of a cycle, so in each run the 1st, 3rd, ... hop start at once and the 2nd, 4th, ...
        start when both neighbours have made their pairs (heralded and transferred). Returns
        ``((i, (neighbours...)), ...)`` for the waiting hops.
        """
        shared = [self.sites[j].communication_qubits == 1 for j in range(1, self.n_hops)]
        waits: list[tuple[int, tuple[int, ...]]] = []
        position = 0                      # position of hop i within its run
        for i in range(self.n_hops):
            position = position + 1 if i > 0 and shared[i - 1] else 0
            if position % 2 == 1:
                nbrs = (i - 1,) + ((i + 1,) if i + 1 < self.n_hops and shared[i] else ())
                waits.append((i, nbrs))
        return tuple(waits)

    @property
    def site_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.sites)

    def swap_success(self, j: int) -> float:
        """Bell-measurement success probability at inner site ``j``."""
        return float(self.sites[j].bsm_success_probability)


def synthetic_physics(p: float, period_s: float, state: NDArray[np.complex128] | None = None, *,
                      herald_s: float | None = None, length_km: float = 0.0, modes: int = 1) -> LinkPhysics:
    """A :class:`LinkPhysics` with given per-mode success, period and state (tests, benchmarks).

    ``p`` is the per-mode success; the round success is ``1 - (1 - p)^modes``. The herald delay
    defaults to the attempt period; the state defaults to Phi+.
    """
    if state is None:
        v = np.array([1, 0, 0, 1], dtype=complex) / np.sqrt(2)
        state = np.outer(v, v.conj())
    fid = float(np.real(np.array([1, 0, 0, 1]) @ state @ np.array([1, 0, 0, 1])) / 2)
    return LinkPhysics(scheme="synthetic", length_km=length_km, loss_db=0.0, transmissivity=1.0,
                       success_probability=p, modes=modes,
                       round_success_probability=1.0 - (1.0 - p) ** modes,
                       attempt_period_s=period_s,
                       herald_delay_s=period_s if herald_s is None else herald_s,
                       state=np.asarray(state, dtype=complex), fidelity=fid)


def line_chain(n_hops: int, p: float, period_s: float, state: NDArray[np.complex128] | None = None, *,
               herald_s: float | None = None, length_km: float = 0.0, t1_s: float = math.inf,
               t2_s: float = math.inf, bsm_success_probability: float = 1.0, gate_error: float = 0.0,
               memory_slots: int | None = None, name: str = "line", index: int = 0,
               site_prefix: str = "N", communication_qubits: int | None = None,
               memory_transfer_s: float = 0.0, memory_transfer_error: float = 0.0,
               attempt_dephasing: float = 0.0) -> Chain:
    """A chain of ``n_hops`` identical hops with identical memories (tests and benchmarks).

    Sites are named ``f"{site_prefix}{k}"``; the ends are users, the inner sites repeaters.
    The memories are ideal unless told otherwise: every slot may attempt, no transfer time or
    error and no attempt dephasing (not the built-in site defaults, which are demonstrated values).
    """
    sites = tuple(
        Site(f"{site_prefix}{k}", "user" if k in (0, n_hops) else "repeater", t1_s=t1_s, t2_s=t2_s,
             bsm_success_probability=bsm_success_probability, gate_error=gate_error,
             memory_slots=memory_slots if memory_slots is not None else (1 if k in (0, n_hops) else 2),
             communication_qubits=communication_qubits, memory_transfer_s=memory_transfer_s,
             memory_transfer_error=memory_transfer_error, attempt_dephasing=attempt_dephasing)
        for k in range(n_hops + 1))
    physics = synthetic_physics(p, period_s, state, herald_s=herald_s, length_km=length_km)
    hops = tuple(HopSpec(f"{sites[k].name}-{sites[k + 1].name}", physics) for k in range(n_hops))
    return Chain(name, sites, hops, index=index)
