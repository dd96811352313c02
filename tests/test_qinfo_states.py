"""Bell and Werner states, the fidelity and the partial trace, checked against QuTiP and
textbook definitions."""

from __future__ import annotations

import numpy as np
import pytest
import qutip
from conftest import assert_valid_state
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.states import partial_trace, random_density_matrices


def _qobj(rho: np.ndarray, dims: list[int]) -> qutip.Qobj:
    return qutip.Qobj(rho, dims=[dims, dims])


@pytest.mark.parametrize(
    ("name", "qutip_index"),
    # QuTiP's bell_state: "00" Phi+, "01" Phi-, "10" Psi+, "11" Psi- (QuTiP documentation).
    [("phi+", "00"), ("phi-", "01"), ("psi+", "10"), ("psi-", "11")],
)
def test_bell_states_match_qutip(name: str, qutip_index: str) -> None:
    # Source: QuTiP qutip.bell_state, same kron ordering (first factor = qubit 0).
    ref = qutip.ket2dm(qutip.bell_state(qutip_index)).full()
    np.testing.assert_allclose(qinfo.bell_state(name), ref, atol=1e-15)


def test_bell_states_are_orthonormal() -> None:
    # Bell basis is orthonormal (Nielsen & Chuang 2010, Sec. 1.3.6).
    states = np.stack([qinfo.bell_state(n) for n in ("phi+", "phi-", "psi+", "psi-")])
    overlaps = np.einsum("aij,bji->ab", states, states).real
    np.testing.assert_allclose(overlaps, np.eye(4), atol=1e-15)


def test_bell_state_rejects_unknown_name() -> None:
    with pytest.raises(ParameterError, match=r"name = 'phi0' is not allowed; expected one of 'phi\+'"):
        qinfo.bell_state("phi0")


@pytest.mark.parametrize("w", [-1 / 3, 0.0, 0.25, 0.6, 1.0])
def test_werner_fidelity_is_one_plus_three_w_over_four(w: float) -> None:
    # F = (1 + 3w)/4 for w |Phi+><Phi+| + (1 - w) I/4 (Werner, PRA 40, 4277, 1989; memory).
    rho = qinfo.werner_state(w)
    assert_valid_state(rho)
    assert qinfo.fidelity(rho, qinfo.bell_state("phi+")) == pytest.approx((1 + 3 * w) / 4, abs=1e-14)


def test_werner_state_is_batched_and_rejects_out_of_range() -> None:
    assert qinfo.werner_state(np.array([0.1, 0.5, 0.9])).shape == (3, 4, 4)
    with pytest.raises(ParameterError, match=r"^w = 1\.2 is not allowed; expected a Werner parameter in \[-1/3, 1\]$"):
        qinfo.werner_state([0.5, 1.2])


def test_fidelity_matches_qutip_on_random_mixed_states() -> None:
    # QuTiP's fidelity is the square-root form (its docstring); square it to compare.
    a = random_density_matrices(20, 4, seed=1)
    b = random_density_matrices(20, 4, seed=2)
    ours = qinfo.fidelity(a, b)
    ref = np.array([qutip.fidelity(_qobj(x, [2, 2]), _qobj(y, [2, 2])) ** 2 for x, y in zip(a, b)])
    np.testing.assert_allclose(ours, ref, atol=1e-9)


def test_fidelity_pure_target_equals_expectation_value() -> None:
    # F(rho, |psi><psi|) = <psi|rho|psi> for the squared Uhlmann form (Jozsa, J. Mod. Opt. 41, 2315, 1994).
    rho = random_density_matrices(50, 4, seed=3)
    phi = qinfo.bell_state("phi+")
    np.testing.assert_allclose(qinfo.fidelity(rho, phi), np.einsum("ij,nji->n", phi, rho).real, atol=1e-14)
    np.testing.assert_allclose(qinfo.fidelity(phi, rho), qinfo.fidelity(rho, phi), atol=1e-14)


@settings(max_examples=40, deadline=None)
@given(seed_a=st.integers(0, 2**31), seed_b=st.integers(0, 2**31), rank=st.integers(1, 4))
def test_fidelity_is_symmetric_and_in_unit_interval(seed_a: int, seed_b: int, rank: int) -> None:
    # Symmetry and 0 <= F <= 1 of the Uhlmann fidelity (Jozsa 1994).
    a = random_density_matrices(1, 4, seed=seed_a, rank=rank)[0]
    b = random_density_matrices(1, 4, seed=seed_b)[0]
    f_ab, f_ba = qinfo.fidelity(a, b), qinfo.fidelity(b, a)
    assert 0.0 <= f_ab <= 1.0
    assert f_ab == pytest.approx(f_ba, abs=1e-8)


def test_partial_trace_matches_qutip_ptrace() -> None:
    rho = random_density_matrices(5, 8, seed=4)
    for keep in [0, 1, 2, (0, 2), (1, 2)]:
        ours = partial_trace(rho, keep)
        keep_list = [keep] if isinstance(keep, int) else list(keep)
        ref = np.stack([_qobj(r, [2, 2, 2]).ptrace(keep_list).full() for r in rho])
        np.testing.assert_allclose(ours, ref, atol=1e-14)


def test_partial_trace_with_uneven_dims_matches_qutip() -> None:
    rho = random_density_matrices(3, 6, seed=5)
    ref = np.stack([_qobj(r, [2, 3]).ptrace(1).full() for r in rho])
    np.testing.assert_allclose(partial_trace(rho, 1, (2, 3)), ref, atol=1e-14)


def test_shape_errors_are_one_line() -> None:
    with pytest.raises(ParameterError, match=r"^rho = 'array of shape \(3, 4\)' is not allowed; expected an array of shape \(\.\.\., d, d\)$"):
        qinfo.fidelity(np.zeros((3, 4)), np.eye(4) / 4)
