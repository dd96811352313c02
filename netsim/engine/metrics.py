"""Streaming accumulators for delivered pairs and the per-chain run record.

Delivered states are turned into figures chunk by chunk (fidelity to Phi+, entanglement of
formation, coherent information) so that a long run never holds millions of 4x4 matrices.
Intervals are 95 % normal intervals, mean +- 1.96 s / sqrt(N) (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from netsim import qinfo
from netsim.qinfo.states import partial_trace, phi_plus_fidelity

__all__ = ["Z95", "ChainRun", "PairMetrics", "StopRule", "pair_figures", "phi_plus_fidelity"]

#: Two-sided 95 % quantile of the standard normal distribution (common practice).
Z95 = 1.959963984540054


def pair_figures(states: NDArray[np.complex128]) -> tuple[NDArray[np.float64], ...]:
    """Per state (N, 4, 4): fidelity to Phi+, entanglement of formation, and the coherent
    information towards each end (qinfo.coherent_information, S(AB) found once): S(B) - S(AB)
    and S(A) - S(AB), clipped at 0. Each state's figures depend on that state alone, so states
    of several demands can go through in one batch."""
    f = phi_plus_fidelity(states)
    e = np.asarray(qinfo.entanglement_of_formation(states), dtype=float)
    s_ab = np.asarray(qinfo.von_neumann_entropy(states), dtype=float)
    c = np.clip(np.asarray(qinfo.von_neumann_entropy(partial_trace(states, 1)), dtype=float) - s_ab, 0.0, None)
    c_a = np.clip(np.asarray(qinfo.von_neumann_entropy(partial_trace(states, 0)), dtype=float) - s_ab, 0.0, None)
    return f, e, c, c_a


@dataclass
class PairMetrics:
    """Running sums over delivered pairs of one demand."""

    n: int = 0
    sum_fidelity: float = 0.0
    sum_fidelity_sq: float = 0.0
    sum_eof: float = 0.0
    sum_eof_sq: float = 0.0
    sum_coherent: float = 0.0  # S(B) - S(AB) per pair, clipped at 0 (hashing with messages A -> B)
    sum_coherent_a: float = 0.0  # S(A) - S(AB) per pair, clipped at 0 (hashing with messages B -> A)
    sum_state: NDArray[np.complex128] = field(default_factory=lambda: np.zeros((4, 4), dtype=complex))
    first_delivery_s: float = math.nan
    last_delivery_s: float = math.nan
    #: A pair is useful when its own fidelity reaches this (the demand's ``min_fidelity``).
    threshold: float = 0.0
    n_useful: int = 0
    last_useful_s: float = 0.0
    useful_intervals_sum_s: float = 0.0
    useful_intervals_sum_sq_s: float = 0.0

    def add(self, states: NDArray[np.complex128], delivered_s: NDArray[np.float64]) -> None:
        """Add a chunk of delivered states (N, 4, 4) and their delivery times (N,), in order."""
        if len(states) == 0:
            return
        self.add_figures(states, delivered_s, *pair_figures(states))

    def add_figures(self, states: NDArray[np.complex128], delivered_s: NDArray[np.float64],
                    f: NDArray[np.float64], e: NDArray[np.float64], c: NDArray[np.float64],
                    c_a: NDArray[np.float64]) -> None:
        """:meth:`add` with the states' :func:`pair_figures` already computed (in order)."""
        if len(states) == 0:
            return
        self._add_useful(np.asarray(delivered_s, dtype=float)[f >= self.threshold - 1e-12])
        self.n += len(states)
        self.sum_fidelity += float(f.sum())
        self.sum_fidelity_sq += float((f * f).sum())
        self.sum_eof += float(e.sum())
        self.sum_eof_sq += float((e * e).sum())
        self.sum_coherent += float(c.sum())
        self.sum_coherent_a += float(c_a.sum())
        self.sum_state = self.sum_state + states.sum(axis=0)
        if math.isnan(self.first_delivery_s):
            self.first_delivery_s = float(delivered_s[0])
        self.last_delivery_s = float(delivered_s[-1])

    def _add_useful(self, times_s: NDArray[np.float64]) -> None:
        if len(times_s) == 0:
            return
        dt = np.diff(np.concatenate([[self.last_useful_s], times_s]))
        self.n_useful += len(times_s)
        self.useful_intervals_sum_s += float(dt.sum())
        self.useful_intervals_sum_sq_s += float((dt * dt).sum())
        self.last_useful_s = float(times_s[-1])

    def useful_rate(self, simulated_time_s: float) -> tuple[float, list[float]]:
        """Useful pairs per second and its 95 % interval.

        The interval inverts a normal interval on the mean time between useful deliveries (the
        method of the rate interval). With fewer than two useful pairs it is [0, 3/t] for none
        (the "rule of three": Hanley & Lippman-Hand, JAMA 249, 1743, 1983) and undefined
        (NaN) above for one.
        """
        t = simulated_time_s
        if t <= 0:
            return 0.0, [0.0, math.nan]
        n = self.n_useful
        rate = n / t
        if n == 0:
            return 0.0, [0.0, 3.0 / t]
        if n < 2:
            return rate, [math.nan, math.nan]
        mean = self.useful_intervals_sum_s / n
        var = max(self.useful_intervals_sum_sq_s / n - mean * mean, 0.0) * n / (n - 1)
        rel = Z95 * math.sqrt(var / n) / mean if mean > 0 else math.inf
        if not math.isfinite(rel):
            return rate, [math.nan, math.nan]
        return rate, [rate / (1.0 + rel), rate / (1.0 - rel) if rel < 1 else math.inf]

    def mean_ci(self, total: float, total_sq: float) -> tuple[float, list[float]]:
        """Mean and 95 % interval of a per-pair quantity from its sum and sum of squares."""
        if self.n == 0:
            return math.nan, [math.nan, math.nan]
        mean = total / self.n
        var = max(total_sq / self.n - mean * mean, 0.0) * self.n / max(self.n - 1, 1)
        hw = Z95 * math.sqrt(var / self.n)
        return mean, [mean - hw, mean + hw]

    def mean_state(self) -> NDArray[np.complex128]:
        return self.sum_state / self.n if self.n else np.full((4, 4), np.nan, dtype=complex)


@dataclass
class ChainRun:
    """Everything one run records for one chain (demand).

    Attributes
    ----------
    metrics : PairMetrics
    simulated_time_s : float
        Length of simulated time the rate is measured over.
    hop_attempts, hop_successes : arrays (n_hops,)
        Attempt rounds made and heralded pairs obtained per hop.
    hop_busy_s : array (n_hops,)
        Time each hop spent in attempt rounds.
    hop_discards, swap_failures : arrays (n_hops,), (n_hops + 1,)
        Link pairs dropped by the cut-off, failed Bell measurements per site.
    purification_failures : array (n_hops,)
    site_qubit_s : array (n_hops + 1,)
        Qubit-seconds of storage at each memory site of the chain.
    interrupted : bool
        True when the run was stopped (Ctrl-C) before its stop rule was met.
    """

    metrics: PairMetrics
    simulated_time_s: float
    hop_attempts: NDArray[np.float64]
    hop_successes: NDArray[np.float64]
    hop_busy_s: NDArray[np.float64]
    hop_discards: NDArray[np.float64]
    swap_failures: NDArray[np.float64]
    purification_failures: NDArray[np.float64]
    site_qubit_s: NDArray[np.float64]
    engine: str = "vector"
    interrupted: bool = False
    intervals_sum_s: float = 0.0
    intervals_sum_sq_s: float = 0.0
    intervals_n: int = 0
    #: Memory-slot statistics of the run's group per site (``SlotBroker.stats``); None when
    #: the chain ran alone on the vectorised engine (it holds its slots throughout).
    slot_stats: dict[str, dict[str, Any]] | None = None

    @classmethod
    def zeros(cls, n_hops: int, engine: str, min_fidelity: float = 0.0) -> ChainRun:
        """An empty record; pairs whose fidelity reaches ``min_fidelity`` count as useful."""
        z = np.zeros(n_hops)
        return cls(PairMetrics(threshold=float(min_fidelity)), 0.0, z.copy(), z.copy(), z.copy(), z.copy(), np.zeros(n_hops + 1),
                   z.copy(), np.zeros(n_hops + 1), engine=engine)

    def add_intervals(self, delivered_s: NDArray[np.float64], previous_s: float) -> None:
        """Record inter-delivery times (for the rate interval)."""
        if len(delivered_s) == 0:
            return
        dt = np.diff(np.concatenate([[previous_s], delivered_s]))
        self.intervals_sum_s += float(dt.sum())
        self.intervals_sum_sq_s += float((dt * dt).sum())
        self.intervals_n += len(dt)

    def add_interval(self, delivered_s: float, previous_s: float) -> None:
        """Record one inter-delivery time (the event engine's per-delivery form)."""
        dt = delivered_s - previous_s
        self.intervals_sum_s += dt
        self.intervals_sum_sq_s += dt * dt
        self.intervals_n += 1

    def rate_relative_halfwidth(self) -> float:
        """Relative 95 % half-width of the rate from the spread of inter-delivery times."""
        n = self.intervals_n
        if n < 2:
            return math.inf
        mean = self.intervals_sum_s / n
        var = max(self.intervals_sum_sq_s / n - mean * mean, 0.0) * n / (n - 1)
        return Z95 * math.sqrt(var / n) / mean if mean > 0 else math.inf


@dataclass(frozen=True)
class StopRule:
    """When a run stops: after ``pairs`` delivered pairs per demand, after ``time_s`` simulated
    seconds, or once every demand's rate has a relative 95 % half-width <= ``precision``.
    ``max_pairs`` caps a precision run (a demand whose rate cannot be pinned down stops there)."""

    pairs: int | None = None
    time_s: float | None = None
    precision: float | None = None
    max_pairs: int = 2_000_000

    def done(self, run: ChainRun, now_s: float) -> bool:
        """Whether ``run`` (at simulated time ``now_s``) has met this rule."""
        delivered = run.intervals_n  # one interval per delivered pair, kept in delivery order
        if self.pairs is not None:
            return delivered >= self.pairs
        if self.time_s is not None:
            return now_s >= self.time_s
        if delivered >= self.max_pairs:
            return True
        return delivered >= 20 and run.rate_relative_halfwidth() <= float(self.precision or 0.0)
