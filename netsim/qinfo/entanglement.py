"""Entanglement measures of two-qubit states: concurrence, entanglement of formation, and the
coherent information (hashing bound), batched over leading axes.

Conventions: qubit 0 (A) is the left factor of ``numpy.kron``; entropies in bits.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError
from netsim.qinfo.entropy import binary_entropy, von_neumann_entropy
from netsim.qinfo.states import as_states, is_xstate, partial_trace

__all__ = [
    "coherent_information",
    "concurrence",
    "concurrence_general",
    "concurrence_xstate",
    "entanglement_of_formation",
    "is_xstate",
]

#: sigma_y (x) sigma_y = anti-diagonal with these signs: (Y x Y) A = _YY_SIGN[:, None] * A[::-1].
_YY_SIGN = np.array([-1.0, 1.0, 1.0, -1.0])


def concurrence_xstate(rho: ArrayLike) -> NDArray[np.float64]:
    """Closed-form concurrence of X-shaped states (entries off the X are ignored).

    C = 2 max(0, |rho_03| - sqrt(rho_11 rho_22), |rho_12| - sqrt(rho_00 rho_33)).

    References
    ----------
    T. Yu and J. H. Eberly, "Evolution from entanglement to decoherence of bipartite mixed
    'X' states", Quantum Inf. Comput. 7, 459 (2007).
    """
    r = as_states(rho, "rho", 4)
    d = np.clip(np.diagonal(r, axis1=-2, axis2=-1).real, 0.0, None)
    a = np.abs(r[..., 0, 3]) - np.sqrt(d[..., 1] * d[..., 2])
    b = np.abs(r[..., 1, 2]) - np.sqrt(d[..., 0] * d[..., 3])
    return np.clip(2.0 * np.maximum(a, b), 0.0, 1.0)


def _cholesky4(rt: NDArray[np.complex128], tol: float = 1e-14) -> tuple[list[list[Any]], NDArray[np.bool_]]:
    """Vectorised Cholesky factor of states stored component-wise, ``rt[i, j]`` of shape (n,).

    Returns the lower factor as nested lists ``low[i][j]`` (i >= j) of (n,) arrays and ``ok``,
    False where a pivot is <= ``tol`` (rank-deficient or nearly so; those entries are junk).
    """
    low: list[list[Any]] = [[None] * 4 for _ in range(4)]
    ok = np.ones(rt.shape[-1], dtype=bool)
    for j in range(4):
        pivot = rt[j, j].real - sum((low[j][k].real ** 2 + low[j][k].imag ** 2 for k in range(j)), 0.0)
        ok &= pivot > tol
        diag = np.sqrt(np.where(pivot > tol, pivot, 1.0))
        low[j][j] = diag
        for i in range(j + 1, 4):
            num = rt[i, j] - sum((low[i][k] * np.conj(low[j][k]) for k in range(j)), 0.0)
            low[i][j] = num / diag
    return low, ok


def _flip_entries(low: list[list[Any]]) -> dict[tuple[int, int], Any]:
    """Nonzero entries of M = L^T (Y x Y) L (both triangles) for lower-triangular L.

    M[j, k] = sum_i s_i L[i, j] L[3 - i, k] with s = (-1, 1, 1, -1): only i in [j, 3 - k]
    contributes, so M is complex symmetric and vanishes below the anti-diagonal (j + k > 3).
    """
    m: dict[tuple[int, int], Any] = {}
    for j in range(4):
        for k in range(j, 4 - j):
            m[j, k] = m[k, j] = sum(_YY_SIGN[i] * low[i][j] * low[3 - i][k] for i in range(j, 4 - k))
    return m


def _flip_gram_triangular(low: list[list[Any]]) -> NDArray[np.complex128]:
    """H = M^dagger M with M = L^T (Y x Y) L for lower-triangular L, as an (n, 4, 4) array.

    With M zero below the anti-diagonal, H[j, k] = sum_i conj(M[i, j]) M[i, k] runs over
    i <= 3 - max(j, k) only. Written out to avoid batched matmuls of tiny matrices.
    """
    m = _flip_entries(low)
    h = np.empty((4, 4, low[0][0].shape[0]), dtype=complex)
    for j in range(4):
        for k in range(j, 4):
            h[j, k] = sum(np.conj(m[i, j]) * m[i, k] for i in range(4 - max(j, k)))
            h[k, j] = np.conj(h[j, k])
    return np.moveaxis(h, -1, 0)


def _flip_gram(r: NDArray[np.complex128]) -> tuple[NDArray[np.complex128], NDArray[np.bool_], NDArray[np.complex128]]:
    """H = M^dagger M with M = A^T (Y x Y) A and rho = A A^dagger, for (n, 4, 4) states.

    Returns (H, fallback mask, M of the fallback rows): rows where the Cholesky factor does
    not exist use A = V sqrt(D) from the eigen-decomposition instead.
    """
    low, ok = _cholesky4(r.transpose(1, 2, 0))
    h = _flip_gram_triangular(low)
    bad = ~ok
    m_bad = np.zeros((0, 4, 4), dtype=complex)
    if np.any(bad):
        vals, vecs = np.linalg.eigh(r[bad])
        a = vecs * np.sqrt(np.clip(vals, 0.0, None))[..., None, :]
        m_bad = np.swapaxes(a, -1, -2) @ (_YY_SIGN[:, None] * a[:, ::-1, :])
        h[bad] = np.conj(m_bad) @ m_bad
    return h, bad, m_bad


def _wootters_lambdas(r: NDArray[np.complex128]) -> NDArray[np.float64]:
    """The decreasing l_i of Wootters (1998) for (n, 4, 4) states: singular values of M.

    Square roots of the eigenvalues of H = M^dagger M (fast). Where the smallest eigenvalue
    is below 1e-10 the square root would lose accuracy, so those rows use an SVD of M.
    """
    h, bad, m_bad = _flip_gram(r)
    mu = np.linalg.eigvalsh(h)[:, ::-1]
    lam = np.sqrt(np.clip(mu, 0.0, None))
    small = mu[:, -1] < 1e-10
    if np.any(small):
        m = np.zeros((r.shape[0], 4, 4), dtype=complex)
        m[bad] = m_bad
        rows = small & ~bad
        if np.any(rows):
            low, _ = _cholesky4(r[rows].transpose(1, 2, 0))
            m[rows] = _flip_matrix_triangular(low)
        lam[small] = np.linalg.svd(m[small], compute_uv=False)
    return lam


def _flip_matrix_triangular(low: list[list[Any]]) -> NDArray[np.complex128]:
    """M = L^T (Y x Y) L for lower-triangular L, as an (n, 4, 4) array."""
    m = np.zeros((low[0][0].shape[0], 4, 4), dtype=complex)
    for (j, k), value in _flip_entries(low).items():
        m[:, j, k] = value
    return m


def concurrence_general(rho: ArrayLike) -> NDArray[np.float64]:
    """Wootters concurrence of any two-qubit state, C = max(0, l1 - l2 - l3 - l4).

    The l_i are the square roots of the eigenvalues of rho (Y x Y) rho* (Y x Y) in decreasing
    order. They are computed as the singular values of M = A^T (Y x Y) A with rho = A A^dagger
    (A a Cholesky factor, or V sqrt(D) from the eigen-decomposition for rank-deficient states):
    M^dagger M is similar to rho (Y x Y) rho* (Y x Y). Small l_i are taken from an SVD of M, so
    they are accurate to rounding, not to the square root of rounding.

    References
    ----------
    W. K. Wootters, "Entanglement of formation of an arbitrary state of two qubits",
    Phys. Rev. Lett. 80, 2245 (1998).
    """
    r = as_states(rho, "rho", 4)
    flat = r.reshape(-1, 4, 4)
    lam = _wootters_lambdas(flat)
    c = lam[:, 0] - lam[:, 1] - lam[:, 2] - lam[:, 3]
    return np.clip(c, 0.0, 1.0).reshape(r.shape[:-2])


def concurrence(rho: ArrayLike) -> NDArray[np.float64]:
    """Concurrence of two-qubit states (batched), in [0, 1].

    Each batch element that is X-shaped (exact zeros off the diagonal and anti-diagonal) takes
    the closed form of :func:`concurrence_xstate`; the others the general Wootters formula of
    :func:`concurrence_general`. Both agree to 1e-10 on X-shaped states. Werner states with
    fidelity F > 1/2 have C = 2F - 1.

    Parameters
    ----------
    rho : array of shape (..., 4, 4)

    Returns
    -------
    numpy.ndarray
        Shape (...).

    Examples
    --------
    >>> from netsim.qinfo import werner_state
    >>> [round(float(c), 12) for c in concurrence(werner_state([0.2, 0.6, 1.0]))]
    [0.0, 0.4, 1.0]

    References
    ----------
    W. K. Wootters, Phys. Rev. Lett. 80, 2245 (1998). T. Yu and J. H. Eberly, Quantum Inf.
    Comput. 7, 459 (2007).
    """
    r = as_states(rho, "rho", 4)
    x = is_xstate(r)
    if np.all(x):
        return concurrence_xstate(r)
    flat, xf = r.reshape(-1, 4, 4), x.reshape(-1)
    out = np.empty(xf.shape)
    out[xf] = concurrence_xstate(flat[xf])
    out[~xf] = concurrence_general(flat[~xf])
    return out.reshape(r.shape[:-2])


def entanglement_of_formation(rho: ArrayLike) -> NDArray[np.float64]:
    """Entanglement of formation of two-qubit states in ebits (batched).

    E_F = h((1 + sqrt(1 - C^2)) / 2) with C the :func:`concurrence` and h the binary entropy.
    Never exceeds the entropy of either reduced state.

    References
    ----------
    W. K. Wootters, "Entanglement of formation of an arbitrary state of two qubits",
    Phys. Rev. Lett. 80, 2245 (1998).
    """
    c = concurrence(rho)
    return binary_entropy((1.0 + np.sqrt(np.clip(1.0 - c * c, 0.0, 1.0))) / 2.0)


def coherent_information(rho: ArrayLike, dims: tuple[int, int] = (2, 2),
                         end: str = "either") -> NDArray[np.float64]:
    """Coherent information in bits, clipped at 0: the one-way hashing lower bound on the
    distillable entanglement (ebits per pair).

    One-way hashing can be run from either end of the pair: with the classical messages going
    from A to B it achieves I(A>B) = S(B) - S(AB), from B to A I(B>A) = S(A) - S(AB). By default
    (``end="either"``) the larger of the two is returned, since the users may choose the
    direction; ``end="b"`` gives S(B) - S(AB) (B the second subsystem) and ``end="a"`` gives
    S(A) - S(AB).

    Parameters
    ----------
    rho : array of shape (..., dA dB, dA dB)
    dims : (int, int)
        (dA, dB); (2, 3) for a pair whose second qubit went through an erasure channel.
    end : {"either", "a", "b"}

    References
    ----------
    I. Devetak and A. Winter, "Distillation of secret key and entanglement from quantum
    states", Proc. R. Soc. A 461, 207 (2005).
    """
    if end not in ("either", "a", "b"):
        raise ParameterError("end", end, "one of either, a, b")
    r = as_states(rho, "rho", int(dims[0]) * int(dims[1]))
    s_ab = von_neumann_entropy(r)
    s_b = von_neumann_entropy(partial_trace(r, 1, tuple(dims)))
    s_a = von_neumann_entropy(partial_trace(r, 0, tuple(dims)))
    towards = {"b": s_b, "a": s_a, "either": np.maximum(s_a, s_b)}[end]
    return np.clip(towards - s_ab, 0.0, None)
