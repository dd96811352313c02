"""Qubit channels: conventions, agreement with QuTiP, Lindblad equivalence of memory
decoherence, and the shared properties every channel must have.

To add a channel to the shared property tests, append a factory to ``CHANNEL_FACTORIES``:
a callable taking a number u in [0, 1] and returning the channel.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest
import qutip
from conftest import assert_valid_state
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.channels import Channel
from netsim.qinfo.states import random_density_matrices

CHANNEL_FACTORIES: dict[str, Callable[[float], Channel]] = {
    "depolarizing": qinfo.depolarizing,
    "dephasing": qinfo.dephasing,
    "amplitude_damping": qinfo.amplitude_damping,
    "erasure": qinfo.erasure,
    "memory_decoherence": lambda u: qinfo.memory_decoherence(u, 0.7, 0.4),
    "memory_decoherence_t2_eq_2t1": lambda u: qinfo.memory_decoherence(3 * u, 0.5, 1.0),
    "depolarizing_then_damping": lambda u: qinfo.compose(qinfo.depolarizing(u / 2), qinfo.amplitude_damping(u)),
    "depolarizing_then_erasure": lambda u: qinfo.compose(qinfo.depolarizing(u), qinfo.erasure(1 - u)),
}

_PAULI = {"I": np.eye(2), "X": np.array([[0, 1], [1, 0]]), "Y": np.array([[0, -1j], [1j, 0]]), "Z": np.diag([1, -1])}


def _qutip_apply(channel: Channel, rho: np.ndarray, qubit: int, n: int) -> np.ndarray:
    """Reference: sum_k K_k rho K_k^dagger with K_k embedded by qutip.tensor (independent of our einsum)."""
    out = 0
    dims_in = [2] * n
    q_rho = qutip.Qobj(rho, dims=[dims_in, dims_in])
    for k in channel.kraus:
        factors = [qutip.qeye(2)] * n
        factors[qubit] = qutip.Qobj(k)
        op = qutip.tensor(*factors)
        out = out + op * q_rho * op.dag()
    return out.full()


@pytest.mark.parametrize("name", sorted(CHANNEL_FACTORIES))
@pytest.mark.parametrize(("n", "qubit"), [(1, 0), (2, 0), (2, 1), (3, 1)])
def test_channel_action_matches_qutip(name: str, n: int, qubit: int) -> None:
    # Reference library: QuTiP Qobj algebra, random states with a fixed seed.
    channel = CHANNEL_FACTORIES[name](0.37)
    rho = random_density_matrices(3, 2**n, seed=100 + n)
    ours = channel.apply(rho, qubit=qubit)
    ref = np.stack([_qutip_apply(channel, r, qubit, n) for r in rho])
    np.testing.assert_allclose(ours, ref, atol=1e-13)


def test_depolarizing_convention() -> None:
    # DESIGN convention rho -> (1 - p) rho + p I/2 (Nielsen & Chuang 2010, Eq. 8.102, with p = 1 fully mixed).
    rho = random_density_matrices(4, 2, seed=7)
    for p in (0.0, 0.25, 1.0):
        np.testing.assert_allclose(qinfo.depolarizing(p).apply(rho), (1 - p) * rho + p * np.eye(2) / 2, atol=1e-15)


def test_dephasing_convention() -> None:
    # netsim convention: off-diagonals times (1 - p), populations unchanged (common practice).
    rho = random_density_matrices(4, 2, seed=8)
    out = qinfo.dephasing(0.3).apply(rho)
    np.testing.assert_allclose(out[:, 0, 1], 0.7 * rho[:, 0, 1], atol=1e-15)
    np.testing.assert_allclose(np.diagonal(out, axis1=1, axis2=2), np.diagonal(rho, axis1=1, axis2=2), atol=1e-15)


def test_amplitude_damping_kraus_and_excited_state_decay() -> None:
    # K0 = [[1, 0], [0, sqrt(1 - g)]], K1 = [[0, sqrt(g)], [0, 0]] (Nielsen & Chuang 2010, Eq. 8.108).
    g = 0.3
    ch = qinfo.amplitude_damping(g)
    np.testing.assert_allclose(ch.kraus, [[[1, 0], [0, math.sqrt(1 - g)]], [[0, math.sqrt(g)], [0, 0]]], atol=0)
    np.testing.assert_allclose(ch.apply(np.diag([0.0, 1.0])), np.diag([g, 1 - g]), atol=1e-15)


def test_erasure_output_flags_the_loss() -> None:
    # Erasure channel rho -> (1 - eps) rho (+) eps |e><e| (Bennett, DiVincenzo & Smolin, PRL 78, 3217, 1997).
    rho = random_density_matrices(1, 2, seed=9)[0]
    out = qinfo.erasure(0.2).apply(rho)
    expected = np.zeros((3, 3), dtype=complex)
    expected[:2, :2] = 0.8 * rho
    expected[2, 2] = 0.2
    np.testing.assert_allclose(out, expected, atol=1e-15)


def test_compose_applies_left_to_right() -> None:
    a, b = qinfo.amplitude_damping(0.6), qinfo.depolarizing(0.5)
    rho = random_density_matrices(3, 4, seed=11)
    np.testing.assert_allclose(qinfo.compose(a, b).apply(rho, 1), b.apply(a.apply(rho, 1), 1), atol=1e-14)
    assert not np.allclose(qinfo.compose(b, a).apply(rho, 1), qinfo.compose(a, b).apply(rho, 1))


@pytest.mark.parametrize(("t_s", "t1_s", "t2_s"), [(0.2, 1.0, 0.5), (1.5, 0.8, 1.6), (0.3, math.inf, 0.4), (0.0, 1.0, 1.0)])
def test_memory_decoherence_equals_lindblad_model(t_s: float, t1_s: float, t2_s: float) -> None:
    # DESIGN: decay rate 1/T1 and pure dephasing rate 1/T2 - 1/(2 T1), solved by QuTiP mesolve
    # (Lindblad, Commun. Math. Phys. 48, 119, 1976). sigma_- = |0><1| (|1> decays to |0>).
    rho = random_density_matrices(1, 2, seed=12)[0]
    c_ops = []
    if math.isfinite(t1_s):
        c_ops.append(math.sqrt(1 / t1_s) * qutip.destroy(2))
    dephase_rate = 1 / t2_s - (0.0 if math.isinf(t1_s) else 1 / (2 * t1_s))
    if dephase_rate > 0:
        c_ops.append(math.sqrt(dephase_rate / 2) * qutip.sigmaz())
    opts = {"atol": 1e-12, "rtol": 1e-10}
    ref = qutip.mesolve(qutip.qzero(2), qutip.Qobj(rho), [0.0, t_s], c_ops, options=opts).states[-1].full()
    np.testing.assert_allclose(qinfo.memory_decoherence(t_s, t1_s, t2_s).apply(rho), ref, atol=1e-8)


def test_memory_coherence_factor_is_exp_minus_t_over_t2() -> None:
    # Total coherence exp(-t/T2) with T2 the total coherence time (DESIGN convention; common practice).
    plus = np.full((2, 2), 0.5, dtype=complex)
    out = qinfo.memory_decoherence(0.25, 2.0, 0.5).apply(plus)
    assert abs(out[0, 1]) == pytest.approx(0.5 * math.exp(-0.25 / 0.5), rel=1e-12)


def test_decohere_is_batched_over_times_and_matches_channel() -> None:
    rho = random_density_matrices(6, 4, seed=13)
    times = np.linspace(0.0, 2.0, 6)
    for qubit in (0, 1):
        batched = qinfo.decohere(rho, times, 1.3, 0.9, qubit=qubit)
        one_by_one = np.stack([qinfo.memory_decoherence(t, 1.3, 0.9).apply(r, qubit) for r, t in zip(rho, times)])
        np.testing.assert_allclose(batched, one_by_one, atol=1e-14)


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: qinfo.depolarizing(1.5), r"^p = 1\.5 is not allowed; expected a number in \[0, 1\]$"),
        (lambda: qinfo.dephasing(float("nan")), r"^p = nan is not allowed; expected a number in \[0, 1\]$"),
        (lambda: qinfo.amplitude_damping(-0.1), r"^gamma = -0\.1 is not allowed; expected a number in \[0, 1\]$"),
        (lambda: qinfo.erasure("x"), r"^eps = 'x' is not allowed; expected a number in \[0, 1\]$"),
        (lambda: qinfo.memory_decoherence(1.0, 1.0, 3.0), r"^t2_s = 3 is not allowed; expected a time <= 2 \* t1_s = 2 s \(T2 <= 2 T1\)$"),
        (lambda: qinfo.memory_decoherence(-1.0, 1.0, 1.0), r"^t_s = -1 is not allowed; expected a finite time >= 0 in seconds$"),
        (lambda: qinfo.memory_decoherence(1.0, 0.0, 1.0), r"^t1_s = 0 is not allowed; expected a time > 0 in seconds"),
        (lambda: qinfo.compose(qinfo.erasure(0.1), qinfo.depolarizing(0.1)), r"^channels\[1\] = 'depolarizing\(p=0\.1\)' is not allowed; expected a channel with input dimension 3$"),
        (lambda: qinfo.depolarizing(0.1).apply(np.eye(4) / 4, qubit=2), r"^qubit = 2 is not allowed; expected an index in \[0, 1\]$"),
        (lambda: qinfo.depolarizing(0.1).apply(np.eye(3) / 3), r"^rho = 'matrix of size 3' is not allowed"),
    ],
)
def test_invalid_parameters_give_one_line_errors(call: Callable[[], object], message: str) -> None:
    with pytest.raises(ParameterError, match=message) as info:
        call()
    assert "\n" not in str(info.value)


@settings(max_examples=60, deadline=None)
@given(name=st.sampled_from(sorted(CHANNEL_FACTORIES)), u=st.floats(0.0, 1.0), seed=st.integers(0, 2**31),
       n=st.integers(1, 3), rank=st.integers(1, 8))
def test_every_channel_is_trace_preserving_and_positive(name: str, u: float, seed: int, n: int, rank: int) -> None:
    # Kraus completeness sum K^dagger K = I and complete positivity (Nielsen & Chuang 2010, Th. 8.1).
    channel = CHANNEL_FACTORIES[name](u)
    completeness = np.einsum("kji,kjl->il", channel.kraus.conj(), channel.kraus)
    np.testing.assert_allclose(completeness, np.eye(2), atol=1e-12)
    rho = random_density_matrices(2, 2**n, seed=seed, rank=min(rank, 2**n))
    qubit = seed % n
    assert_valid_state(channel.apply(rho, qubit=qubit), atol=1e-12)


def test_channel_rejects_non_trace_preserving_kraus() -> None:
    with pytest.raises(ParameterError, match=r"^kraus = 'operators with \|sum K\^dagger K - I\| = 0\.5' is not allowed; expected a trace-preserving set"):
        Channel("half", np.array([[[1, 0], [0, math.sqrt(0.5)]]], dtype=complex))
    with pytest.raises(ParameterError, match=r"^kraus = 'array of shape \(2, 2\)' is not allowed"):
        Channel("flat", np.eye(2, dtype=complex))
