"""Chains of stored and swapped pairs in Pauli form: the batched arithmetic both the planning
estimate and the event engine use to turn storage times into delivered states.

A two-qubit state is written rho = 1/4 sum_ab R[a, b] P_a (x) P_b with P = (I, X, Y, Z) and
R[a, b] = tr(rho P_a (x) P_b). In this form the steps of a repeater chain are cheap and exact
rewrites of :func:`netsim.qinfo.decohere`, :func:`netsim.qinfo.dephasing`,
:func:`netsim.qinfo.depolarizing` and :func:`netsim.qinfo.entanglement_swap`:

- A one-qubit channel with Pauli transfer matrix A acts as R -> A R (qubit 0) or R A^T
  (qubit 1). Memory decay (gamma = 1 - exp(-t/T1), coherence c = exp(-t/T2)):
  A = [[1, 0, 0, 0], [0, c, 0, 0], [0, 0, c, 0], [gamma, 0, 0, 1 - gamma]]
  (rho_00 += gamma rho_11, rho_11 *= 1 - gamma, coherences times c). Dephasing that multiplies
  coherences by f (attempt dephasing) multiplies c by f; depolarizing p is diag(1, 1 - p, 1 - p, 1 - p).
- The entanglement swap (Bell measurement averaged over its four outcomes, Pauli correction on
  the far qubit) of R1 and R2 is R1 diag(v) with v = (1, R2[1, 1], -R2[2, 2], R2[3, 3]): the
  corrected outcomes twirl the second pair, so only its correlations <XX>, <YY>, <ZZ> remain
  (the output's column 0 is R1's, as tr R2 = 1). A gate error q at the measuring site mixes in
  tr_B(rho_1) (x) I/2, whose Pauli form is R1's column 0 alone: v[1:] times 1 - q.
- A chain swapped left to right is therefore its first pair, decayed, with its columns scaled by
  the product of the later pairs' kept correlations (:func:`chain_states`).
- Fidelity to Phi+ = (R[0, 0] + R[1, 1] - R[2, 2] + R[3, 3]) / 4.

References: the Pauli transfer matrix of amplitude damping and dephasing, M. A. Nielsen and
I. L. Chuang, *Quantum Computation and Quantum Information* (2000), sec. 8.3; the twirl of the
resource pair by outcome-averaged teleportation, C. H. Bennett et al., Phys. Rev. A 54, 3824
(1996). ``tests/test_qinfo_pauli_form.py`` checks every step against the 4x4 functions of
:mod:`netsim.qinfo` and against QuTiP.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["SWAP_SIGN", "chain_decay", "chain_mean", "chain_states", "correlations", "decayed", "fidelity", "from_pauli", "to_pauli"]

_PAULI = np.array([[[1, 0], [0, 1]], [[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)
#: _PAULI_PAIRS[a, b] = P_a (x) P_b (4 x 4)
_PAULI_PAIRS = np.einsum("aij,bkl->abikjl", _PAULI, _PAULI).reshape(4, 4, 4, 4)
#: (16, 16) matrices of to_pauli and from_pauli: R[ab] = sum_ij rho[ij] P_ab[ji]; rho[ij] = sum_ab R[ab] P_ab[ij] / 4
_TO_PAULI = np.ascontiguousarray(_PAULI_PAIRS.transpose(3, 2, 0, 1).reshape(16, 16))
_FROM_PAULI = np.ascontiguousarray(_PAULI_PAIRS.reshape(16, 16) / 4.0)
#: v = SWAP_SIGN * (R2[1, 1], R2[2, 2], R2[3, 3]) prefixed with 1: what a swap keeps of its later pair
SWAP_SIGN = np.array([1.0, 1.0, -1.0, 1.0])


def to_pauli(rho: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """R[..., a, b] = tr(rho P_a (x) P_b) of (..., 4, 4) states (complex: exact for any 4 x 4 input)."""
    rho = np.asarray(rho, dtype=complex)
    # tr(rho P) = sum_ij rho_ij P_ji: one (.., 16) x (16, 16) product
    return (rho.reshape(-1, 16) @ _TO_PAULI).reshape(rho.shape)


def from_pauli(r: NDArray[Any]) -> NDArray[np.complex128]:
    """The (..., 4, 4) states of Pauli forms ``r`` (..., 4, 4), real or complex."""
    r = np.asarray(r)
    flat = r.reshape(-1, 16)
    if np.iscomplexobj(flat):
        out = flat @ _FROM_PAULI
    else:  # two real products: a real form times the complex Pauli pairs
        out = np.empty((len(flat), 16), dtype=complex)
        out.real = flat @ _FROM_PAULI.real
        out.imag = flat @ _FROM_PAULI.imag
    return out.reshape(r.shape[:-2] + (4, 4))


def decayed(r: NDArray[Any], gl: NDArray[np.float64], cl: NDArray[np.float64],
            gr: NDArray[np.float64], cr: NDArray[np.float64]) -> NDArray[np.complex128]:
    """A_L r A_R^T: memory decay (gamma, coherence factor) of qubit 0 (``gl``, ``cl``) and qubit
    1 (``gr``, ``cr``), per state; ``r`` one Pauli form (4, 4) or one per state (N, 4, 4),
    factors (N,); returns (N, 4, 4), real when ``r`` is."""
    n = len(gl)
    rows = np.empty((n, 4, 4), dtype=np.result_type(r, gl))
    rows[:, 0] = r[..., 0, :]
    rows[:, 1] = cl[:, None] * r[..., 1, :]
    rows[:, 2] = cl[:, None] * r[..., 2, :]
    rows[:, 3] = gl[:, None] * r[..., 0, :] + (1.0 - gl)[:, None] * r[..., 3, :]
    out = np.empty_like(rows)
    out[:, :, 0] = rows[:, :, 0]
    out[:, :, 1] = cr[:, None] * rows[:, :, 1]
    out[:, :, 2] = cr[:, None] * rows[:, :, 2]
    out[:, :, 3] = gr[:, None] * rows[:, :, 0] + (1.0 - gr)[:, None] * rows[:, :, 3]
    return out


def correlations(r: NDArray[Any], gl: NDArray[np.float64], cl: NDArray[np.float64],
                 gr: NDArray[np.float64], cr: NDArray[np.float64]) -> NDArray[Any]:
    """diag(A_L r A_R^T)[1:] (..., 3): the <XX>, <YY>, <ZZ> of decayed pairs (as :func:`decayed`),
    all a swap keeps of them, by broadcasting: factors (N,) or (N, hops), ``r`` one form (4, 4),
    one per hop (hops, 4, 4) or one per state and hop (N, hops, 4, 4)."""
    return np.stack(_kept(r, gl, cl, gr, cr), axis=-1)


def _kept(r: NDArray[Any], gl: NDArray[np.float64], cl: NDArray[np.float64],
          gr: NDArray[np.float64], cr: NDArray[np.float64]) -> tuple[NDArray[Any], NDArray[Any], NDArray[Any]]:
    """The <XX>, <YY> and <ZZ> of :func:`correlations`, as three arrays."""
    both = cl * cr
    return both * r[..., 1, 1], both * r[..., 2, 2], _decayed_zz(r, gl, gr)


def _decayed_zz(r: NDArray[Any], gl: NDArray[np.float64], gr: NDArray[np.float64]) -> NDArray[Any]:
    """<ZZ> of pairs ``r`` after memory decay gamma ``gl`` (qubit 0) and ``gr`` (qubit 1), by
    broadcasting (one pair or one per state; one hop or several)."""
    return (gl * gr * r[..., 0, 0] + gl * (1.0 - gr) * r[..., 0, 3] + (1.0 - gl) * gr * r[..., 3, 0]
            + (1.0 - gl) * (1.0 - gr) * r[..., 3, 3])


def chain_decay(left_s: NDArray[np.float64], right_s: NDArray[np.float64], t1_s: NDArray[np.float64],
                t2_s: NDArray[np.float64], dephasing: NDArray[np.float64] | None = None,
                attempts_left: NDArray[np.float64] | None = None, attempts_right: NDArray[np.float64] | None = None,
                ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """(gl, cl, gr, cr), each (N, n): the memory decay of every hop's left and right qubit, as
    :func:`chain_states` takes it, after storage times ``left_s``, ``right_s`` (N, n) at sites
    with ``t1_s``, ``t2_s`` (n + 1,): gamma = 1 - exp(-t/T1), coherence exp(-t/T2) (no checks).
    ``dephasing`` (n + 1,): a site's attempt dephasing a multiplies a waiting qubit's coherence
    by (1 - a)^k for the k attempts counted in ``attempts_left`` / ``attempts_right`` (N, n)."""
    with np.errstate(over="ignore"):  # t / T2 beyond the largest float: exp(-inf) = 0
        gl, gr = -np.expm1(-left_s / t1_s[:-1]), -np.expm1(-right_s / t1_s[1:])
        cl = _coherence(left_s, t2_s[:-1], None if dephasing is None else dephasing[:-1], attempts_left)
        cr = _coherence(right_s, t2_s[1:], None if dephasing is None else dephasing[1:], attempts_right)
    return gl, cl, gr, cr


def _coherence(t_s: NDArray[np.float64], t2_s: NDArray[np.float64], dephasing: NDArray[np.float64] | None,
               attempts: NDArray[np.float64] | None) -> NDArray[np.float64]:
    """exp(-t/T2) (1 - a)^k per qubit, as one exp(-t/T2 + k log(1 - a)) where 0 <= a < 1."""
    exponent = -t_s / t2_s
    whole = None  # the hops whose site's attempt dephasing is total (a = 1): (1 - a)^k by power
    if dephasing is not None and attempts is not None and np.any(dephasing > 0):
        d = np.asarray(dephasing, dtype=float)
        partial = d < 1.0
        log_kept = np.zeros(len(d))
        log_kept[partial] = np.log1p(-d[partial])
        exponent += attempts * log_kept
        if not partial.all():
            whole = ~partial
    out = np.exp(exponent)
    if whole is not None and attempts is not None:
        out[:, whole] *= np.power(0.0, attempts[:, whole])
    return out


def chain_states(pairs: list[NDArray[np.complex128]], gl: NDArray[np.float64], cl: NDArray[np.float64],
                 gr: NDArray[np.float64], cr: NDArray[np.float64],
                 gate_errors: list[float]) -> NDArray[np.complex128]:
    """Pauli forms (N, 4, 4) of chains of n pairs swapped left to right.

    ``pairs[i]``: Pauli form of hop i's pair before storage, (4, 4) or one per chain (N, 4, 4);
    ``gl, cl, gr, cr`` (N, n): each hop's memory decay of its left and right qubit (gamma,
    coherence factor); ``gate_errors[i - 1]`` (i = 1 .. n - 1): the gate error of the site joining
    hop i - 1 and hop i.

    Pauli forms of states (Hermitian) are real; forms whose imaginary parts are rounding noise
    (as :func:`to_pauli` leaves them) are computed in real arithmetic, and the result is real.
    The later hops' kept correlations (:func:`correlations`) are taken for all hops at once.
    """
    forms = [np.real_if_close(p, tol=1000) for p in pairs]
    out = decayed(forms[0], gl[:, 0], cl[:, 0], gr[:, 0], cr[:, 0])
    if len(forms) == 1:
        return out
    return out * _swap_weights(forms[1:], gl, cl, gr, cr, gate_errors, out.dtype)[:, None, :]


def chain_mean(pairs: list[NDArray[np.complex128]], gl: NDArray[np.float64], cl: NDArray[np.float64],
               gr: NDArray[np.float64], cr: NDArray[np.float64], gate_errors: list[float]) -> NDArray[Any]:
    """The mean over the N chains of :func:`chain_states` (4, 4), without the N forms.

    Each chain's form is its first pair r decayed, ``A r A'^T``, with its columns scaled by the
    swap weights w (N, 4). The rows of ``A r`` are 1, c_L, c_L and (gamma_L, 1 - gamma_L) times
    rows of r, and the columns of ``(A r) A'^T`` likewise with c_R, gamma_R: the mean is a sum of
    nine fixed 4x4 matrices made from r, each column b weighted by a mean of (1, c_L, gamma_L)
    times (1, c_R, gamma_R) times w_b. Equal to ``chain_states(...).mean(axis=0)`` up to rounding
    (a test compares them); the first pair must be one form (4, 4) for all chains."""
    forms = [np.real_if_close(p, tol=1000) for p in pairs]
    r = forms[0]
    if r.ndim != 2:
        raise ValueError("chain_mean: the first pair must be one form (4, 4) for all chains")
    n = len(gl)
    dtype = np.result_type(r, gl)
    weights = (np.ones((n, 4), dtype=dtype) if len(forms) == 1
               else _swap_weights(forms[1:], gl, cl, gr, cr, gate_errors, dtype))
    left = np.stack([np.ones(n), cl[:, 0], gl[:, 0]], axis=1)                 # (N, 3)
    right = np.stack([np.ones(n), cr[:, 0], gr[:, 0]], axis=1)                # (N, 3)
    # means[k, m, b] = mean over chains of left_k right_m w_b (one matrix product)
    means = ((left[:, :, None] * weights[:, None, :]).reshape(n, 12).T @ right).reshape(3, 4, 3).transpose(0, 2, 1) / n
    # the rows of A r by factor (1, c_L, gamma_L), then the columns of each by (1, c_R, gamma_R)
    rows = np.zeros((3, 4, 4), dtype=r.dtype)
    rows[0, 0], rows[0, 3] = r[0], r[3]
    rows[1, 1], rows[1, 2] = r[1], r[2]
    rows[2, 3] = r[0] - r[3]
    parts = np.zeros((3, 3, 4, 4), dtype=r.dtype)
    parts[:, 0, :, 0], parts[:, 0, :, 3] = rows[:, :, 0], rows[:, :, 3]
    parts[:, 1, :, 1], parts[:, 1, :, 2] = rows[:, :, 1], rows[:, :, 2]
    parts[:, 2, :, 3] = rows[:, :, 0] - rows[:, :, 3]
    return np.einsum("kmab,kmb->ab", parts, means)


def _swap_weights(later: list[NDArray[Any]], gl: NDArray[np.float64], cl: NDArray[np.float64],
                  gr: NDArray[np.float64], cr: NDArray[np.float64], gate_errors: list[float],
                  dtype: Any) -> NDArray[Any]:
    """(N, 4): what the swaps keep of each chain's first pair, column by column: 1, then the
    products over the later hops of their kept <XX>, <YY>, <ZZ> (signed, times 1 - gate error)."""
    if all(p.ndim == 2 for p in later):
        r = np.stack(later)                                                  # (n - 1, 4, 4)
    else:  # some hops have one pair per chain (purified pairs)
        r = np.stack([np.broadcast_to(p, (len(gl), 4, 4)) for p in later], axis=1)  # (N, n - 1, 4, 4)
    keep = 1.0 - np.asarray(gate_errors, dtype=float)
    factor = SWAP_SIGN[1:] * keep[:, None]                                        # (n - 1, 3)
    # the later hops' kept <XX>, <YY>, <ZZ> (:func:`correlations`), each (N, n - 1), and their
    # products over the hops one component at a time (numpy reduces an (N, n - 1) array along its
    # last axis a few times faster than an (N, n - 1, 3) one along its middle; for real forms, the
    # forms of states, the same products in the same order)
    weights = np.empty((len(gl), 4), dtype=np.result_type(dtype, r))
    weights[:, 0] = 1.0
    kept = _kept(r, gl[:, 1:], cl[:, 1:], gr[:, 1:], cr[:, 1:])
    for j in range(3):
        weights[:, j + 1] = (kept[j] * factor[:, j]).prod(axis=1)
    return weights


def fidelity(r: NDArray[np.complex128]) -> NDArray[np.float64]:
    """Fidelity to Phi+ of Pauli forms ``r`` (..., 4, 4)."""
    return np.real(r[..., 0, 0] + r[..., 1, 1] - r[..., 2, 2] + r[..., 3, 3]) / 4.0
