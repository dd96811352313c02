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
                       (a site, link or defaults table may name a hardware ``profile``; precedence:
                       own key > own profile > [defaults.*] key > [defaults.*] profile > built-in)
    [[sites]]          name, role, x_km, y_km, memory_slots, t1_s, t2_s, ...
    [[links]]          ends = [site, site], length_km, attenuation_db_per_km, ...
    [[demands]]        users = [site, site], pairs or duration_s, min_fidelity, min_rate_per_s
    [costs]            currency, fibre_per_km, repeater_site, memory_slot, mode, ...
    [sweep]            kept untouched in Scenario.data for the sweep layer
    [sensitivity]      kept untouched in Scenario.data: ranges of the sensitivity ranking

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
    "Costs",
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
ROUTING_POLICIES: tuple[str, ...] = ("least_loss", "fewest_hops", "highest_bound", "highest_rate")
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
    ``t2_s <= 2 * t1_s`` holds on every loaded site. ``profile`` names the hardware profile
    (:mod:`netsim.scenario.profiles`) that supplied values not written in the file, ``None`` if
    none did; the hardware defaults below are those of the demonstrated nitrogen-vacancy profile
    (or less optimistic), see the README.
    """

    name: str
    role: SiteRole
    x_km: float | None = None
    y_km: float | None = None
    memory_slots: int = 2                 # qubit memories available for link pairs
    # Built-in hardware defaults: the demonstrated nitrogen-vacancy profile
    # (``nv-diamond-demonstrated``, sources in netsim/hardware/profiles.toml) or less optimistic;
    # memory_efficiency, which that platform does not use, from ``rare-earth-afc-demonstrated``.
    t1_s: float = 10.0                    # energy relaxation time of a memory qubit
    t2_s: float = 0.4                     # total coherence time (T2 <= 2 T1)
    emission_efficiency: float = 1e-4     # photon emitted, collected and converted into fibre, per attempt
    memory_efficiency: float = 0.05       # absorb-and-retrieve efficiency (absorptive memories)
    bsm_success_probability: float = 1.0  # Bell-state measurement success (swapping here)
    gate_error: float = 0.03              # depolarizing p applied to the swapped pair
    attempt_prep_time_s: float = 5e-6     # memory initialisation and emission per attempt
    communication_qubits: int | None = 1  # links that may attempt at once (None: every memory slot)
    memory_transfer_s: float = 5e-4       # time to move a fresh link qubit into a memory qubit
    memory_transfer_error: float = 0.03   # depolarizing p of that transfer
    photon_indistinguishability: float = 0.8  # limits the interference visibility of two sites' photons
    attempt_dephasing: float = 1e-3       # dephasing p of stored qubits per attempt the site makes
    profile: str | None = None            # the hardware profile the values came from (own or defaults)
    candidate: bool = False               # exists only if a design chooses it (netsim design)
    cost: float | None = None             # own price of building the site (replaces [costs])


@dataclass(frozen=True)
class Link:
    """A fibre link between sites ``a`` and ``b`` (``ends = [a, b]`` in the file).

    ``index`` is the link's zero-based position among the file's ``[[links]]`` tables. At most
    one link joins a pair of sites (parallel fibres are modelled with ``modes``). ``profile`` as
    for :class:`Site`.
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
    phase_noise_rad: float = 0.25         # rms optical phase error of single-photon heralding
    profile: str | None = None            # the hardware profile the values came from (own or defaults)
    candidate: bool = False               # exists only if a design chooses it (netsim design)
    cost: float | None = None             # own price of the fibre (e.g. a dark-fibre lease)

    @property
    def name(self) -> str:
        return f"{self.a}-{self.b}"


@dataclass(frozen=True)
class Demand:
    """Two end users who want Bell pairs: ``pairs`` of them, or for ``duration_s`` seconds.

    A pair is *useful* when its own delivered fidelity reaches ``min_fidelity``;
    ``min_rate_per_s`` (optional) is the rate of useful pairs the users need.

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
    min_rate_per_s: float | None = None   # useful pairs per second needed; None: no requirement

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
class Costs:
    """Prices of the ``[costs]`` table, in the unit named by ``currency`` (a label only).

    ``fibre_per_km`` per km of link; ``repeater_site`` / ``user_site`` per site built;
    ``memory_slot`` per qubit memory; ``mode`` per multiplexed mode and link end; ``detector``
    per heralding detector (two per link); ``heralding_station`` per link heralded at a
    midpoint station or source (every scheme but ``direct``). A site's or link's own ``cost``
    replaces the site or fibre price (its slots, modes and detectors are still priced).
    """

    currency: str = "units"
    fibre_per_km: float = 0.0
    repeater_site: float = 0.0
    user_site: float = 0.0
    memory_slot: float = 0.0
    mode: float = 0.0
    detector: float = 0.0
    heralding_station: float = 0.0


@dataclass(frozen=True)
class Scenario:
    """A whole validated scenario (``sites`` and ``links``: the built network; candidates apart).
    ``data`` is the parsed file with defaults not yet applied
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
    costs: Costs | None = None            # the [costs] table; None when the file has none
    #: Sites and links marked ``candidate = true`` (and links with a candidate end): they exist
    #: only once a design chooses them, so ``sites`` and ``links`` hold the built network alone.
    candidate_sites: tuple[Site, ...] = ()
    candidate_links: tuple[Link, ...] = ()

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
