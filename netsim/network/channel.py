"""Information figures of a link: Holevo information of the encoding, channel capacity, EoF.

The fibre channel is :func:`netsim.hardware.fibre.qubit_channel`. Results are cached by their
parameters because many links of a network share them.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from netsim.hardware.fibre import qubit_channel
from netsim.scenario.model import Encoding

__all__ = ["encoding_holevo_bits", "encoding_states", "eof_ebits", "link_capacity_bits", "werner_eof_ebits"]

_PAULI = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)


def encoding_states(encoding: Encoding) -> np.ndarray:
    """Density matrices (I + r . sigma) / 2 of the encoding's Bloch vectors, shape (n, 2, 2)."""
    r = np.asarray(encoding.bloch_vectors, dtype=float)
    return (np.eye(2) + np.einsum("nj,jxy->nxy", r, _PAULI)) / 2.0


@lru_cache(maxsize=4096)
def encoding_holevo_bits(encoding: Encoding, transmissivity: float, depolarizing: float = 0.0,
                         loss_model: str = "erasure") -> float:
    """Holevo information (bits per sent qubit) of ``encoding`` after the fibre channel."""
    from netsim.qinfo import holevo_information

    channel = qubit_channel(transmissivity, depolarizing, loss_model)
    outputs = channel.apply(encoding_states(encoding))
    return float(holevo_information(np.asarray(encoding.probabilities), outputs))


@lru_cache(maxsize=4096)
def link_capacity_bits(transmissivity: float, depolarizing: float = 0.0, loss_model: str = "erasure") -> float:
    """Holevo (product-state classical) capacity of the fibre channel, bits per use.

    Erasure model: the flag splits every output into a known erasure and the depolarized qubit,
    so chi of any ensemble is (1 - eps) times its chi through the depolarizing channel, and the
    capacity is eta (1 - h(p / 2)) (Bennett, DiVincenzo & Smolin, PRL 78, 3217, 1997, for the
    erasure factor; King, IEEE Trans. Inf. Theory 49, 221, 2003, for the depolarizing channel
    rho -> (1 - p) rho + p I/2). Damping model: maximised numerically by
    :func:`netsim.qinfo.holevo_capacity`.
    """
    from netsim.qinfo import binary_entropy, holevo_capacity

    if loss_model == "erasure":
        channel = qubit_channel(transmissivity, depolarizing, loss_model)  # validates the inputs
        del channel
        return float(transmissivity * (1.0 - binary_entropy(depolarizing / 2.0)))
    return float(holevo_capacity(qubit_channel(transmissivity, depolarizing, loss_model))[0])


def eof_ebits(state: np.ndarray) -> float:
    """Entanglement of formation (Wootters) of a two-qubit state, in ebits."""
    from netsim.qinfo import entanglement_of_formation

    return float(entanglement_of_formation(state))


@lru_cache(maxsize=4096)
def werner_eof_ebits(fidelity: float) -> float:
    """Entanglement of formation of the Werner state of fidelity F (w = (4F - 1) / 3)."""
    from netsim.qinfo import entanglement_of_formation, werner_state

    w = min(max((4.0 * fidelity - 1.0) / 3.0, -1.0 / 3.0), 1.0)
    return float(entanglement_of_formation(werner_state(w)))
