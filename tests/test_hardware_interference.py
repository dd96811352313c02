"""Photon indistinguishability and optical phase noise in the heralding schemes.

Outside sources: Barrett-Kok fidelity F = (1 + V) / 2 for two-photon visibility V (Bernien et al.,
Nature 497, 86, 2013; Hensen et al., Nature 526, 682, 2015, supplementary information (memory));
single-photon heralding coherence scales with sqrt(V) (Humphreys et al., Nature 558, 268, 2018;
Hermans et al., Nature 605, 663, 2022 (memory)) and is checked against a first-principles QuTiP
model with partly distinguishable photons; Gaussian phase noise multiplies the coherence by
exp(-sigma^2 / 2), the characteristic function of the normal distribution (common practice).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from conftest import assert_probability, assert_valid_state
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim.hardware import link_physics
from netsim.hardware.schemes import PHI_PLUS, pair_visibility
from netsim.network import budget
from netsim.scenario import load_data
from netsim.scenario.model import Link, Site

IDEAL = {"emission_efficiency": 1.0, "memory_efficiency": 1.0, "attempt_prep_time_s": 1e-6}



def _two_site_modes(ca: float, cb: float):  # type: ignore[no-untyped-def]
    """The mode space of the two-site models: spin a, spin b, then per internal mode its spatial
    modes a and b: common (up to two photons), own-a and own-b (one photon at most: only their own
    site emits into them). Returns qutip, the dimensions, an embedding ``op(slot, operator)`` and
    the creation operators of site a's and site b's photon (a share ``ca``/``cb`` in the common
    mode)."""
    import qutip
    dims = [2, 2, 3, 3, 2, 2, 2, 2]

    def op(slot: int, o):  # type: ignore[no-untyped-def]
        parts = [qutip.qeye(d) for d in dims]
        parts[slot] = o
        return qutip.tensor(*parts)

    photon_a = math.sqrt(ca) * op(2, qutip.create(3)) + math.sqrt(1 - ca) * op(4, qutip.create(2))
    photon_b = math.sqrt(cb) * op(3, qutip.create(3)) + math.sqrt(1 - cb) * op(7, qutip.create(2))
    return qutip, dims, op, photon_a, photon_b

def sites(va: float = 1.0, vb: float | None = None) -> tuple[Site, Site]:
    vb = va if vb is None else vb
    return (Site("Ashgrove", "user", photon_indistinguishability=va, **IDEAL),  # type: ignore[arg-type]
            Site("Brookend", "user", photon_indistinguishability=vb, **IDEAL))  # type: ignore[arg-type]


def link(**overrides: object) -> Link:
    base = {"index": 0, "a": "Ashgrove", "b": "Brookend", "length_km": 20.0, "attenuation_db_per_km": 0.2,
            "extra_loss_db": 0.0, "detector_efficiency": 1.0, "dark_count_probability": 0.0,
            "phase_noise_rad": 0.0}  # stated: no phase noise unless a test sets it (built-in default 0.25 rad)
    return Link(**{**base, **overrides})  # type: ignore[arg-type]


@pytest.mark.parametrize("v", [1.0, 0.9, 0.75, 0.0])
def test_two_photon_fidelity_is_one_plus_v_over_two(v: float) -> None:
    """F = (1 + V) / 2 (Bernien et al. 2013; Hensen et al. 2015, SI (memory)); the herald
    probability P_a P_b / 2 does not depend on V (Barrett & Kok, PRA 71, 060310(R), 2005 (memory))."""
    ideal = link_physics(link(scheme="two_photon"), *sites())
    physics = link_physics(link(scheme="two_photon"), *sites(v))
    assert physics.fidelity == pytest.approx((1 + v) / 2, abs=1e-12)
    assert physics.success_probability == pytest.approx(ideal.success_probability, rel=1e-12)


def test_pair_visibility_is_the_geometric_mean() -> None:
    """Two sites identical to one with value I show V = I; a perfect and an I = 0.81 site show
    V = 0.9 (the common-mode model in the schemes' docstring: gamma = sqrt(c_a c_b), V = gamma^2,
    I = c^2 (derived; Hong, Ou & Mandel, PRL 59, 2044, 1987 for V = |gamma|^2 (memory)))."""
    a, b = sites(0.81, 1.0)
    assert pair_visibility(a, b) == pytest.approx(0.9, abs=1e-12)
    assert pair_visibility(a, a) == pytest.approx(0.81, abs=1e-12)
    physics = link_physics(link(scheme="two_photon"), a, b)
    assert physics.fidelity == pytest.approx((1 + 0.9) / 2, abs=1e-12)


def _single_photon_distinguishable(alpha: float, eta: float, ca: float, cb: float) -> tuple[float, float]:
    """Single-photon heralding with partly distinguishable photons, from first principles (QuTiP).

    Spins a, b; spatial modes a, b, each with three internal modes: common, own-a, own-b. Site x emits sqrt(1 - alpha)|0>|vac> + sqrt(alpha)|1>(sqrt(c_x) common +
    sqrt(1 - c_x) own-x)^dagger|vac>. A 50:50 beam splitter mixes the spatial modes of each internal
    mode; threshold detectors of efficiency eta that do not resolve internal modes (no-click
    element (1 - eta)^N). Herald: port a clicks and port b does not. Returns (herald probability
    over both ports, fidelity to the better of Psi+ and Psi-).
    """
    qutip, dims, op, photon_a, photon_b = _two_site_modes(ca, cb)
    raise_spin = qutip.basis(2, 1) * qutip.basis(2, 0).dag()
    keep_zero = qutip.basis(2, 0) * qutip.basis(2, 0).dag()
    emit_a = math.sqrt(1 - alpha) * op(0, keep_zero) + math.sqrt(alpha) * op(0, raise_spin) * photon_a
    emit_b = math.sqrt(1 - alpha) * op(1, keep_zero) + math.sqrt(alpha) * op(1, raise_spin) * photon_b
    psi = emit_b * emit_a * qutip.tensor(*[qutip.basis(d, 0) for d in dims])
    splitters = []
    for d in (3, 2, 2):                # 50:50 beam splitter on (a, b) of one internal mode
        a = qutip.tensor(qutip.destroy(d), qutip.qeye(d))
        b = qutip.tensor(qutip.qeye(d), qutip.destroy(d))
        splitters.append((math.pi / 4 * (a.dag() * b - a * b.dag())).expm())
    psi = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *splitters) * psi
    silent = [qutip.qdiags([(1 - eta) ** k for k in range(d)], 0) for d in dims[2:]]
    eye = [qutip.qeye(d) for d in dims[2:]]
    no_a = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *[silent[k] if k % 2 == 0 else eye[k] for k in range(6)])
    no_b = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *[silent[k] if k % 2 == 1 else eye[k] for k in range(6)])
    herald = (op(0, qutip.qeye(2)) - no_a) * no_b        # diagonal in the Fock basis: a POVM element
    spins = (herald * qutip.ket2dm(psi)).ptrace([0, 1])
    prob = float(spins.tr().real)
    spins = spins / prob
    up, down = qutip.basis(2, 1), qutip.basis(2, 0)
    psi_plus = (qutip.tensor(up, down) + qutip.tensor(down, up)).unit()
    psi_minus = (qutip.tensor(up, down) - qutip.tensor(down, up)).unit()
    fid = max(float(qutip.expect(spins, psi_plus)), float(qutip.expect(spins, psi_minus)))
    return 2 * prob, fid


@pytest.mark.parametrize(("alpha", "eta", "ia", "ib"), [(0.1, 0.8, 0.9, 0.9), (0.2, 0.95, 0.5, 0.7)])
def test_single_photon_with_distinguishable_photons_against_qutip(alpha: float, eta: float, ia: float,
                                                                   ib: float) -> None:
    """The closed form (coherence x sqrt(V), two-photon weight with (1 + V) / 2 bunching) against the
    first-principles QuTiP model above; site values I_x = c_x^2 (schemes' docstring)."""
    lk = link(length_km=1.0, attenuation_db_per_km=0.0, detector_efficiency=eta, bright_state_population=alpha)
    physics = link_physics(lk, *sites(ia, ib))
    prob, fid = _single_photon_distinguishable(alpha, eta, math.sqrt(ia), math.sqrt(ib))
    assert physics.success_probability == pytest.approx(prob, rel=1e-9)
    assert physics.fidelity == pytest.approx(fid, abs=1e-9)


def _barrett_kok_distinguishable(eta: float, ca: float, cb: float, dark: float = 0.0) -> tuple[float, float]:
    """Two-photon (Barrett-Kok) heralding with partly distinguishable photons, from first
    principles (QuTiP), with the photon model of :func:`_single_photon_distinguishable`.

    Spins start in |+>|+>; in each of two rounds a spin in |1> emits one photon into its arm, with
    X on both spins between the rounds; per round a 50:50 beam splitter per internal mode and two
    threshold detectors of efficiency eta that do not resolve internal modes, each firing dark
    with probability ``dark`` per round (no click: (1 - dark) x no photon detected in any internal
    mode). A herald is exactly one click in each round. Returns (herald probability, fidelity to
    the Psi state the click pattern announces).
    """
    qutip, dims, op, photon_a, photon_b = _two_site_modes(ca, cb)
    up_proj = qutip.basis(2, 1) * qutip.basis(2, 1).dag()
    down_proj = qutip.basis(2, 0) * qutip.basis(2, 0).dag()
    emit = ((op(1, up_proj) * photon_b + op(1, down_proj))
            * (op(0, up_proj) * photon_a + op(0, down_proj)))
    splitters = []
    for d in (3, 2, 2):
        a = qutip.tensor(qutip.destroy(d), qutip.qeye(d))
        b = qutip.tensor(qutip.qeye(d), qutip.destroy(d))
        splitters.append((math.pi / 4 * (a.dag() * b - a * b.dag())).expm())
    mix = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *splitters)
    silent = [qutip.qdiags([(1 - eta) ** k for k in range(d)], 0) for d in dims[2:]]
    eye = [qutip.qeye(d) for d in dims[2:]]
    no_a = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *[silent[k] if k % 2 == 0 else eye[k] for k in range(6)])
    no_b = qutip.tensor(qutip.qeye(2), qutip.qeye(2), *[silent[k] if k % 2 == 1 else eye[k] for k in range(6)])
    one = op(0, qutip.qeye(2))
    no_a, no_b = (1 - dark) * no_a, (1 - dark) * no_b
    patterns = {"a": (one - no_a) * no_b, "b": (one - no_b) * no_a}
    vacuum = [qutip.basis(d, 0) for d in dims[2:]]

    def one_round(spins):  # type: ignore[no-untyped-def]
        """Spin density matrix -> {click port: unnormalised spin density matrix}."""
        values, vectors = spins.eigenstates()
        out = {}
        for port, element in patterns.items():
            total = 0 * spins
            for w, vec in zip(values, vectors):
                if w > 1e-15:
                    psi = mix * emit * qutip.tensor(vec, *vacuum)
                    total += w * (element * qutip.ket2dm(psi)).ptrace([0, 1])
            out[port] = total
        return out

    plus = (qutip.basis(2, 0) + qutip.basis(2, 1)).unit()
    flip = qutip.tensor(qutip.sigmax(), qutip.sigmax())
    start = qutip.ket2dm(qutip.tensor(plus, plus))
    up, down = qutip.basis(2, 1), qutip.basis(2, 0)
    psi_plus = (qutip.tensor(up, down) + qutip.tensor(down, up)).unit()
    psi_minus = (qutip.tensor(up, down) - qutip.tensor(down, up)).unit()
    prob = weighted = 0.0
    for first in one_round(start).values():
        for second in one_round(flip * first * flip).values():
            p = float(second.tr().real)
            prob += p
            weighted += max(float(qutip.expect(second, psi_plus)), float(qutip.expect(second, psi_minus)))
    return prob, weighted / prob


@pytest.mark.parametrize(("eta", "ia", "ib"), [(0.7, 0.8, 0.8), (0.9, 0.5, 0.95)])
def test_two_photon_with_distinguishable_photons_against_qutip(eta: float, ia: float, ib: float) -> None:
    """The closed form (p = eta^2 / 2, coherence x V with V = sqrt(I_a I_b)) against the
    first-principles QuTiP model above; F = (1 + V) / 2 is the published form (Bernien et al. 2013;
    Hensen et al. 2015, SI (memory))."""
    lk = link(scheme="two_photon", length_km=1.0, attenuation_db_per_km=0.0, detector_efficiency=eta)
    physics = link_physics(lk, *sites(ia, ib))
    prob, fid = _barrett_kok_distinguishable(eta, math.sqrt(ia), math.sqrt(ib))
    assert physics.success_probability == pytest.approx(prob, rel=1e-9)
    assert physics.fidelity == pytest.approx(fid, abs=1e-9)
    assert fid == pytest.approx((1 + math.sqrt(ia * ib)) / 2, abs=1e-9)


@pytest.mark.parametrize(("v", "sigma"), [(1.0, 0.0), (0.9, 0.0), (1.0, 0.4), (0.8, 0.3)])
def test_single_photon_fidelity_closed_form(v: float, sigma: float) -> None:
    """Equal arms P: F = (1 - alpha)(1 + sqrt(V) e^{-sigma^2/2}) / (2 - alpha P (3 - V) / 2); for
    alpha P << 1 this is F ~ (1 - alpha)(1 + sqrt(V) e^{-sigma^2/2}) / 2 (Hermans et al. 2022,
    Methods (memory); the V = 1, sigma = 0 case is Humphreys et al. 2018's F ~ 1 - alpha)."""
    alpha, p_arm = 0.1, 10 ** (-0.2)
    physics = link_physics(link(bright_state_population=alpha, phase_noise_rad=sigma), *sites(v))
    c = math.sqrt(v) * math.exp(-sigma**2 / 2)
    assert physics.fidelity == pytest.approx((1 - alpha) * (1 + c) / (2 - alpha * p_arm * (3 - v) / 2), abs=1e-12)
    far = link_physics(link(bright_state_population=alpha, phase_noise_rad=sigma, length_km=200.0), *sites(v))
    assert far.fidelity == pytest.approx((1 - alpha) * (1 + c) / 2, abs=1e-3)   # P = 1e-2 per arm


def test_phase_noise_equals_averaging_over_gaussian_phases() -> None:
    """A random optical phase phi ~ N(0, sigma^2) between the arms rotates the heralded state by
    Z(phi) on one qubit; averaging (Gauss-Hermite quadrature, common practice) gives netsim's state."""
    sigma, alpha = 0.5, 0.1
    clean = link_physics(link(bright_state_population=alpha), *sites()).state
    noisy = link_physics(link(bright_state_population=alpha, phase_noise_rad=sigma), *sites()).state
    x, w = np.polynomial.hermite_e.hermegauss(40)
    avg = np.zeros((4, 4), dtype=complex)
    for phi, weight in zip(sigma * x, w / w.sum()):
        z = np.kron(np.diag([1.0, np.exp(1j * phi)]), np.eye(2))
        avg += weight * (z @ clean @ z.conj().T)
    np.testing.assert_allclose(noisy, avg, atol=1e-12)


@pytest.mark.parametrize("scheme", ["two_photon", "midpoint_source", "direct"])
def test_phase_noise_leaves_phase_insensitive_schemes_alone(scheme: str) -> None:
    """Two-photon heralding cancels the optical phase between its rounds (Barrett & Kok 2005
    (memory)); a midpoint source and direct transmission interfere no photons of two sites."""
    base = link_physics(link(scheme=scheme), *sites())
    noisy = link_physics(link(scheme=scheme, phase_noise_rad=1.0), *sites())
    np.testing.assert_allclose(noisy.state, base.state, atol=1e-15)


@pytest.mark.parametrize("scheme", ["midpoint_source", "direct"])
def test_indistinguishability_leaves_non_interfering_schemes_alone(scheme: str) -> None:
    """Neither scheme interferes photons from two sites (schemes' docstring)."""
    base = link_physics(link(scheme=scheme), *sites())
    other = link_physics(link(scheme=scheme), *sites(0.5))
    np.testing.assert_allclose(other.state, base.state, atol=1e-15)


def test_the_budget_link_fidelity_reflects_both() -> None:
    """The closed-form budget's link rows carry the heralded fidelity: F = (1 + V) / 2 for a
    two-photon link between two V = 0.9 sites (Bernien et al. 2013 (memory)), and the phase
    factor on a single-photon link (schemes' closed form, tested above)."""
    data = {
        "network": {"name": "Quillan pair"},
        "defaults": {"site": {"photon_indistinguishability": 0.9, "emission_efficiency": 1.0},
                     "link": {"detector_efficiency": 1.0, "dark_count_probability": 0.0,
                              "attenuation_db_per_km": 0.2, "extra_loss_db": 0.0}},
        "sites": [{"name": "Quillan East", "role": "user"}, {"name": "Quillan West", "role": "user"},
                  {"name": "Rook Hall", "role": "user"}],
        "links": [{"ends": ["Quillan East", "Quillan West"], "length_km": 20.0, "scheme": "two_photon"},
                  {"ends": ["Quillan West", "Rook Hall"], "length_km": 20.0, "phase_noise_rad": 0.3,
                   "bright_state_population": 0.1}],
        "demands": [{"users": ["Quillan East", "Quillan West"]}],
    }
    rows = budget(load_data(data)).links
    assert rows[0]["fidelity"] == pytest.approx(0.95, abs=1e-12)
    c = math.sqrt(0.9) * math.exp(-0.3**2 / 2)
    p_arm = 10 ** (-0.2)
    assert rows[1]["fidelity"] == pytest.approx(0.9 * (1 + c) / (2 - 0.1 * p_arm * (3 - 0.9) / 2), abs=1e-12)


def test_coherence_factor_acts_only_on_the_target_coherence() -> None:
    """At V = 0 two-photon heralding leaves the classically correlated mixture (|00><00| + |11><11|)/2,
    fidelity 1/2 (Bernien et al. 2013 (memory): no interference, no entanglement)."""
    physics = link_physics(link(scheme="two_photon"), *sites(0.0))
    np.testing.assert_allclose(physics.state, np.diag([0.5, 0, 0, 0.5]), atol=1e-12)
    assert float(np.trace(PHI_PLUS @ physics.state).real) == pytest.approx(0.5)


@settings(max_examples=60, deadline=None)
@given(scheme=st.sampled_from(["two_photon", "single_photon"]), va=st.floats(0.0, 1.0), vb=st.floats(0.0, 1.0),
       sigma=st.floats(0.0, 6.0), alpha=st.floats(0.01, 0.5), dark=st.floats(0.0, 0.01),
       length=st.floats(0.5, 150.0), fraction=st.floats(0.0, 1.0))
def test_states_stay_valid_and_fidelity_never_rises(scheme: str, va: float, vb: float, sigma: float, alpha: float,
                                                    dark: float, length: float, fraction: float) -> None:
    """Invariants over the whole allowed range: a density matrix, and lowering the visibility or
    adding phase noise never raises the heralded fidelity (both only shrink a coherence)."""
    lk = link(scheme=scheme, length_km=length, midpoint_fraction=fraction, bright_state_population=alpha,
              dark_count_probability=dark, phase_noise_rad=sigma)
    physics = link_physics(lk, *sites(va, vb))
    assert_valid_state(physics.state)
    assert_probability([physics.success_probability, physics.fidelity])
    ideal = link_physics(replace(lk, phase_noise_rad=0.0), *sites())
    assert physics.fidelity <= ideal.fidelity + 1e-12
