"""The per-link physics handed from ``hardware`` to ``network`` and ``engine``."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["LinkPhysics"]


@dataclass(frozen=True, eq=False)
class LinkPhysics:
    """What one heralded link delivers, per attempt round.

    Attributes
    ----------
    scheme : str
        One of :data:`netsim.scenario.model.SCHEMES`.
    length_km, loss_db, transmissivity : float
        Fibre length, total loss budget in dB (fibre + extra) and eta = 10^(-loss_db/10).
    success_probability : float
        Heralded success per mode per attempt, in [0, 1].
    modes : int
        Multiplexed modes per attempt round.
    round_success_probability : float
        1 - (1 - success_probability)^modes.
    attempt_period_s : float
        Time between the starts of consecutive attempt rounds (preparation plus the signalling
        needed before the next round may start).
    herald_delay_s : float
        From the start of a successful round until both ends know of the success.
    state : numpy.ndarray
        4x4 density matrix of the heralded pair (qubit 0 at site ``a``), target Phi+.
    fidelity : float
        <Phi+|state|Phi+>.
    dark_count_fraction : float
        Share of heralds caused by detector dark counts (0 when not modelled).
    bound_transmissivity : float or None
        Transmissivity of the channel that bounds what the link can deliver: for a link heralded
        at a midpoint station (or fed by a midpoint source) the station is a node between two
        channels, so the repeater-chain bound is the worse arm's (Pirandola, Commun. Phys. 2, 51,
        2019); for direct transmission the whole fibre's. ``None`` means ``transmissivity``.
    """

    scheme: str
    length_km: float
    loss_db: float
    transmissivity: float
    success_probability: float
    modes: int
    round_success_probability: float
    attempt_period_s: float
    herald_delay_s: float
    state: np.ndarray
    fidelity: float
    dark_count_fraction: float = 0.0
    bound_transmissivity: float | None = None

    @property
    def bound_bits_per_use(self) -> float:
        """-log2(1 - eta) of the bounding channel (:attr:`bound_transmissivity`): an upper bound
        on the ebits (and secret bits) per mode and attempt any protocol on this link can deliver.

        References
        ----------
        S. Pirandola, R. Laurenza, C. Ottaviani and L. Banchi, Nat. Commun. 8, 15043 (2017);
        S. Pirandola, Commun. Phys. 2, 51 (2019).
        """
        eta = self.transmissivity if self.bound_transmissivity is None else self.bound_transmissivity
        return math.inf if eta >= 1.0 else -math.log1p(-eta) / math.log(2.0)

    @property
    def rate_per_s(self) -> float:
        """Analytic elementary-pair rate: round success over attempt period."""
        return self.round_success_probability / self.attempt_period_s
