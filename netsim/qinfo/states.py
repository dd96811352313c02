"""Standard two-qubit states, the fidelity, partial traces and small array helpers.

Conventions (shared by every layer, see DEVELOPERS.md):

- Qubit 0 is the left factor of ``numpy.kron``.
- Bell states: Phi+- = (|00> +- |11>)/sqrt2, Psi+- = (|01> +- |10>)/sqrt2.
- Werner state with parameter w: w |Phi+><Phi+| + (1 - w) I/4, fidelity F = (1 + 3w)/4.
- Fidelity is the squared Uhlmann form, F = (tr sqrt(sqrt(rho) sigma sqrt(rho)))^2, which equals
  <psi|rho|psi> for a pure target.
- Batched: functions accept arrays of shape (..., d, d) and return arrays of shape (...).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError

__all__ = [
    "BELL_NAMES",
    "as_states",
    "bell_state",
    "bell_vector",
    "fidelity",
    "is_xstate",
    "partial_trace",
    "phi_plus_fidelity",
    "random_density_matrices",
    "random_xstates",
    "werner_state",
]

#: Names accepted by :func:`bell_state`, in the order used for Bell-diagonal coefficients.
BELL_NAMES: tuple[str, ...] = ("phi+", "phi-", "psi+", "psi-")

_S = 1.0 / np.sqrt(2.0)
_BELL_VECTORS = {
    "phi+": np.array([_S, 0, 0, _S], dtype=complex),
    "phi-": np.array([_S, 0, 0, -_S], dtype=complex),
    "psi+": np.array([0, _S, _S, 0], dtype=complex),
    "psi-": np.array([0, _S, -_S, 0], dtype=complex),
}


def as_states(rho: ArrayLike, name: str = "rho", dim: int | None = None) -> NDArray[np.complex128]:
    """Return ``rho`` as a complex array of shape (..., d, d), checking the shape only.

    Raises
    ------
    ParameterError
        If the last two axes are not square (or not ``dim`` x ``dim`` when ``dim`` is given).
    """
    arr = np.asarray(rho, dtype=complex)
    if arr.ndim < 2 or arr.shape[-1] != arr.shape[-2]:
        raise ParameterError(name, f"array of shape {arr.shape}", "an array of shape (..., d, d)")
    if dim is not None and arr.shape[-1] != dim:
        raise ParameterError(name, f"array of shape {arr.shape}", f"an array of shape (..., {dim}, {dim})")
    return arr


def bell_vector(name: str) -> NDArray[np.complex128]:
    """State vector of the Bell state ``name`` (one of :data:`BELL_NAMES`)."""
    key = str(name).lower()
    if key not in _BELL_VECTORS:
        raise ParameterError("name", name, "one of " + ", ".join(repr(n) for n in BELL_NAMES))
    return _BELL_VECTORS[key].copy()


def bell_state(name: str = "phi+") -> NDArray[np.complex128]:
    """Density matrix (4 x 4) of a Bell state.

    Parameters
    ----------
    name : {"phi+", "phi-", "psi+", "psi-"}
        Phi+- = (|00> +- |11>)/sqrt2, Psi+- = (|01> +- |10>)/sqrt2; qubit 0 is the left factor.

    Returns
    -------
    numpy.ndarray
        Complex array of shape (4, 4).

    Examples
    --------
    >>> float(bell_state("phi+")[0, 3].real)
    0.5
    """
    v = np.round(bell_vector(name) * np.sqrt(2.0))  # entries 0, +-1: exact halves below
    return (np.outer(v, v.conj()) / 2.0).astype(complex)


def werner_state(w: ArrayLike) -> NDArray[np.complex128]:
    """Werner state w |Phi+><Phi+| + (1 - w) I/4 (batched over ``w``).

    Parameters
    ----------
    w : float or array
        Werner parameter in [-1/3, 1] (the state is positive exactly there). Its fidelity to
        Phi+ is F = (1 + 3w)/4; it is entangled for w > 1/3.

    Returns
    -------
    numpy.ndarray
        Shape ``w.shape + (4, 4)``.

    Examples
    --------
    >>> round(float(fidelity(werner_state(0.6), bell_state("phi+"))), 12)
    0.7

    References
    ----------
    R. F. Werner, "Quantum states with Einstein-Podolsky-Rosen correlations admitting a
    hidden-variable model", Phys. Rev. A 40, 4277 (1989).
    """
    wa = np.asarray(w, dtype=float)
    if np.any(~((wa >= -1.0 / 3.0 - 1e-12) & (wa <= 1.0 + 1e-12))):
        bad = wa[~((wa >= -1.0 / 3.0 - 1e-12) & (wa <= 1.0 + 1e-12))].flat[0]
        raise ParameterError("w", float(bad), "a Werner parameter in [-1/3, 1]")
    phi = bell_state("phi+")
    return wa[..., None, None] * phi + (1.0 - wa)[..., None, None] * np.eye(4) / 4.0


#: Entries that vanish in an X-shaped state (nonzero only on the diagonal and anti-diagonal).
_OFF_X = np.array([[0, 1, 1, 0], [1, 0, 0, 1], [1, 0, 0, 1], [0, 1, 1, 0]], dtype=bool)


def is_xstate(rho: ArrayLike) -> NDArray[np.bool_]:
    """True where every entry of a 4 x 4 state off the diagonal and anti-diagonal is exactly 0."""
    r = as_states(rho, "rho", 4)
    nonzero = [r[..., i, j] != 0 for i, j in zip(*np.nonzero(_OFF_X))]
    return ~np.logical_or.reduce(nonzero)


def _is_pure(rho: NDArray[np.complex128], tol: float = 1e-12) -> NDArray[np.bool_]:
    purity = np.einsum("...ij,...ji->...", rho, rho).real
    return np.abs(purity - 1.0) <= tol


def _psd_sqrt(rho: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """Square root of a positive matrix; eigenvalues below 1e-15 (rounding of zeros) count as 0."""
    vals, vecs = np.linalg.eigh(rho)
    root = np.sqrt(np.where(vals > 1e-15, vals, 0.0))
    return (vecs * root[..., None, :]) @ np.conj(np.swapaxes(vecs, -1, -2))


def phi_plus_fidelity(states: NDArray[Any]) -> NDArray[np.float64]:
    """<Phi+|rho|Phi+> = (rho_00,00 + rho_00,11 + rho_11,00 + rho_11,11) / 2 of two-qubit states
    (..., 4, 4), batched: the four entries that :func:`fidelity` with Phi+ reads, without its checks
    (a 0-d array for one state)."""
    return np.real(states[..., 0, 0] + states[..., 0, 3] + states[..., 3, 0] + states[..., 3, 3]) / 2.0


def fidelity(rho: ArrayLike, sigma: ArrayLike) -> NDArray[np.float64]:
    """Uhlmann fidelity in its squared form, batched.

    F(rho, sigma) = (tr sqrt(sqrt(rho) sigma sqrt(rho)))^2, so that F = <psi|rho|psi> when
    sigma = |psi><psi| is pure. Where either argument is pure (purity within 1e-12 of 1) the
    cheap form tr(rho sigma) is used; otherwise F = ||sqrt(rho) sqrt(sigma)||_1^2 (sum of singular
    values), which is symmetric by construction. Eigenvalues below 1e-15 count as zero; near
    rank-deficient states the fidelity itself changes like the square root of a perturbation, so
    expect agreement with other libraries to about 1e-8 there and to rounding elsewhere.

    Parameters
    ----------
    rho, sigma : array of shape (..., d, d)
        Density matrices; the leading axes broadcast.

    Returns
    -------
    numpy.ndarray
        Fidelities in [0, 1], shape of the broadcast leading axes.

    References
    ----------
    A. Uhlmann, "The 'transition probability' in the state space of a *-algebra",
    Rep. Math. Phys. 9, 273 (1976). R. Jozsa, "Fidelity for mixed quantum states",
    J. Mod. Opt. 41, 2315 (1994).
    """
    r = as_states(rho, "rho")
    s = as_states(sigma, "sigma", r.shape[-1])
    r, s = np.broadcast_arrays(r, s)
    batch, d = r.shape[:-2], r.shape[-1]
    r, s = r.reshape(-1, d, d), s.reshape(-1, d, d)
    out = np.einsum("...ij,...ji->...", r, s).real
    general = ~(_is_pure(r) | _is_pure(s))
    if np.any(general):
        product = _psd_sqrt(r[general]) @ _psd_sqrt(s[general])
        out[general] = np.sum(np.linalg.svd(product, compute_uv=False), axis=-1) ** 2
    return np.clip(out, 0.0, 1.0).reshape(batch)


def partial_trace(rho: ArrayLike, keep: int | tuple[int, ...], dims: tuple[int, ...] | None = None) -> NDArray[np.complex128]:
    """Reduced state of the subsystems ``keep`` (batched).

    Parameters
    ----------
    rho : array of shape (..., D, D)
    keep : int or tuple of int
        Indices of the subsystems to keep, in increasing order (subsystem 0 is the left factor
        of ``kron``).
    dims : tuple of int, optional
        Subsystem dimensions; default: all qubits (D must be a power of 2).
    """
    r = as_states(rho)
    dims = _qubit_dims(r.shape[-1]) if dims is None else tuple(int(d) for d in dims)
    keep_t = (keep,) if isinstance(keep, (int, np.integer)) else tuple(sorted(keep))
    n = len(dims)
    batch = r.shape[:-2]
    t = r.reshape(batch + dims + dims)
    nb = len(batch)
    traced = [k for k in range(n) if k not in keep_t]
    for offset, k in enumerate(traced):
        axis = nb + k - offset
        t = np.trace(t, axis1=axis, axis2=axis + n - offset)
    d_keep = int(np.prod([dims[k] for k in keep_t])) if keep_t else 1
    return t.reshape(batch + (d_keep, d_keep))


def _qubit_dims(d: int) -> tuple[int, ...]:
    n = round(float(np.log2(d))) if d > 0 else 0
    if 2**n != d:
        raise ParameterError("rho", f"matrix of size {d}", "a state of n qubits (size a power of 2), or pass dims")
    return (2,) * n


def random_density_matrices(n: int, d: int = 4, seed: Any = 0, rank: int | None = None) -> NDArray[np.complex128]:
    """``n`` random density matrices of size ``d`` (Hilbert-Schmidt measure for full rank).

    Used by tests and benchmarks. ``rank`` < d gives rank-deficient states.
    """
    rng = np.random.default_rng(seed)
    k = d if rank is None else int(rank)
    g = rng.normal(size=(n, d, k)) + 1j * rng.normal(size=(n, d, k))
    rho = g @ np.conj(np.swapaxes(g, -1, -2))
    return rho / np.trace(rho, axis1=-2, axis2=-1).real[:, None, None]


def random_xstates(n: int, seed: Any = 0) -> NDArray[np.complex128]:
    """``n`` random full-rank X-shaped two-qubit states (diagonal plus anti-diagonal).

    Populations are Dirichlet(1, 1, 1, 1); each anti-diagonal coherence has a uniform phase and
    a modulus uniform in [0, sqrt(rho_ii rho_jj)), which keeps the state positive. Used by tests
    and benchmarks.
    """
    rng = np.random.default_rng(seed)
    d = rng.dirichlet(np.ones(4), size=n)
    rho = np.zeros((n, 4, 4), dtype=complex)
    rho[:, range(4), range(4)] = d
    for i, j in ((0, 3), (1, 2)):
        z = np.sqrt(d[:, i] * d[:, j]) * rng.uniform(0, 1, n) * np.exp(1j * rng.uniform(0, 2 * np.pi, n))
        rho[:, i, j], rho[:, j, i] = z, z.conj()
    return rho
