"""The Pauli-form chain arithmetic (netsim.qinfo.pauli_form) against the 4x4 functions of
netsim.qinfo and against QuTiP (an independent reference library)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import qutip_swap

from netsim import qinfo
from netsim.qinfo import pauli_form
from netsim.qinfo.states import random_density_matrices


def _decay(t: np.ndarray, t1: float, t2: float) -> tuple[np.ndarray, np.ndarray]:
    return -np.expm1(-t / t1), np.exp(-t / t2)


def test_pauli_components_match_qutip_expectations() -> None:
    """R[a, b] = tr(rho P_a (x) P_b) with P = (I, X, Y, Z): QuTiP's expect of the tensor product
    (Nielsen & Chuang, sec. 2.4, the Pauli expansion of a density matrix), and back."""
    import qutip

    paulis = [qutip.qeye(2), qutip.sigmax(), qutip.sigmay(), qutip.sigmaz()]
    rho = random_density_matrices(1, 4, seed=11)[0]
    state = qutip.Qobj(rho, dims=[[2, 2], [2, 2]])
    r = pauli_form.to_pauli(rho)
    for a in range(4):
        for b in range(4):
            assert r[a, b] == pytest.approx(qutip.expect(qutip.tensor(paulis[a], paulis[b]), state), abs=1e-12)
    np.testing.assert_allclose(pauli_form.from_pauli(r), rho, atol=1e-13)
    assert pauli_form.fidelity(r) == pytest.approx(qutip.expect(qutip.ket2dm(qutip.bell_state("00")), state), abs=1e-12)


def test_decay_equals_decohere_on_both_qubits() -> None:
    """The transfer matrices of memory decay against netsim.qinfo.decohere (which is itself checked
    against QuTiP's Lindblad solver in tests/test_engine_states.py), one storage time per state."""
    rng = np.random.default_rng(3)
    rho = random_density_matrices(1, 4, seed=4)[0]
    tl, tr = rng.uniform(0, 2, 7), rng.uniform(0, 2, 7)
    gl, cl = _decay(tl, 1.3, 0.9)
    gr, cr = _decay(tr, 2.0, 3.5)
    got = pauli_form.from_pauli(pauli_form.decayed(pauli_form.to_pauli(rho), gl, cl, gr, cr))
    want = qinfo.decohere(qinfo.decohere(rho, tl, 1.3, 0.9, qubit=0), tr, 2.0, 3.5, qubit=1)
    np.testing.assert_allclose(got, want, atol=1e-13)


def test_chain_equals_swaps_one_by_one_on_generic_states() -> None:
    """A 4-hop chain of generic (not Bell-diagonal) pairs, each its own state per chain for the
    second hop (as purified pairs are), decayed and swapped with gate errors: against
    netsim.qinfo.decohere and netsim.qinfo.entanglement_swap applied one by one."""
    rng = np.random.default_rng(8)
    n_chains, n = 6, 4
    pairs = list(random_density_matrices(n, 4, seed=5))
    per_chain = random_density_matrices(n_chains, 4, seed=6)
    t1 = [1.0, 2.0, 0.7, 5.0, 1.5]
    t2 = [0.8, 1.0, 1.2, 2.0, 3.0]
    left, right = rng.uniform(0, 1, (n_chains, n)), rng.uniform(0, 1, (n_chains, n))
    gates = [0.0, 0.03, 0.1]
    gl, cl = _decay(left, np.array(t1[:-1]), np.array(t2[:-1]))
    gr, cr = _decay(right, np.array(t1[1:]), np.array(t2[1:]))
    forms = [pauli_form.to_pauli(p) for p in pairs]
    forms[1] = pauli_form.to_pauli(per_chain)
    got = pauli_form.from_pauli(pauli_form.chain_states(forms, gl, cl, gr, cr, gates))
    for c in range(n_chains):
        out = None
        for i in range(n):
            rho = per_chain[c] if i == 1 else pairs[i]
            rho = qinfo.decohere(rho, left[c, i], t1[i], t2[i], qubit=0)
            rho = qinfo.decohere(rho, right[c, i], t1[i + 1], t2[i + 1], qubit=1)
            out = rho if out is None else qinfo.entanglement_swap(out, rho, bsm_depolarizing=gates[i - 1])
        np.testing.assert_allclose(got[c], out, atol=1e-12)


@pytest.mark.parametrize("n", [1, 2, 5])
def test_chain_mean_is_the_mean_of_the_chain_states(n: int) -> None:
    """chain_mean (the planning estimate's mean delivered state, from weighted means) against
    the mean of chain_states, one form per chain, on generic complex states (not Bell-diagonal),
    per-chain later pairs (as purified pairs are), gate errors and unequal T1, T2 per site:
    equal to rounding (invariant of the implementation: two ways to the same sum)."""
    rng = np.random.default_rng(21 + n)
    n_chains = 300
    bell = qinfo.bell_state("phi+")
    pairs = [pauli_form.to_pauli(0.8 * bell + 0.2 * p) for p in random_density_matrices(n, 4, seed=22 + n)]
    if n > 2:
        pairs[2] = pauli_form.to_pauli(0.8 * bell + 0.2 * random_density_matrices(n_chains, 4, seed=23))
    t1, t2 = rng.uniform(0.5, 3.0, n + 1), rng.uniform(0.2, 2.0, n + 1)
    left, right = rng.uniform(0, 0.2, (n_chains, n)), rng.uniform(0, 0.2, (n_chains, n))
    gl, cl = _decay(left, t1[:-1], t2[:-1])
    gr, cr = _decay(right, t1[1:], t2[1:])
    gates = list(rng.uniform(0, 0.1, n - 1))
    want = pauli_form.chain_states(pairs, gl, cl, gr, cr, gates).mean(axis=0)
    got = pauli_form.chain_mean(pairs, gl, cl, gr, cr, gates)
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-14)
    assert np.abs(want).max() > 0.1 and np.abs(want[1:, 1:]).max() > 0.05  # correlations survive
    with pytest.raises(ValueError, match="one form"):
        pauli_form.chain_mean([pauli_form.to_pauli(random_density_matrices(n_chains, 4, seed=24))] + pairs[1:],
                              gl, cl, gr, cr, gates)


def test_swap_matches_an_explicit_qutip_bell_measurement() -> None:
    """One swap in Pauli form against QuTiP's explicit Bell measurement with Pauli corrections
    (conftest.qutip_swap)."""
    rho_1, rho_2 = random_density_matrices(2, 4, seed=9)
    zeros = np.zeros((1, 2))
    forms = [pauli_form.to_pauli(rho_1), pauli_form.to_pauli(rho_2)]
    got = pauli_form.from_pauli(pauli_form.chain_states(forms, zeros, zeros + 1, zeros, zeros + 1, [0.0]))[0]
    np.testing.assert_allclose(got, qutip_swap(rho_1, rho_2), atol=1e-12)
    assert math.isclose(float(np.real(np.trace(got))), 1.0, abs_tol=1e-12)


def test_chain_decay_with_attempt_dephasing_is_the_product_of_its_factors() -> None:
    """The coherence of a waiting qubit is exp(-t/T2) times (1 - a)^k for the k attempts at its
    site (the model's definition, DESIGN: attempt dephasing), also for a = 0 and a = 1 (total:
    one attempt erases it, none keeps it) and T2 = inf."""
    rng = np.random.default_rng(12)
    n_chains, n = 9, 4
    left, right = rng.uniform(0, 2, (n_chains, n)), rng.uniform(0, 2, (n_chains, n))
    attempts_left = rng.integers(0, 40, (n_chains, n)).astype(float)
    attempts_right = rng.integers(0, 40, (n_chains, n)).astype(float)
    attempts_left[0] = attempts_right[0] = 0.0
    t1, t2 = np.array([3.0, 1.0, np.inf, 2.0, 5.0]), np.array([1.0, 0.5, np.inf, 4.0, 0.2])
    dephasing = np.array([0.0, 1e-3, 1.0, 0.25, 0.0])
    gl, cl, gr, cr = pauli_form.chain_decay(left, right, t1, t2, dephasing, attempts_left, attempts_right)
    for c in range(n_chains):
        for i in range(n):
            assert gl[c, i] == pytest.approx(1 - math.exp(-left[c, i] / t1[i]), abs=1e-15)
            assert gr[c, i] == pytest.approx(1 - math.exp(-right[c, i] / t1[i + 1]), abs=1e-15)
            want_l = math.exp(-left[c, i] / t2[i]) * (1 - dephasing[i]) ** attempts_left[c, i]
            want_r = math.exp(-right[c, i] / t2[i + 1]) * (1 - dephasing[i + 1]) ** attempts_right[c, i]
            assert cl[c, i] == pytest.approx(want_l, rel=1e-12, abs=1e-300)
            assert cr[c, i] == pytest.approx(want_r, rel=1e-12, abs=1e-300)
