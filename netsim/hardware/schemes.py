"""Heralding schemes: from a light path and its two end sites to :class:`LinkPhysics`.

Every scheme computes, per mode and per attempt:

- ``p_true``: the probability that photons alone produce an accepted herald, with the heralded
  state ``rho_true``;
- ``p_false``: the probability that a detector dark count completes (or alone makes) an
  accepted herald, with the state ``rho_false`` the memories are then left in.

Derived here (dark counts): the heralded state is the mixture weighted by how often each kind of
herald happens, rho = (p_true rho_true + p_false rho_false) / (p_true + p_false), so the fidelity
drops from F_true to (p_true F_true + p_false F_false) / (p_true + p_false): dark counts matter
when ``p_false`` is not small against ``p_true``, i.e. on long, lossy links. Detectors are
threshold detectors with dark-count probability d per window, treated exactly: a detector that
receives light it detects with probability P clicks with probability 1 - (1 - P)(1 - d), and a
pattern that needs a detector silent carries (1 - d) for it (checked in the tests against an
explicit enumeration of click patterns and against QuTiP models).

Per-arm efficiency: P = (emission or memory efficiency) x (fibre transmissivity of the arm) x
(detector efficiency). States are written in the frame where the target is Phi+ (the Pauli
correction that turns the heralded Bell state into Phi+ is known from the click pattern and
applied). Qubit 0 is the memory at ``site_a`` (left factor of ``numpy.kron``).

Multiplexing over M modes: round success 1 - (1 - p)^M (modes are independent attempts that
share one attempt period; Collins et al., PRL 98, 060502, 2007).

References
----------
S. D. Barrett and P. Kok, Phys. Rev. A 71, 060310(R) (2005).
C. Cabrillo, J. I. Cirac, P. Garcia-Fernandez and P. Zoller, Phys. Rev. A 59, 1025 (1999).
P. C. Humphreys et al., Nature 558, 268 (2018).
J. Calsamiglia and N. Lütkenhaus, Appl. Phys. B 72, 67 (2001).
N. Sangouard, C. Simon, H. de Riedmatten and N. Gisin, Rev. Mod. Phys. 83, 33 (2011).
O. A. Collins, S. D. Jenkins, A. Kuzmich and T. A. B. Kennedy, Phys. Rev. Lett. 98, 060502 (2007).
H. Bernien et al., Nature 497, 86 (2013); B. Hensen et al., Nature 526, 682 (2015), supplementary
information (two-photon heralding with partly distinguishable photons).
S. L. N. Hermans et al., Nature 605, 663 (2022) (single-photon heralding: visibility and phase).
C. K. Hong, Z. Y. Ou and L. Mandel, Phys. Rev. Lett. 59, 2044 (1987).

Photon indistinguishability and optical phase (shared by the two interfering schemes)
------------------------------------------------------------------------------------
Derived here. Model the photon of site x as sqrt(c_x)|common> + sqrt(1 - c_x)|own_x>, with
the ``own`` modes orthogonal to each other and to the common mode. Two sites' photons overlap
by gamma = sqrt(c_a c_b), and their two-photon (Hong-Ou-Mandel) interference visibility is
V = |gamma|^2 = c_a c_b (Hong, Ou & Mandel 1987). ``photon_indistinguishability`` I_x is what
two sites identical to x show, I_x = c_x^2; so the pair's visibility is the geometric mean
V = sqrt(I_a I_b) (:func:`pair_visibility`): a site's value is the visibility measured
between two nodes of its kind, as published experiments report it.

A detector that does not resolve the ``own`` modes leaves the which-path information in them:
each heralded photon multiplies the spin-spin coherence by gamma = sqrt(V). Single-photon
heralding detects one photon: coherence x sqrt(V) (Humphreys et al. 2018; Hermans et al. 2022).
Two-photon heralding detects one photon in each of two rounds: coherence x V, so F = (1 + V) / 2
for an otherwise perfect link (Bernien et al. 2013; Hensen et al. 2015, SI (memory)). An rms
optical phase error sigma between the arms of single-photon heralding (Gaussian, zero mean)
multiplies the coherence by E[exp(i phi)] = exp(-sigma^2 / 2) (Hermans et al. 2022, Methods
(memory)); two-photon heralding cancels the optical phase between its two rounds (Barrett & Kok
2005) and the other schemes do not interfere photons of two sites, so ``phase_noise_rad`` and
``photon_indistinguishability`` leave them unchanged.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from netsim.errors import ParameterError
from netsim.hardware.fibre import FIBRE_SPEED_KM_PER_S, db_to_transmissivity
from netsim.hardware.lightpath import LightPath
from netsim.hardware.types import LinkPhysics
from netsim.qinfo.states import phi_plus_fidelity
from netsim.scenario.model import SCHEMES, Link, Site

__all__ = [
    "MIXED",
    "PHI_PLUS",
    "SCHEME_FUNCTIONS",
    "Herald",
    "assemble",
    "direct",
    "direct_herald",
    "link_physics",
    "midpoint_source",
    "midpoint_source_herald",
    "pair_visibility",
    "path_physics",
    "single_photon",
    "single_photon_herald",
    "two_photon",
    "two_photon_herald",
]

PHI_PLUS: np.ndarray = np.outer([1, 0, 0, 1], [1, 0, 0, 1]) / 2.0
MIXED: np.ndarray = np.eye(4) / 4.0


@dataclass(frozen=True)
class Herald:
    """Per-mode heralding outcome of one attempt (see the module docstring)."""

    p_true: float
    rho_true: np.ndarray
    p_false: float
    rho_false: np.ndarray
    attempt_period_s: float
    herald_delay_s: float


#: Schemes heralded at (or fed from) a station between the two ends.
STATION_SCHEMES: tuple[str, ...] = ("two_photon", "single_photon", "midpoint_source")


def _arm_efficiencies(path: LightPath, source_a: float, source_b: float) -> tuple[float, float]:
    """P_a, P_b: source (emission or memory) efficiency x arm transmissivity x detector efficiency."""
    loss_a, loss_b = path.arm_losses_db()
    eta_d = path.first.detector_efficiency
    return source_a * db_to_transmissivity(loss_a) * eta_d, source_b * db_to_transmissivity(loss_b) * eta_d


def pair_visibility(site_a: Site, site_b: Site) -> float:
    """Two-photon interference visibility of two sites' photons: sqrt(I_a I_b).

    Derived in the module docstring (common mode plus orthogonal own modes); two identical sites
    give their own ``photon_indistinguishability``.
    """
    return math.sqrt(site_a.photon_indistinguishability * site_b.photon_indistinguishability)


def _scale_coherence(rho: np.ndarray, i: int, j: int, factor: float) -> np.ndarray:
    """``rho`` with the coherence between basis states ``i`` and ``j`` multiplied by ``factor``."""
    out = np.array(rho, dtype=float, copy=True)
    out[i, j] *= factor
    out[j, i] *= factor
    return out


def _station_timing(path: LightPath, preparations: int = 1) -> float:
    """Attempt period with a station at fraction f: preparation + 2 max(f, 1 - f) L / v.

    Derived here: both photons must reach the station together, so the nearer end fires later;
    each end waits for its emission to reach the station and the herald to come back before it
    may re-initialise its memory, a round trip of 2 f L / v for ``site_a`` and 2 (1 - f) L / v
    for ``site_b``; the slower end sets the period (L / v for a centred station).
    """
    f = path.station_fraction
    prep = max(path.site_a.attempt_prep_time_s, path.site_b.attempt_prep_time_s) * preparations
    return prep + 2.0 * max(f, 1.0 - f) * path.length_km / FIBRE_SPEED_KM_PER_S


def two_photon_herald(path: LightPath) -> Herald:
    """Two-photon heralding at a midpoint station (Barrett & Kok 2005).

    Each memory emits a photon entangled with its spin in two rounds separated by a spin flip;
    a herald is one click in each round. With a linear-optics Bell measurement only two of the
    four Bell states are identified (Calsamiglia & Lütkenhaus 2001), so p_true = P_a P_b / 2
    (Barrett & Kok: eta^2 / 2 for equal arms), with the heralded state a Bell state (Phi+ after
    correction) for indistinguishable photons.

    Dark counts (derived here, exact for threshold detectors; checked against an enumeration of
    click patterns and a first-principles QuTiP model in the tests). Each spin emits in round 1
    or round 2 with probability 1/2; a herald needs exactly one of the two detectors of each
    round to click. A round holding one photon gives that with
    o(P) = (1 - d) [P + 2 d (1 - P)] (the photon's detector clicks, the other stays dark, or
    the photon is lost and exactly one detector fires dark); an empty round with o(0) = 2 d (1 - d).

    - Photons in different rounds (1/2), both detected and no extra click: the true herald,
      p_true = P_a P_b (1 - d)^2 / 2.
    - Photons in different rounds, at least one lost and its round completed by a dark click:
      1/2 (1 - d)^2 [2 d P_a (1 - P_b) + 2 d P_b (1 - P_a) + 4 d^2 (1 - P_a)(1 - P_b)]; the lost
      photon revealed its spin, leaving anti-correlated spins ((|01><01| + |10><10|)/2 before
      the correction), F = 1/2.
    - Photons in the same round (1/2): the full round gives one click with
      (1 - d) [P_a (1 - P_b) + P_b (1 - P_a) + P_a P_b (1 + V) / 2 + 2 d (1 - P_a)(1 - P_b)] (two
      detected photons leave by one port with (1 + V) / 2, Hong, Ou & Mandel 1987; V = 1 gives
      1 - (1 - P_a)(1 - P_b)) and the empty round with 2 d (1 - d); the heralded spins are
      correlated ((|00><00| + |11><11|)/2 before the correction), F = 0.

    States are written after the Psi -> Phi+ correction. Two preparations per attempt (one per
    round).

    Partly distinguishable photons (module docstring): the coherence of the true herald is
    multiplied by the pair visibility V, rho_true = (|00><00| + |11><11| + V (|00><11| + h.c.)) / 2,
    F = (1 + V) / 2 (Bernien et al. 2013; Hensen et al. 2015, SI (memory)). p_true does not
    depend on V: in each round exactly one spin emits, so no two photons meet at the beam
    splitter.
    """
    pa, pb = _arm_efficiencies(path, path.site_a.emission_efficiency, path.site_b.emission_efficiency)
    d = path.first.dark_count_probability
    keep = (1 - d) ** 2
    w_anti = keep * (2 * d * (pa * (1 - pb) + pb * (1 - pa)) + 4 * d * d * (1 - pa) * (1 - pb)) / 2.0
    vis = pair_visibility(path.site_a, path.site_b)
    # the full round: one detected photon, or both bunched ((1 + V) / 2), or a lone dark click
    one_click = pa * (1 - pb) + pb * (1 - pa) + pa * pb * (1 + vis) / 2 + 2 * d * (1 - pa) * (1 - pb)
    w_corr = 2 * d * keep * one_click / 2.0
    raw_false = w_anti * np.diag([0.5, 0.0, 0.0, 0.5]) + w_corr * np.diag([0.0, 0.5, 0.5, 0.0])
    period = _station_timing(path, preparations=2)
    rho_true = _scale_coherence(PHI_PLUS, 0, 3, vis)
    return Herald(pa * pb / 2.0 * keep, rho_true, w_anti + w_corr, _normalised(raw_false),
                  period, period)


def single_photon_herald(path: LightPath) -> Herald:
    """Single-photon heralding with bright-state population alpha (Cabrillo et al. 1999).

    Each memory is prepared in sqrt(1 - alpha)|0>|vac> + sqrt(alpha)|1>|photon>; the photons
    meet on a beam splitter at the station and one click heralds. Derived here for arm
    efficiencies P_a, P_b and non-photon-number-resolving detectors (indistinguishable photons
    first; V < 1 below):

    - one emitted photon detected: weight alpha (1 - alpha)(P_a + P_b), state
      (sqrt(P_a)|10> + sqrt(P_b)|01>) / sqrt(P_a + P_b) (Psi+ for equal arms);
    - both emitted, at least one detected: weight alpha^2 (P_a + P_b - P_a P_b), state |11>;

    so p_true = 1 - (1 - alpha P_a)(1 - alpha P_b) ~ 2 alpha eta and, for equal arms,
    F = (1 - alpha) / (1 - alpha P / 2) ~ 1 - alpha (Humphreys et al. 2018: p ~ 2 alpha eta,
    F ~ 1 - alpha).

    Partly distinguishable photons and phase noise (module docstring): the one-photon term's
    coherence is multiplied by c = sqrt(V) exp(-sigma^2 / 2), V the pair visibility and sigma the
    link's ``phase_noise_rad``. Two emitted photons that are both detected leave by the same
    port only through two-photon interference: with probability (1 + V) / 2 (Hong, Ou & Mandel
    1987); otherwise both detectors click and the herald is rejected, so the two-photon weight is
    alpha^2 (P_a + P_b - P_a P_b (3 - V) / 2). For equal arms P:
    F = (1 - alpha)(1 + c) / (2 - alpha P (3 - V) / 2), to first order in P
    F ~ (1 - alpha)(1 + c) / 2 (Hermans et al. 2022, Methods (memory)).

    Dark counts (exact for threshold detectors): a true herald is rejected when the other
    detector fires too (factor 1 - d); with no photon detected ((1 - alpha P_a)(1 - alpha P_b)),
    exactly one of the two detectors fires dark, p_false = 2 d (1 - d)(1 - alpha P_a)(1 - alpha P_b);
    the memories are
    then in the no-click state, diagonal with weights (1 - alpha)^2 |00>,
    alpha (1 - alpha)(1 - P_a) |10>, alpha (1 - alpha)(1 - P_b) |01>,
    alpha^2 (1 - P_a)(1 - P_b) |11> (derived here).
    """
    alpha = path.first.bright_state_population
    pa, pb = _arm_efficiencies(path, path.site_a.emission_efficiency, path.site_b.emission_efficiency)
    vis = pair_visibility(path.site_a, path.site_b)
    coherence = math.sqrt(vis) * math.exp(-path.first.phase_noise_rad ** 2 / 2.0)
    w_one, w_two = alpha * (1 - alpha) * (pa + pb), alpha ** 2 * (pa + pb - pa * pb * (3.0 - vis) / 2.0)
    p_true = w_one + w_two
    # Written entry by entry after the correction X on qubit 1 (|01> -> |00>, |10> -> |11>,
    # |11> -> |10>): the one-photon state's |01> and |10> weights P_b / (P_a + P_b) and
    # P_a / (P_a + P_b) move to |00> and |11>, its coherence to <00|rho|11>, and |11> to |10>.
    total = pa + pb
    if total > 0:
        on_00, on_11, between = w_one * (pb / total), w_one * (pa / total), w_one * (math.sqrt(pa * pb) / total * coherence)
    else:
        on_00 = on_11 = between = 0.0
    rho_true = _normalised_diagonal_plus((on_00, 0.0, w_two, on_11), between)
    no_click = ((1 - alpha) ** 2, alpha * (1 - alpha) * (1 - pb), alpha * (1 - alpha) * (1 - pa),
                alpha ** 2 * (1 - pa) * (1 - pb))   # |00>, |01>, |10>, |11> before the correction
    d = path.first.dark_count_probability
    period = _station_timing(path)
    return Herald(p_true * (1 - d), rho_true, 2.0 * d * (1 - d) * sum(no_click),
                  _normalised_diagonal_plus((no_click[1], no_click[0], no_click[3], no_click[2]), 0.0),
                  period, period)


def midpoint_source_herald(path: LightPath) -> Herald:
    """An entangled-pair source at the station; absorptive memories with heralded storage at both ends.

    The source emits mu pairs per pulse on average (``pair_probability``) with thermal
    statistics P(n) = mu^n / (1 + mu)^(n + 1), as for one mode of spontaneous parametric
    down-conversion (Sangouard et al. 2011, Sec. V). P_x = memory efficiency x arm
    transmissivity x detector efficiency of the storage herald. Derived here, to second order
    in mu: one pair stored at both ends, p_1 P_a P_b, gives Phi+; two pairs with at least one
    photon stored per side, p_2 (1 - (1 - P_a)^2)(1 - (1 - P_b)^2), give with probability 1/2
    photons of the same pair (Phi+) and otherwise halves of different pairs (I/4).

    Dark counts (one herald detector per memory, exact for threshold detectors given the pair
    numbers kept): a herald needs both detectors to click; with n pairs side x detects a photon
    with D_x = 1 - (1 - P_x)^n, and a herald not made by photons alone has probability
    p_n [(1 - (1 - D_a)(1 - d))(1 - (1 - D_b)(1 - d)) - D_a D_b] for n = 0, 1, 2;
    the memories are then uncorrelated, rho_false = I/4 (approximation).

    Attempt period (derived here): the next photon must not reach a memory before that memory has
    heard whether the far memory stored, so site a waits 2 (1 - f) L / v between pulses and site
    b waits 2 f L / v: period = preparation + 2 max(f, 1 - f) L / v. Both ends know the outcome
    (1 + max(f, 1 - f)) L / v after emission.
    """
    mu = path.first.pair_probability
    p1, p2 = mu / (1 + mu) ** 2, mu ** 2 / (1 + mu) ** 3
    pa, pb = _arm_efficiencies(path, path.site_a.memory_efficiency, path.site_b.memory_efficiency)
    w_one = p1 * pa * pb
    w_two = p2 * (1 - (1 - pa) ** 2) * (1 - (1 - pb) ** 2)
    rho_true = _normalised(w_one * PHI_PLUS + w_two * (PHI_PLUS + MIXED) / 2.0)
    d = path.first.dark_count_probability
    p_false = 0.0
    for p_n, n in ((1 / (1 + mu), 0), (p1, 1), (p2, 2)):
        da, db = 1 - (1 - pa) ** n, 1 - (1 - pb) ** n
        p_false += p_n * ((1 - (1 - da) * (1 - d)) * (1 - (1 - db) * (1 - d)) - da * db)
    f, v = path.station_fraction, FIBRE_SPEED_KM_PER_S
    prep = max(path.site_a.attempt_prep_time_s, path.site_b.attempt_prep_time_s)
    period = prep + 2.0 * max(f, 1 - f) * path.length_km / v
    delay = prep + (1.0 + max(f, 1 - f)) * path.length_km / v
    return Herald(w_one + w_two, rho_true, p_false, MIXED, period, delay)


def direct_herald(path: LightPath) -> Herald:
    """Emitter-to-receiver transmission: one end emits, the photon is stored at the other end.

    The emitter's memory emits a photon entangled with it; the receiving memory absorbs it and
    a detector heralds storage. Derived here: p_true = e_emit x eta x m_receive x eta_det over
    the whole path (no station), heralded state Phi+. A dark count of the storage herald
    (d (1 - p_true), exact for a threshold detector) leaves the emitter's qubit unpaired:
    rho_false = I/4 (approximation).
    The emitter must hear the outcome before it re-initialises: period = preparation + 2 L / v.
    The emitter is the path's reference end (:attr:`LightPath.is_canonical`): for a lone link,
    its ``a`` end as written in the scenario.
    """
    emitter, receiver = path.site_a, path.site_b  # path_physics calls this from the reference end
    eta = db_to_transmissivity(path.loss_db)
    p_true = emitter.emission_efficiency * eta * receiver.memory_efficiency * path.first.detector_efficiency
    p_false = path.first.dark_count_probability * (1 - p_true)
    period = emitter.attempt_prep_time_s + 2.0 * path.length_km / FIBRE_SPEED_KM_PER_S
    return Herald(p_true, PHI_PLUS, p_false, MIXED, period, period)


def _normalised_diagonal_plus(diagonal: tuple[float, float, float, float], coherence: float) -> np.ndarray:
    """The state with ``diagonal`` weights and ``coherence`` in <00|rho|11> (and its conjugate),
    normalised (I/4 when the weights sum to zero): built from plain floats in one array."""
    trace = sum(diagonal)
    if not trace > 0:
        return MIXED.copy()
    w00, w01, w10, w11 = (w / trace for w in diagonal)
    c = coherence / trace
    return np.array([[w00, 0.0, 0.0, c], [0.0, w01, 0.0, 0.0], [0.0, 0.0, w10, 0.0], [c, 0.0, 0.0, w11]])


def _normalised(rho: np.ndarray) -> np.ndarray:
    trace = float(np.trace(rho).real)
    return rho / trace if trace > 0 else MIXED.copy()


SCHEME_FUNCTIONS: dict[str, Callable[[LightPath], Herald]] = {
    "two_photon": two_photon_herald,
    "single_photon": single_photon_herald,
    "midpoint_source": midpoint_source_herald,
    "direct": direct_herald,
}


def path_physics(path: LightPath) -> LinkPhysics:
    """LinkPhysics of a whole light path, dispatching on the first link's ``scheme``.

    Computed from the path's reference end (:attr:`LightPath.is_canonical`); walked the other
    way, the same state is returned with its two qubits swapped (qubit 0 at ``path.site_a``).
    """
    if not path.is_canonical:
        return swapped_ends(path_physics(path.reversed()))
    scheme = path.first.scheme
    if scheme not in SCHEME_FUNCTIONS:
        raise ParameterError(f"links[{path.first.index}].scheme", scheme, "one of " + ", ".join(SCHEMES))
    herald = SCHEME_FUNCTIONS[scheme](path)
    return assemble(path, herald)


_SWAP = np.eye(4)[[0, 2, 1, 3]]


def swapped_ends(physics: LinkPhysics) -> LinkPhysics:
    """The same link physics seen from its other end: the state's two qubits exchanged."""
    from dataclasses import replace

    return replace(physics, state=_SWAP @ physics.state @ _SWAP)


def assemble(path: LightPath, herald: Herald) -> LinkPhysics:
    """Mix true and dark-count heralds, apply multiplexing and fill :class:`LinkPhysics`."""
    p = min(herald.p_true + herald.p_false, 1.0)
    if herald.p_true + herald.p_false > 0:
        rho = (herald.p_true * herald.rho_true + herald.p_false * herald.rho_false) / (herald.p_true + herald.p_false)
    else:
        rho = MIXED.copy()
    modes = int(path.first.modes)
    round_p = -math.expm1(modes * math.log1p(-p)) if p < 1 else 1.0
    loss = path.loss_db
    # A midpoint station or source is a node between two channels: the worse arm bounds the link.
    bound_loss = max(path.arm_losses_db()) if path.first.scheme in STATION_SCHEMES else loss
    return LinkPhysics(
        scheme=path.first.scheme, length_km=path.length_km, loss_db=loss,
        transmissivity=db_to_transmissivity(loss), success_probability=p, modes=modes,
        round_success_probability=round_p, attempt_period_s=herald.attempt_period_s,
        herald_delay_s=herald.herald_delay_s, state=rho,
        fidelity=float(phi_plus_fidelity(rho)),
        dark_count_fraction=herald.p_false / p if p > 0 else 0.0,
        bound_transmissivity=db_to_transmissivity(bound_loss),
    )


def link_physics(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """LinkPhysics of one fibre link; qubit 0 of the state at ``site_a`` (either end of the link)."""
    return path_physics(LightPath.join((link,), site_a, site_b))


def _with_scheme(link: Link, scheme: str) -> Link:
    from dataclasses import replace

    return link if link.scheme == scheme else replace(link, scheme=scheme)  # type: ignore[arg-type]


def two_photon(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """LinkPhysics of ``link`` under two-photon heralding (see :func:`two_photon_herald`)."""
    return link_physics(_with_scheme(link, "two_photon"), site_a, site_b)


def single_photon(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """LinkPhysics of ``link`` under single-photon heralding (see :func:`single_photon_herald`)."""
    return link_physics(_with_scheme(link, "single_photon"), site_a, site_b)


def midpoint_source(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """LinkPhysics of ``link`` with a midpoint pair source (see :func:`midpoint_source_herald`)."""
    return link_physics(_with_scheme(link, "midpoint_source"), site_a, site_b)


def direct(link: Link, site_a: Site, site_b: Site) -> LinkPhysics:
    """LinkPhysics of ``link`` as emitter-to-receiver transmission (see :func:`direct_herald`)."""
    return link_physics(_with_scheme(link, "direct"), site_a, site_b)
