"""Entanglement swapping and recurrence purification against published recurrences and an
independent QuTiP simulation of the circuits."""

from __future__ import annotations

import numpy as np
import pytest
import qutip
from conftest import assert_probability, assert_valid_state, qutip_swap

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.states import random_density_matrices

_BELL = ["phi+", "phi-", "psi+", "psi-"]


def test_swap_matches_qutip_circuit_on_random_states() -> None:
    # Independent route: explicit 4-qubit projection with QuTiP (Zukowski et al., PRL 71, 4287, 1993).
    a = random_density_matrices(4, 4, seed=40)
    b = random_density_matrices(4, 4, seed=41)
    ours = qinfo.entanglement_swap(a, b)
    ref = np.stack([qutip_swap(x, y) for x, y in zip(a, b)])
    np.testing.assert_allclose(ours, ref, atol=1e-13)
    assert_valid_state(ours)


@pytest.mark.parametrize(("w1", "w2"), [(1.0, 1.0), (0.9, 0.8), (0.5, 0.95), (0.0, 0.7)])
def test_swap_of_werner_states_multiplies_parameters(w1: float, w2: float) -> None:
    # Werner swapping: w = w1 w2 (Briegel, Dur, Cirac & Zoller, PRL 81, 5932, 1998; memory).
    out = qinfo.entanglement_swap(qinfo.werner_state(w1), qinfo.werner_state(w2))
    np.testing.assert_allclose(out, qinfo.werner_state(w1 * w2), atol=1e-14)


def test_swap_gate_error_depolarizes_the_output() -> None:
    # Two-qubit depolarizing q before the measurement: Werner w1 w2 (1 - q) (common practice).
    out = qinfo.entanglement_swap(qinfo.werner_state(0.9), qinfo.werner_state(0.8), bsm_depolarizing=0.1)
    np.testing.assert_allclose(out, qinfo.werner_state(0.9 * 0.8 * 0.9), atol=1e-14)
    with pytest.raises(ParameterError, match=r"^bsm_depolarizing = 2 is not allowed; expected a number in \[0, 1\]$"):
        qinfo.entanglement_swap(qinfo.werner_state(0.9), qinfo.werner_state(0.8), bsm_depolarizing=2)


def _bell_diagonal(weights: tuple[float, float, float, float]) -> np.ndarray:
    return sum(w * qinfo.bell_state(name) for w, name in zip(weights, _BELL))


@pytest.mark.parametrize("q", [0.03, 0.2, 1.0])
def test_swap_gate_error_matches_qutip_on_non_werner_states(q: float) -> None:
    """The gate-error branch on inputs a Werner-only check cannot tell apart: Bell-diagonal states
    with unequal coefficients, and random states whose reduced state of A is not I/2 (so a branch
    that mixed with I/4 instead of rho_A (x) I/2 fails). Reference: the QuTiP circuit above."""
    firsts = [_bell_diagonal((0.85, 0.1, 0.05, 0.0)), _bell_diagonal((0.7, 0.0, 0.2, 0.1))]
    seconds = [_bell_diagonal((0.9, 0.02, 0.03, 0.05)), _bell_diagonal((0.6, 0.25, 0.1, 0.05))]
    firsts += list(random_density_matrices(3, 4, seed=42))
    seconds += list(random_density_matrices(3, 4, seed=43))
    for x, y in zip(firsts, seconds):
        ours = qinfo.entanglement_swap(x, y, bsm_depolarizing=q)
        np.testing.assert_allclose(ours, qutip_swap(x, y, q), atol=1e-13)
        assert_valid_state(ours)


def test_swap_broadcasts_batches() -> None:
    a = random_density_matrices(6, 4, seed=42).reshape(2, 3, 4, 4)
    out = qinfo.entanglement_swap(a, qinfo.bell_state("phi+"))
    assert out.shape == (2, 3, 4, 4)
    # swapping with a perfect Phi+ pair teleports qubit B1 onto C unchanged (Bennett et al., PRL 70, 1895, 1993)
    np.testing.assert_allclose(out, a, atol=1e-14)


def _bbpssw_recurrence(f1: float, f2: float) -> tuple[float, float]:
    """Bennett et al., PRL 76, 722 (1996): output fidelity and success probability for Werner inputs."""
    n = f1 * f2 + f1 * (1 - f2) / 3 + (1 - f1) * f2 / 3 + 5 * (1 - f1) * (1 - f2) / 9
    return (f1 * f2 + (1 - f1) * (1 - f2) / 9) / n, n


@pytest.mark.parametrize(("f1", "f2"), [(0.75, 0.75), (0.9, 0.6), (0.55, 0.99), (0.5, 0.5)])
def test_bbpssw_recurrence(f1: float, f2: float) -> None:
    # BBPSSW fidelity map F' = (F^2 + ((1-F)/3)^2) / (F^2 + 2F(1-F)/3 + 5((1-F)/3)^2) for equal
    # inputs (Bennett et al., PRL 76, 722, 1996), in its two-input form (Dur & Briegel, Rep. Prog.
    # Phys. 70, 1381, 2007; memory).
    w1, w2 = (4 * f1 - 1) / 3, (4 * f2 - 1) / 3
    p, out = qinfo.purify_bbpssw(qinfo.werner_state(w1), qinfo.werner_state(w2))
    f_out, n = _bbpssw_recurrence(f1, f2)
    assert p == pytest.approx(n, abs=1e-14)
    assert qinfo.fidelity(out, qinfo.bell_state("phi+")) == pytest.approx(f_out, abs=1e-14)
    assert_valid_state(out)


def test_bbpssw_twirls_non_werner_inputs_by_fidelity() -> None:
    # Twirling keeps only F (Bennett et al. 1996): any input with fidelity F behaves as Werner(F).
    rho = random_density_matrices(5, 4, seed=43)
    f = qinfo.fidelity(rho, qinfo.bell_state("phi+"))
    p, out = qinfo.purify_bbpssw(rho, rho)
    expected = np.array([_bbpssw_recurrence(x, x) for x in f])
    np.testing.assert_allclose(p, expected[:, 1], atol=1e-13)
    np.testing.assert_allclose(qinfo.fidelity(out, qinfo.bell_state("phi+")), expected[:, 0], atol=1e-13)


def _bell_diagonal(coeffs: np.ndarray) -> np.ndarray:
    """Coefficients on (Phi+, Psi-, Psi+, Phi-), the order used by Deutsch et al. (1996)."""
    basis = np.stack([qinfo.bell_state(n) for n in ("phi+", "psi-", "psi+", "phi-")])
    return np.einsum("...k,kij->...ij", coeffs, basis)


def test_dejmps_recurrence_on_bell_diagonal_states() -> None:
    # Deutsch et al., PRL 77, 2818 (1996): A' = (A^2 + B^2)/N, B' = 2CD/N, C' = (C^2 + D^2)/N,
    # D' = 2AB/N, N = (A + B)^2 + (C + D)^2 (memory of the paper's Eq. for identical pairs).
    coeffs = np.random.default_rng(44).dirichlet(np.ones(4) * 2, size=50)
    p, out = qinfo.purify_dejmps(_bell_diagonal(coeffs), _bell_diagonal(coeffs))
    a, b, c, d = coeffs.T
    n = (a + b) ** 2 + (c + d) ** 2
    expected = np.stack([(a**2 + b**2) / n, 2 * c * d / n, (c**2 + d**2) / n, 2 * a * b / n], axis=-1)
    np.testing.assert_allclose(p, n, atol=1e-14)
    np.testing.assert_allclose(out, _bell_diagonal(expected), atol=1e-14)


def test_dejmps_beats_bbpssw_from_the_second_round() -> None:
    # On Werner pairs the first rounds agree (both recurrences give (F^2 + ((1-F)/3)^2)/N); from
    # the second round on DEJMPS, which keeps the Bell-diagonal output instead of twirling it
    # back to Werner form, converges faster (Deutsch et al., PRL 77, 2818, 1996; memory).
    phi = qinfo.bell_state("phi+")
    d = b = qinfo.werner_state(0.6)
    fidelities = []
    for _ in range(2):
        _, d = qinfo.purify_dejmps(d, d)
        _, b = qinfo.purify_bbpssw(b, b)
        fidelities.append((float(qinfo.fidelity(d, phi)), float(qinfo.fidelity(b, phi))))
    assert fidelities[0][0] == pytest.approx(fidelities[0][1], abs=1e-14)
    assert fidelities[0][0] == pytest.approx(0.5 / 0.68, abs=1e-14)  # F = 0.7: 0.5/0.68 (BBPSSW map above)
    assert fidelities[1][0] > fidelities[1][1] + 0.05


def test_purification_of_random_states_is_valid() -> None:
    a = random_density_matrices(20, 4, seed=45)
    b = random_density_matrices(20, 4, seed=46)
    for protocol in (qinfo.purify_bbpssw, qinfo.purify_dejmps):
        p, out = protocol(a, b)
        assert_probability(p)
        assert_valid_state(out, atol=1e-12)


def _cnot(control: int, target: int, n: int = 4) -> qutip.Qobj:
    """CNOT on n qubits as a permutation matrix (qubit 0 is the most significant bit)."""
    dim = 2**n
    perm = np.zeros((dim, dim))
    for i in range(dim):
        bits = [(i >> (n - 1 - k)) & 1 for k in range(n)]
        if bits[control]:
            bits[target] ^= 1
        perm[int("".join(map(str, bits)), 2), i] = 1
    return qutip.Qobj(perm, dims=[[2] * n, [2] * n])


def _qutip_dejmps(rho_1: np.ndarray, rho_2: np.ndarray) -> tuple[float, np.ndarray]:
    """Reference: rotations, bilateral CNOT, Z measurement of pair 2, keep pair 1 on agreement."""
    rx_a, rx_b = (-1j * np.pi / 4 * qutip.sigmax()).expm(), (1j * np.pi / 4 * qutip.sigmax()).expm()
    local = qutip.tensor(rx_a, rx_b)
    dims = [[2, 2], [2, 2]]
    p1, p2 = (local * qutip.Qobj(r, dims=dims) * local.dag() for r in (rho_1, rho_2))
    total = qutip.tensor(p1, p2)  # qubits A1, B1, A2, B2
    gate = _cnot(1, 3) * _cnot(0, 2)
    total = gate * total * gate.dag()
    kept = 0
    for m in (0, 1):
        proj = qutip.tensor(qutip.qeye(2), qutip.qeye(2), qutip.basis(2, m).proj(), qutip.basis(2, m).proj())
        kept = kept + (proj * total * proj).ptrace([0, 1])
    p = float(kept.tr().real)
    return p, (kept / p).full()


def test_dejmps_matches_qutip_circuit_on_random_states() -> None:
    # Independent route for general (not Bell-diagonal) inputs: the DEJMPS circuit of
    # Deutsch et al. (PRL 77, 2818, 1996) simulated gate by gate with QuTiP.
    a = random_density_matrices(4, 4, seed=47)
    b = random_density_matrices(4, 4, seed=48)
    p, out = qinfo.purify_dejmps(a, b)
    for i in range(4):
        p_ref, out_ref = _qutip_dejmps(a[i], b[i])
        assert p[i] == pytest.approx(p_ref, abs=1e-13)
        np.testing.assert_allclose(out[i], out_ref, atol=1e-13)


@pytest.mark.parametrize("q", [0.0, 0.07])
def test_swap_as_sums_of_blocks_equals_the_dense_tensor_product(q: float) -> None:
    """The swap applied as 8 block products (the non-zero entries of the swap tensor G) against
    the dense formulation it replaced: r2 G^T as a 16 x 16 product, then a batched 4 x 4 product
    with r1 (G is built from the Bell vectors and Pauli corrections, and that formulation matched
    the QuTiP circuit above); broadcast batches, to float rounding."""
    from netsim.qinfo.operations import _SWAP_MATRIX

    a = random_density_matrices(6, 4, seed=50)
    b = random_density_matrices(7, 4, seed=51)
    r1, r2 = a[:, None], b[None, :]
    batch = (6, 7)
    t1 = np.broadcast_to(r1, batch + (4, 4)).reshape(batch + (2, 2, 2, 2))
    t = np.einsum("...k,lk->...l", np.broadcast_to(r2, batch + (4, 4)).reshape(batch + (16,)), _SWAP_MATRIX)
    dense = (np.swapaxes(t1, -3, -2).reshape(batch + (4, 4)) @ t.reshape(batch + (4, 4))).reshape(batch + (2, 2, 2, 2))
    dense = np.swapaxes(dense, -3, -2).reshape(batch + (4, 4))
    rho_a = np.trace(t1, axis1=-3, axis2=-1)
    dense = (1 - q) * dense + q * np.einsum("...aA,cC->...acAC", rho_a, np.eye(2) / 2).reshape(batch + (4, 4))
    np.testing.assert_allclose(qinfo.entanglement_swap(r1, r2, bsm_depolarizing=q), dense, rtol=0, atol=1e-14)
    np.testing.assert_allclose(qinfo.entanglement_swap(a[0], b[0], bsm_depolarizing=q), dense[0, 0], rtol=0, atol=1e-14)
