"""The repeaterless bound, the amplitude-damping quantum capacity via coherent information,
and the BB84 key fraction threshold."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.qinfo.bounds import qber
from netsim.qinfo.entropy import binary_entropy


def test_plob_bound_values() -> None:
    # Pirandola, Laurenza, Ottaviani & Banchi, Nat. Commun. 8, 15043 (2017): -log2(1 - eta).
    assert qinfo.plob_bound(0.5) == pytest.approx(1.0, abs=1e-15)
    assert qinfo.plob_bound(0.0) == 0.0
    assert math.isinf(qinfo.plob_bound(1.0))
    # 50 km at 0.2 dB/km: eta = 0.1 -> 0.152 bits per use (same source, closed form)
    assert qinfo.plob_bound(0.1) == pytest.approx(-math.log2(0.9), rel=1e-15)


def test_plob_bound_small_eta_is_about_1_44_eta() -> None:
    # "about 1.44 eta for small eta" (Pirandola et al. 2017): the slope is 1/ln 2 = 1.4427.
    eta = np.array([1e-3, 1e-5, 1e-8])
    np.testing.assert_allclose(qinfo.plob_bound(eta) / eta, 1 / math.log(2), rtol=1e-3)


def test_plob_bound_rejects_bad_eta() -> None:
    with pytest.raises(ParameterError, match=r"^eta = 1\.5 is not allowed; expected a transmissivity in \[0, 1\]$"):
        qinfo.plob_bound(1.5)


def test_key_fraction_threshold_near_eleven_percent() -> None:
    # Shor & Preskill, PRL 85, 441 (2000): 1 - 2 h(Q) vanishes at Q of about 11.0 %
    # (0.110028, memory). Werner states have e_Z = e_X = (1 - w)/2.
    q_star = brentq(lambda q: 1 - 2 * float(binary_entropy(q)), 0.01, 0.2, xtol=1e-14)
    assert q_star == pytest.approx(0.110028, abs=1e-6)
    assert float(qinfo.key_fraction(qinfo.werner_state(1 - 2 * (q_star - 1e-4)))) > 0
    assert float(qinfo.key_fraction(qinfo.werner_state(1 - 2 * (q_star + 1e-4)))) == 0.0
    for q in (0.0, 0.02, 0.05, 0.1):
        assert float(qinfo.key_fraction(qinfo.werner_state(1 - 2 * q))) == pytest.approx(1 - 2 * float(binary_entropy(q)), abs=1e-12)


def _bell_diagonal(phi_p: float, phi_m: float, psi_p: float, psi_m: float) -> np.ndarray:
    return (phi_p * qinfo.bell_state("phi+") + phi_m * qinfo.bell_state("phi-")
            + psi_p * qinfo.bell_state("psi+") + psi_m * qinfo.bell_state("psi-"))


@pytest.mark.parametrize(("state", "e_z", "e_x", "expected"), [
    # Bell-diagonal: e_Z = psi+ + psi-, e_X = phi- + psi- (common practice). 1 - h(0.08) - h(0.02),
    # worked by hand: h(0.08) = 0.402179, h(0.02) = 0.141441 -> 0.456380.
    (_bell_diagonal(0.90, 0.02, 0.08, 0.00), 0.08, 0.02, 0.456380),
    # 1 - h(0.03) - h(0.07): h(0.03) = 0.194392, h(0.07) = 0.365924 -> 0.439684
    (_bell_diagonal(0.90, 0.07, 0.03, 0.00), 0.03, 0.07, 0.439684),
    # 1 - h(0.12) - h(0.05) with a psi- share in both: h(0.12) = 0.529361, h(0.05) = 0.286397 -> 0.184242
    (_bell_diagonal(0.86, 0.02, 0.09, 0.03), 0.12, 0.05, 0.184242),
    # Not Bell-diagonal: 0.8 Phi+ + 0.2 |00><00| has e_Z = 0, <XX> = 0.8, e_X = 0.1 -> 1 - h(0.1) = 0.531004
    (0.8 * qinfo.bell_state("phi+") + 0.2 * np.diag([1.0, 0, 0, 0]), 0.0, 0.1, 0.531004),
    # 1 - h(0.2) - h(0.1) = 1 - 0.721928 - 0.468996 < 0: no key (clipped to 0)
    (_bell_diagonal(0.75, 0.05, 0.15, 0.05), 0.2, 0.1, 0.0),
])
def test_key_fraction_with_unequal_error_rates(state: np.ndarray, e_z: float, e_x: float, expected: float) -> None:
    """The Shor-Preskill asymptotic key fraction r = 1 - h(e_Z) - h(e_X) (Shor & Preskill, PRL 85,
    441, 2000; bit and phase error rates taken separately, as in Lo, Chau & Ardehali,
    J. Cryptology 18, 133, 2005, memory) on states with e_Z != e_X, values worked by hand above: a formula
    using 2 h(e_Z), 2 h(e_X) or 2 h of the mean error fails every row."""
    got_z, got_x = qber(state)
    assert (float(got_z), float(got_x)) == pytest.approx((e_z, e_x), abs=1e-12)
    assert float(qinfo.key_fraction(state)) == pytest.approx(expected, abs=2e-6)


def test_qber_of_bell_states() -> None:
    # Relative to Phi+: Phi- flips X outcomes, Psi+ flips Z outcomes, Psi- flips both (common practice).
    expected = {"phi+": (0, 0), "phi-": (0, 1), "psi+": (1, 0), "psi-": (1, 1)}
    for name, (ez, ex) in expected.items():
        got = qber(qinfo.bell_state(name))
        assert (float(got[0]), float(got[1])) == pytest.approx((ez, ex), abs=1e-15)


def _gf_quantum(eta: float) -> float:
    """Giovannetti & Fazio, PRA 71, 032314 (2005): Q = max_p h(eta p) - h((1 - eta) p) for eta >= 1/2, else 0."""
    if eta < 0.5:
        return 0.0
    res = minimize_scalar(lambda p: -float(binary_entropy(eta * p) - binary_entropy((1 - eta) * p)),
                          bounds=(0.0, 1.0), method="bounded", options={"xatol": 1e-12})
    return max(0.0, -float(res.fun))


@pytest.mark.parametrize("eta", [1.0, 0.9, 0.7, 0.55, 0.5, 0.3])
def test_amplitude_damping_quantum_capacity_via_coherent_information(eta: float) -> None:
    # Coherent information of sqrt(1-p)|00> + sqrt(p)|11> with qubit B damped equals
    # h(eta p) - h((1 - eta) p); its maximum over p is Q (Giovannetti & Fazio 2005).
    channel = qinfo.amplitude_damping(1 - eta)

    def ic(p: float) -> float:
        psi = np.array([math.sqrt(1 - p), 0, 0, math.sqrt(p)], dtype=complex)
        # a channel quantity: the output B is the receiving end, so I(A>B) = S(B) - S(AB)
        return float(qinfo.coherent_information(channel.apply(np.outer(psi, psi.conj()), qubit=1), end="b"))

    for p in (0.2, 0.5, 0.8):
        closed = max(0.0, float(binary_entropy(eta * p) - binary_entropy((1 - eta) * p)))
        assert ic(p) == pytest.approx(closed, abs=1e-12)
    best = -minimize_scalar(lambda p: -ic(p), bounds=(0.0, 1.0), method="bounded", options={"xatol": 1e-10}).fun
    assert best == pytest.approx(_gf_quantum(eta), abs=1e-8)
