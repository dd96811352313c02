"""Fibre loss budget, transmissivity, delay and the fibre qubit channel (netsim.hardware.fibre)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import assert_valid_state

from netsim import qinfo
from netsim.errors import ParameterError
from netsim.hardware import fibre


@pytest.mark.parametrize(
    ("length_km", "alpha", "extra", "expected_db"),
    [
        # 50 km at 0.2 dB/km is 10 dB (common practice: loss in dB adds linearly with length).
        (50.0, 0.2, 0.0, 10.0),
        # 24 km at 0.25 dB/km plus three connector pairs of 0.3 dB (TIA-568 typical, memory): 6.9 dB.
        (24.0, 0.25, 0.9, 6.9),
        # A patch cord alone: only its extra loss counts (common practice).
        (0.0, 0.25, 0.75, 0.75),
    ],
)
def test_loss_budget_adds_in_db(length_km: float, alpha: float, extra: float, expected_db: float) -> None:
    assert fibre.loss_db(length_km, alpha, extra) == pytest.approx(expected_db, rel=1e-12)


@pytest.mark.parametrize(
    ("loss", "eta"),
    [
        (10.0, 0.1),          # 10 dB is a factor 10 (definition of the decibel; common practice)
        (3.0, 0.501187),      # 3 dB is about one half (common practice)
        (20.0, 0.01),
    ],
)
def test_transmissivity_from_db(loss: float, eta: float) -> None:
    assert fibre.transmissivity(loss, 1.0, 0.0) == pytest.approx(eta, rel=1e-6)
    assert fibre.db_to_transmissivity(loss) == pytest.approx(eta, rel=1e-6)


def test_link_physics_uses_the_one_db_conversion() -> None:
    """The heralding schemes and `netsim link` convert dB with fibre.db_to_transmissivity: a
    link's reported transmissivity is 10^(-loss/10) of its reported loss (common practice)."""
    from netsim.cli.link_cmd import link_rows

    row = link_rows([17.0], 0.2, 0.4)[0]
    assert row["transmissivity"] == pytest.approx(0.416869, rel=1e-5)  # 3.8 dB (common practice)
    assert row["transmissivity"] == pytest.approx(fibre.db_to_transmissivity(row["loss_db"]), rel=1e-15)


def test_transmissivities_of_spans_multiply() -> None:
    """Two spans in a row: dB add, so transmissivities multiply (common practice)."""
    eta_1 = fibre.transmissivity(12.0, 0.22, 0.5)
    eta_2 = fibre.transmissivity(7.0, 0.3, 1.2)
    joined = 10 ** (-(fibre.loss_db(12.0, 0.22, 0.5) + fibre.loss_db(7.0, 0.3, 1.2)) / 10)
    assert eta_1 * eta_2 == pytest.approx(joined, rel=1e-12)


def test_propagation_delay_is_about_4_9_us_per_km() -> None:
    # Group index 1.468 at 1550 nm gives about 4.9 us/km (common practice).
    assert fibre.propagation_delay_s(1.0) == pytest.approx(4.9e-6, rel=0.01)
    # Exactly L n_g / c with c = 299 792.458 km/s (SI definition of the metre).
    assert fibre.propagation_delay_s(100.0) == pytest.approx(100.0 * 1.468 / 299_792.458, rel=1e-12)


@pytest.mark.parametrize(
    ("call", "fragment"),
    [
        (lambda: fibre.loss_db(-1.0, 0.2), "length_km = -1 is not allowed; expected a finite number >= 0"),
        (lambda: fibre.loss_db(10.0, float("nan")), "attenuation_db_per_km = nan is not allowed"),
        (lambda: fibre.transmissivity(10.0, 0.2, -0.5), "extra_loss_db = -0.5 is not allowed"),
        (lambda: fibre.propagation_delay_s(float("inf")), "length_km = inf is not allowed"),
        (lambda: fibre.qubit_channel(1.5), "transmissivity = 1.5 is not allowed; expected a number in [0, 1]"),
        (lambda: fibre.qubit_channel(0.5, depolarizing=-0.1), "depolarizing = -0.1 is not allowed"),
        (lambda: fibre.qubit_channel(0.5, loss_model="photon"),
         "loss_model = 'photon' is not allowed; expected one of erasure, damping"),
    ],
)
def test_bad_input_gets_one_line_error(call, fragment: str) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(ParameterError, match=fragment.replace("[", r"\[").replace("]", r"\]")) as info:
        call()
    assert "\n" not in str(info.value)


def test_erasure_model_flags_lost_photons() -> None:
    """Erasure channel: rho -> eta rho (+) (1 - eta)|e><e| (Bennett, DiVincenzo & Smolin, PRL 78, 3217, 1997)."""
    eta = 0.3
    rho = np.array([[0.7, 0.2 - 0.1j], [0.2 + 0.1j, 0.3]])
    out = fibre.qubit_channel(eta).apply(rho)
    expected = np.zeros((3, 3), dtype=complex)
    expected[:2, :2] = eta * rho
    expected[2, 2] = 1 - eta
    np.testing.assert_allclose(out, expected, atol=1e-12)


def test_damping_model_is_amplitude_damping_with_gamma_one_minus_eta() -> None:
    """Single-rail qubit: |1> (one photon) decays to |0> (vacuum) with gamma = 1 - eta.

    Kraus operators K0 = [[1, 0], [0, sqrt(eta)]], K1 = [[0, sqrt(1 - eta)], [0, 0]]
    (Nielsen & Chuang 2010, Sec. 8.3.5, amplitude damping).
    """
    eta = 0.4
    rho = np.array([[0.25, 0.3], [0.3, 0.75]], dtype=complex)
    k0 = np.array([[1, 0], [0, math.sqrt(eta)]])
    k1 = np.array([[0, math.sqrt(1 - eta)], [0, 0]])
    expected = k0 @ rho @ k0.T + k1 @ rho @ k1.T
    np.testing.assert_allclose(fibre.qubit_channel(eta, loss_model="damping").apply(rho), expected, atol=1e-12)


def test_depolarizing_is_applied_before_the_loss() -> None:
    """p then loss: eta ((1 - p) rho + p I/2) on the qubit block (convention rho -> (1 - p) rho + p I/2)."""
    eta, p = 0.6, 0.2
    rho = np.array([[1.0, 0.0], [0.0, 0.0]], dtype=complex)
    out = fibre.qubit_channel(eta, depolarizing=p).apply(rho)
    np.testing.assert_allclose(out[:2, :2], eta * ((1 - p) * rho + p * np.eye(2) / 2), atol=1e-12)
    assert out[2, 2].real == pytest.approx(1 - eta, abs=1e-12)
    assert_valid_state(out)


@pytest.mark.parametrize(("eta", "p"), [(0.3, 0.0), (0.7, 0.1)])
def test_erasure_channel_capacity_matches_closed_form(eta: float, p: float) -> None:
    """Holevo capacity of depolarize-then-erase is eta (1 - h(p/2)).

    Erasure factor 1 - eps: Bennett, DiVincenzo & Smolin, PRL 78, 3217 (1997); depolarizing
    capacity 1 - h(p/2): King, IEEE Trans. Inf. Theory 49, 221 (2003). The numerical maximum of
    netsim.qinfo and the closed form used by the budget must agree.
    """
    from netsim.network.channel import link_capacity_bits

    h = 0.0 if p == 0 else -(p / 2) * math.log2(p / 2) - (1 - p / 2) * math.log2(1 - p / 2)
    closed = eta * (1 - h)
    numeric = qinfo.holevo_capacity(fibre.qubit_channel(eta, depolarizing=p))[0]
    assert numeric == pytest.approx(closed, abs=1e-6)
    assert link_capacity_bits(eta, p) == pytest.approx(closed, abs=1e-12)
