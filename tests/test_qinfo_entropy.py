"""Entropies and the Holevo information against QuTiP and textbook values."""

from __future__ import annotations

import math

import numpy as np
import pytest
import qutip
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.states import random_density_matrices, random_xstates


@pytest.mark.parametrize(("d", "rank"), [(2, None), (2, 1), (4, None), (4, 2), (4, 1), (8, 3)])
def test_von_neumann_entropy_matches_qutip(d: int, rank: int | None) -> None:
    # Reference: QuTiP entropy_vn(rho, base=2) on random states with a fixed seed.
    rho = random_density_matrices(30, d, seed=10 + d, rank=rank)
    ref = np.array([qutip.entropy_vn(qutip.Qobj(r), base=2) for r in rho])
    np.testing.assert_allclose(qinfo.von_neumann_entropy(rho), ref, atol=1e-10)


def test_pure_and_maximally_mixed_states_exact() -> None:
    # S = 0 for pure, log2 d for I/d (Nielsen & Chuang 2010, Sec. 11.3).
    pure = qinfo.bell_state("psi-")
    s_pure = qinfo.von_neumann_entropy(pure)
    assert 0.0 <= s_pure <= 1e-12 and not math.isnan(s_pure)
    assert qinfo.von_neumann_entropy(np.eye(4) / 4) == pytest.approx(2.0, abs=1e-14)
    assert qinfo.von_neumann_entropy(np.diag([1.0, 0.0])) == 0.0
    assert not np.signbit(qinfo.von_neumann_entropy(np.diag([1.0, 0.0, 0.0, 0.0])))


def test_werner_entropy_closed_form() -> None:
    # Werner spectrum {(1+3w)/4, (1-w)/4 x3} (Werner 1989; memory) gives S in closed form.
    w = np.linspace(0.0, 1.0, 11)
    lam = np.stack([(1 + 3 * w) / 4] + [(1 - w) / 4] * 3, axis=-1)
    expected = -np.sum(np.where(lam > 0, lam * np.log2(np.where(lam > 0, lam, 1)), 0), axis=-1)
    np.testing.assert_allclose(qinfo.von_neumann_entropy(qinfo.werner_state(w)), expected, atol=1e-12)


def test_binary_and_shannon_entropy() -> None:
    # h(1/2) = 1, h(0) = h(1) = 0; uniform over 4 outcomes is 2 bits (Shannon 1948; common practice).
    np.testing.assert_allclose(qinfo.binary_entropy([0.0, 0.5, 1.0]), [0.0, 1.0, 0.0], atol=0)
    assert qinfo.binary_entropy(0.11) == pytest.approx(-0.11 * math.log2(0.11) - 0.89 * math.log2(0.89))
    assert qinfo.shannon_entropy([0.25] * 4) == pytest.approx(2.0, abs=1e-15)
    assert qinfo.shannon_entropy([1.0, 0.0]) == 0.0


def test_entropy_input_errors() -> None:
    with pytest.raises(ParameterError, match=r"^p = 1\.5 is not allowed; expected a probability in \[0, 1\]$"):
        qinfo.binary_entropy(1.5)
    with pytest.raises(ParameterError, match=r"^sum\(probs\) = 0\.9 is not allowed; expected 1"):
        qinfo.shannon_entropy([0.5, 0.4])
    with pytest.raises(ParameterError, match=r"^probs = -0\.1 is not allowed; expected probabilities >= 0$"):
        qinfo.shannon_entropy([1.1, -0.1])


def test_holevo_information_of_zero_and_plus() -> None:
    # Nielsen & Chuang (2010), Sec. 12.1.1 (memory): {|0>, |+>} with equal priors has
    # chi = h(cos^2(pi/8)), about 0.6 bits.
    zero = np.array([[1, 0], [0, 0]], dtype=complex)
    plus = np.full((2, 2), 0.5, dtype=complex)
    chi = qinfo.holevo_information([0.5, 0.5], np.stack([zero, plus]))
    assert chi == pytest.approx(float(qinfo.binary_entropy(math.cos(math.pi / 8) ** 2)), abs=1e-12)
    assert chi == pytest.approx(0.6009, abs=1e-4)


def test_holevo_information_orthogonal_and_identical() -> None:
    # Orthogonal pure states carry H(p); identical states carry nothing (Holevo 1973; common practice).
    basis = np.stack([np.diag([1.0, 0.0]), np.diag([0.0, 1.0])]).astype(complex)
    assert qinfo.holevo_information([0.3, 0.7], basis) == pytest.approx(float(qinfo.binary_entropy(0.3)))
    same = np.stack([np.eye(2) / 2] * 3)
    assert qinfo.holevo_information([0.2, 0.3, 0.5], same) == pytest.approx(0.0, abs=1e-14)


def test_holevo_information_weights_mixed_members_by_their_priors() -> None:
    """chi = S(sum p_i rho_i) - sum p_i S(rho_i) (Holevo, Probl. Inf. Transm. 9, 177, 1973) with
    unequal priors and mixed members of unequal entropy, worked by hand: a formula that averages
    the members' entropies without their priors fails both."""
    # 3/4 |0><0| and 1/4 I/2: average diag(7/8, 1/8), S = h(1/8) = 3/8 + (7/8) log2(8/7) = 0.543564;
    # minus 1/4 * 1 bit -> 0.293564
    chi = qinfo.holevo_information([0.75, 0.25], np.stack([np.diag([1.0, 0.0]), np.eye(2) / 2]))
    assert float(chi) == pytest.approx(0.293564, abs=1e-6)
    # 0.6 diag(0.9, 0.1) and 0.4 |1><1|: average diag(0.54, 0.46), h(0.46) = 0.995378,
    # minus 0.6 h(0.1) = 0.6 * 0.468996 -> 0.713981
    chi = qinfo.holevo_information([0.6, 0.4], np.stack([np.diag([0.9, 0.1]), np.diag([0.0, 1.0])]))
    assert float(chi) == pytest.approx(0.713981, abs=1e-6)


def test_holevo_information_shape_error() -> None:
    with pytest.raises(ParameterError, match=r"^states = .* expected one state per probability"):
        qinfo.holevo_information([0.5, 0.5], np.stack([np.eye(2) / 2] * 3))


@settings(max_examples=50, deadline=None)
@given(seed=st.integers(0, 2**31), d=st.sampled_from([2, 3, 4]), rank=st.integers(1, 4))
def test_entropy_between_zero_and_log_d(seed: int, d: int, rank: int) -> None:
    # 0 <= S(rho) <= log2 d (Nielsen & Chuang 2010, Th. 11.8).
    rho = random_density_matrices(4, d, seed=seed, rank=min(rank, d))
    s = qinfo.von_neumann_entropy(rho)
    assert np.all(s >= 0.0) and np.all(s <= math.log2(d) + 1e-12)


@settings(max_examples=50, deadline=None)
@given(seed=st.integers(0, 2**31), n=st.integers(1, 5), d=st.sampled_from([2, 4]))
def test_holevo_information_below_entropy_of_average(seed: int, n: int, d: int) -> None:
    # 0 <= chi <= S(sum p rho) (Holevo 1973; Nielsen & Chuang 2010, Th. 12.1).
    states = random_density_matrices(n, d, seed=seed)
    p = np.random.default_rng(seed).dirichlet(np.ones(n))
    chi = qinfo.holevo_information(p, states)
    avg = np.einsum("i,ijk->jk", p, states)
    assert 0.0 <= chi <= qinfo.von_neumann_entropy(avg) + 1e-12


def test_xstate_entropy_fast_path_agrees_with_eigvalsh() -> None:
    # Closed-form eigenvalues of the two 2 x 2 blocks of X states vs QuTiP entropy_vn (reference library).
    rho = np.concatenate([random_xstates(300, seed=60), random_density_matrices(5, 4, seed=61),
                          qinfo.werner_state(np.array([0.0, 0.5, 1.0]))])
    ref = np.array([qutip.entropy_vn(qutip.Qobj(r), base=2) for r in rho])
    np.testing.assert_allclose(qinfo.von_neumann_entropy(rho), ref, atol=1e-10)
    assert 0.0 <= qinfo.von_neumann_entropy(qinfo.bell_state("phi-")) <= 1e-12
