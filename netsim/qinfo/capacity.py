"""Product-state classical capacity (Holevo capacity) of a qubit channel, found numerically.

C_chi(N) = max over ensembles {p_i, psi_i} of chi({p_i, N(psi_i)}), in bits per channel use.
Pure input states suffice, and for a qubit input at most four of them (Davies' theorem), so
the search runs over four pure states on the Bloch sphere and their probabilities, with a
quasi-Newton optimiser from several deterministic starts (antipodal pairs along the principal
axes of the channel's Bloch map, a tetrahedron and a few seeded random ensembles). The best
value is kept. Accuracy: within 1e-6 bits of the closed forms for the depolarizing, dephasing,
amplitude-damping and erasure channels (see ``tests/test_qinfo_capacity.py``).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize

from netsim.errors import ParameterError
from netsim.qinfo.channels import Channel
from netsim.qinfo.entropy import von_neumann_entropy

__all__ = ["holevo_capacity"]

_SIGMA = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)
_MEMBERS = 4


def _output_basis(kraus: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """E[0] = N(I)/2, E[j] = N(sigma_j)/2, so that N((I + r.sigma)/2) = E[0] + sum_j r_j E[j]."""
    basis = np.concatenate([np.eye(2, dtype=complex)[None], _SIGMA]) / 2.0
    return np.einsum("kxi,bij,kyj->bxy", kraus, basis, kraus.conj())


def _unpack(x: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Parameters -> (probabilities (n,), Bloch unit vectors (n, 3))."""
    theta, phi = x[:_MEMBERS], x[_MEMBERS:2 * _MEMBERS]
    logits = np.concatenate([x[2 * _MEMBERS:], [0.0]])
    w = np.exp(logits - logits.max())
    r = np.stack([np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)], axis=-1)
    return w / w.sum(), r


def _chi(x: NDArray[np.float64], basis: NDArray[np.complex128]) -> float:
    p, r = _unpack(x)
    outs = basis[0] + np.einsum("nj,jxy->nxy", r, basis[1:])
    avg = np.einsum("n,nxy->xy", p, outs)
    return float(von_neumann_entropy(avg) - p @ von_neumann_entropy(outs))


def _pack(p: NDArray[np.float64], r: NDArray[np.float64]) -> NDArray[np.float64]:
    r = r / np.linalg.norm(r, axis=-1, keepdims=True)
    theta = np.arccos(np.clip(r[:, 2], -1.0, 1.0))
    phi = np.arctan2(r[:, 1], r[:, 0])
    logits = np.log(np.clip(p, 1e-12, None))
    return np.concatenate([theta, phi, logits[:-1] - logits[-1]])


def _starts(basis: NDArray[np.complex128]) -> list[NDArray[np.float64]]:
    """Antipodal pairs along the principal axes of the Bloch map, a tetrahedron, random sets."""
    t = np.real(np.einsum("iyx,jxy->ij", _SIGMA, basis[1:, :2, :2]))  # Bloch map (qubit block)
    _, _, vt = np.linalg.svd(t)
    even = np.full(_MEMBERS, 1.0 / _MEMBERS)
    starts = [_pack(even, np.array([u, -u, u + 1e-3, -u + 1e-3])) for u in vt]
    tetra = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], dtype=float)
    starts.append(_pack(even, tetra))
    rng = np.random.default_rng(20050314)
    starts += [_pack(rng.dirichlet(np.ones(_MEMBERS)), rng.normal(size=(_MEMBERS, 3))) for _ in range(2)]
    return starts


@lru_cache(maxsize=256)
def _capacity_cached(kraus_bytes: bytes, shape: tuple[int, ...]) -> tuple[float, bytes]:
    kraus = np.frombuffer(kraus_bytes, dtype=complex).reshape(shape)
    basis = _output_basis(kraus)
    best_val, best_x = -np.inf, None
    for x0 in _starts(basis):
        res = minimize(lambda x: -_chi(x, basis), x0, method="BFGS", options={"gtol": 1e-10})
        if -res.fun > best_val:
            best_val, best_x = -res.fun, res.x
    return float(best_val), np.asarray(best_x).tobytes()


def holevo_capacity(channel: Channel) -> tuple[float, tuple[NDArray[np.float64], NDArray[np.complex128]]]:
    """Product-state classical capacity of a qubit channel and an ensemble that reaches it.

    Parameters
    ----------
    channel : Channel
        Any channel with a qubit input (output dimension 2, or 3 for erasure-type channels).

    Returns
    -------
    capacity_bits : float
        max chi in bits per channel use, accurate to 1e-6 bits (tested against closed forms).
    ensemble : (probabilities, states)
        Probabilities of shape (n,) and pure input states of shape (n, 2, 2), n <= 4 (members
        with probability below 1e-6 dropped).

    Raises
    ------
    ParameterError
        If the channel input is not a qubit.

    References
    ----------
    A. S. Holevo, IEEE Trans. Inf. Theory 44, 269 (1998); B. Schumacher and M. D. Westmoreland,
    Phys. Rev. A 56, 131 (1997). E. B. Davies, IEEE Trans. Inf. Theory 24, 596 (1978) (at most
    d^2 pure states needed). C. King, IEEE Trans. Inf. Theory 49, 221 (2003) and V. Giovannetti
    and R. Fazio, Phys. Rev. A 71, 032314 (2005) for the closed forms used in the tests.
    """
    kraus = np.ascontiguousarray(getattr(channel, "kraus", None), dtype=complex)
    if kraus.ndim != 3 or kraus.shape[-1] != 2:
        raise ParameterError("channel", getattr(channel, "name", channel), "a channel with a qubit input")
    value, x_bytes = _capacity_cached(kraus.tobytes(), kraus.shape)
    p, r = _unpack(np.frombuffer(x_bytes, dtype=float))
    keep = p >= 1e-6
    p, r = p[keep] / p[keep].sum(), r[keep]
    states = (np.eye(2) + np.einsum("nj,jxy->nxy", r, _SIGMA)) / 2.0
    return max(value, 0.0), (p, states)
