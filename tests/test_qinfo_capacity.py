"""Holevo (product-state classical) capacity against published closed forms, to 1e-6 bits."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar
from scipy.stats import unitary_group

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.entropy import binary_entropy

TOL_BITS = 1e-6


@pytest.mark.parametrize("p", [0.0, 0.05, 0.3, 0.7, 1.0])
def test_depolarizing_capacity_is_one_minus_h_of_half_p(p: float) -> None:
    # King, IEEE Trans. Inf. Theory 49, 221 (2003): C = 1 - h(p/2) for rho -> (1 - p) rho + p I/2.
    value, _ = qinfo.holevo_capacity(qinfo.depolarizing(p))
    assert value == pytest.approx(1 - float(binary_entropy(p / 2)), abs=TOL_BITS)


def _gf_classical(eta: float) -> float:
    """Giovannetti & Fazio, PRA 71, 032314 (2005): max_p h(eta p) - h((1 + sqrt((1 - 2 eta p)^2 + 4 eta p (1 - p)))/2)."""

    def neg(p: float) -> float:
        root = math.sqrt((1 - 2 * eta * p) ** 2 + 4 * eta * p * (1 - p))
        return -float(binary_entropy(eta * p) - binary_entropy(min(1.0, (1 + root) / 2)))

    res = minimize_scalar(neg, bounds=(0.0, 1.0), method="bounded", options={"xatol": 1e-12})
    return max(0.0, -float(res.fun))


@pytest.mark.parametrize("eta", [1.0, 0.9, 0.6, 0.5, 0.3, 0.1, 0.01])
def test_amplitude_damping_capacity_matches_giovannetti_fazio(eta: float) -> None:
    # Giovannetti & Fazio (2005), product-state classical capacity of amplitude damping, eta = 1 - gamma.
    value, (probs, states) = qinfo.holevo_capacity(qinfo.amplitude_damping(1 - eta))
    assert value == pytest.approx(_gf_classical(eta), abs=TOL_BITS)
    # the returned ensemble reaches the value through the channel
    outputs = qinfo.amplitude_damping(1 - eta).apply(states)
    assert qinfo.holevo_information(probs, outputs) == pytest.approx(value, abs=1e-9)


@pytest.mark.parametrize("eps", [0.0, 0.25, 0.5, 0.9, 1.0])
def test_erasure_capacity_is_one_minus_eps(eps: float) -> None:
    # Bennett, DiVincenzo & Smolin, PRL 78, 3217 (1997): C = 1 - eps.
    value, _ = qinfo.holevo_capacity(qinfo.erasure(eps))
    assert value == pytest.approx(1 - eps, abs=TOL_BITS)


def test_dephasing_capacity_is_one_bit() -> None:
    # Unital channel that keeps the Z basis: one bit per use (King 2003, unital qubit channels).
    for p in (0.2, 1.0):
        assert qinfo.holevo_capacity(qinfo.dephasing(p))[0] == pytest.approx(1.0, abs=TOL_BITS)


def test_depolarizing_then_erasure_scales_by_one_minus_eps() -> None:
    # Erasure after a channel N: C = (1 - eps) C(N) (Bennett, DiVincenzo & Smolin 1997 argument; common practice).
    value, _ = qinfo.holevo_capacity(qinfo.compose(qinfo.depolarizing(0.2), qinfo.erasure(0.3)))
    assert value == pytest.approx(0.7 * (1 - float(binary_entropy(0.1))), abs=TOL_BITS)


def test_unital_random_channel_capacity_from_largest_singular_value() -> None:
    # Unital qubit channel: C = 1 - h((1 - s_max)/2) with s_max the largest singular value of its
    # Bloch matrix (King, J. Math. Phys. 43, 4641, 2002; memory). Random Pauli channel with rotations.
    rng = np.random.default_rng(50)
    q = rng.dirichlet(np.ones(4))
    paulis = np.array([np.eye(2), [[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]])
    u, v = unitary_group.rvs(2, random_state=1), unitary_group.rvs(2, random_state=2)
    kraus = np.stack([u @ (math.sqrt(qk) * pk) @ v for qk, pk in zip(q, paulis)])
    lam = np.array([q[0] + q[1] - q[2] - q[3], q[0] - q[1] + q[2] - q[3], q[0] - q[1] - q[2] + q[3]])
    expected = 1 - float(binary_entropy((1 - np.abs(lam).max()) / 2))
    value, _ = qinfo.holevo_capacity(qinfo.Channel("rotated pauli", kraus))
    assert value == pytest.approx(expected, abs=TOL_BITS)


def test_capacity_never_exceeds_one_bit_and_chi_of_any_ensemble() -> None:
    # chi of any ensemble is a lower bound of the capacity (definition; Holevo 1998).
    ch = qinfo.compose(qinfo.amplitude_damping(0.35), qinfo.depolarizing(0.15))
    value, _ = qinfo.holevo_capacity(ch)
    states = np.stack([np.diag([1.0, 0.0]), np.diag([0.0, 1.0]), np.full((2, 2), 0.5)]).astype(complex)
    for probs in ([0.5, 0.5, 0.0], [0.3, 0.3, 0.4], [0.6, 0.4, 0.0]):
        assert qinfo.holevo_information(probs, ch.apply(states)) <= value + 1e-12
    assert value <= 1.0


def test_capacity_rejects_non_qubit_input() -> None:
    bad = qinfo.Channel("qutrit", np.eye(3)[None].astype(complex))
    with pytest.raises(ParameterError, match=r"^channel = 'qutrit' is not allowed; expected a channel with a qubit input$"):
        qinfo.holevo_capacity(bad)


def test_general_output_path_is_invariant_under_an_output_isometry() -> None:
    # Capacity is unchanged by an isometry on the output (common practice): embedding the
    # damping channel's output in a rotated qutrit takes the general (non-Bloch) optimiser path,
    # which must still reach Giovannetti & Fazio (2005).
    v = unitary_group.rvs(3, random_state=7)[:, :2]  # isometry C^2 -> C^3
    damping = qinfo.amplitude_damping(0.4)
    embedded = qinfo.Channel("embedded damping", np.einsum("xy,kyi->kxi", v, damping.kraus))
    value, _ = qinfo.holevo_capacity(embedded)
    assert value == pytest.approx(_gf_classical(0.6), abs=TOL_BITS)
