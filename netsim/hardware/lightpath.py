"""A heralded light path: one fibre link, or several joined through passive switches.

A switch holds no memory, so the links of a light path act as one span: lengths add and losses
add in dB. The heralding settings of the path (scheme, modes, detector efficiency, dark counts,
midpoint fraction, bright-state population, pair probability) are those of the link touching
its reference end (see :attr:`LightPath.is_canonical`); ``netsim check`` warns when the links of
one path disagree.

Where the loss sits along the path matters for midpoint schemes. Decision (documented here and
in the README): a link's extra loss (splices, connectors, patch panels) is spread uniformly along
that link, like its attenuation, so a station at a fraction f of a lone link sees the fraction f
of the link's total dB on the side of ``a``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from netsim.errors import ParameterError
from netsim.hardware.fibre import loss_db
from netsim.scenario.model import Link, Site

__all__ = ["LightPath"]


@dataclass(frozen=True)
class LightPath:
    """Links joined end to end from memory site ``site_a`` to memory site ``site_b``.

    Its lengths and losses are computed once (cached properties: the path is immutable, and a
    heralding scheme reads them several times).

    Attributes
    ----------
    links : tuple of Link
        In order from ``site_a``; each may be written in either direction in the scenario.
    site_a, site_b : Site
        The memory sites at the two ends (qubit 0 of the heralded pair lives at ``site_a``).
    reversed_links : tuple of bool
        ``True`` where the link is traversed from its ``b`` end to its ``a`` end.
    """

    links: tuple[Link, ...]
    site_a: Site
    site_b: Site
    reversed_links: tuple[bool, ...]

    @classmethod
    def join(cls, links: tuple[Link, ...] | list[Link], site_a: Site, site_b: Site) -> LightPath:
        """Join ``links`` (ordered from ``site_a``) into a path; check that they connect."""
        links = tuple(links)
        if not links:
            raise ParameterError("links", links, "at least one link")
        here, flags = site_a.name, []
        for i, link in enumerate(links):
            if here not in (link.a, link.b):
                raise ParameterError(f"links[{i}]", link.name, f"a link touching site {here!r}")
            flags.append(link.b == here and link.a != here)
            here = link.a if flags[-1] else link.b
        if here != site_b.name:
            raise ParameterError("links", [k.name for k in links], f"a path ending at site {site_b.name!r}")
        return cls(links, site_a, site_b, tuple(flags))

    @property
    def first(self) -> Link:
        """The link whose heralding settings the whole path uses."""
        return self.links[0]

    @cached_property
    def length_km(self) -> float:
        return sum(link.length_km for link in self.links)

    @cached_property
    def fibre_loss_db(self) -> float:
        return sum(loss_db(k.length_km, k.attenuation_db_per_km) for k in self.links)

    @cached_property
    def extra_loss_db(self) -> float:
        return sum(k.extra_loss_db for k in self.links)

    @cached_property
    def loss_db(self) -> float:
        return self.fibre_loss_db + self.extra_loss_db

    @property
    def station_fraction(self) -> float:
        """Position of the midpoint station from ``site_a`` as a fraction of the path length.

        The first link's ``midpoint_fraction`` is measured from its own ``a`` end; on a lone
        reversed link it becomes 1 - f. On a joined path the station sits at that fraction of
        the whole path length (the fraction is a property of the heralding set-up, not of one
        fibre).
        """
        f = self.first.midpoint_fraction
        return 1.0 - f if self.reversed_links[0] else f

    @property
    def is_canonical(self) -> bool:
        """Whether ``site_a`` is the path's reference end.

        The reference end is the end site that is the ``a`` end of the link touching it (for a
        lone link: its ``a``); if both or neither end qualify, the end whose name sorts first.
        Physics is computed from the reference end, so a path gives the same state whichever
        way it is walked (with the qubits swapped), including the choice of which memory
        applies the Pauli correction and, for emitter-to-receiver links, which end emits.
        """
        a_is_a = self.links[0].a == self.site_a.name
        b_is_a = self.links[-1].a == self.site_b.name
        if a_is_a != b_is_a:
            return a_is_a
        return self.site_a.name <= self.site_b.name

    def reversed(self) -> LightPath:
        """The same path walked from ``site_b`` to ``site_a``."""
        return LightPath.join(tuple(reversed(self.links)), self.site_b, self.site_a)

    def loss_up_to_db(self, distance_km: float) -> float:
        """Loss in dB from ``site_a`` to a point ``distance_km`` along the path."""
        total, start = 0.0, 0.0
        for link in self.links:
            if link.length_km <= 0.0:  # a zero-length patch: its extra loss sits at one point
                total += link.extra_loss_db if distance_km > start else 0.0
                continue
            inside = min(max(distance_km - start, 0.0), link.length_km)
            # the extra loss spread evenly along the link, as a share of its length: dividing the
            # loss by a subnormal length (5e-324 km) overflowed to inf and made the loss NaN
            total += link.attenuation_db_per_km * inside + link.extra_loss_db * (inside / link.length_km)
            start += link.length_km
        return total

    def arm_losses_db(self) -> tuple[float, float]:
        """Loss in dB from ``site_a`` to the station and from the station to ``site_b``."""
        return self._arm_losses_db

    @cached_property
    def _arm_losses_db(self) -> tuple[float, float]:
        to_station = self.loss_up_to_db(self.station_fraction * self.length_km)
        return to_station, max(self.loss_db - to_station, 0.0)
