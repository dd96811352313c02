"""Qubit ensembles sent hop by hop along a route (direct transmission, no entanglement).

Each realisation sends one qubit of the scenario's encoding {p_i, rho_i} from the first user to
the last: through the fibre channel of every hop (:func:`netsim.hardware.fibre.qubit_channel`
with the hop's transmissivity; a lost photon is a flagged erasure) and, at every inner site,
into a memory (absorb-and-retrieve efficiency ``memory_efficiency``; a failed retrieval is an
erasure too) where it waits for the next hop, decohering by the memory channel
(:func:`netsim.qinfo.decohere`, T1 then T2). All members of the ensemble travel through the same
realised channel. The outputs are averaged over realisations (qutrits: qubit block plus the
erasure flag), and the Holevo information of the averaged ensemble is what the route delivers
per sent qubit, loss counted.

Waiting time at an inner site: ``waits="uniform"`` (default) draws the preparation time
``attempt_prep_time_s`` plus a uniform phase of the next hop's attempt period (the qubit waits for
the next emission slot); ``waits="fixed"`` uses the preparation time alone (deterministic).

Sent qubits per second: the slowest hop's mode rate, min_i(modes_i / attempt_period_s_i).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from netsim import qinfo
from netsim.engine.chain import Chain
from netsim.errors import ParameterError
from netsim.hardware.fibre import qubit_channel
from netsim.scenario.model import Encoding

__all__ = ["WAIT_MODELS", "EnsembleResult", "encoding_states", "send_ensemble"]

WAIT_MODELS = ("uniform", "fixed")


@dataclass(frozen=True)
class EnsembleResult:
    """Holevo information a route delivers for an encoding ensemble."""

    chi_bits_per_qubit: float
    chi_bits_per_s: float
    arrival_probability: float
    sent_qubits_per_s: float
    realisations: int

    def to_dict(self) -> dict[str, float | int]:
        return {"chi_bits_per_qubit": self.chi_bits_per_qubit, "chi_bits_per_s": self.chi_bits_per_s,
                "arrival_probability": self.arrival_probability,
                "sent_qubits_per_s": self.sent_qubits_per_s, "realisations": self.realisations}


def encoding_states(encoding: Encoding) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
    """Probabilities (n,) and density matrices (n, 2, 2) from Bloch vectors: (I + r.sigma)/2."""
    r = np.asarray(encoding.bloch_vectors, dtype=float)
    rho = np.empty((len(r), 2, 2), dtype=complex)
    rho[:, 0, 0], rho[:, 1, 1] = (1 + r[:, 2]) / 2, (1 - r[:, 2]) / 2
    rho[:, 0, 1], rho[:, 1, 0] = (r[:, 0] - 1j * r[:, 1]) / 2, (r[:, 0] + 1j * r[:, 1]) / 2
    return np.asarray(encoding.probabilities, dtype=float), rho


def _fibre(rho: NDArray[np.complex128], eta: float) -> tuple[NDArray[np.complex128], float]:
    """Qubit block after the hop's fibre channel, and the transmissivity that survives."""
    channel = qubit_channel(eta, 0.0, "erasure")
    out = channel.apply(rho)
    return out[..., :2, :2] / max(eta, 1e-300), eta


def _waits(chain: Chain, j: int, n: int, waits: str, rng: np.random.Generator) -> NDArray[np.float64]:
    prep = float(chain.sites[j].attempt_prep_time_s)
    if waits == "fixed":
        return np.full(n, prep)
    return prep + rng.uniform(0.0, float(chain.period_s[j]), size=n)


def send_ensemble(chain: Chain, encoding: Encoding, *, realisations: int = 2000, waits: str = "uniform",
                  seed: int | np.random.Generator = 0) -> EnsembleResult:
    """Send ``encoding`` along ``chain`` and return the delivered Holevo information.

    Parameters
    ----------
    chain : Chain
    encoding : Encoding
    realisations : int
        Channel realisations averaged (waiting times drawn per realisation).
    waits : {"uniform", "fixed"}
    seed : int or numpy.random.Generator
    """
    if waits not in WAIT_MODELS:
        raise ParameterError("waits", waits, "one of " + ", ".join(WAIT_MODELS))
    if int(realisations) < 1:
        raise ParameterError("realisations", realisations, "an integer >= 1")
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    n = 1 if waits == "fixed" else int(realisations)
    probs, states = encoding_states(encoding)
    rho = np.broadcast_to(states, (n,) + states.shape).copy()
    survive = 1.0
    for i, hop in enumerate(chain.hops):
        if i > 0:
            site = chain.sites[i]
            t = _waits(chain, i, n, waits, rng)[:, None]
            rho = qinfo.decohere(rho, t, site.t1_s, site.t2_s, qubit=0)
            survive *= float(site.memory_efficiency)
        rho, eta = _fibre(rho, float(hop.physics.transmissivity))
        survive *= eta
    return _result(chain, probs, rho.mean(axis=0), survive, n)


def _result(chain: Chain, probs: NDArray[np.float64], qubit_block: NDArray[np.complex128],
            survive: float, n: int) -> EnsembleResult:
    flagged = np.zeros((len(probs), 3, 3), dtype=complex)
    flagged[:, :2, :2] = survive * qubit_block
    flagged[:, 2, 2] = 1.0 - survive
    chi = float(qinfo.holevo_information(probs, flagged))
    rate = min(h.physics.modes / h.physics.attempt_period_s for h in chain.hops)
    return EnsembleResult(chi, chi * rate, survive, rate, n)
