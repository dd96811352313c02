"""Concurrence, entanglement of formation and coherent information against QuTiP and published
closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
import qutip
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.entanglement import concurrence_general, concurrence_xstate, is_xstate
from netsim.qinfo.states import partial_trace, random_density_matrices, random_xstates


@pytest.mark.parametrize("rank", [None, 3, 2, 1])
def test_concurrence_matches_qutip_on_random_states(rank: int | None) -> None:
    # Reference library: QuTiP qutip.concurrence (Wootters formula), fixed seed.
    rho = random_density_matrices(40, 4, seed=20 + (rank or 4), rank=rank)
    ref = np.array([qutip.concurrence(qutip.Qobj(r, dims=[[2, 2], [2, 2]])) for r in rho])
    np.testing.assert_allclose(qinfo.concurrence(rho), ref, atol=1e-7)


def test_werner_concurrence_and_eof() -> None:
    # Wootters, PRL 80, 2245 (1998): Werner state with fidelity F > 1/2 has C = 2F - 1, and
    # E_F = h(1/2 + sqrt(F (1 - F))); separable (C = 0) for F <= 1/2.
    w = np.linspace(-1 / 3, 1.0, 25)
    f = (1 + 3 * w) / 4
    rho = qinfo.werner_state(w)
    expected_c = np.clip(2 * f - 1, 0, None)
    np.testing.assert_allclose(qinfo.concurrence(rho), expected_c, atol=1e-12)
    expected_e = np.where(f > 0.5, qinfo.binary_entropy(0.5 + np.sqrt(f * (1 - f))), 0.0)
    np.testing.assert_allclose(qinfo.entanglement_of_formation(rho), expected_e, atol=1e-12)


def test_bell_states_carry_one_ebit_and_product_states_none() -> None:
    # Maximally entangled: C = E_F = 1; product: 0 (Wootters 1998).
    for name in ("phi+", "phi-", "psi+", "psi-"):
        assert qinfo.entanglement_of_formation(qinfo.bell_state(name)) == pytest.approx(1.0, abs=1e-12)
    product = np.kron(random_density_matrices(1, 2, seed=1)[0], random_density_matrices(1, 2, seed=2)[0])
    assert qinfo.concurrence(product) == pytest.approx(0.0, abs=1e-12)


def test_pure_state_concurrence_closed_form() -> None:
    # Pure a|00> + b|11>: C = 2|ab| (Hill & Wootters, PRL 78, 5022, 1997).
    a = np.linspace(0, 1, 9)
    b = np.sqrt(1 - a**2)
    psi = np.zeros((9, 4), dtype=complex)
    psi[:, 0], psi[:, 3] = a, b
    rho = np.einsum("ni,nj->nij", psi, psi.conj())
    np.testing.assert_allclose(qinfo.concurrence(rho), 2 * a * b, atol=1e-12)
    # the same pure states rotated locally are no longer X-shaped: the general path must agree
    u = qutip.rand_unitary(2, seed=5).full()
    rotated = np.kron(u, np.eye(2)) @ rho @ np.kron(u, np.eye(2)).conj().T
    assert not np.any(is_xstate(rotated[1:-1]))
    np.testing.assert_allclose(qinfo.concurrence(rotated), 2 * a * b, atol=1e-12)


def test_xstate_fast_path_agrees_with_general_path() -> None:
    # Yu & Eberly, Quantum Inf. Comput. 7, 459 (2007) closed form vs Wootters (1998) general form.
    rho = random_xstates(2000, seed=30)
    assert np.all(is_xstate(rho))
    np.testing.assert_allclose(concurrence_xstate(rho), concurrence_general(rho), atol=1e-10)


def test_mixed_batch_dispatches_each_element() -> None:
    rho = np.concatenate([random_xstates(5, seed=31), random_density_matrices(5, 4, seed=32)])[::-1]
    mask = is_xstate(rho)
    assert mask.sum() == 5
    np.testing.assert_allclose(qinfo.concurrence(rho), concurrence_general(rho), atol=1e-10)
    assert qinfo.concurrence(rho.reshape(2, 5, 4, 4)).shape == (2, 5)


def test_concurrence_rejects_wrong_dimension() -> None:
    with pytest.raises(ParameterError, match=r"^rho = 'array of shape \(2, 2\)' is not allowed; expected an array of shape \(\.\.\., 4, 4\)$"):
        qinfo.concurrence(np.eye(2) / 2)


def test_coherent_information_of_werner_states() -> None:
    # Hashing bound of a Werner state: 1 - S(rho) since S(B) = 1 (Bennett, DiVincenzo, Smolin &
    # Wootters, PRA 54, 3824, 1996; Devetak & Winter 2005); positive above F of about 0.8107 (memory).
    w = np.linspace(0, 1, 21)
    rho = qinfo.werner_state(w)
    np.testing.assert_allclose(qinfo.coherent_information(rho), np.clip(1 - qinfo.von_neumann_entropy(rho), 0, None), atol=1e-12)
    w_threshold = _root(lambda x: 1 - float(qinfo.von_neumann_entropy(qinfo.werner_state(x))), 0.5, 1.0)
    f_threshold = (1 + 3 * w_threshold) / 4
    assert f_threshold == pytest.approx(0.8107, abs=1e-4)


def test_coherent_information_from_either_end_against_qutip() -> None:
    # Reference library: QuTiP entropies. One-way hashing may run from either end (Devetak &
    # Winter, Proc. R. Soc. A 461, 207, 2005): "a" is S(A) - S(AB), "b" is S(B) - S(AB), and the
    # default is the larger, so it does not depend on which user is written first.
    rho = random_density_matrices(30, 4, seed=91, rank=2)
    swap = np.eye(4)[[0, 2, 1, 3]]
    for r in rho:
        q = qutip.Qobj(r, dims=[[2, 2], [2, 2]])
        s_ab = qutip.entropy_vn(q, base=2)
        to_a = max(0.0, qutip.entropy_vn(q.ptrace(0), base=2) - s_ab)
        to_b = max(0.0, qutip.entropy_vn(q.ptrace(1), base=2) - s_ab)
        assert float(qinfo.coherent_information(r, end="a")) == pytest.approx(to_a, abs=1e-9)
        assert float(qinfo.coherent_information(r, end="b")) == pytest.approx(to_b, abs=1e-9)
        assert float(qinfo.coherent_information(r)) == pytest.approx(max(to_a, to_b), abs=1e-9)
        assert float(qinfo.coherent_information(swap @ r @ swap)) == pytest.approx(max(to_a, to_b), abs=1e-9)


def test_coherent_information_of_a_damped_pair_is_best_from_the_receiver() -> None:
    # Phi+ with qubit B damped (eta = 0.6): S(B) - S(AB) = h(eta/2) - h((1 - eta)/2) (Giovannetti &
    # Fazio, PRA 71, 032314, 2005) and S(A) - S(AB) = 1 - h((1 - eta)/2), the reverse coherent
    # information (Garcia-Patron, Pirandola, Lloyd & Shapiro, PRL 102, 210501, 2009 (memory)).
    eta = 0.6
    rho = qinfo.amplitude_damping(1 - eta).apply(qinfo.bell_state("phi+"), qubit=1)
    h = qinfo.binary_entropy
    assert float(qinfo.coherent_information(rho, end="b")) == pytest.approx(float(h(eta / 2) - h((1 - eta) / 2)), abs=1e-12)
    assert float(qinfo.coherent_information(rho)) == pytest.approx(float(1 - h((1 - eta) / 2)), abs=1e-12)
    with pytest.raises(ParameterError, match="end"):
        qinfo.coherent_information(rho, end="left")


def _root(fn, lo: float, hi: float) -> float:  # type: ignore[no-untyped-def]
    from scipy.optimize import brentq

    return float(brentq(fn, lo, hi, xtol=1e-14))


def test_coherent_information_through_erasure_is_one_minus_two_eps() -> None:
    # Quantum capacity of the erasure channel 1 - 2 eps, reached by a Bell pair
    # (Bennett, DiVincenzo & Smolin, PRL 78, 3217, 1997).
    for eps in (0.0, 0.1, 0.3, 0.6):
        out = qinfo.erasure(eps).apply(qinfo.bell_state("phi+"), qubit=1)
        assert qinfo.coherent_information(out, dims=(2, 3)) == pytest.approx(max(0.0, 1 - 2 * eps), abs=1e-12)


def _local_channel(kind: int, u: float) -> qinfo.Channel:
    return [qinfo.depolarizing, qinfo.dephasing, qinfo.amplitude_damping][kind](u)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31), kind=st.integers(0, 2), u=st.floats(0, 1), qubit=st.integers(0, 1),
       rank=st.integers(1, 4))
def test_eof_never_rises_under_local_channels(seed: int, kind: int, u: float, qubit: int, rank: int) -> None:
    # Entanglement monotone under LOCC (Bennett, DiVincenzo, Smolin & Wootters, PRA 54, 3824, 1996).
    rho = random_density_matrices(1, 4, seed=seed, rank=rank)[0]
    out = _local_channel(kind, u).apply(rho, qubit=qubit)
    assert qinfo.entanglement_of_formation(out) <= qinfo.entanglement_of_formation(rho) + 1e-9


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31), rank=st.integers(1, 4))
def test_eof_below_reduced_state_entropies(seed: int, rank: int) -> None:
    # E_F <= min(S(A), S(B)) (Bennett, DiVincenzo, Smolin & Wootters 1996: E_F(pure) = S(A), convex roof).
    rho = random_density_matrices(1, 4, seed=seed, rank=rank)[0]
    e = qinfo.entanglement_of_formation(rho)
    s_a = qinfo.von_neumann_entropy(partial_trace(rho, 0))
    s_b = qinfo.von_neumann_entropy(partial_trace(rho, 1))
    assert 0.0 <= e <= min(s_a, s_b) + 1e-9
    # and the hashing bound never exceeds E_F (Devetak & Winter 2005; E_D <= E_F, common practice)
    assert qinfo.coherent_information(rho) <= e + 1e-9


def test_eof_of_one_over_root_two_concurrence() -> None:
    # E_F(C) = h((1 + sqrt(1 - C^2))/2) (Wootters 1998): C = 1/sqrt2 gives h((2 + sqrt2)/4).
    c = 1 / math.sqrt(2)
    f = (1 + c) / 2  # Werner fidelity with C = 2F - 1
    rho = qinfo.werner_state((4 * f - 1) / 3)
    assert qinfo.entanglement_of_formation(rho) == pytest.approx(float(qinfo.binary_entropy((2 + math.sqrt(2)) / 4)), abs=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("rank", [4, 3, 2, 1])
def test_concurrence_matches_qutip_on_many_states(rank: int) -> None:
    # Reference library: QuTiP qutip.concurrence on 3000 random states per rank (fixed seed);
    # the same agreement as the quick test, over a much larger sample.
    rho = random_density_matrices(3000, 4, seed=900 + rank, rank=rank)
    ref = np.array([qutip.concurrence(qutip.Qobj(r, dims=[[2, 2], [2, 2]])) for r in rho])
    np.testing.assert_allclose(qinfo.concurrence(rho), ref, atol=1e-7)
