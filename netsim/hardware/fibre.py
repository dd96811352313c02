"""Optical fibre: loss budget, transmissivity, propagation delay and the qubit channel.

Conventions (shared by every layer, see DEVELOPERS.md):

- Loss in dB: ``attenuation_db_per_km * length_km + extra_loss_db``.
- Transmissivity eta = 10^(-loss_dB / 10).
- Light travels at c / n_g with the group index :data:`GROUP_INDEX` = 1.468 (about 4.9 us/km at
  1550 nm in standard single-mode fibre; common practice).
- Depolarizing p: rho -> (1 - p) rho + p I/2. Amplitude damping gamma = 1 - eta.
"""

from __future__ import annotations

from typing import Any

from netsim.errors import ParameterError, nonnegative, probability

__all__ = [
    "FIBRE_SPEED_KM_PER_S",
    "GROUP_INDEX",
    "LOSS_MODELS",
    "SPEED_OF_LIGHT_KM_PER_S",
    "db_to_transmissivity",
    "loss_db",
    "propagation_delay_s",
    "qubit_channel",
    "transmissivity",
]

#: Group index of standard single-mode fibre near 1550 nm (common practice).
GROUP_INDEX: float = 1.468
#: Speed of light in vacuum, exact by the SI definition of the metre.
SPEED_OF_LIGHT_KM_PER_S: float = 299_792.458
#: Speed of light in fibre, c / n_g (about 204 000 km/s, i.e. about 4.9 us/km).
FIBRE_SPEED_KM_PER_S: float = SPEED_OF_LIGHT_KM_PER_S / GROUP_INDEX
#: Models of what a lost photon does to the qubit it carried.
LOSS_MODELS: tuple[str, ...] = ("erasure", "damping")




def loss_db(length_km: float, attenuation_db_per_km: float, extra_loss_db: float = 0.0) -> float:
    """Total loss of a fibre span in dB.

    Parameters
    ----------
    length_km : float
        Fibre length in km (>= 0).
    attenuation_db_per_km : float
        Attenuation coefficient in dB/km (>= 0).
    extra_loss_db : float
        Lumped extra loss in dB: splices, connectors, patch panels, switches (>= 0).

    Returns
    -------
    float
        ``attenuation_db_per_km * length_km + extra_loss_db``.

    Raises
    ------
    ParameterError
        If any argument is negative, NaN or infinite.
    """
    length = nonnegative("length_km", length_km)
    alpha = nonnegative("attenuation_db_per_km", attenuation_db_per_km)
    extra = nonnegative("extra_loss_db", extra_loss_db)
    return alpha * length + extra


def db_to_transmissivity(loss_db: float) -> float:
    """eta = 10^(-loss_dB / 10): the one conversion from a loss in dB to a transmissivity."""
    return float(10.0 ** (-loss_db / 10.0))


def transmissivity(length_km: float, attenuation_db_per_km: float, extra_loss_db: float = 0.0) -> float:
    """Probability that a photon crosses the span: eta = 10^(-loss_dB / 10).

    Parameters are those of :func:`loss_db`. Returns a number in (0, 1].
    """
    return db_to_transmissivity(loss_db(length_km, attenuation_db_per_km, extra_loss_db))


def propagation_delay_s(length_km: float) -> float:
    """Time for light to cross ``length_km`` of fibre: L n_g / c (about 4.9 us/km)."""
    return nonnegative("length_km", length_km) / FIBRE_SPEED_KM_PER_S


def qubit_channel(transmissivity: float, depolarizing: float = 0.0, loss_model: str = "erasure") -> Any:
    """The channel a photonic qubit sees through a lossy fibre span.

    The qubit is first depolarized with parameter ``depolarizing`` (rho -> (1 - p) rho + p I/2:
    imperfect preparation, polarisation drift) and then meets the loss of the span:

    - ``"erasure"`` (polarisation or time-bin qubit): a lost photon is noticed (no click), so
      the receiver holds a flagged erasure; erasure probability eps = 1 - eta. The output is a
      qutrit whose third level is the erasure flag (Bennett, DiVincenzo & Smolin 1997).
    - ``"damping"`` (single-rail qubit, |1> = one photon, |0> = vacuum): loss is amplitude
      damping with gamma = 1 - eta, K0 = [[1, 0], [0, sqrt(eta)]], K1 = [[0, sqrt(1 - eta)], [0, 0]].

    Depolarizing commutes with the erasure channel on the qubit subspace, so the order only
    matters for damping, where depolarizing at the sender comes first.

    Parameters
    ----------
    transmissivity : float
        eta in [0, 1].
    depolarizing : float
        p in [0, 1].
    loss_model : {"erasure", "damping"}

    Returns
    -------
    netsim.qinfo channel
        With ``.kraus`` and ``.apply(rho)``.

    References
    ----------
    C. H. Bennett, D. P. DiVincenzo and J. A. Smolin, "Capacities of quantum erasure channels",
    Phys. Rev. Lett. 78, 3217 (1997).
    """
    # lazy: the math layer is imported only when a channel is needed
    from netsim import qinfo

    eta = probability("transmissivity", transmissivity)
    p = probability("depolarizing", depolarizing)
    if loss_model == "erasure":
        loss = qinfo.erasure(1.0 - eta)
    elif loss_model == "damping":
        loss = qinfo.amplitude_damping(1.0 - eta)
    else:
        raise ParameterError("loss_model", loss_model, "one of " + ", ".join(LOSS_MODELS))
    if p == 0.0:
        return loss
    return qinfo.compose(qinfo.depolarizing(p), loss)
