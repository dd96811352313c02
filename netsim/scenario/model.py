"""Typed, immutable objects a scenario file is loaded into.

These dataclasses are the contract between the scenario loader and every layer above it. Field
names equal the keys of the scenario file (units in the names). Indices in key paths are
zero-based: ``links[0]`` is the first ``[[links]]`` table of the file.

Scenario file layout (TOML)::

    [network]          name, purpose
    [encoding]         states ("binary" | "bb84" | list of Bloch vectors), probabilities
    [protocol]         routing, swap_policy, scheduling, cutoff_s, purification, purification_rounds
    [defaults.site]    any Site key except name/role/x_km/y_km, applied where a site is silent
    [defaults.link]    any Link key except ends, applied where a link is silent
    [[sites]]          name, role, x_km, y_km, memory_slots, t1_s, t2_s, ...
    [[links]]          ends = [site, site], length_km, attenuation_db_per_km, ...
    [[demands]]        users = [site, site], pairs or duration_s, min_fidelity
    [sweep]            kept untouched in Scenario.data for the sweep layer

The full reference (every key, unit, default and allowed range) is the README's scenario reference.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

__all__ = [
    "DEFAULT_DEMAND_PAIRS",
    "PURIFICATION_PROTOCOLS",
    "ROUTING_POLICIES",
    "SCHEDULING_POLICIES",
    "SCHEMES",
    "SITE_ROLES",
    "SWAP_POLICIES",
    "Demand",
    "Encoding",
    "Link",
    "Protocol",
    "Scenario",
    "Site",
]

SiteRole = Literal["user", "repeater", "switch"]
Scheme = Literal["two_photon", "single_photon", "midpoint_source", "direct"]

SITE_ROLES: tuple[str, ...] = ("user", "repeater", "switch")
#: Heralding schemes: two-photon detection at a midpoint station (Barrett & Kok 2005),
#: single-photon detection with bright-state population alpha (Cabrillo et al. 1999),
#: an entangled-pair source at the midpoint with absorptive memories at both ends, and
#: emitter-to-receiver transmission (the photon travels from end a to a memory at end b).
SCHEMES: tuple[str, ...] = ("two_photon", "single_photon", "midpoint_source", "direct")
ROUTING_POLICIES: tuple[str, ...] = ("least_loss", "fewest_hops", "highest_bound")
PURIFICATION_PROTOCOLS: tuple[str, ...] = ("none", "bbpssw", "dejmps")
#: Swapping orders the engine offers (a plug-in family; add a name here when adding a plug-in).
SWAP_POLICIES: tuple[str, ...] = ("asap",)
#: Memory-slot scheduling between demands (a plug-in family; add names with new plug-ins).
SCHEDULING_POLICIES: tuple[str, ...] = ("fair", "demand_order")
#: Pairs asked for by a demand that gives neither ``pairs`` nor ``duration_s``.
DEFAULT_DEMAND_PAIRS: int = 100


@dataclass(frozen=True)
class Site:
    """A site of the network.

    ``role``: ``user`` (an end user holding memories), ``repeater`` (memories that swap) or
    ``switch`` (a passive optical switch: no memory; its links' losses add up along a light path).
    ``memory_slots`` is >= 1 at users and repeaters (0 is allowed only at a switch) and
    ``t2_s <= 2 * t1_s`` holds on every loaded site.
    """

    name: str
    role: SiteRole
    x_km: float | None = None
    y_km: float | None = None
    memory_slots: int = 2                 # qubit memories available for link pairs
    t1_s: float = 10.0                    # energy relaxation time of a memory qubit
    t2_s: float = 1.0                     # total coherence time (T2 <= 2 T1)
    emission_efficiency: float = 0.5      # photon emitted and collected into fibre, per attempt
    memory_efficiency: float = 0.9        # absorb-and-retrieve efficiency (absorptive memories)
    bsm_success_probability: float = 1.0  # Bell-state measurement success (swapping here)
    gate_error: float = 0.0               # depolarizing p applied to the swapped pair
    attempt_prep_time_s: float = 1e-6     # memory initialisation and emission per attempt
    communication_qubits: int | None = None  # optical interfaces; None: every slot may attempt
    memory_transfer_s: float = 0.0        # moving a heralded qubit from the interface to memory
    memory_transfer_error: float = 0.0    # depolarizing p of that transfer
    photon_indistinguishability: float = 1.0  # two-photon visibility of two sites like this one
    attempt_dephasing: float = 0.0        # stored coherence x (1 - this) per attempt of the site


@dataclass(frozen=True)
class Link:
    """A fibre link between sites ``a`` and ``b`` (``ends = [a, b]`` in the file).

    ``index`` is the link's zero-based position among the file's ``[[links]]`` tables. At most
    one link joins a pair of sites (parallel fibres are modelled with ``modes``).
    """

    index: int
    a: str
    b: str
    length_km: float
    attenuation_db_per_km: float = 0.25   # deployed G.652 at 1550 nm incl. splices (practice)
    extra_loss_db: float = 1.0            # connectors, patch panels, switches
    scheme: Scheme = "single_photon"
    modes: int = 1                        # multiplexed modes per attempt round
    detector_efficiency: float = 0.9
    dark_count_probability: float = 1e-6  # per detector per detection window
    midpoint_fraction: float = 0.5        # position of the midpoint station from a (0..1)
    bright_state_population: float = 0.1  # alpha for single-photon heralding
    pair_probability: float = 0.01        # mean pairs per pulse of a midpoint source
    phase_noise_rad: float = 0.0          # rms optical phase error (single-photon heralding)

    @property
    def name(self) -> str:
        return f"{self.a}-{self.b}"


@dataclass(frozen=True)
class Demand:
    """Two end users who want Bell pairs: ``pairs`` of them, or for ``duration_s`` seconds.

    The loader fills in ``pairs = DEFAULT_DEMAND_PAIRS`` when the file gives neither, so exactly
    one of ``pairs`` and ``duration_s`` is set on a loaded demand. ``index`` is the demand's
    zero-based position among the ``[[demands]]`` tables.
    """

    index: int
    a: str
    b: str
    pairs: int | None = None
    duration_s: float | None = None
    min_fidelity: float = 0.5

    @property
    def name(self) -> str:
        return f"{self.a}-{self.b}"


@dataclass(frozen=True)
class Encoding:
    """The ensemble {p_i, rho_i} used for direct qubit transmission, as Bloch vectors.

    ``name`` is ``"binary"``, ``"bb84"`` or ``"custom"`` (a list of Bloch vectors in the file);
    rho_i = (I + x X + y Y + z Z)/2; the probabilities sum to 1.
    """

    name: str
    probabilities: tuple[float, ...]
    bloch_vectors: tuple[tuple[float, float, float], ...]


@dataclass(frozen=True)
class Protocol:
    """How the engine runs the network; each choice is a plug-in with a documented default."""

    routing: str = "least_loss"
    swap_policy: str = "asap"
    scheduling: str = "fair"
    cutoff_s: float | None = None
    purification: str = "none"
    purification_rounds: int = 0


@dataclass(frozen=True)
class Scenario:
    """A whole validated scenario. ``data`` is the parsed file with defaults not yet applied
    (sweeps edit it and load it again); ``content_hash`` is the SHA-256 of its canonical JSON."""

    name: str
    purpose: str
    sites: tuple[Site, ...]
    links: tuple[Link, ...]
    demands: tuple[Demand, ...]
    encoding: Encoding
    protocol: Protocol
    data: dict[str, Any] = field(repr=False, compare=False, default_factory=dict)
    content_hash: str = ""
    source: str | None = None

    def site(self, name: str) -> Site:
        for s in self.sites:
            if s.name == name:
                return s
        raise KeyError(name)

    @property
    def slug(self) -> str:
        """A file-system friendly name: the source file's stem, else the lower-case name."""
        if self.source:
            from pathlib import Path

            return Path(self.source).stem
        return "".join(ch if ch.isalnum() else "-" for ch in self.name.lower()).strip("-") or "scenario"
