"""Operations on Bell pairs: entanglement swapping and two recurrence purification protocols.

All functions are batched over leading axes of (..., 4, 4) states; qubit 0 of each pair is the
left factor of ``numpy.kron``, and the target state is Phi+ = (|00> + |11>)/sqrt2.

Conventions written down once:

- **Swap** (:func:`entanglement_swap`): pair 1 holds qubits (A, B1), pair 2 holds (B2, C). A
  Bell-state measurement on (B1, B2) with outcome Phi+, Phi-, Psi+, Psi- is followed by the
  correction I, Z, X, Y on C (the far qubit of pair 2). The result is the state of (A, C)
  averaged over the four outcomes (each with its Born probability): a fixed channel of the two
  inputs. A gate error ``bsm_depolarizing`` q depolarizes the two measured qubits together
  before an ideal measurement, rho -> (1 - q) rho + q I/4 (x) tr_{B1 B2} rho.
- **Purification** (:func:`purify_bbpssw`, :func:`purify_dejmps`): Alice holds qubit 0 of both
  pairs, Bob qubit 1. Each applies a CNOT with pair 1 as control and pair 2 as target, both
  measure pair 2 in the Z basis, and the round succeeds when their outcomes agree. Pair 1 is
  kept; pair 2 is consumed. The returned state is the normalised state of pair 1 given success,
  without any further twirl.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from netsim.errors import ParameterError
from netsim.qinfo.states import as_states, bell_state, bell_vector

__all__ = ["entanglement_swap", "purify_bbpssw", "purify_dejmps"]

_PAULI = np.array([[[1, 0], [0, 1]], [[1, 0], [0, -1]], [[0, 1], [1, 0]], [[0, -1j], [1j, 0]]], dtype=complex)
_XX = np.kron(_PAULI[2], _PAULI[2])
_PHI_PLUS = bell_state("phi+")


def _swap_tensor() -> NDArray[np.complex128]:
    """G[b, m, n, p, c, x, C, y] = sum_k conj(beta_k[b, m]) beta_k[n, p] U_k[c, x] conj(U_k[C, y])."""
    beta = np.stack([bell_vector(n).reshape(2, 2) for n in ("phi+", "phi-", "psi+", "psi-")])
    return np.einsum("kbm,knp,kcx,kCy->bmnpcxCy", beta.conj(), beta, _PAULI, _PAULI.conj())


#: G as a (16, 16) matrix, rows (b, n, c, C) and columns (m, x, p, y) (see entanglement_swap).
_SWAP_MATRIX = np.ascontiguousarray(_swap_tensor().transpose(0, 2, 4, 6, 1, 5, 3, 7).reshape(16, 16))


def _swap_terms() -> tuple[tuple[int, int, tuple[int, ...]], ...]:
    """G's non-zero entries, grouped: (column a, column b, rows) with G[row, a] = G[row, b] = 1 for
    each row and every other entry of those rows 0 (8 of the 16 rows, in 4 groups). Read from
    the tensor itself; entanglement_swap applies G as these sums instead of a 16 x 16 product."""
    groups: dict[tuple[int, int], list[int]] = {}
    for row in range(16):
        cols = np.flatnonzero(np.abs(_SWAP_MATRIX[row]) > 1e-12)
        if len(cols) == 0:
            continue
        if len(cols) != 2 or not np.allclose(_SWAP_MATRIX[row, cols], 1.0, rtol=0, atol=1e-12):
            raise AssertionError("the swap tensor is not a sum of pairs of unit entries")  # pragma: no cover
        groups.setdefault((int(cols[0]), int(cols[1])), []).append(row)
    return tuple((a, b, tuple(rows)) for (a, b), rows in groups.items())


_SWAP_TERMS = _swap_terms()


def entanglement_swap(rho_1: ArrayLike, rho_2: ArrayLike, bsm_depolarizing: float = 0.0) -> NDArray[np.complex128]:
    """Swap two pairs (A, B1) and (B2, C) into one pair (A, C) (batched).

    Bell-state measurement on B1, B2; Pauli correction on C (Phi+ I, Phi- Z, Psi+ X, Psi- Y);
    the output is averaged over outcomes. Two Werner states with parameters w1, w2 give a Werner
    state with w1 w2 (w1 w2 (1 - q) with the gate error q).

    Parameters
    ----------
    rho_1, rho_2 : array of shape (..., 4, 4)
        The two pairs; leading axes broadcast.
    bsm_depolarizing : float
        q in [0, 1]: two-qubit depolarizing of the measured qubits before the measurement.

    Returns
    -------
    numpy.ndarray
        State of (A, C), shape (..., 4, 4).

    References
    ----------
    M. Zukowski, A. Zeilinger, M. A. Horne and A. K. Ekert, "'Event-ready-detectors' Bell
    experiment via entanglement swapping", Phys. Rev. Lett. 71, 4287 (1993). H.-J. Briegel,
    W. Dur, J. I. Cirac and P. Zoller, Phys. Rev. Lett. 81, 5932 (1998).
    """
    q = _gate_error(bsm_depolarizing)
    r1 = as_states(rho_1, "rho_1", 4)
    r2 = as_states(rho_2, "rho_2", 4)
    batch = np.broadcast_shapes(r1.shape[:-2], r2.shape[:-2])
    t2 = np.broadcast_to(r2, batch + (4, 4)).reshape(batch + (16,))
    # out[a, c, A, C] = sum G[b, m, n, p, c, x, C, y] r1[a, b, A, n] r2[m, x, p, y]. With G's rows
    # (b, n, c, C) each the sum of two entries of r2 (_SWAP_TERMS), this is 8 products of a 2 x 2
    # block of r1 (rows a at b, columns A at n) with such a sum, added into the block (c, C) of out.
    r1b = np.broadcast_to(r1, batch + (4, 4))
    out = np.zeros(batch + (4, 4), dtype=complex)
    for x, y, rows in _SWAP_TERMS:
        pair = (t2[..., x] + t2[..., y])[..., None, None]
        for row in rows:
            b, n, c, cc = (row >> 3) & 1, (row >> 2) & 1, (row >> 1) & 1, row & 1
            out[..., c::2, cc::2] += r1b[..., b::2, n::2] * pair
    if q > 0.0:
        # (1 - q) out + q tr_B(rho_1) (x) I/2: the mixed part lives on the blocks c = C only
        half_a = (r1b[..., 0::2, 0::2] + r1b[..., 1::2, 1::2]) * 0.5  # tr_B(rho_1) / 2 = rho_A (x) I/2's blocks
        out *= 1.0 - q
        for c in (0, 1):
            out[..., c::2, c::2] += q * half_a
    return out


def _gate_error(value: float) -> float:
    try:
        q = float(value)
    except (TypeError, ValueError):
        raise ParameterError("bsm_depolarizing", value, "a number in [0, 1]") from None
    if not 0.0 <= q <= 1.0:
        raise ParameterError("bsm_depolarizing", value, "a number in [0, 1]")
    return q


def _bilateral_cnot(r1: NDArray[np.complex128], r2: NDArray[np.complex128]) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
    """Bilateral CNOT (pair 1 controls), Z measurement of pair 2, keep pair 1 on agreement.

    The unnormalised kept state is rho_1 * (rho_2 + (X x X) rho_2 (X x X)) entrywise.
    """
    kept = r1 * (r2 + _XX @ r2 @ _XX)
    p = np.trace(kept, axis1=-2, axis2=-1).real
    safe = np.where(p > 0.0, p, 1.0)
    return p, kept / safe[..., None, None]


def _pair_inputs(rho_1: ArrayLike, rho_2: ArrayLike) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    r1 = as_states(rho_1, "rho_1", 4)
    r2 = as_states(rho_2, "rho_2", 4)
    batch = np.broadcast_shapes(r1.shape[:-2], r2.shape[:-2])
    return np.broadcast_to(r1, batch + (4, 4)), np.broadcast_to(r2, batch + (4, 4))


def _twirl_to_werner(rho: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """Isotropic twirl: the Werner state with the same fidelity F to Phi+."""
    f = np.einsum("ij,...ji->...", _PHI_PLUS, rho).real[..., None, None]
    return f * _PHI_PLUS + (1.0 - f) / 3.0 * (np.eye(4) - _PHI_PLUS)


def purify_bbpssw(rho_1: ArrayLike, rho_2: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
    """One BBPSSW recurrence round on two pairs (batched).

    Both pairs are first twirled into Werner form with their fidelity F to Phi+ (random
    bilateral rotations U x U*), then the bilateral CNOT round of the module docstring runs.
    For fidelities F1, F2 the output fidelity is
    (F1 F2 + (1 - F1)(1 - F2)/9) / N with success probability
    N = F1 F2 + F1 (1 - F2)/3 + (1 - F1) F2/3 + 5 (1 - F1)(1 - F2)/9.

    Returns
    -------
    (success_probability, output_state)
        Shapes (...) and (..., 4, 4); pair 1 is kept, the state is not twirled again.

    References
    ----------
    C. H. Bennett, G. Brassard, S. Popescu, B. Schumacher, J. A. Smolin and W. K. Wootters,
    "Purification of noisy entanglement and faithful teleportation via noisy channels",
    Phys. Rev. Lett. 76, 722 (1996).
    """
    r1, r2 = _pair_inputs(rho_1, rho_2)
    return _bilateral_cnot(_twirl_to_werner(r1), _twirl_to_werner(r2))


def _dejmps_rotation() -> NDArray[np.complex128]:
    """Alice Rx(pi/2) = (I - iX)/sqrt2 on qubit 0, Bob Rx(-pi/2) = (I + iX)/sqrt2 on qubit 1."""
    rx_a = (np.eye(2) - 1j * _PAULI[2]) / np.sqrt(2.0)
    rx_b = (np.eye(2) + 1j * _PAULI[2]) / np.sqrt(2.0)
    return np.kron(rx_a, rx_b)


_DEJMPS_U = _dejmps_rotation()


def purify_dejmps(rho_1: ArrayLike, rho_2: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.complex128]]:
    """One DEJMPS recurrence round on two pairs (batched).

    Alice rotates both her qubits by Rx(pi/2), Bob both of his by Rx(-pi/2); then the bilateral
    CNOT round of the module docstring. For Bell-diagonal inputs with coefficients
    (A, B, C, D) on (Phi+, Psi-, Psi+, Phi-) -- the same for both pairs -- the output is
    Bell-diagonal with A' = (A^2 + B^2)/N, B' = 2CD/N, C' = (C^2 + D^2)/N, D' = 2AB/N and success
    probability N = (A + B)^2 + (C + D)^2.

    Returns
    -------
    (success_probability, output_state)
        Shapes (...) and (..., 4, 4); pair 1 is kept.

    References
    ----------
    D. Deutsch, A. Ekert, R. Jozsa, C. Macchiavello, S. Popescu and A. Sanpera, "Quantum
    privacy amplification and the security of quantum cryptography over noisy channels",
    Phys. Rev. Lett. 77, 2818 (1996).
    """
    r1, r2 = _pair_inputs(rho_1, rho_2)
    u, ud = _DEJMPS_U, _DEJMPS_U.conj().T
    return _bilateral_cnot(u @ r1 @ ud, u @ r2 @ ud)
