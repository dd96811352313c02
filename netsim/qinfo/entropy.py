"""Entropies and the Holevo information, in bits (log base 2), batched.

Conventions: 0 log 0 = 0; eigenvalues within 1e-15 below zero (rounding) count as zero, so
rank-deficient states give exact results with no NaN and no negative noise.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError
from netsim.qinfo.states import as_states, is_xstate

__all__ = ["binary_entropy", "holevo_information", "shannon_entropy", "von_neumann_entropy"]


def _xlog2x(x: NDArray[Any]) -> NDArray[np.float64]:
    """x log2 x with 0 log 0 = 0 (x clipped at 0)."""
    x = np.clip(x, 0.0, None)
    safe = np.where(x > 0.0, x, 1.0)
    return np.where(x > 0.0, x * np.log2(safe), 0.0)


def binary_entropy(p: ArrayLike) -> NDArray[np.float64]:
    """Binary entropy h(p) = -p log2 p - (1 - p) log2(1 - p), in bits (batched).

    Parameters
    ----------
    p : float or array
        Probabilities in [0, 1] (rounding up to 1e-12 outside is clipped).

    Raises
    ------
    ParameterError
        If a value lies outside [0, 1] by more than 1e-12 or is NaN.
    """
    pa = np.asarray(p, dtype=float)
    bad = ~((pa >= -1e-12) & (pa <= 1.0 + 1e-12))
    if np.any(bad):
        raise ParameterError("p", float(pa[bad].flat[0]), "a probability in [0, 1]")
    pa = np.clip(pa, 0.0, 1.0)
    return np.abs(-_xlog2x(pa) - _xlog2x(1.0 - pa))


def shannon_entropy(probs: ArrayLike) -> NDArray[np.float64]:
    """Shannon entropy -sum p log2 p of distributions along the last axis, in bits.

    Parameters
    ----------
    probs : array of shape (..., n)
        Non-negative entries summing to 1 along the last axis (tolerance 1e-9).

    Raises
    ------
    ParameterError
        If an entry is negative or a row does not sum to 1.
    """
    pa = np.asarray(probs, dtype=float)
    _check_distribution("probs", pa)
    return np.abs(-np.sum(_xlog2x(pa), axis=-1))


def _check_distribution(name: str, pa: NDArray[np.float64]) -> None:
    if pa.ndim < 1 or pa.shape[-1] == 0:
        raise ParameterError(name, f"array of shape {pa.shape}", "a non-empty array of probabilities")
    if np.any(~(pa >= -1e-12)):
        raise ParameterError(name, float(pa[~(pa >= -1e-12)].flat[0]), "probabilities >= 0")
    sums = pa.sum(axis=-1)
    if np.any(np.abs(sums - 1.0) > 1e-9):
        bad = sums[np.abs(sums - 1.0) > 1e-9].flat[0]
        raise ParameterError(f"sum({name})", float(bad), "1 (probabilities must sum to 1)")


def _qubit_entropy(rho: NDArray[np.complex128]) -> NDArray[np.float64]:
    """Closed form for 2 x 2 states: eigenvalues (1 +- |r|)/2 from the Bloch vector."""
    tr = (rho[..., 0, 0] + rho[..., 1, 1]).real
    det = (rho[..., 0, 0] * rho[..., 1, 1]).real - np.abs(rho[..., 0, 1]) ** 2
    disc = np.sqrt(np.clip(tr**2 - 4.0 * det, 0.0, None))
    lam = np.stack([(tr + disc) / 2.0, (tr - disc) / 2.0], axis=-1)
    return np.abs(-np.sum(_xlog2x(lam), axis=-1))


def _xstate_eigenvalues(rho: NDArray[np.complex128]) -> NDArray[np.float64]:
    """Eigenvalues of X-shaped 4 x 4 states: those of the blocks {0, 3} and {1, 2}."""
    out = []
    for i, j in ((0, 3), (1, 2)):
        a, d = rho[..., i, i].real, rho[..., j, j].real
        radius = np.hypot((a - d) / 2.0, np.abs(rho[..., i, j]))
        out += [(a + d) / 2.0 + radius, (a + d) / 2.0 - radius]
    return np.stack(out, axis=-1)


def _eigenvalues(r: NDArray[np.complex128]) -> NDArray[np.float64]:
    """Eigenvalues of (..., d, d) states; X-shaped two-qubit states in closed form."""
    if r.shape[-1] != 4:
        return np.asarray(np.linalg.eigvalsh(r), dtype=float)
    x = is_xstate(r)
    if np.all(x):
        return _xstate_eigenvalues(r)
    flat, xf = r.reshape(-1, 4, 4), x.reshape(-1)
    lam = np.empty((xf.size, 4))
    lam[xf] = _xstate_eigenvalues(flat[xf])
    lam[~xf] = np.linalg.eigvalsh(flat[~xf])
    return lam.reshape(r.shape[:-1])


def von_neumann_entropy(rho: ArrayLike) -> NDArray[np.float64]:
    """Von Neumann entropy S(rho) = -tr rho log2 rho, in bits (batched).

    Exact for rank-deficient states: eigenvalues are clipped at 0 and 0 log 0 = 0, so a pure
    state gives 0 to rounding (|S| <= 1e-12), never NaN. 2 x 2 states use the closed form in
    the Bloch length, X-shaped 4 x 4 states (exact zeros off the diagonal and anti-diagonal,
    detected per state) the closed-form eigenvalues of their two 2 x 2 blocks, all others
    ``numpy.linalg.eigvalsh``.

    Parameters
    ----------
    rho : array of shape (..., d, d)
        Density matrices (Hermitian, positive, trace 1; not checked).

    Returns
    -------
    numpy.ndarray
        Shape (...), values in [0, log2 d].

    References
    ----------
    M. A. Nielsen and I. L. Chuang, Quantum Computation and Quantum Information, 10th
    anniversary ed., Cambridge University Press (2010), Ch. 11.
    """
    r = as_states(rho)
    if r.shape[-1] == 2:
        out = _qubit_entropy(r)
    else:
        out = np.abs(-np.sum(_xlog2x(_eigenvalues(r)), axis=-1))
    return np.clip(out, 0.0, np.log2(r.shape[-1]))


def holevo_information(probabilities: ArrayLike, states: ArrayLike) -> NDArray[np.float64]:
    """Holevo information chi = S(sum_i p_i rho_i) - sum_i p_i S(rho_i), in bits (batched).

    Parameters
    ----------
    probabilities : array of shape (..., n)
        Prior probabilities of the ensemble members (non-negative, summing to 1).
    states : array of shape (..., n, d, d)
        The member states.

    Returns
    -------
    numpy.ndarray
        chi, shape (...); 0 <= chi <= S(average state) <= log2 d.

    Examples
    --------
    Two orthogonal states with equal priors carry one bit:

    >>> import numpy as np
    >>> float(holevo_information([0.5, 0.5], np.stack([np.diag([1, 0]), np.diag([0, 1])])))
    1.0

    References
    ----------
    A. S. Holevo, "Bounds for the quantity of information transmitted by a quantum
    communication channel", Probl. Inf. Transm. 9, 177 (1973).
    """
    p = np.asarray(probabilities, dtype=float)
    s = as_states(states, "states")
    _check_distribution("probabilities", p)
    if s.ndim < 3 or s.shape[-3] != p.shape[-1]:
        raise ParameterError("states", f"array of shape {s.shape}",
                             f"one state per probability: shape (..., {p.shape[-1]}, d, d)")
    avg = np.einsum("...i,...ijk->...jk", p, s)
    chi = von_neumann_entropy(avg) - np.sum(p * von_neumann_entropy(s), axis=-1)
    return np.clip(chi, 0.0, None)
