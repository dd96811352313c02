"""Rate bounds: the repeaterless bound of a lossy channel and the BB84 key fraction of a pair.

All quantities in bits; batched over array arguments.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError
from netsim.qinfo.entropy import binary_entropy
from netsim.qinfo.states import as_states

__all__ = ["key_fraction", "plob_bound", "qber"]


def plob_bound(eta: ArrayLike) -> NDArray[np.float64]:
    """Repeaterless bound -log2(1 - eta) in bits per channel use (batched).

    The two-way assisted capacity of a pure-loss channel with transmissivity eta; about
    1.44 eta for small eta, infinite at eta = 1.

    Parameters
    ----------
    eta : float or array
        Transmissivity in [0, 1].

    Raises
    ------
    ParameterError
        If eta is outside [0, 1] or NaN.

    Examples
    --------
    >>> float(plob_bound(0.5))
    1.0

    References
    ----------
    S. Pirandola, R. Laurenza, C. Ottaviani and L. Banchi, "Fundamental limits of repeaterless
    quantum communications", Nat. Commun. 8, 15043 (2017). doi:10.1038/ncomms15043
    """
    e = np.asarray(eta, dtype=float)
    bad = ~((e >= 0.0) & (e <= 1.0))
    if np.any(bad):
        raise ParameterError("eta", float(e[bad].flat[0]), "a transmissivity in [0, 1]")
    with np.errstate(divide="ignore"):
        return -np.log1p(-e) / np.log(2.0)


def qber(rho: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Quantum bit error rates (e_Z, e_X) of two-qubit states relative to Phi+.

    e_Z = (1 - <Z x Z>)/2 (outcomes disagree in the Z basis), e_X = (1 - <X x X>)/2.
    """
    r = as_states(rho, "rho", 4)
    d = np.diagonal(r, axis1=-2, axis2=-1).real
    e_z = d[..., 1] + d[..., 2]
    xx = 2.0 * (r[..., 0, 3].real + r[..., 1, 2].real)  # <X x X> = tr(rho X x X)
    e_x = (1.0 - xx) / 2.0
    return np.clip(e_z, 0.0, 1.0), np.clip(e_x, 0.0, 1.0)


def key_fraction(rho: ArrayLike) -> NDArray[np.float64]:
    """Asymptotic entanglement-based BB84 key fraction max(0, 1 - h(e_Z) - h(e_X)) (batched).

    e_Z and e_X are the bit error rates of :func:`qber` (relative to Phi+, for which both vanish).
    For equal error rates Q the fraction 1 - 2 h(Q) vanishes at Q of about 11.0 %. No sifting
    factor: the asymptotic fraction of an efficient BB84 variant that measures in one basis almost
    always (Lo, Chau & Ardehali, J. Cryptology 18, 133, 2005); halve it for random bases.

    References
    ----------
    P. W. Shor and J. Preskill, "Simple proof of security of the BB84 quantum key distribution
    protocol", Phys. Rev. Lett. 85, 441 (2000).
    """
    e_z, e_x = qber(rho)
    return np.clip(1.0 - binary_entropy(e_z) - binary_entropy(e_x), 0.0, None)
