"""Product-state classical capacity (Holevo capacity) of a qubit channel, found numerically.

C_chi(N) = max over ensembles {p_i, psi_i} of chi({p_i, N(psi_i)}), in bits per channel use.
Pure input states suffice, and for a qubit input at most four of them (Davies' theorem), so
the search runs over four pure states on the Bloch sphere and their probabilities, with a
quasi-Newton optimiser (analytic gradient in the Bloch representation) from several
deterministic starts (antipodal pairs along the principal axes of the channel's Bloch map, a
tetrahedron, two seeded random ensembles). The search stops once two starts reach the same
maximum within 1e-10 bits; the best value is kept. Accuracy: within 1e-6 bits of the closed
forms for the depolarizing, dephasing, amplitude-damping and erasure channels (see
``tests/test_qinfo_capacity.py``). Results are cached by the bytes of the Kraus operators.
Speed: about 0.01-0.05 s per channel whose output is a qubit, or a qubit plus a constant
erasure flag; any other output structure takes a slower numerical-gradient path (about 1 s).
"""

from __future__ import annotations

from collections.abc import Callable
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

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


def _pack(p: NDArray[np.float64], r: NDArray[np.float64]) -> NDArray[np.float64]:
    r = r / np.linalg.norm(r, axis=-1, keepdims=True)
    theta = np.arccos(np.clip(r[:, 2], -1.0, 1.0))
    phi = np.arctan2(r[:, 1], r[:, 0])
    logits = np.log(np.clip(p, 1e-12, None))
    return np.concatenate([theta, phi, logits[:-1] - logits[-1]])


def _bloch_map(basis: NDArray[np.complex128]) -> tuple[float, NDArray[np.float64], NDArray[np.float64]] | None:
    """(1 - eps, T, t) when the output is a qubit state (+) a constant flag weight eps.

    The normalised qubit block then has Bloch vector T r + t for input Bloch vector r, and
    chi = (1 - eps) chi_block. Returns None for other output structures.
    """
    if basis.shape[-1] == 3:
        leak = np.abs(basis[:, 2, :2]).max() + np.abs(basis[:, :2, 2]).max() + np.abs(basis[1:, 2, 2]).max()
        eps = float(basis[0, 2, 2].real)
        if leak > 1e-13 or eps >= 1.0 - 1e-15:
            return (0.0, np.zeros((3, 3)), np.zeros(3)) if leak <= 1e-13 else None
        basis = basis[:, :2, :2] / (1.0 - eps)
    elif basis.shape[-1] == 2:
        eps = 0.0
    else:
        return None
    bloch = np.real(np.einsum("iyx,bxy->ib", _SIGMA, basis))
    return 1.0 - eps, bloch[:, 1:], bloch[:, 0]


def _h_bloch(a: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Entropy of a qubit with Bloch length a, and its derivative (finite: a capped below 1)."""
    a = np.clip(a, 0.0, 1.0 - 1e-13)
    hi, lo = (1.0 + a) / 2.0, (1.0 - a) / 2.0
    value = -(hi * np.log2(hi) + lo * np.log2(lo))
    return value, 0.5 * np.log2(lo / hi)


def _chi_and_grad(x: NDArray[np.float64], tmat: NDArray[np.float64], tvec: NDArray[np.float64]) -> tuple[float, NDArray[np.float64]]:
    """chi of the ensemble encoded by ``x`` through the Bloch map, and d chi / d x."""
    p, r = _unpack(x)
    theta, phi = x[:_MEMBERS], x[_MEMBERS:2 * _MEMBERS]
    u = tmat @ (p @ r) + tvec
    au = np.linalg.norm(u)
    h_avg, dh_avg = _h_bloch(au)
    g_avg = tmat.T @ (dh_avg * u / au) if au > 0 else np.zeros(3)
    v = r @ tmat.T + tvec
    av = np.linalg.norm(v, axis=-1)
    h_m, dh_m = _h_bloch(av)
    g_m = (dh_m / np.where(av > 0, av, 1.0))[:, None] * v @ tmat
    grad_r = p[:, None] * (g_avg - g_m)
    dr_dtheta = np.stack([np.cos(theta) * np.cos(phi), np.cos(theta) * np.sin(phi), -np.sin(theta)], -1)
    dr_dphi = np.stack([-np.sin(theta) * np.sin(phi), np.sin(theta) * np.cos(phi), np.zeros(_MEMBERS)], -1)
    grad_p = r @ g_avg - h_m
    grad_logit = p * (grad_p - p @ grad_p)
    grad = np.concatenate([np.sum(grad_r * dr_dtheta, -1), np.sum(grad_r * dr_dphi, -1), grad_logit[:-1]])
    return float(h_avg - p @ h_m), grad


def _chi_generic(x: NDArray[np.float64], basis: NDArray[np.complex128]) -> float:
    p, r = _unpack(x)
    outs = basis[0] + np.einsum("nj,jxy->nxy", r, basis[1:])
    avg = np.einsum("n,nxy->xy", p, outs)
    return float(von_neumann_entropy(avg) - p @ von_neumann_entropy(outs))


def _starts(tmat: NDArray[np.float64]) -> list[NDArray[np.float64]]:
    """Antipodal pairs along the principal axes of the Bloch map, a tetrahedron, random sets."""
    _, _, vt = np.linalg.svd(tmat)
    even = np.full(_MEMBERS, 1.0 / _MEMBERS)
    starts = [_pack(even, np.array([u, -u, u + 1e-3, -u + 1e-3])) for u in vt]
    tetra = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], dtype=float)
    starts.append(_pack(even, tetra))
    rng = np.random.default_rng(20050314)
    starts += [_pack(rng.dirichlet(np.ones(_MEMBERS)), rng.normal(size=(_MEMBERS, 3))) for _ in range(2)]
    return starts


def _maximise(objective: Callable[[NDArray[np.float64]], Any], starts: list[NDArray[np.float64]],
              jac: bool) -> tuple[float, NDArray[np.float64]]:
    """Best of the local maxima from ``starts``; stops once two starts agree within 1e-10 bits."""
    from scipy.optimize import (
        minimize,  # lazy: importing scipy.optimize costs about 0.5 s
    )

    found: list[float] = []
    best_val, best_x = -np.inf, starts[0]
    for x0 in starts:
        res = minimize(objective, x0, method="BFGS", jac=jac, options={"gtol": 1e-11, "maxiter": 400})
        value = -float(res.fun)
        if value > best_val:
            best_val, best_x = value, res.x
        if sum(abs(value - f) <= 1e-10 for f in found) and value >= best_val - 1e-10:
            break
        found.append(value)
    return best_val, best_x


@lru_cache(maxsize=256)
def _capacity_cached(kraus_bytes: bytes, shape: tuple[int, ...]) -> tuple[float, bytes]:
    kraus = np.frombuffer(kraus_bytes, dtype=complex).reshape(shape)
    basis = _output_basis(kraus)
    bloch = _bloch_map(basis)
    if bloch is None:
        tmat = np.real(np.einsum("iyx,jxy->ij", _SIGMA, basis[1:, :2, :2]))
        value, x = _maximise(lambda x: -_chi_generic(x, basis), _starts(tmat), jac=False)
        return value, x.tobytes()
    scale, tmat, tvec = bloch

    def negative(x: NDArray[np.float64]) -> tuple[float, NDArray[np.float64]]:
        value, grad = _chi_and_grad(x, tmat, tvec)
        return -value, -grad

    value, x = _maximise(negative, _starts(tmat), jac=True)
    return scale * value, x.tobytes()


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
